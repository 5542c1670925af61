"""Request models in, core computations, plain JSON-ready dicts out.

Shared by the routers and the command line so both give the same answer.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np

from .. import COMPUTATION_VERSION
from ..config import Settings
from ..contract.fold import FoldIn, chain_from_request
from ..contract.sources import source_to_core
from ..core.prediction import Prediction, predict
from ..core.sources import expand_sources
from ..core.tones import ToneSet
from .errors import InputError, RequestError, input_errors

__all__ = ["fold_payload", "prediction_to_dict", "run_fold", "tones_from_request"]


def _nan_to_none(values: np.ndarray) -> list[Any]:
    return [None if v != v else v for v in values.tolist()]


def _sent_as(source: Any) -> Callable[[InputError], str]:
    """The request's name of a core source field: a speed the core holds in Hz
    (``shaft_hz``) is named as it was sent (``shaft_rpm``, ``shaft_cpm``)."""
    sent = source.model_fields_set

    def rename(exc: InputError) -> str:
        name = str(exc.field)
        if name in sent or not name.endswith("_hz"):
            return name
        for unit in ("_rpm", "_cpm"):
            if name[:-3] + unit in sent:
                return name[:-3] + unit
        return name

    return rename


def _chain_field(req: FoldIn) -> Callable[[InputError], str]:
    """The request's name of a core chain field: the core numbers ``stages``; a request
    writes them as ``chain`` or as the shorthand ``anti_alias`` + ``sample_rate_hz``."""

    def rename(exc: InputError) -> str:
        name = str(exc.field)
        head, sep, rest = name.partition(".")
        if not head.startswith("stages"):
            return name
        if req.chain is not None:
            return "chain" + head[len("stages") :] + sep + rest
        if req.anti_alias is not None and head == "stages[0]":
            return "anti_alias" + sep + rest
        return "sample_rate_hz"

    return rename


def _tone_field(req: FoldIn) -> Callable[[InputError], str]:
    """The request's name of a core tone field: ``freq_hz`` is the first explicit tone
    with the offending value (``tones[3].freq_hz``), else the sources that made it."""

    def rename(exc: InputError) -> str:
        name = str(exc.field)
        if name != "freq_hz":
            return name
        for i, tone in enumerate(req.tones or ()):
            if tone.freq_hz == exc.value:
                return f"tones[{i}].freq_hz"
        return "sources"

    return rename


def tones_from_request(req: FoldIn, max_tones: int) -> ToneSet:
    parts: list[ToneSet] = []
    if req.tones:
        if len(req.tones) > max_tones:
            raise RequestError(
                f"{len(req.tones)} tones is more than the limit of {max_tones}",
                field="tones",
                value=len(req.tones),
                limit=max_tones,
            )
        parts.append(
            ToneSet.explicit(
                [t.freq_hz for t in req.tones],
                [t.label for t in req.tones],
                [np.nan if t.amplitude is None else t.amplitude for t in req.tones],
            )
        )
    if req.sources:
        core_sources = []
        for i, s in enumerate(req.sources):
            with input_errors(f"sources[{i}]", under=f"sources[{i}]", rename=_sent_as(s)):
                core_sources.append(source_to_core(s))
        with input_errors("sources"):
            parts.append(expand_sources(core_sources))
    tones = ToneSet.concat(parts)
    if len(tones) > max_tones:
        raise RequestError(
            f"the tones and sources expand to {len(tones)} tones, more than the limit of "
            f"{max_tones}; ask for fewer harmonics or sidebands",
            field="sources",
            value=len(tones),
            limit=max_tones,
        )
    return tones


def run_fold(req: FoldIn, settings: Settings) -> Prediction:
    tones = tones_from_request(req, settings.max_tones)
    with input_errors(
        "chain" if req.chain is not None else "sample_rate_hz", under="", rename=_chain_field(req)
    ):
        chain = chain_from_request(req)
        chain.validate()
    with input_errors(under="", rename=_tone_field(req)):
        return predict(
            tones,
            chain,
            band_hz=req.band_hz,
            lines=req.lines,
            speed_tolerance_pct=req.speed_tolerance_pct,
            collision_bins=req.collision_bins,
        )


def prediction_to_dict(p: Prediction) -> dict[str, Any]:
    t, r = p.tones, p.response
    n = len(t)
    names = list(r.stage_names)
    fold_stage = np.asarray(r.fold_stage)
    folded_at = [names[k] if k >= 0 else None for k in fold_stage.tolist()]
    stage_db = np.asarray(r.stage_attenuation_db).T.round(4).tolist() if n else []
    amp = _nan_to_none(t.amplitude)
    level = _nan_to_none(p.apparent_amplitude)
    family = [f or None for f in t.family.tolist()]
    harmonic = _nan_to_none(t.harmonic)
    cols = {
        "label": t.label.tolist(),
        "source": t.source.tolist(),
        "kind": t.kind.tolist(),
        "family": family,
        "harmonic": harmonic,
        "freq_hz": t.freq_hz.tolist(),
        "apparent_hz": r.apparent_hz.tolist(),
        "apparent_low_hz": p.apparent_low_hz.tolist(),
        "apparent_high_hz": p.apparent_high_hz.tolist(),
        "zone": r.zone.tolist(),
        "inverted": np.asarray(r.inverted).tolist(),
        "aliased": p.aliased.tolist(),
        "in_band": p.in_band.tolist(),
        "attenuation_db": np.round(r.attenuation_db, 4).tolist(),
        "stage_attenuation_db": stage_db,
        "folded_at": folded_at,
        "amplitude": amp,
        "apparent_amplitude": level,
        "bin": p.bin.tolist(),
    }
    keys = list(cols)
    tones_out = [dict(zip(keys, row, strict=True)) for row in zip(*cols.values(), strict=True)]
    c = p.collisions
    collisions = [
        {
            "alias": t.label[i],
            "alias_source": t.source[i],
            "alias_index": i,
            "other": t.label[j],
            "other_source": t.source[j],
            "other_index": j,
            "other_aliased": bool(p.aliased[j]),
            "apparent_hz": float(r.apparent_hz[i]),
            "separation_hz": float(s),
            "separation_bins": float(s / p.bin_width_hz),
        }
        for i, j, s in zip(
            c.alias.tolist(), c.other.tolist(), c.separation_hz.tolist(), strict=True
        )
    ]
    return {
        "nyquist_hz": p.nyquist_hz,
        "sample_rate_hz": p.chain.sample_rate_hz,
        "final_rate_hz": r.final_rate_hz,
        "band_hz": list(p.band_hz),
        "lines": p.lines,
        "bin_width_hz": p.bin_width_hz,
        "speed_tolerance_pct": p.speed_tolerance_pct,
        "stages": names,
        "notes": list(p.notes),
        "tones": tones_out,
        "collisions": collisions,
        "collisions_total": c.total,
        "computation_version": COMPUTATION_VERSION,
    }


def fold_payload(req: FoldIn, settings: Settings) -> dict[str, Any]:
    return prediction_to_dict(run_fold(req, settings))
