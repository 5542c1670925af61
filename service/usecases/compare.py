"""The multi-rate test: 2 to 6 captures of the same signal at different sample rates.

Each capture is measured through the one measuring path (:mod:`.measure`), its peaks
found, and the captures go to :func:`service.core.multirate.compare_captures` with each
chain's attenuation, which matches the peaks across the captures and weighs the true
frequencies consistent with all of them.

Everything here is synchronous and may be heavy: callers run it off the event loop.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import Any

import numpy as np

from .. import COMPUTATION_VERSION
from ..config import Settings
from ..contract.caution import CAUTION
from ..contract.diagnose import CompareIn
from ..core.chain import Chain
from ..core.errors import plain
from ..core.folding import fold
from ..core.multirate import compare_captures
from ..core.multirate_evidence import MAX_CHANCE_PROBABILITY, MIN_ALIAS_SNR_DB
from ..core.multirate_model import Candidate, Capture, MultiRateResult, PeakGroup
from ..core.spectrum import Peaks, find_peaks, noise_floor
from .errors import RequestError, input_errors
from .measure import Measured, Upload, capture_chain, chain_if_given, check_extent, measure

__all__ = ["capture_labels", "compare_payload"]

_LABELS = "ABCDEF"


def capture_labels(req: CompareIn) -> list[str]:
    """Each capture's name: its own label, or A, B, C, ... by position."""
    return [c.label or _LABELS[i] for i, c in enumerate(req.capture_list)]


def _num(v: float) -> float | None:
    return None if not math.isfinite(v) else float(v)


def _hz(v: float) -> str:
    return f"{v:.7g} Hz"


def _attenuation(chain: Chain) -> Callable[[np.ndarray], np.ndarray]:
    return lambda f: chain.evaluate(f).attenuation_db


def _candidate_out(c: Candidate, tied: bool) -> dict[str, Any]:
    return {
        "true_hz": round(c.true_hz, 4),
        "zone": list(c.zone),
        "apparent_hz": [round(a, 4) for a in c.apparent_hz],
        "freq_error_hz": [None if math.isnan(e) else round(e, 4) for e in c.freq_error_hz],
        "level_error_db": [None if math.isnan(e) else round(e, 3) for e in c.level_error_db],
        "attenuation_db": [round(a, 3) for a in c.attenuation_db],
        "in_range": c.in_range,
        "score": round(c.score, 4),
        "tied": tied,
    }


def _sentence(g: PeakGroup, labels: list[str]) -> str:
    seen = [f"{_hz(f)} in {labels[k]}" for k, f in enumerate(g.freq_hz) if f == f]
    where = ", ".join(seen)
    if g.verdict == "real":
        assert g.top is not None
        return (
            f"Stays put ({where}): a real line at {_hz(g.top.true_hz)}"
            + (", chosen by the lower-frequency prior" if g.decided_by_prior else "")
            + "."
        )
    if g.verdict == "alias":
        assert g.top is not None
        zones = ", ".join(f"zone {z} in {labels[k]}" for k, z in enumerate(g.top.zone))
        return (
            f"Moves with the sample rate ({where}): an alias of {_hz(g.top.true_hz)} "
            f"({zones})"
            + (", chosen by the lower-frequency prior" if g.decided_by_prior else "")
            + "."
        )
    if g.verdict == "ambiguous" and g.could_be_chance:
        assert g.candidates
        text = (
            f"{where}: the best fit is {_hz(g.candidates[0].true_hz)}, but the match could "
            "be chance: "
        )
        if g.chance_probability >= MAX_CHANCE_PROBABILITY:
            text += (
                f"an unrelated peak of comparable level would fit some candidate with "
                f"probability {g.chance_probability:.0%}"
            )
        else:
            text += f"a peak stands less than {MIN_ALIAS_SNR_DB:g} dB above its noise floor"
        if g.settle_rate_hz == g.settle_rate_hz:
            text += (
                f". A capture at {plain(g.settle_rate_hz)} S/s would confirm it (the peak "
                f"must appear at {_hz(float(fold(g.candidates[0].true_hz, g.settle_rate_hz)))})"
            )
        return text + "."
    if g.verdict == "ambiguous":
        tied = [c.true_hz for c in g.candidates[: g.tied]]
        if g.candidates and all(z == 1 for z in g.candidates[0].zone):
            where = (
                f"Stays put ({where}); a real line at {_hz(tied[0])} if nothing above "
                f"{_hz(g.unambiguous_hz)} reaches the sensor, but"
            )
        listed = ", ".join(_hz(f) for f in tied[:4]) + (", ..." if len(tied) > 4 else "")
        text = (
            f"{where}: {g.tied} true frequencies fit every capture equally ({listed}); "
            f"they repeat every {_hz(g.period_hz)}, so the captures cannot tell them apart"
        )
        if g.settle_rate_hz == g.settle_rate_hz:
            text += (
                f". A capture at {plain(g.settle_rate_hz)} S/s would separate them by "
                f"{g.settle_separation_bins:.0f} bins"
            )
        return text + "; a stated highest true frequency (the sensor's bandwidth) may too."
    if sum(f == f for f in g.freq_hz) < 2:
        return f"Seen in one capture only ({where}): nothing to compare it with."
    return f"{where}: no true frequency fits every capture; they may be different tones."


