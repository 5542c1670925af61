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
from ..core.attribution_model import Attribution
from ..core.chain import Chain
from ..core.diagnosis import Diagnosis, diagnose_peaks
from ..core.harmonics import Family
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

__all__ = ["HEADLINE_STATUSES", "diagnose_payload", "headline", "is_aliased"]


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
                "aliased": bool(a.aliased[i]),
                "in_band": bool(a.in_band[i]),
                "beyond_span": bool(a.beyond_span[i]),
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
    with input_errors():
        d = diagnose_peaks(
            peaks,
            chain,
            tones,
            m.bin_width_hz,
            window=m.window,
            speed_tolerance_pct=req.speed_tolerance_pct,
            speed_search_pct=req.speed_search_pct,
            band_hz=req.band_hz,
            level_tolerance_db=req.level_tolerance_db,
            blind=blind,
        )
    att, families = d.attribution, d.families
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
        **_span(chain, att.span_hz),
        "tolerance_hz": att.tolerance_hz,
        "stages": list(chain.stage_names),
        # attribute() carries the chain's notes already: each note once, in order.
        "notes": list(
            dict.fromkeys(
                [
                    *chain.validate(),
                    *att.notes,
                    *d.notes,
                    *input_warnings(m, len(peaks), req.threshold_db),
                ]
            )
        ),
        "counts": counts,
        "peaks": peaks_out,
        "families": [_family(f) for f in families],
        "caution": CAUTION,
        "computation_version": COMPUTATION_VERSION,
    }
    peaks_out = payload["peaks"]
    payload["summary"].update(
        speed=_speed(req, d), **headline(peaks_out, sources_given=tones is not None)
    )
    return payload, m


#: ``summary.status`` codes, in the order of what matters first.
HEADLINE_STATUSES = ("aliases_found", "unexplained_peaks", "no_aliases", "no_peaks")


def is_aliased(peak: dict[str, Any]) -> bool:
    """The peak's verdict puts its energy above the Nyquist frequency of the final rate
    (its ``aliased`` field; results saved before the field existed: alias, mirror, or a
    family member from a zone above the first)."""
    if "aliased" in peak:
        return bool(peak["aliased"])
    verdict = peak.get("verdict")
    return verdict in ("alias", "mirror") or (verdict == "family" and (peak.get("zone") or 1) > 1)


def headline(peaks: list[dict[str, Any]], sources_given: bool) -> dict[str, Any]:
    """The one-sentence answer every edge shows (``summary.headline``, ``summary.status``).

    "No aliases" only when every peak is explained as a real line; otherwise the aliases
    and the unexplained peaks are counted and the sentence says what would settle the
    unexplained ones.
    """
    n = len(peaks)
    aliased = [p for p in peaks if is_aliased(p)]
    unexplained = sum(1 for p in peaks if p.get("verdict") == "unexplained")
    settle = (
        "capture again at a second sample rate, or add the sources missing from the list"
        if sources_given
        else "name the machine's sources (shaft speeds, gear teeth, bearings, inverter, "
        "supply) or capture again at a second sample rate"
    )
    them = "it" if unexplained == 1 else "them"
    some = f"{unexplained} of {n} peak{'s' if n != 1 else ''} {_are(unexplained)} unexplained"
    if n == 0:
        status = "no_peaks"
        text = "No peak stands out: nothing rises above the noise floor by the threshold."
    elif aliased:
        status = "aliases_found"
        by_source: dict[str, int] = {}
        for p in aliased:
            name = p.get("source") or "energy above the Nyquist frequency"
            by_source[name] = by_source.get(name, 0) + 1
        names = ", ".join(f"{k} ({v})" for k, v in sorted(by_source.items(), key=lambda kv: -kv[1]))
        a = len(aliased)
        text = f"{a} of {n} peak{'s' if n != 1 else ''} {_are(a)} probably aliased: {names}"
        text += f"; {some} — to settle {them}, {settle}." if unexplained else "."
    elif unexplained:
        status = "unexplained_peaks"
        text = f"No alias identified, but {some}: to settle {them}, {settle}."
    else:
        status = "no_aliases"
        text = f"No aliases: all {n} peak{'s are' if n != 1 else ' is'} explained as real lines."
    return {
        "headline": text,
        "status": status,
        "aliased_count": len(aliased),
        "unexplained_count": unexplained,
    }


def _are(k: int) -> str:
    return "is" if k == 1 else "are"


def _span(chain: Chain, span_hz: float) -> dict[str, float]:
    """The analysed span (fs/2.56) and what the entered chain actually does there: its
    rejection at the span edge and at ``fs − span``, the frequency that folds onto it."""
    fs = chain.final_rate_hz
    att = chain.evaluate(np.array([span_hz, fs - span_hz])).attenuation_db
    return {
        "span_hz": span_hz,
        "rejection_at_span_edge_db": round(float(att[0]), 3),
        "rejection_at_fold_of_span_edge_db": round(float(att[1]), 3),
    }


def _speed(req: DiagnoseIn, d: Diagnosis) -> dict[str, Any] | None:
    """The running speed used against the one given (null without a speed search)."""
    e = d.speed
    if e is None:
        return None
    ratio = e.ratio
    given = []
    for src in req.sources or []:  # a handful of sources
        rpm = getattr(src, "speed_rpm", None)
        hz = getattr(src, "speed_hz", None)
        if rpm is None and hz is not None:
            rpm = 60.0 * hz
        if rpm is not None:
            given.append({"source": src.label, "given_rpm": rpm, "used_rpm": round(rpm * ratio, 6)})
    return {
        "estimated": bool(e.trustworthy),
        "ratio": ratio,
        "offset_pct": round(e.offset_pct, 4),
        "uncertainty_pct": _none(round(100.0 * e.ratio_uncertainty, 4)),
        "search_pct": req.speed_search_pct,
        "tolerance_pct": d.speed_tolerance_pct,
        "explained_at_given": e.explained_at_nominal,
        "explained_at_used": e.explained_at_estimate if ratio != 1.0 else e.explained_at_nominal,
        "sources": given,
        "reason": e.reason,
    }
