"""The two-rate test: peaks that stay put are real, peaks that move are aliases.

Everything here is synchronous and may be heavy: callers run it off the event loop.
"""

from __future__ import annotations

from typing import Any

from .. import COMPUTATION_VERSION
from ..config import Settings
from ..contract.caution import CAUTION
from ..contract.diagnose import (
    CaptureIn,
    CompareIn,
)
from ..core.comparison import CaptureVerdicts, compare_rates
from ..core.spectrum import find_peaks, noise_floor
from .errors import RequestError, input_errors
from .measure import Measured, Upload, capture_chain, chain_if_given, check_extent, measure

__all__ = ["compare_payload"]


def _none(v: float) -> float | None:
    return None if v != v else float(v)


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
        stated = chain_if_given(cap, f"{side}.")
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
        chain = stated or capture_chain(cap, m.record_rate_hz, f"{side}.")
        check_extent(m, chain, f"{side}.")
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
            f"both captures are at {rates['a']:g} S/s; the two-rate test needs "
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