def _aliased(g: PeakGroup, k: int) -> bool | None:
    zones = {c.zone[k] > 1 for c in g.candidates[: max(g.tied, 1)]}
    if g.top is not None:
        return g.top.zone[k] > 1
    if g.verdict == "unmatched" or len(zones) != 1:
        return None
    return zones.pop()


def _group_out(gid: int, g: PeakGroup, labels: list[str]) -> dict[str, Any]:
    return {
        "id": gid,
        "verdict": g.verdict,
        "true_hz": round(g.top.true_hz, 4) if g.top is not None else None,
        "peaks": [i if i >= 0 else None for i in g.peak],
        "freq_hz": [_num(f) for f in g.freq_hz],
        "level_db": [None if v != v else round(v, 3) for v in g.level_db],
        "candidates": [_candidate_out(c, i < g.tied) for i, c in enumerate(g.candidates)],
        "tied": g.tied,
        "decided_by_prior": g.decided_by_prior,
        "unambiguous_hz": _num(g.unambiguous_hz),
        "error_bound_hz": _num(g.error_bound_hz),
        "period_hz": _num(g.period_hz) if g.verdict == "ambiguous" else None,
        "settle_rate_hz": _num(g.settle_rate_hz),
        "settle_separation_bins": _num(round(g.settle_separation_bins, 2))
        if g.settle_separation_bins == g.settle_separation_bins
        else None,
        "in_band": g.in_band,
        "chance_probability": None
        if g.chance_probability != g.chance_probability
        else round(g.chance_probability, 4),
        "could_be_chance": g.could_be_chance,
        "sentence": _sentence(g, labels),
    }


def _captures_out(
    res: MultiRateResult,
    groups: list[dict[str, Any]],
    peaks: list[Peaks],
    measured: list[Measured],
    chains: list[Chain],
    labels: list[str],
) -> list[dict[str, Any]]:
    out = []
    for k, (p, m, chain) in enumerate(zip(peaks, measured, chains, strict=True)):
        rows: list[dict[str, Any] | None] = [None] * p.freq_hz.size
        for gid, g in enumerate(res.groups):
            i = g.peak[k]
            if i < 0:
                continue
            amp = float(p.amplitude[i])
            rows[i] = {
                "freq_hz": float(p.freq_hz[i]),
                "amplitude": amp,
                "level_db": round(20 * math.log10(amp), 3) if amp > 0 else -400.0,
                "verdict": g.verdict,
                "aliased": _aliased(g, k),
                "group": gid,
                "true_hz": groups[gid]["true_hz"],
                "explanation": groups[gid]["sentence"],
            }
        listed = [r for r in rows if r is not None]
        counts: dict[str, int] = {}
        for r in listed:
            counts[r["verdict"]] = counts.get(r["verdict"], 0) + 1
        out.append(
            {
                "label": labels[k],
                "sample_rate_hz": chain.final_rate_hz,
                "input": m.description,
                "stages": list(chain.stage_names),
                "bin_width_hz": m.bin_width_hz,
                "counts": counts,
                "peaks": listed,
            }
        )
    return out


