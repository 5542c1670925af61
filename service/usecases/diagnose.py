"""Diagnosis: which peaks of a measured spectrum are aliases, of what, how sure.

Shared by the API routes, the pages and the command line so all give the same answer.
Everything here is synchronous and may be heavy: callers run it off the event loop.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from .. import COMPUTATION_VERSION
from ..config import Settings
from ..contract.caution import CAUTION
from ..contract.diagnose import (
    DiagnoseIn,
)
from ..core.attribution import attribute
from ..core.attribution_model import Attribution
from ..core.harmonics import Family, find_families
from ..core.spectrum import find_peaks, noise_floor
from .errors import input_errors
from .fold import tones_from_request
from .measure import (
    Measured,
    Upload,
    capture_chain,
    chain_if_given,
    check_extent,
    input_summary,
    input_warnings,
    mark_clipping_products,
    measure,
)

__all__ = ["diagnose_payload"]


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
    stated = chain_if_given(req, "")
    m = measure(
        req.spectrum,
        req.time_record,
        upload,
        req.upload,
        req.spectrum_options,
        stated.final_rate_hz if stated else None,
        settings,
        rate_field="chain" if req.chain is not None else None,
    )
    chain = stated or capture_chain(req, m.record_rate_hz, "")
    check_extent(m, chain, "")
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
    peaks_out = _peaks_out(att, peaks.floor, peaks.snr_db)
    mark_clipping_products(m, peaks_out, chain.final_rate_hz, att.tolerance_hz)
    counts: dict[str, int] = {}
    for v in (p["verdict"] for p in peaks_out):
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
            **input_summary(m),
        },
        "nyquist_hz": chain.final_rate_hz / 2.0,
        "final_rate_hz": chain.final_rate_hz,
        "band_hz": list(att.band_hz),
        "protected_edge_hz": att.protected_edge_hz,
        "tolerance_hz": att.tolerance_hz,
        "stages": list(chain.stage_names),
        "notes": list(chain.validate())
        + list(att.notes)
        + input_warnings(m, len(peaks), req.threshold_db),
        "counts": counts,
        "peaks": peaks_out,
        "families": [_family(f) for f in families],
        "caution": CAUTION,
        "computation_version": COMPUTATION_VERSION,
    }
    return payload, m
