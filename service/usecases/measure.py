"""The measured input of a diagnosis or a capture: a spectrum, a time record or an
uploaded file, read and turned into an amplitude spectrum, and the chain it came through.

Everything here is synchronous and may be heavy: callers run it off the event loop.
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from dataclasses import field as dc_field
from typing import Any

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
from ..core.channels import ChannelActivity, channels_sentence, classify_channels
from ..core.clipping import ClippingReport, detect_clipping
from ..core.clipping_products import clipping_products, strongest_tones
from ..core.errors import InputError, plain
from ..core.spectrum import amplitude_spectrum, bad_negative_cells, detect_unit, to_linear
from ..inputs import (
    TimeRecord,
    guess_text_kind,
    parse_spectrum_text,
    parse_time_record,
    sniff_table,
)
from ..inputs.records import TEXT_EXTENSIONS
from .errors import RequestError, input_errors

__all__ = [
    "Measured",
    "Upload",
    "capture_chain",
    "chain_if_given",
    "check_extent",
    "input_summary",
    "input_warnings",
    "mark_clipping_products",
    "measure",
]

_TIME_EXTENSIONS = (".wav", ".wave", ".npy")
#: Channels judged from at most this many samples each (the verdict needs a few
#: seconds of record, not all of it), and at most this many channels.
_CHANNEL_SAMPLES = 1 << 20
_MAX_CHANNELS_JUDGED = 16


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
    # The input's own rate: a time record's, or the one a spectrum file's header gives
    record_rate_hz: float | None
    description: str
    # What the reader found out about the input (shown in the answer's summary).
    scale_source: str = "request"
    notes: tuple[str, ...] = ()
    metadata: dict[str, str] = dc_field(default_factory=dict)
    frequency_unit: str = "Hz"
    amplitude_unit: str | None = None
    # What the amplitudes state: peak, rms or peak_to_peak (None: not stated).
    amplitude_kind: str | None = None
    dropped: dict[str, int] = dc_field(default_factory=dict)
    clipping: ClippingReport | None = None
    channels: tuple[ChannelActivity, ...] = ()
    channel: int | None = None
    channel_names: tuple[str, ...] = ()


@contextmanager
def _reader_errors(fields: dict[str, str], default: str) -> Iterator[None]:
    """A reader's :class:`InputError` with its own code, remedy, value, limit and status;
    its field (``amplitude_column``, ``sample_rate_hz`` ...) placed on the request."""
    try:
        yield
    except RequestError:
        raise
    except InputError as exc:
        where = fields.get(exc.field or "", exc.field if exc.field == default else default)
        raise RequestError.placed(exc, where) from exc


def _from_spectrum(
    freq: np.ndarray,
    values: np.ndarray,
    unit: str,
    window: str,
    description: str,
    field: str,
    reason: str | None = None,
) -> Measured:
    """A spectrum in ``unit`` ("auto", "linear", "db"): the one scale rule of the core
    (:func:`service.core.spectrum.detect_unit`) decides "auto", and a handful of
    negative cells in a linear spectrum are dropped and counted, as the file reader does."""
    source = "request"
    if unit == "auto":
        with input_errors(f"{field}.amplitude"):
            unit, reason = detect_unit(values, f"{field}.amplitude")
        source = "values"
    elif reason is None:
        reason = f"the request says the values are {'dB' if unit == 'db' else 'linear'}"
    notes: list[str] = []
    dropped: dict[str, int] = {}
    if unit == "linear":
        with input_errors(f"{field}.amplitude"):
            negative = bad_negative_cells(values, reason, f"{field}.amplitude")
        count = int(np.count_nonzero(negative))
        if count:
            first = int(np.argmax(negative))
            dropped["negative"] = count
            notes.append(
                f"{count} negative amplitude{'s' if count > 1 else ''} in a linear "
                f"spectrum left out as bad data, the first at index {first}."
            )
            freq, values = freq[~negative], values[~negative]
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
        scale_source=source,
        notes=tuple(notes),
        dropped=dropped,
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
    with input_errors(field):
        clipping = detect_clipping(samples)
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
        scale_source="time_record",
        # The computed spectrum gives each sine's peak amplitude (core.spectrum).
        amplitude_kind="peak",
        clipping=clipping,
    )


_CLIP_RANK = {"none": 0, "suspected": 1, "clipped": 2}


def _is_time_file(upload: Upload) -> bool:
    magic = upload.data[:6]
    return (
        upload.filename.lower().endswith(_TIME_EXTENSIONS)
        or magic[:4] in (b"RIFF", b"RIFX", b"RF64")
        or magic == b"\x93NUMPY"
    )


def _unknown_extension(filename: str) -> bool:
    name = filename.lower()
    return "." in name and not name.endswith(_TIME_EXTENSIONS + TEXT_EXTENSIONS)


def _requested_rate(
    u: UploadIn, chain_rate_hz: float | None, rate_field: str, pre: str
) -> tuple[float | None, str]:
    """The rate the request states for an uploaded record, and the field that states it:
    the top-level ``sample_rate_hz`` (or chain) serves uploads as it serves JSON records."""
    if u.sample_rate_hz is not None and chain_rate_hz is not None:
        if abs(u.sample_rate_hz - chain_rate_hz) > 1e-6 * chain_rate_hz:
            raise RequestError(
                f"{pre}upload.sample_rate_hz={plain(u.sample_rate_hz)} Hz disagrees with "
                f"the request's {rate_field}, which ends at {plain(chain_rate_hz)} Hz",
                field=f"{pre}upload.sample_rate_hz",
                value=u.sample_rate_hz,
                limit=chain_rate_hz,
                code="rate_conflict",
                remedy=f"Give the rate once: leave {pre}upload.sample_rate_hz out",
            )
    if chain_rate_hz is not None or u.sample_rate_hz is None:
        return chain_rate_hz, rate_field
    return u.sample_rate_hz, f"{pre}upload.sample_rate_hz"


def _judge_channels(
    upload: Upload,
    rec: TimeRecord,
    rate: float | None,
    max_samples: int,
    file_field: str,
) -> tuple[ChannelActivity, ...]:
    """Signal or converter noise, for every channel of a multichannel upload."""
    n = min(rec.n_channels, _MAX_CHANNELS_JUDGED)
    if rec.n_channels < 2 or rec.n_samples < 256:
        return ()
    rows = []
    for c in range(n):  # a handful of channels; each read is vectorised
        other = rec if c == rec.channel else None
        if other is None:
            try:
                other = parse_time_record(
                    upload.data,
                    upload.filename,
                    sample_rate_hz=rate,
                    channel=c,
                    max_samples=max_samples,
                    field=file_field,
                )
            except InputError:
                # A constant or broken other channel: judged on zeros, "constant".
                rows.append(np.zeros(min(rec.n_samples, _CHANNEL_SAMPLES)))
                continue
        rows.append(np.asarray(other.samples[:_CHANNEL_SAMPLES], dtype=np.float64))
    with input_errors(file_field):
        return tuple(classify_channels(np.stack(rows), rec.sample_rate_hz))


def _from_upload(
    upload: Upload,
    u: UploadIn,
    opts: SpectrumOptionsIn,
    chain_rate_hz: float | None,
    rate_field: str,
    settings: Settings,
    pre: str,
) -> Measured:
    file_field = f"{pre}file"
    kind = u.kind
    if kind == "auto":
        kind = "time_record" if _is_time_file(upload) else guess_text_kind(upload.data)
        if _unknown_extension(upload.filename) and sniff_table(upload.data) is None:
            kind = "time_record"  # neither a table nor a known type: refused by type
    fields = {
        "amplitude_column": f"{pre}upload.amplitude_column",
        "unit": f"{pre}upload.unit",
        "channel": f"{pre}upload.channel",
        file_field: file_field,
    }
    if kind == "spectrum":
        with _reader_errors(fields, file_field):
            parsed = parse_spectrum_text(
                upload.data,
                max_lines=settings.max_spectrum_lines,
                unit=u.unit,
                amplitude_column=u.amplitude_column,
                field=file_field,
            )
        with _reader_errors(fields, file_field):
            m = _from_spectrum(
                parsed.freq_hz,
                parsed.amplitude,
                parsed.unit,
                u.window,
                f"{upload.filename}: spectrum of {parsed.n_lines} lines "
                f"({parsed.format_description}; frequency column "
                f"{parsed.frequency_column}, amplitude column {parsed.amplitude_column})",
                file_field,
                reason=parsed.unit_reason,
            )
        notes = list(parsed.notes)
        file_rate = parsed.sample_rate_hz
        if file_rate is not None and chain_rate_hz is None:
            notes.append(
                f"The request gives no sample rate, so the {plain(file_rate)} Hz in the "
                "file's header is used."
            )
        return Measured(
            **{
                **m.__dict__,
                "scale_source": parsed.scale_source,
                "notes": tuple(dict.fromkeys(notes + list(m.notes))),
                "metadata": dict(parsed.metadata),
                "frequency_unit": parsed.freq_unit,
                "amplitude_unit": parsed.amplitude_unit,
                "dropped": {**parsed.dropped, **m.dropped},
                "record_rate_hz": file_rate,
            }
        )
    requested, where = _requested_rate(u, chain_rate_hz, rate_field, pre)
    fields["sample_rate_hz"] = where
    with _reader_errors(fields, file_field):
        rec = parse_time_record(
            upload.data,
            upload.filename,
            sample_rate_hz=requested,
            channel=u.channel,
            max_samples=settings.max_time_samples,
            field=file_field,
        )
    m = _from_samples(
        rec.samples,
        rec.sample_rate_hz,
        opts,
        f"{upload.filename}: {rec.format_description}, channel {rec.channel}",
        file_field,
    )
    clipping = m.clipping
    if rec.full_scale is not None:  # integer PCM: the converter's range is known
        # One and a half 16-bit codes: +full scale is written as 32767/32768 of it.
        with input_errors(file_field):
            at_full_scale = detect_clipping(
                rec.samples, full_scale=rec.full_scale, tolerance=1.5 * rec.full_scale / 32768
            )
        # Clipping at full scale, or at a lower level (an amplifier before the
        # converter): the stronger finding stands.
        if clipping is None or _CLIP_RANK[at_full_scale.verdict] > _CLIP_RANK[clipping.verdict]:
            clipping = at_full_scale
    notes = list(rec.notes)
    if requested is None and rec.file_rate_hz is not None:
        notes.append(
            f"The request gives no sample rate, so the file's own {rec.sample_rate_hz:.7g} "
            "Hz is used."
        )
    channels = _judge_channels(upload, rec, requested, settings.max_time_samples, file_field)
    return Measured(
        **{
            **m.__dict__,
            "notes": tuple(dict.fromkeys(notes)),
            "metadata": dict(rec.metadata),
            "clipping": clipping,
            "channels": channels,
            "channel": rec.channel,
            "channel_names": rec.channel_names,
        }
    )


def measure(
    spectrum: SpectrumIn | None,
    time_record: TimeRecordIn | None,
    upload: Upload | None,
    upload_opts: UploadIn | None,
    opts: SpectrumOptionsIn,
    chain_rate_hz: float | None,
    settings: Settings,
    field: str = "",
    rate_field: str | None = None,
) -> Measured:
    """Turn whichever input was given into a linear amplitude spectrum.

    ``chain_rate_hz`` is the final rate the request states (its ``sample_rate_hz`` or
    chain), named ``rate_field`` in errors; an uploaded record must agree with it.
    """
    pre = f"{field}." if field else ""
    rate_field = rate_field or f"{pre}sample_rate_hz"
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
        m = _from_spectrum(
            np.asarray(spectrum.freq_hz, dtype=np.float64),
            np.asarray(spectrum.amplitude, dtype=np.float64),
            spectrum.unit,
            spectrum.window,
            f"spectrum of {len(spectrum.freq_hz)} lines",
            f"{pre}spectrum",
        )
        return _stated(m, spectrum.amplitude_unit, spectrum.amplitude_kind)
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
    m = _from_upload(upload, u, opts, chain_rate_hz, rate_field, settings, pre)
    return _stated(m, u.amplitude_unit, u.amplitude_kind)


def _stated(m: Measured, unit: str | None, kind: str | None) -> Measured:
    """The amplitude unit and kind the request states, over what the file says; a time
    record's computed spectrum states the peak of each sine whatever was asked."""
    if m.scale_source == "time_record":
        kind = "peak"
    if unit is None and kind is None:
        return m
    return Measured(
        **{
            **m.__dict__,
            "amplitude_unit": unit if unit is not None else m.amplitude_unit,
            "amplitude_kind": kind if kind is not None else m.amplitude_kind,
        }
    )