def _overall(res: MultiRateResult, counts: dict[str, int]) -> str:
    rates = ", ".join(f"{plain(r)}" for r in res.rates_hz)
    text = (
        f"The rates {rates} S/s tell true frequencies apart up to "
        f"{_hz(res.unambiguous_hz)}; {_hz(res.max_true_hz)} "
        "was considered."
    )
    if counts.get("ambiguous"):
        text += (
            f" {counts['ambiguous']} group(s) are ambiguous: state the highest true frequency "
            "the signal can hold (max_true_hz, e.g. the sensor's bandwidth) or add a capture "
            "at the proposed rate."
        )
    return text


def compare_payload(
    req: CompareIn, settings: Settings, uploads: dict[str, Upload] | None = None
) -> tuple[dict[str, Any], list[Measured]]:
    """The multi-rate test: the JSON answer and every capture's spectrum.

    ``uploads`` maps a capture's request path (``captures[1]``, ``a``) to its file.
    """
    uploads = uploads or {}
    caps_in = req.capture_list
    fields = req.capture_fields
    labels = capture_labels(req)
    measured: list[Measured] = []
    chains: list[Chain] = []
    peaks: list[Peaks] = []
    for cap, field in zip(caps_in, fields, strict=True):
        stated = chain_if_given(cap, f"{field}.")
        m = measure(
            cap.spectrum,
            cap.time_record,
            uploads.get(field),
            cap.upload,
            req.spectrum_options,
            stated.final_rate_hz if stated else None,
            settings,
            field=field,
        )
        chain = stated or capture_chain(cap, m.record_rate_hz, f"{field}.")
        check_extent(m, chain, f"{field}.")
        with input_errors(field):
            p = find_peaks(
                m.freq_hz,
                m.amplitude,
                noise_floor(m.amplitude),
                threshold_db=req.threshold_db,
                window=m.window,
                max_peaks=req.max_peaks,
            )
        measured.append(m)
        chains.append(chain)
        peaks.append(p)
    rates = [c.final_rate_hz for c in chains]
    for j in range(1, len(rates)):
        for i in range(j):
            if math.isclose(rates[i], rates[j], rel_tol=1e-9):
                raise RequestError(
                    f"{fields[j]} and {fields[i]} are both at {plain(rates[j])} S/s; each "
                    "capture needs its own sample rate, or the peaks cannot move",
                    field=f"{fields[j]}.sample_rate_hz",
                    value=rates[j],
                    code="duplicate",
                )
    captures = [
        Capture(
            rate_hz=chain.final_rate_hz,
            freq_hz=np.minimum(p.freq_hz, chain.final_rate_hz / 2),
            level_db=20 * np.log10(np.maximum(p.amplitude, 1e-300)),
            uncertainty_hz=m.bin_width_hz,
            attenuation=_attenuation(chain),
            label=label,
            snr_db=p.snr_db,
        )
        for p, m, chain, label in zip(peaks, measured, chains, labels, strict=True)
    ]
    with input_errors():
        res = compare_captures(
            captures,
            max_true_hz=req.max_true_hz,
            drift=req.drift_pct / 100.0,
            band_hz=req.band_hz,
            level_tolerance_db=req.level_tolerance_db,
            full_scale_db=req.full_scale_db,
            prior_weight=req.prior_weight,
            settle_rates_hz=req.settle_rates_hz,
        )
    groups = [_group_out(i, g, labels) for i, g in enumerate(res.groups)]
    counts: dict[str, int] = {}
    for g in groups:
        counts[g["verdict"]] = counts.get(g["verdict"], 0) + 1
    caps_out = _captures_out(res, groups, peaks, measured, chains, labels)
    payload: dict[str, Any] = {
        "captures": caps_out,
        "groups": groups,
        "counts": counts,
        "rates_hz": list(res.rates_hz),
        "resolution_hz": res.resolution.resolution_hz,
        "unambiguous_hz": _num(res.unambiguous_hz),
        "error_bound_hz": res.resolution.error_bound_hz,
        "max_true_hz": res.max_true_hz,
        "drift_pct": req.drift_pct,
        "sentence": _overall(res, counts),
    }
    if req.captures is None:
        payload["a"], payload["b"] = caps_out
    payload["caution"] = CAUTION
    payload["computation_version"] = COMPUTATION_VERSION
    return payload, measured
