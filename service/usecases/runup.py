"""Run-up recordings: speed, the frequency × speed map, its lines and their folding verdicts.

Shared by the API route, the page and the command line so all give the same answer. The
result carries its own display payload (the map reduced by
:func:`~service.core.runup_map.display_map`, lines decimated, the order spectrum reduced
by a maximum per bucket) bounded for any record size, so a saved result redraws without
recomputing. Everything here is synchronous and may be heavy: callers run it off the
event loop.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Any

import numpy as np

from .. import COMPUTATION_VERSION
from ..config import Settings
from ..contract.caution import CAUTION
from ..contract.runup import RunUpRecordIn
from ..core.chain import Chain
from ..core.errors import InputError
from ..core.folding import fold
from ..core.order_tracking import OrderSpectrum, apparent_order, order_spectrum
from ..core.runup_lines import KnownLine, RunUpLine, known_lines_from_tones
from ..core.runup_map import display_map
from ..core.runup_record import RunUpResult, analyse_run_up
from ..core.runup_sim import simulate_run_up
from ..inputs import TimeRecord, parse_time_record
from .errors import RequestError
from .fold import tones_from_request
from .measure import Upload, capture_chain, chain_if_given

__all__ = [
    "DISPLAY_LINE_POINTS",
    "MAX_LINES",
    "Recording",
    "demo_recording",
    "demo_request",
    "read_recording",
    "runup_payload",
]

#: Points kept per line for display.
DISPLAY_LINE_POINTS = 200
#: Lines reported (strongest first); the rest are counted in a note.
MAX_LINES = 100
#: Lines drawn; predicted lines drawn.
DISPLAY_LINES = 60
PREDICTED_LINES = 60
PREDICTED_POINTS = 60
#: Points kept of the order spectrum (maximum per bucket, so no peak disappears).
ORDER_POINTS = 2000
DEMO_NOMINAL_RPM = 6000.0


@dataclass(frozen=True)
class Recording:
    """The channels of a run-up record and where each came from (for error fields)."""

    vibration: np.ndarray
    tacho: np.ndarray | None
    rate_hz: float | None  # the record's own rate (a WAV header), if any
    description: str
    vibration_field: str = "vibration"
    tacho_field: str = "tacho"


@contextmanager
def _rooted(fields: dict[str, str], default: str) -> Iterator[None]:
    """Re-root a core or reader :class:`InputError` on the request field it came from,
    keeping its value, limit, code and remedy."""
    try:
        yield
    except RequestError:
        raise
    except InputError as exc:
        name = exc.field or ""
        head = name.split(".", 1)[0].split("[", 1)[0]
        field = fields.get(head)
        if field is None:
            field = default
        elif name != head and not fields.get(head, "").startswith("upload"):
            field = field + name[len(head) :]
        raise RequestError(
            exc.message,
            field=field,
            value=exc.value,
            limit=exc.limit,
            code=exc.code,
            remedy=exc.remedy,
            status=exc.status,
        ) from exc


# ------------------------------------------------------------------------- reading


def _channel(
    upload: Upload, ch: int | str, rate: float | None, settings: Settings, field: str
) -> TimeRecord:
    idx = ch if isinstance(ch, int) else 0
    fields = {"file": "file", "channel": field, "sample_rate_hz": "upload.sample_rate_hz"}

    def read(i: int) -> TimeRecord:
        with _rooted(fields, "file"):
            return parse_time_record(
                upload.data,
                upload.filename,
                sample_rate_hz=rate,
                channel=i,
                max_samples=settings.max_time_samples,
            )

    rec = read(idx)
    if isinstance(ch, str):
        names = [n.strip().lower() for n in rec.channel_names]
        if ch.strip().lower() not in names:
            raise RequestError(
                f"{field}={ch!r} names no channel of the file; it has "
                + ", ".join(repr(n) for n in rec.channel_names),
                field=field,
                value=ch,
                code="unknown_channel",
                remedy="Name one of the file's channels, or give its index from 0",
            )
        idx = names.index(ch.strip().lower())
        if idx != rec.channel:
            rec = read(idx)
    return rec


def read_recording(req: RunUpRecordIn, settings: Settings, upload: Upload | None) -> Recording:
    """The vibration and tacho channels, from JSON arrays or an uploaded file."""
    if upload is None:
        if req.vibration is None:
            raise RequestError(
                "give the vibration samples (and a tacho or a speed trace), or upload a file",
                field="vibration",
                code="no_record",
                remedy="Send `vibration` as a JSON array, or the record as multipart `file`",
            )
        tacho = None if req.tacho is None else np.asarray(req.tacho, dtype=np.float64)
        vib = np.asarray(req.vibration, dtype=np.float64)
        return Recording(vib, tacho, None, f"{vib.size} samples sent as JSON")
    if req.vibration is not None or req.tacho is not None:
        raise RequestError(
            "with an uploaded file, leave out the vibration and tacho arrays",
            field="vibration",
            code="two_records",
            remedy="Name the file's channels in `upload` instead",
        )
    opts = req.upload
    vib_ch: int | str = opts.vibration_channel if opts else 0
    tacho_ch = opts.tacho_channel if opts else None
    rate = opts.sample_rate_hz if opts else None
    vib = _channel(upload, vib_ch, rate, settings, "upload.vibration_channel")
    tach = None
    if tacho_ch is not None:
        tach = _channel(upload, tacho_ch, rate, settings, "upload.tacho_channel")
        if tach.channel == vib.channel:
            raise RequestError(
                f"the vibration and tacho channels are both channel {vib.channel}",
                field="upload.tacho_channel",
                value=tach.channel,
                code="same_channel",
                remedy="Name two different channels of the file",
            )
    names = vib.channel_names
    what = f"{upload.filename}: {vib.format_description}; vibration {names[vib.channel]!r}"
    if tach is not None:
        what += f", tacho {names[tach.channel]!r}"
    return Recording(
        np.asarray(vib.samples, dtype=np.float64),
        None if tach is None else np.asarray(tach.samples, dtype=np.float64),
        vib.sample_rate_hz,
        what,
        "upload.vibration_channel",
        "upload.tacho_channel",
    )


def _chain(req: RunUpRecordIn, rec: Recording) -> Chain:
    stated = chain_if_given(req, "")  # type: ignore[arg-type]
    chain = stated or capture_chain(req, rec.rate_hz, "")  # type: ignore[arg-type]
    fs = chain.final_rate_hz
    if rec.rate_hz is not None and abs(rec.rate_hz - fs) > 1e-6 * fs:
        raise RequestError(
            f"the file is sampled at {rec.rate_hz:g} S/s but the chain ends at {fs:g} S/s; "
            "they must agree",
            field="sample_rate_hz",
            value=rec.rate_hz,
            limit=fs,
            code="rate_conflict",
            remedy="Give the chain that produced the file, or leave the rate out",
        )
    return chain


def _nperseg(req: RunUpRecordIn, fs: float) -> int:
    if req.bin_width_hz is None:
        return req.nperseg or 1024
    n = round(fs / req.bin_width_hz)
    if not 64 <= n <= 65_536:
        raise RequestError(
            f"bin_width_hz={req.bin_width_hz:g} at {fs:g} S/s needs frames of {n} samples; "
            "frames must be from 64 to 65536 samples",
            field="bin_width_hz",
            value=req.bin_width_hz,
            limit=round(fs / 64, 6) if n < 64 else round(fs / 65_536, 6),
            code="out_of_range",
            remedy=f"Choose a bin width from {fs / 65_536:.3g} to {fs / 64:.3g} Hz",
        )
    return n


def _known(req: RunUpRecordIn, settings: Settings) -> tuple[KnownLine, ...] | None:
    if not (req.sources or req.tones):
        return None
    if req.sources and req.nominal_rpm is None:
        raise RequestError(
            "the sources need nominal_rpm: the shaft speed they are described at sets "
            "the order of each of their tones",
            field="nominal_rpm",
            code="missing",
            remedy="Add nominal_rpm (the speed written in the sources, e.g. their speed_rpm)",
        )
    tones = tones_from_request(req, settings.max_tones)  # type: ignore[arg-type]
    with _rooted({}, "nominal_rpm"):
        return known_lines_from_tones(tones, req.nominal_rpm or 1.0)


# ------------------------------------------------------------------------- output


def _num(v: float, nd: int = 4) -> float | None:
    return None if not np.isfinite(v) else round(float(v), nd)


def _decimate_idx(n: int, keep: int) -> np.ndarray:
    if n <= keep:
        return np.arange(n)
    return np.unique(np.linspace(0, n - 1, keep).round().astype(np.int64))


def _line_out(ln: RunUpLine) -> dict[str, Any]:
    lo, hi = float(ln.rpm.min()), float(ln.rpm.max())
    explained = np.isfinite(ln.order)
    true = None
    if explained:
        t = np.abs(ln.order * np.array([lo, hi]) / 60.0 + ln.fixed_hz)
        true = (round(float(t[0]), 3), round(float(t[1]), 3))
    return {
        "kind": ln.kind,
        "label": ln.label,
        "known": bool(ln.known),
        "order": _num(ln.order) if explained else None,
        "fixed_hz": _num(ln.fixed_hz, 3) if explained else None,
        "aliased": bool(ln.aliased),
        "zones": [
            {
                "zone": z.zone,
                "inverted": bool(z.inverted),
                "rpm_from": round(z.rpm_from, 1),
                "rpm_to": round(z.rpm_to, 1),
            }
            for z in ln.zones
        ],
        "rpm_range": (round(lo, 1), round(hi, 1)),
        "apparent_hz_range": (
            round(float(ln.freq_hz.min()), 3),
            round(float(ln.freq_hz.max()), 3),
        ),
        "true_hz_range": true,
        "sweep": round(ln.sweep, 4),
        "residual_hz": _num(ln.residual_hz),
        "level_db_max": round(float(np.max(ln.level_db)), 2),
        "confidence": round(ln.confidence, 4),
        "sentence": ln.sentence,
    }


def _line_display(ln: RunUpLine) -> dict[str, Any]:
    order = np.argsort(ln.rpm, kind="stable")
    idx = order[_decimate_idx(order.size, DISPLAY_LINE_POINTS)]
    return {
        "label": ln.label,
        "kind": ln.kind,
        "rpm": np.round(ln.rpm[idx], 1).tolist(),
        "freq_hz": np.round(ln.freq_hz[idx], 2).tolist(),
    }


def _predicted(
    known: tuple[KnownLine, ...],
    chain: Chain,
    rpm_lo: float,
    rpm_hi: float,
    orders: OrderSpectrum | None,
) -> list[dict[str, Any]]:
    """The chain's folded lines ``fold(k·r + c, fs)`` with its attenuation, by speed."""
    fs = chain.final_rate_hz
    rpm = np.linspace(rpm_lo, rpm_hi, PREDICTED_POINTS)
    out = []
    for kl in known[:PREDICTED_LINES]:
        true = np.abs(kl.order * rpm / 60.0 + kl.fixed_hz)
        resp = chain.evaluate(true)
        entry: dict[str, Any] = {
            "label": kl.label,
            "order": round(kl.order, 6),
            "fixed_hz": round(kl.fixed_hz, 3),
            "aliased": bool(np.any(resp.zone >= 2)),
            "rpm": np.round(rpm, 1).tolist(),
            "apparent_hz": np.round(fold(true, fs), 2).tolist(),
            "attenuation_db": np.round(resp.attenuation_db, 2).tolist(),
            "apparent_order_range": None,
        }
        if orders is not None and kl.fixed_hz == 0.0 and kl.order > 0:
            r = np.linspace(orders.rpm_range[0], orders.rpm_range[1], 40)
            r = r[r > 0]
            if r.size:
                ao = apparent_order(kl.order, r, fs)
                entry["apparent_order_range"] = (
                    round(float(ao.min()), 4),
                    round(float(ao.max()), 4),
                )
        out.append(entry)
    return out


