"""The measured input of a diagnosis or a capture: a spectrum, a time record or an
uploaded file, read and turned into an amplitude spectrum, and the chain it came through.

Everything here is synchronous and may be heavy: callers run it off the event loop.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..config import Settings
from ..contract.diagnose import (
    CaptureIn,
    DiagnoseIn,
    SpectrumIn,
    SpectrumOptionsIn,
    TimeRecordIn,
    UploadIn,
)
from ..contract.fold import ChainIn, chain_from_request
from ..core.chain import Chain
from ..core.errors import plain
from ..core.spectrum import amplitude_spectrum, detect_unit, to_linear
from ..inputs import parse_spectrum_text, parse_time_record
from .errors import RequestError, input_errors

__all__ = ["Measured", "Upload", "capture_chain", "chain_if_given", "check_extent", "measure"]

_TIME_EXTENSIONS = (".wav", ".wave", ".npy")


@dataclass(frozen=True)
class Upload:
    """An uploaded file: its bytes and its name (the name decides the type)."""

    data: bytes
    filename: str


@dataclass(frozen=True)
class Measured:
    """A spectrum ready for peak finding, and what it came from."""

    freq_hz: np.ndarray
    amplitude: np.ndarray  # linear
    unit: str
    unit_reason: str
    window: str
    bin_width_hz: float
    lines: int | None
    averages: int | None
    nfft: int | None
    record_rate_hz: float | None  # rate of a time record, if it was one
    description: str


def _from_spectrum(
    freq: np.ndarray, values: np.ndarray, unit: str, window: str, description: str, field: str
) -> Measured:
    if unit == "auto":
        with input_errors(f"{field}.amplitude"):
            unit, reason = detect_unit(values)
    else:
        reason = f"the request says the values are {'dB' if unit == 'db' else 'linear'}"
    with input_errors(f"{field}.amplitude"):
        amp = to_linear(values, unit)
    if not np.all(np.diff(freq) > 0):
        i = int(np.flatnonzero(np.diff(freq) <= 0)[0]) + 1
        raise RequestError(
            f"{field}.freq_hz[{i}]={plain(freq[i])} is not above the value before "
            "it; frequencies must strictly increase",
            field=f"{field}.freq_hz",
        )
    if float(np.ptp(amp)) == 0.0:
        raise RequestError(
            f"{field}.amplitude is constant: there are no peaks to explain",
            field=f"{field}.amplitude",
        )
    bin_width = float(np.median(np.diff(freq)))
    return Measured(
        freq,
        amp,
        unit,
        reason,
        window,
        bin_width,
        int(freq.size - 1),
        None,
        None,
        None,
        description,
    )


def _from_samples(
    samples: np.ndarray, rate: float, opts: SpectrumOptionsIn, description: str, field: str
) -> Measured:
    with input_errors(field):
        s = amplitude_spectrum(
            samples,
            rate,
            lines=opts.lines,
            window=opts.window,
            overlap_pct=opts.overlap_pct,
            averages=opts.averages,
        )
    if float(np.ptp(s.amplitude)) == 0.0:
        raise RequestError(f"{field} is constant: there are no peaks to explain", field=field)
    return Measured(
        s.freq_hz,
        s.amplitude,
        "linear",
        "computed from the time record, in the unit of its samples",
        s.window,
        s.bin_width_hz,
        s.lines,
        s.averages,
        s.nfft,
        rate,
        f"{description}; {s.window} window, {s.lines} lines, {s.averages} "
        f"averages, {s.overlap_pct:g} % overlap",
    )


def _text_columns(data: bytes) -> int:
    """Columns on the first data line of a text file (0 if none)."""
    for raw in data[:65536].splitlines():
        line = raw.split(b"#", 1)[0].strip()
        if not line:
            continue
        for sep in (b",", b";", b"\t"):
            if sep in line:
                return len([c for c in line.split(sep)])
        return len(line.split())
    return 0


def measure(
    spectrum: SpectrumIn | None,
    time_record: TimeRecordIn | None,
    upload: Upload | None,
    upload_opts: UploadIn | None,
    opts: SpectrumOptionsIn,
    chain_rate_hz: float | None,
    settings: Settings,
    field: str = "",
) -> Measured:
    """Turn whichever input was given into a linear amplitude spectrum."""
    pre = f"{field}." if field else ""
    given = sum(x is not None for x in (spectrum, time_record, upload))
    if given != 1:
        raise RequestError(
            f"give exactly one of {pre}spectrum, {pre}time_record or a file (got {given})",
            field=f"{pre}spectrum",
        )
    if spectrum is not None:
        if len(spectrum.freq_hz) > settings.max_spectrum_lines:
            raise RequestError(
                status=413,
                message=f"the spectrum has {len(spectrum.freq_hz)} lines; the limit is "
                f"{settings.max_spectrum_lines}",
                field=f"{pre}spectrum.freq_hz",
                limit=settings.max_spectrum_lines,
            )
        return _from_spectrum(
            np.asarray(spectrum.freq_hz, dtype=np.float64),
            np.asarray(spectrum.amplitude, dtype=np.float64),
            spectrum.unit,
            spectrum.window,
            f"spectrum of {len(spectrum.freq_hz)} lines",
            f"{pre}spectrum",
        )
    if time_record is not None:
        rate = time_record.sample_rate_hz or chain_rate_hz
        if rate is None:
            raise RequestError(
                "the time record needs sample_rate_hz (or a chain)",
                field=f"{pre}time_record.sample_rate_hz",
            )
        samples = np.asarray(time_record.samples, dtype=np.float64)
        return _from_samples(
            samples,
            rate,
            opts,
            f"time record of {samples.size} samples at {rate:g} S/s",
            f"{pre}time_record",
        )
    assert upload is not None
    u = upload_opts or UploadIn()
    name = upload.filename.lower()
    kind = u.kind
    if kind == "auto":
        magic = upload.data[:6]
        if (
            name.endswith(_TIME_EXTENSIONS)
            or magic[:4] in (b"RIFF", b"RIFX", b"RF64")
            or magic == b"\x93NUMPY"
        ):
            kind = "time_record"
        else:
            kind = "time_record" if _text_columns(upload.data) == 1 else "spectrum"
    file_field = f"{pre}file"
    if kind == "spectrum":
        with input_errors(file_field):
            parsed = parse_spectrum_text(upload.data, max_lines=settings.max_spectrum_lines)
        unit = u.unit if u.unit != "auto" else parsed.unit
        reason = parsed.unit_reason if u.unit == "auto" else "the request says so"
        m = _from_spectrum(
            parsed.freq_hz,
            parsed.amplitude,
            unit,
            u.window,
            f"{upload.filename}: spectrum of {parsed.n_lines} lines",
            file_field,
        )
        return Measured(**{**m.__dict__, "unit_reason": reason})
    with input_errors(file_field):
        rec = parse_time_record(
            upload.data,
            upload.filename,
            sample_rate_hz=u.sample_rate_hz or None,
            channel=u.channel,
            max_samples=settings.max_time_samples,
        )
    return _from_samples(
        rec.samples,
        rec.sample_rate_hz,
        opts,
        f"{upload.filename}: {rec.format_description}, channel {rec.channel}",
        file_field,
    )


def _chain(chain_in: ChainIn, field: str) -> Chain:
    with input_errors(field):
        chain = chain_from_request(chain_in)
        chain.validate()
    return chain


def capture_chain(c: DiagnoseIn | CaptureIn, record_rate: float | None, pre: str) -> Chain:
    if c.chain is not None:
        return _chain(ChainIn(chain=c.chain), f"{pre}chain")
    rate = c.sample_rate_hz or record_rate
    if rate is None:
        raise RequestError(
            "give sample_rate_hz (with optional anti_alias) or a chain: a "
            "spectrum cannot be diagnosed without the rate it was sampled at",
            field=f"{pre}sample_rate_hz",
        )
    return _chain(ChainIn(sample_rate_hz=rate, anti_alias=c.anti_alias), f"{pre}sample_rate_hz")


def chain_if_given(c: DiagnoseIn | CaptureIn, pre: str) -> Chain | None:
    """The chain when the request states its rate; None when the record's own rate (a WAV
    header) decides, with the anti-alias filter, if any, in front of it."""
    if c.chain is None and c.sample_rate_hz is None:
        return None
    return capture_chain(c, None, pre)


def check_extent(m: Measured, chain: Chain, pre: str) -> None:
    nyq = chain.final_rate_hz / 2.0
    top = float(m.freq_hz[-1])
    if top > nyq * (1 + 1e-6) + m.bin_width_hz:
        raise RequestError(
            f"the spectrum reaches {top:g} Hz but the chain's final Nyquist frequency is "
            f"{nyq:g} Hz; check the sample rate (a spectrum cannot extend above fs/2)",
            field=f"{pre}sample_rate_hz",
            value=top,
            limit=nyq,
        )
    if (
        m.record_rate_hz is not None
        and abs(m.record_rate_hz - chain.final_rate_hz) > 1e-6 * chain.final_rate_hz
    ):
        raise RequestError(
            f"the time record is sampled at {m.record_rate_hz:g} S/s but the chain ends at "
            f"{chain.final_rate_hz:g} S/s; they must agree",
            field=f"{pre}sample_rate_hz",
            value=m.record_rate_hz,
            limit=chain.final_rate_hz,
        )