def input_summary(m: Measured) -> dict[str, Any]:
    """What the reader found out about the input, for the answer's ``summary``."""
    clip = m.clipping
    chosen = m.channel
    return {
        "scale": m.unit,
        "scale_source": m.scale_source,
        "scale_reason": m.unit_reason,
        "frequency_unit": m.frequency_unit,
        "amplitude_unit": m.amplitude_unit,
        "amplitude_kind": m.amplitude_kind,
        "dropped_rows": dict(m.dropped),
        "input_notes": list(dict.fromkeys(m.notes)),
        "metadata": dict(m.metadata),
        "clipping": None
        if clip is None
        else {
            "verdict": clip.verdict,
            "fraction": round(float(clip.fraction), 6),
            "symmetric": bool(clip.symmetric),
            "sentence": clip.sentence,
        },
        "channels": [
            {
                "index": i,
                "name": m.channel_names[i] if i < len(m.channel_names) else f"channel {i}",
                "activity": a.verdict,
                "rms": float(a.rms),
                "analysed": i == chosen,
                "reasons": list(a.reasons),
            }
            for i, a in enumerate(m.channels)
        ],
    }


def input_warnings(m: Measured, peaks_found: int, threshold_db: float) -> list[str]:
    """Notes the answer must carry about its input: the analysed channel holds only
    noise (naming those that carry signal), the record is clipped, or no peak at all."""
    out: list[str] = []
    if m.channels and m.channel is not None and m.channel < len(m.channels):
        if m.channels[m.channel].verdict != "signal":
            sentence = channels_sentence(list(m.channels), chosen=m.channel)
            out.append(
                f"{sentence[0].upper()}{sentence[1:]}: choose a channel that carries "
                "signal with the channel option."
            )
    if m.clipping is not None and m.clipping.verdict != "none":
        out.append(
            f"{m.clipping.sentence} Peaks that are products of clipping are marked "
            "'clipping', not aliases."
        )
    if peaks_found == 0:
        out.append(
            f"No peak stands {threshold_db:g} dB above the noise floor: the input holds "
            "noise only at this threshold (lower threshold_db, or check the channel, "
            "column and scale the summary names)."
        )
    return out


