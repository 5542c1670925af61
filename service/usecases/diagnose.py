"""Diagnosis and the two-rate test: input handling, core calls, JSON-ready answers.

Shared by the API routes, the pages and the command line so all give the same answer.
Everything here is synchronous and may be heavy: callers run it off the event loop.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .. import COMPUTATION_VERSION
from ..config import Settings
from ..contract.caution import CAUTION
from ..contract.diagnose import (
    CaptureIn,
    CompareIn,
    DiagnoseIn,
    SpectrumIn,
    SpectrumOptionsIn,
    TimeRecordIn,
    UploadIn,
)
from ..contract.fold import ChainIn, chain_from_request
from ..core.attribution import Attribution, attribute
from ..core.chain import Chain
from ..core.comparison import CaptureVerdicts, compare_rates
from ..core.harmonics import Family, find_families
from ..core.spectrum import amplitude_spectrum, detect_unit, find_peaks, noise_floor, to_linear
from ..inputs import parse_spectrum_text, parse_time_record
from .errors import RequestError, input_errors
from .fold import tones_from_request

__all__ = [
    "Measured",
    "Upload",
    "compare_payload",
    "diagnose_payload",
    "measure",
]

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
            status=422,
            message=f"{field}.freq_hz[{i}]={freq[i]!r} is not above the value before "
            "it; frequencies must strictly increase",
            field=f"{field}.freq_hz",
        )
    if float(np.ptp(amp)) == 0.0:
        raise RequestError(
            status=422,
            message=f"{field}.amplitude is constant: there are no peaks to explain",
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
        raise RequestError(
            status=422, message=f"{field} is constant: there are no peaks to explain", field=field
        )
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
            status=422,
            message=f"give exactly one of {pre}spectrum, {pre}time_record or a file (got {given})",
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
                status=422,
                message="the time record needs sample_rate_hz (or a chain)",
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


def _capture_chain(c: DiagnoseIn | CaptureIn, record_rate: float | None, pre: str) -> Chain:
    if c.chain is not None:
        return _chain(ChainIn(chain=c.chain), f"{pre}chain")
    rate = c.sample_rate_hz or record_rate
    if rate is None:
        raise RequestError(
            status=422,
            message="give sample_rate_hz (with optional anti_alias) or a chain: a "
            "spectrum cannot be diagnosed without the rate it was sampled at",
            field=f"{pre}sample_rate_hz",
        )
    return _chain(ChainIn(sample_rate_hz=rate, anti_alias=c.anti_alias), f"{pre}sample_rate_hz")


def _chain_if_given(c: DiagnoseIn | CaptureIn, pre: str) -> Chain | None:
    """The chain when the request states its rate; None when the record's own rate (a WAV
    header) decides, with the anti-alias filter, if any, in front of it."""
    if c.chain is None and c.sample_rate_hz is None:
        return None
    return _capture_chain(c, None, pre)


def _check_extent(m: Measured, chain: Chain, pre: str) -> None:
    nyq = chain.final_rate_hz / 2.0
    top = float(m.freq_hz[-1])
    if top > nyq * (1 + 1e-6) + m.bin_width_hz:
        raise RequestError(
            status=422,
            message=f"the spectrum reaches {top:g} Hz but the chain's final Nyquist frequency is "
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
            status=422,
            message=f"the time record is sampled at {m.record_rate_hz:g} S/s but the chain ends at "
            f"{chain.final_rate_hz:g} S/s; they must agree",
            field=f"{pre}sample_rate_hz",
            value=m.record_rate_hz,
            limit=chain.final_rate_hz,
        )


def _none(v: float) -> float | None:
    return None if v != v else float(v)


def _alt(e: Any) -> dict[str, Any]:
    return {
        "kind": e.kind,
        "confidence": round(float(e.confidence), 4),
        "label": e.label,
        "source": e.source,
        "true_hz": _none(e.true_hz),
        "zone": int(e.zone) if e.zone > 0 else None,
        "inverted": bool(e.inverted) if e.zone > 0 else None,
        "attenuation_db": _none(round(float(e.attenuation_db), 3)),
        "predicted_amplitude": _none(e.predicted_amplitude),
        "sentence": e.sentence,
    }


def _family(f: Family) -> dict[str, Any]:
    return {
        "fundamental_hz": f.fundamental_hz,
        "uncertainty_hz": f.uncertainty_hz,
        "aliased_count": f.aliased_count,
        "p_value": f.p_value,
        "members": [
            {
                "peak_index": m.peak,
                "harmonic": m.harmonic,
                "apparent_hz": m.apparent_hz,
                "true_hz": m.true_hz,
                "zone": m.zone,
                "aliased": m.aliased,
                "inverted": m.inverted,
            }
            for m in f.members
        ],
    }


def _peaks_out(a: Attribution, floor: np.ndarray, snr: np.ndarray) -> list[dict[str, Any]]:
    out = []
    amp_db = 20 * np.log10(np.maximum(a.amplitude, 1e-300))
    for i in range(a.freq_hz.size):
        zone = int(a.zone[i])
        out.append(
            {
                "freq_hz": float(a.freq_hz[i]),
                "amplitude": float(a.amplitude[i]),
                "amplitude_db": round(float(amp_db[i]), 3),
                "floor": float(floor[i]),
                "snr_db": round(float(snr[i]), 2),
                "verdict": a.verdict[i],
                "confidence": round(float(a.confidence[i]), 4),
                "source": a.source[i],
                "tone": a.tone_label[i],
                "true_hz": _none(a.true_hz[i]),
                "zone": zone if zone > 0 else None,
                "inverted": bool(a.inverted[i]) if zone > 0 else None,
                "in_band": bool(a.in_band[i]),
                "unprotected": bool(a.unprotected[i]),
                "explanation": a.explanation[i],
                "alternatives": [_alt(e) for e in a.alternatives[i]],
            }
        )
    return out


def diagnose_payload(
    req: DiagnoseIn, settings: Settings, upload: Upload | None = None
) -> tuple[dict[str, Any], Measured]:
    """Diagnose one spectrum: the JSON answer and the spectrum it was computed from."""
    stated = _chain_if_given(req, "")
    m = measure(
        req.spectrum,
        req.time_record,
        upload,
        req.upload,
        req.spectrum_options,
        stated.final_rate_hz if stated else None,
        settings,
    )
    chain = stated or _capture_chain(req, m.record_rate_hz, "")
    _check_extent(m, chain, "")
    tones = tones_from_request(req, settings.max_tones) if (req.tones or req.sources) else None
    with input_errors():
        floor = noise_floor(m.amplitude)
        peaks = find_peaks(
            m.freq_hz,
            m.amplitude,
            floor,
            threshold_db=req.threshold_db,
            window=m.window,
            max_peaks=req.max_peaks,
        )
    blind = req.blind == "on" or (req.blind == "auto" and tones is None)
    families: list[Family] = []
    if blind and len(peaks) >= 3:
        with input_errors():
            families = find_families(
                peaks.freq_hz,
                peaks.amplitude,
                peaks.floor,
                chain.final_rate_hz,
                m.bin_width_hz,
                attenuation=lambda f: chain.evaluate(f).attenuation_db,
            )
    with input_errors():
        att = attribute(
            peaks.freq_hz,
            peaks.amplitude,
            peaks.floor,
            chain,
            tones,
            m.bin_width_hz,
            window=m.window,
            speed_tolerance_pct=req.speed_tolerance_pct,
            band_hz=req.band_hz,
            level_tolerance_db=req.level_tolerance_db,
            families=families,
        )
    counts: dict[str, int] = {}
    for v in att.verdict.tolist():
        counts[v] = counts.get(v, 0) + 1
    payload = {
        "summary": {
            "input": m.description,
            "unit": m.unit,
            "unit_reason": m.unit_reason,
            "window": m.window,
            "bin_width_hz": m.bin_width_hz,
            "lines": m.lines,
            "n_bins": int(m.freq_hz.size),
            "averages": m.averages,
            "nfft": m.nfft,
            "floor_median": float(np.median(floor)),
            "peaks_found": len(peaks),
            "peaks_shown": len(peaks),
        },
        "nyquist_hz": chain.final_rate_hz / 2.0,
        "final_rate_hz": chain.final_rate_hz,
        "band_hz": list(att.band_hz),
        "protected_edge_hz": att.protected_edge_hz,
        "tolerance_hz": att.tolerance_hz,
        "stages": list(chain.stage_names),
        "notes": list(chain.validate()) + list(att.notes),
        "counts": counts,
        "peaks": _peaks_out(att, peaks.floor, peaks.snr_db),
        "families": [_family(f) for f in families],
        "caution": CAUTION,
        "computation_version": COMPUTATION_VERSION,
    }
    return payload, m


def _capture_out(v: CaptureVerdicts, rate: float) -> dict[str, Any]:
    peaks = []
    for i in range(v.freq_hz.size):
        peaks.append(
            {
                "freq_hz": float(v.freq_hz[i]),
                "amplitude": float(v.amplitude[i]),
                "verdict": v.verdict[i],
                "confidence": round(float(v.confidence[i]), 4),
                "partner_index": int(v.partner[i]) if v.partner[i] >= 0 else None,
                "true_hz": _none(v.true_hz[i]),
                "zone_a": int(v.zone_a[i]) if v.zone_a[i] > 0 else None,
                "zone_b": int(v.zone_b[i]) if v.zone_b[i] > 0 else None,
                "explanation": v.sentence[i],
                "candidates": [
                    {
                        "true_hz": c.true_hz,
                        "zone_a": c.zone_a,
                        "zone_b": c.zone_b,
                        "partner_index": c.partner,
                        "freq_error_hz": c.freq_error_hz,
                        "level_diff_db": c.level_diff_db,
                        "score": round(float(c.score), 4),
                    }
                    for c in v.candidates[i]
                ],
            }
        )
    counts: dict[str, int] = {}
    for p in peaks:
        counts[p["verdict"]] = counts.get(p["verdict"], 0) + 1
    return {"sample_rate_hz": rate, "counts": counts, "peaks": peaks}


def compare_payload(
    req: CompareIn, settings: Settings, uploads: dict[str, Upload] | None = None
) -> tuple[dict[str, Any], dict[str, Measured]]:
    """The two-rate test: the JSON answer and both spectra."""
    uploads = uploads or {}
    measured: dict[str, Measured] = {}
    peaks: dict[str, Any] = {}
    rates: dict[str, float] = {}
    for side in ("a", "b"):
        cap: CaptureIn = getattr(req, side)
        stated = _chain_if_given(cap, f"{side}.")
        m = measure(
            cap.spectrum,
            cap.time_record,
            uploads.get(side),
            cap.upload,
            req.spectrum_options,
            stated.final_rate_hz if stated else None,
            settings,
            field=side,
        )
        chain = stated or _capture_chain(cap, m.record_rate_hz, f"{side}.")
        _check_extent(m, chain, f"{side}.")
        with input_errors(side):
            floor = noise_floor(m.amplitude)
            peaks[side] = find_peaks(
                m.freq_hz,
                m.amplitude,
                floor,
                threshold_db=req.threshold_db,
                window=m.window,
                max_peaks=req.max_peaks,
            )
        measured[side] = m
        rates[side] = chain.final_rate_hz
    if rates["a"] == rates["b"]:
        raise RequestError(
            status=422,
            message=f"both captures are at {rates['a']:g} S/s; the two-rate test needs "
            "two different sample rates",
            field="b.sample_rate_hz",
        )
    pa, pb = peaks["a"], peaks["b"]
    with input_errors():
        cmp = compare_rates(
            pa.freq_hz,
            pa.amplitude,
            rates["a"],
            measured["a"].bin_width_hz,
            pb.freq_hz,
            pb.amplitude,
            rates["b"],
            measured["b"].bin_width_hz,
            max_true_hz=req.max_true_hz,
            level_tolerance_db=req.level_tolerance_db,
        )
    payload = {
        "a": {**_capture_out(cmp.a, rates["a"]), "input": measured["a"].description},
        "b": {**_capture_out(cmp.b, rates["b"]), "input": measured["b"].description},
        "tolerance_hz": cmp.tolerance_hz,
        "max_true_hz": cmp.max_true_hz,
        "caution": CAUTION,
        "computation_version": COMPUTATION_VERSION,
    }
    return payload, measured