def _reduce_max(x: np.ndarray, y: np.ndarray, keep: int) -> tuple[np.ndarray, np.ndarray]:
    """At most ``keep`` points: the maximum of ``y`` per bucket (peaks never vanish)."""
    if x.size <= keep:
        return x, y
    step = -(-x.size // keep)
    n = -(-x.size // step) * step
    yp = np.pad(y, (0, n - y.size), constant_values=-np.inf).reshape(-1, step)
    arg = np.argmax(yp, axis=1) + np.arange(yp.shape[0]) * step
    arg = np.minimum(arg, x.size - 1)
    return x[arg], y[arg]


def _order_view(
    res: RunUpResult, vib: np.ndarray, max_order: float
) -> tuple[OrderSpectrum | None, dict[str, Any], str | None]:
    hi = res.speed.rpm_range[1]
    try:
        # The upper half of the sweep: at low speed the high orders lie above the band.
        osp = order_spectrum(
            vib, res.sample_rate_hz, res.speed, max_order=max_order, rpm_range=(0.5 * hi, hi)
        )
    except InputError as exc:
        return None, {}, f"No order spectrum: {exc.message}."
    keep = osp.order <= max_order
    with np.errstate(divide="ignore"):
        db = 20 * np.log10(np.maximum(osp.amplitude[keep], 1e-12))
    o, d = _reduce_max(osp.order[keep], db, ORDER_POINTS)
    summary = {
        "samples_per_rev": osp.samples_per_rev,
        "revs_per_segment": osp.revs_per_segment,
        "order_resolution": 1.0 / osp.revs_per_segment,
        "segments": osp.segments,
        "rpm_range": [round(osp.rpm_range[0], 1), round(osp.rpm_range[1], 1)],
        "max_order": max_order,
    }
    return (
        osp,
        {"order": np.round(o, 4).tolist(), "level_db": np.round(d, 2).tolist(), **summary},
        None,
    )


def _map_display(res: RunUpResult) -> dict[str, Any]:
    speeds, freqs, db = display_map(res.map)
    level = np.round(db.astype(np.float64), 1)
    rows = [[None if v != v else v for v in row] for row in level.tolist()]
    return {
        "rpm": np.round(speeds, 1).tolist(),
        "freq_hz": np.round(freqs, 2).tolist(),
        "level_db": rows,
    }


def runup_payload(
    req: RunUpRecordIn,
    settings: Settings,
    upload: Upload | None = None,
    *,
    recording: Recording | None = None,
    progress: Callable[[float], None] | None = None,
) -> dict[str, Any]:
    """Analyse one run-up record: the JSON answer (shaped like ``RunUpRecordOut``)."""
    rec = recording or read_recording(req, settings, upload)
    chain = _chain(req, rec)
    fs = chain.final_rate_hz
    known = _known(req, settings)
    nperseg = _nperseg(req, fs)
    if rec.tacho is None and req.speed_trace is None:
        raise RequestError(
            "the record has no speed information: neither a tacho channel nor a speed trace",
            field=rec.tacho_field if rec.tacho_field.startswith("upload") else "tacho",
            code="no_speed",
            remedy="Add the tacho channel (and pulses_per_rev) or the controller's speed "
            "trace as speed_trace {time_s, rpm}",
        )
    trace = req.speed_trace
    fields = {
        "tacho": rec.tacho_field,
        "vibration": rec.vibration_field,
        "speed_trace": "speed_trace",
        "nperseg": "bin_width_hz" if req.bin_width_hz is not None else "nperseg",
        "pulses_per_rev": "pulses_per_rev",
        "sample_rate_hz": "sample_rate_hz",
    }
    with _rooted(fields, rec.vibration_field):
        res = analyse_run_up(
            rec.vibration,
            fs,
            tacho=rec.tacho,
            pulses_per_rev=req.pulses_per_rev,
            speed_time_s=None if trace is None else trace.time_s,
            speed_rpm=None if trace is None else trace.rpm,
            known=known,
            nperseg=nperseg,
            progress=progress,
        )
    osp, order_display, order_note = _order_view(res, rec.vibration, req.max_order)
    lo, hi = res.speed.rpm_range
    if known is None:
        known_for_chain = tuple(
            KnownLine(ln.label, ln.order, ln.fixed_hz)
            for ln in res.lines
            if ln.kind in ("order", "folded_order", "sideband")
        )
    else:
        known_for_chain = known
    counts: dict[str, int] = {}
    for ln in res.lines:
        counts[ln.kind] = counts.get(ln.kind, 0) + 1
    notes = list(chain.validate())
    if len(res.lines) > MAX_LINES:
        notes.append(f"{len(res.lines)} lines found; the {MAX_LINES} strongest are listed.")
    if order_note:
        notes.append(order_note)
    sp = res.speed
    m = res.map
    return {
        "input": rec.description,
        "speed": {
            "source": sp.source,
            "rpm_min": round(lo, 2),
            "rpm_max": round(hi, 2),
            "duration_s": round(rec.vibration.size / fs, 4),
            "pulses_per_rev": sp.pulses_per_rev,
            "missing_pulses_repaired": sp.missing_repaired,
            "extra_pulses_repaired": sp.extra_repaired,
        },
        "map": {
            "sample_rate_hz": fs,
            "nyquist_hz": fs / 2,
            "bin_width_hz": m.bin_hz,
            "nperseg": m.nperseg,
            "hop": m.hop,
            "frames": m.frames,
            "speed_slices": int(m.speed_rpm.size),
        },
        "counts": counts,
        "lines": [_line_out(ln) for ln in res.lines[:MAX_LINES]],
        "predicted": _predicted(known_for_chain, chain, lo, hi, osp),
        "order_spectrum": {
            k: v for k, v in order_display.items() if k not in ("order", "level_db")
        },
        "display": {
            "map": _map_display(res),
            "lines": [_line_display(ln) for ln in res.lines[:DISPLAY_LINES]],
            "order_spectrum": {
                "order": order_display.get("order", []),
                "level_db": order_display.get("level_db", []),
            },
        },
        "stages": list(chain.stage_names),
        "notes": notes,
        "caution": CAUTION,
        "computation_version": COMPUTATION_VERSION,
    }


# ---------------------------------------------------------------------------- demo


def demo_request() -> RunUpRecordIn:
    """The invented e-drive bench's chain and known sources (DESIGN.md §6)."""
    rpm = DEMO_NOMINAL_RPM
    return RunUpRecordIn.model_validate(
        {
            "sample_rate_hz": 12_800.0,
            "anti_alias": {"family": "butterworth", "order": 2, "cutoff_hz": 5000.0},
            "pulses_per_rev": 1,
            "nominal_rpm": rpm,
            "sources": [
                {"type": "shaft", "label": "motor shaft", "speed_rpm": rpm, "orders": [1, 2, 8]},
                {
                    "type": "gear_mesh",
                    "label": "first mesh 17/53",
                    "speed_rpm": rpm,
                    "teeth": 17,
                    "harmonics": 4,
                    "sidebands": 0,
                },
                {
                    "type": "pwm",
                    "label": "inverter",
                    "carrier_hz": 10_000.0,
                    "pole_pairs": 4,
                    "speed_rpm": rpm,
                    "carrier_multiples": 1,
                    "sidebands": 2,
                },
            ],
        }
    )


def demo_recording(duration_s: float = 20.0, seed: int = 0) -> Recording:
    """A run-up of the invented e-drive (0–12,000 rpm, 12.8 kS/s behind the weak 2nd-order
    filter, inverter at 10 kHz, first mesh 17 teeth), generated by the simulator."""
    sim = simulate_run_up(duration_s=duration_s, seed=seed)
    return Recording(
        sim.vibration,
        sim.tacho,
        sim.rate_hz,
        f"simulated e-drive run-up, {duration_s:g} s at {sim.rate_hz:g} S/s, "
        f"{sim.rpm_start:g} to {sim.rpm_end:g} rpm (invented demo)",
    )