#: Verdicts a clipping product replaces: those that would call it an independent alias,
#: mirror or unknown line. A peak a given source explains directly keeps its verdict.
_REPLACEABLE = ("alias", "mirror", "family", "unexplained")
#: Stated confidence of a clipping verdict (not calibrated: clipping is not part of the
#: simulated corpus the other verdicts are calibrated on): high on a record found
#: clipped, even odds on one where clipping is only suspected.
_CLIPPING_CONFIDENCE = {"clipped": 0.9, "suspected": 0.5}
#: Highest product order searched. Hard clipping (a clipped record: a tenth of the
#: samples flat) keeps harmonics far above the floor up to high orders; a 440 Hz tone
#: at 12.8 kS/s puts its 29th harmonic at 40 Hz. Mild clipping: up to the 9th.
_CLIPPING_ORDER = {"clipped": 31, "suspected": 9}


def mark_clipping_products(
    m: Measured, peaks: list[dict[str, Any]], final_rate_hz: float, tolerance_hz: float
) -> int:
    """On a clipped (or suspected) time record, give the peaks that harmonics and
    intermodulation products of the strongest tones explain the verdict ``clipping``
    instead of alias, mirror, family or unexplained. Returns how many were marked."""
    clip = m.clipping
    if clip is None or clip.verdict == "none" or len(peaks) < 2:
        return 0
    freq = np.array([p["freq_hz"] for p in peaks], dtype=np.float64)
    amp = np.array([p["amplitude"] for p in peaks], dtype=np.float64)
    # Tones down to 30 dB below the strongest: an aliased carrier 20 dB down still
    # mixes with the others in the clipped converter.
    tones = strongest_tones(freq, amp, count=3, within_db=30.0)
    if tones.size == 0:
        return 0
    products = clipping_products(
        freq,
        tones,
        final_rate_hz,
        max(tolerance_hz, m.bin_width_hz),
        symmetric=clip.symmetric,
        max_order=_CLIPPING_ORDER[clip.verdict],
    )
    marked = 0
    for i in np.flatnonzero(products.explained):  # only the explained peaks change
        p = peaks[i]
        if p["verdict"] not in _REPLACEABLE:
            continue
        label = str(products.label[i])
        p["alternatives"] = [
            {
                "kind": p["verdict"],
                "confidence": p["confidence"],
                "label": p["tone"],
                "source": p["source"],
                "true_hz": p["true_hz"],
                "zone": p["zone"],
                "inverted": p["inverted"],
                "attenuation_db": None,
                "predicted_amplitude": None,
                "sentence": p["explanation"],
            },
            *p["alternatives"],
        ]
        p.update(
            verdict="clipping",
            confidence=_CLIPPING_CONFIDENCE[clip.verdict],
            source=None,
            tone=label,
            true_hz=float(products.true_hz[i]),
            zone=None,
            inverted=None,
            explanation=(
                f"Probably a product of clipping, not an alias: {label}; the record "
                "is clipped, so this line was made in the converter, not by the machine."
            ),
        )
        if "aliased" in p:
            p["aliased"] = False
        marked += 1
    return marked


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
    if (
        m.record_rate_hz is not None
        and abs(m.record_rate_hz - chain.final_rate_hz) > 1e-6 * chain.final_rate_hz
    ):
        what = "time record's own rate" if m.nfft is not None else "file header's rate"
        raise RequestError(
            f"the request's rate ({chain.final_rate_hz:g} Hz at the end of the chain) "
            f"disagrees with the {what} of {m.record_rate_hz:g} Hz",
            field=f"{pre}sample_rate_hz",
            value=chain.final_rate_hz,
            limit=m.record_rate_hz,
            code="rate_conflict",
            remedy=(
                f"Give the rate once: leave {pre}sample_rate_hz out to use the record's "
                f"{m.record_rate_hz:g} Hz (or the other rate out), or fix the export if "
                "the file is wrong"
            ),
        )
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
