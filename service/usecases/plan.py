"""Plan requests in, the core planner and run-up, plain JSON-ready dicts out.

Shared by POST /api/v1/plan and ``foldwise plan`` so both give the same answer.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

import numpy as np

from .. import COMPUTATION_VERSION
from ..config import Settings
from ..contract.caution import CAUTION
from ..contract.fold import chain_to_request
from ..contract.plan import FilterIn, PlanIn
from ..core import filter_catalogue, plan_common, plan_model, plan_search, runup
from ..core.multirate_settle import settle_rate
from ..core.stages import SensorResonance
from ..core.tones import ToneSet
from .errors import InputError, PlanImpossibleError, RequestError
from .fold import tones_from_request

__all__ = [
    "PLAN_FIELDS",
    "PLAN_MAX_TONES",
    "plan_payload",
    "plan_request_from_model",
    "plan_to_dict",
    "runup_payload",
]

#: Most tones one plan evaluates (each is followed over the whole speed grid for every
#: candidate rate); the service's own ``max_tones`` applies when it is lower.
PLAN_MAX_TONES = 20_000
#: Largest plan searched: tones × candidate rates × candidate filters (each pair is
#: evaluated on a 200-point speed grid; about 5 s on one core at the limit).
PLAN_MAX_WORK = 10_000_000
#: Largest run-up computed: lines × lines of interest × speed points (the crossing
#: search compares every aliased line with every line of interest at every speed).
RUNUP_MAX_WORK = 20_000_000
#: Largest run-up sent: lines × points per array (the grid is thinned evenly to fit).
RUNUP_JSON_VALUES = 200_000
RUNUP_JSON_POINTS = 500
RUNUP_MAX_CROSSINGS = 1000
RUNUP_MAX_FOLD_LINES_PER_LINE = 200


# --------------------------------------------------------------------------- errors

#: Core parameter names → request fields: where a core error's ``field`` lands in the
#: plan request. The one table of this mapping; the message is never parsed for it
#: when the core names the field.
PLAN_FIELDS = {
    "band_hz": "band_hz",
    "speed_range": "speed_range_rpm",
    "tolerance_pct": "speed_tolerance_pct",
    "nominal_rpm": "nominal_rpm",
    "rejection_db": "rejection_db",
    "floor": "floor",
    "bin_width_hz": "bin_width_hz",
    "resolve": "resolve",
    "window": "window",
    "rates_hz": "rates_hz",
    "rate_series": "rate_series",
    "lines_options": "lines_options",
    "averages": "averages",
    "overlap_pct": "overlap_pct",
    "max_band_loss_db": "max_band_loss_db",
    "orders_of_interest": "runup.orders_of_interest",
    "tolerance_hz": "runup.tolerance_hz",
    "speed_factors": "runup.n_speeds",
    "tones": "tones",
}
_LEADING = re.compile(r"^([A-Za-z_]+)((?:\[\d+\])*)[= ]")
_WORD = re.compile(r"[A-Za-z_]+")
_FIELD = re.compile(r"^([A-Za-z_]+)(.*)$")


#: Request members that are objects: a core field they do not map re-roots under them
#: (``filters[2]`` + ``ripple_db`` -> ``filters[2].ripple_db``).
_OBJECTS = re.compile(r"^(filters\[\d+\]|sensor)$")


def _field_of(exc: ValueError, default: str) -> str:
    """The request field a core error is about: its ``field`` through :data:`PLAN_FIELDS`
    (or under ``default`` when that is an object of the request); for a plain
    ``ValueError``, the parameter its message starts with."""
    if isinstance(exc, InputError) and exc.field:
        m = _FIELD.match(exc.field)
        if _OBJECTS.match(default):
            return str(InputError("", field=exc.field).under(default).field)
        if m and m.group(1) in PLAN_FIELDS:
            return PLAN_FIELDS[m.group(1)] + m.group(2)
        return default
    message = str(exc)
    m = _LEADING.match(message)
    if m and m.group(1) in PLAN_FIELDS:
        return PLAN_FIELDS[m.group(1)] + m.group(2)
    if "meet in frequency" in message:
        return "resolve"
    for word in _WORD.findall(message):
        if "_" in word and word in PLAN_FIELDS:
            return PLAN_FIELDS[word]
    return default


@contextmanager
def _core_errors(default: str) -> Iterator[None]:
    """A core ``ValueError`` becomes a 422 problem naming the request field."""
    try:
        yield
    except plan_common.PlanImpossible:
        raise
    except ValueError as exc:
        code = exc.code if isinstance(exc, InputError) else "invalid"
        raise RequestError(str(exc), field=_field_of(exc, default), code=code) from exc


def _impossible(exc: plan_common.PlanImpossible, req: PlanIn) -> PlanImpossibleError:
    msg = str(exc)
    if msg.startswith("no listed rate covers"):
        field = "rates_hz" if req.rates_hz is not None else "rate_series"
    elif msg.startswith("no listed setup meets the resolution"):
        field = "bin_width_hz" if req.resolve is None else "resolve"
        if req.bin_width_hz is not None and req.resolve is not None and "requested" in msg:
            field = "bin_width_hz"
    elif msg.startswith("every listed filter"):
        field = "filters"
    else:
        field = "rejection_db" if req.rejection_db is not None else "floor"
    tips = list(exc.suggestions)
    detail = msg
    if tips:
        detail += ". What would make it possible: " + "; ".join(tips) + "."
    return PlanImpossibleError(detail, tips, field=field)


# --------------------------------------------------------------------------- request


def _filter_option(f: FilterIn) -> filter_catalogue.FilterOption:
    return filter_catalogue.FilterOption(
        family=f.family,
        order=f.order or 0,
        ripple_db=f.ripple_db,
        stop_atten_db=f.stop_atten_db,
        cutoff_hz=f.cutoff_hz,
        cutoff_fraction=f.cutoff_fraction,
        table_hz=tuple(f.table_hz) if f.table_hz is not None else None,
        table_gain_db=tuple(f.table_gain_db) if f.table_gain_db is not None else None,
        name=f.name,
    )


def _speed_range(req: PlanIn) -> tuple[float, float]:
    if req.speed_range_rpm is not None:
        assert req.nominal_rpm is not None  # checked by PlanIn
        lo, hi = req.speed_range_rpm
        return (lo / req.nominal_rpm, hi / req.nominal_rpm)
    if req.speed_tolerance_pct is not None:
        with _core_errors("speed_tolerance_pct"):
            return plan_common.speed_range_from_tolerance(req.speed_tolerance_pct)
    return (1.0, 1.0)


def plan_request_from_model(
    req: PlanIn, max_tones: int = PLAN_MAX_TONES, tones: ToneSet | None = None
) -> plan_model.PlanRequest:
    """The core request a validated :class:`PlanIn` describes.

    ``tones`` may be passed when already expanded from the request; otherwise the tones
    and sources are expanded here (at most ``max_tones``).
    """
    if tones is None:
        tones = tones_from_request(req, min(max_tones, PLAN_MAX_TONES))  # type: ignore[arg-type]
    filters = None
    if req.filters is not None:
        opts = []
        for i, f in enumerate(req.filters):
            with _core_errors(f"filters[{i}]"):
                opts.append(_filter_option(f))
        filters = tuple(opts)
    sensor = None
    if req.sensor is not None:
        with _core_errors("sensor"):
            sensor = SensorResonance(natural_hz=req.sensor.natural_hz, q=req.sensor.q)
    extra: dict[str, Any] = {}
    if req.lines_options is not None:
        extra["lines_options"] = tuple(req.lines_options)
    return plan_model.PlanRequest(
        tones=tones,
        band_hz=(float(req.band_hz[0]), float(req.band_hz[1])),
        rejection_db=req.rejection_db,
        floor=req.floor,
        speed_range=_speed_range(req),
        nominal_rpm=req.nominal_rpm,
        bin_width_hz=req.bin_width_hz,
        resolve=req.resolve,
        window=req.window,
        rates_hz=tuple(req.rates_hz) if req.rates_hz is not None else None,
        rate_series=req.rate_series or "converter",
        filters=filters,
        averages=req.averages,
        overlap_pct=req.overlap_pct,
        max_band_loss_db=req.max_band_loss_db,
        sensor=sensor,
        **extra,
    )


# --------------------------------------------------------------------------- output


def _num(x: Any) -> float | None:
    """A finite float, or None (NaN and infinities are not JSON)."""
    if x is None:
        return None
    v = float(x)
    return v if math.isfinite(v) else None


def _filter_dict(opt: filter_catalogue.FilterOption, cutoff_hz: float | None) -> dict[str, Any]:
    return {
        "name": opt.describe(cutoff_hz),
        "family": opt.family,
        "order": opt.order,
        "ripple_db": opt.ripple_db,
        "stop_atten_db": opt.stop_atten_db,
        "cutoff_hz": opt.cutoff_hz,
        "cutoff_fraction": opt.cutoff_fraction,
    }


def _rpm(speed_factor: float, nominal_rpm: float | None) -> float | None:
    if nominal_rpm is None or not math.isfinite(speed_factor):
        return None
    return speed_factor * nominal_rpm


def plan_to_dict(p: plan_model.Plan, tones: ToneSet, nominal_rpm: float | None) -> dict[str, Any]:
    """The JSON body of a plan (without run-up, caution and version)."""
    rec = p.record
    recommendation = {
        "sample_rate_hz": p.sample_rate_hz,
        "filter": _filter_dict(p.filter, p.cutoff_hz),
        "cutoff_hz": p.cutoff_hz,
        "chain": chain_to_request(p.chain),
        "stages": list(p.chain.stage_names),
        "lines": rec.lines,
        "span_hz": rec.span_hz,
        "bin_width_hz": rec.bin_width_hz,
        "required_bin_hz": p.required_bin_hz,
        "record_s": rec.record_s,
        "samples": rec.samples,
        "averages": rec.averages,
        "overlap_pct": rec.overlap_pct,
        "total_s": rec.total_s,
        "window": p.window,
        "mainlobe_bins": p.mainlobe_bins,
        "limit_db": p.limit_db,
        "reference_db": p.reference_db,
        "worst_margin_db": _num(p.worst_margin_db),
        "band_loss_db": p.band_loss_db,
    }
    tone_rows = [
        {
            "label": t.label,
            "source": t.source,
            "aliases_into_band": t.aliases_into_band,
            "true_hz": _num(t.true_hz),
            "apparent_hz": _num(t.apparent_hz),
            "zone": t.zone if t.aliases_into_band else None,
            "speed_factor": _num(t.speed_factor),
            "rpm": _num(t.rpm),
            "level_db": _num(t.level_db),
            "margin_db": _num(t.margin_db),
            "amplitude_assumed": t.amplitude_assumed,
        }
        for t in p.tones
    ]
    rejected = []
    for r in p.rejected:
        i = r.tone_index
        rejected.append(
            {
                "sample_rate_hz": r.sample_rate_hz,
                "filter": _filter_dict(r.filter, r.cutoff_hz),
                "cutoff_hz": r.cutoff_hz,
                "failure": r.failure,
                "reason": r.reason,
                "tone": None if i is None else str(tones.label[i]),
                "tone_source": None if i is None else str(tones.source[i]),
                "apparent_hz": _num(r.apparent_hz),
                "excess_db": _num(r.excess_db),
                "speed_factor": _num(r.speed_factor),
                "rpm": _num(_rpm(r.speed_factor, nominal_rpm)),
            }
        )
    lo, hi = p.speed_range
    return {
        "band_hz": list(p.band_hz),
        "speed_range": {
            "factor": [lo, hi],
            "rpm": None if nominal_rpm is None else [lo * nominal_rpm, hi * nominal_rpm],
        },
        "recommendation": recommendation,
        "tones": tone_rows,
        "rejected": rejected,
        "residual_risk": list(p.residual_risk),
        "amplitude_basis": p.amplitude_basis,
        "amplitude_basis_text": p.amplitude_basis_text,
    }


def _runup_dict(ru: runup.RunUp, max_crossings: int) -> dict[str, Any]:
    s_n, l_n = ru.apparent_hz.shape
    points = min(s_n, RUNUP_JSON_POINTS, max(50, RUNUP_JSON_VALUES // max(1, l_n)))
    keep = np.unique(np.rint(np.linspace(0, s_n - 1, points)).astype(np.int64))
    interest = np.zeros(l_n, dtype=bool)
    interest[ru.interest] = True
    app = np.round(ru.apparent_hz[keep], 2).T.tolist()
    zone = ru.zone[keep].T.tolist()
    fl = ru.fold_lines
    fl_rpm = fl.rpm if fl.rpm is not None else np.full(fl.speed_factor.size, np.nan)
    per_line: list[list[dict[str, Any]]] = [[] for _ in range(l_n)]
    for j, s, r, f, m in zip(
        fl.tone_index.tolist(),
        fl.speed_factor.tolist(),
        fl_rpm.tolist(),
        fl.true_hz.tolist(),
        fl.multiple.tolist(),
        strict=True,
    ):
        if len(per_line[j]) < RUNUP_MAX_FOLD_LINES_PER_LINE:
            per_line[j].append(
                {"speed_factor": s, "rpm": _num(r), "true_hz": f, "multiple": int(m)}
            )
    lines = [
        {
            "label": ru.label[j],
            "source": ru.source[j],
            "interest": bool(interest[j]),
            "apparent_hz": app[j],
            "zone": zone[j],
            "fold_lines": per_line[j],
        }
        for j in range(l_n)
    ]
    c = ru.crossings
    n_c = min(c.speed_factor.size, max_crossings)
    c_rpm = c.rpm if c.rpm is not None else np.full(c.speed_factor.size, np.nan)
    crossings = [
        {
            "speed_factor": float(c.speed_factor[k]),
            "rpm": _num(c_rpm[k]),
            "apparent_hz": float(c.apparent_hz[k]),
            "alias_label": ru.label[int(c.alias_index[k])],
            "alias_source": ru.source[int(c.alias_index[k])],
            "crossed_label": ru.label[int(c.crossed_index[k])],
            "crossed_source": ru.source[int(c.crossed_index[k])],
            "alias_level": _num(c.alias_level[k]),
            "crossed_level": _num(c.crossed_level[k]),
            "touching": bool(c.touching[k]),
        }
        for k in range(n_c)
    ]
    return {
        "speed_factor": np.round(ru.speed_factor[keep], 6).tolist(),
        "rpm": None if ru.rpm is None else np.round(ru.rpm[keep], 2).tolist(),
        "points_computed": int(s_n),
        "final_rate_hz": ru.final_rate_hz,
        "tolerance_hz": ru.tolerance_hz,
        "band_hz": list(ru.band_hz),
        "lines": lines,
        "fold_lines_total": int(fl.total),
        "crossings": crossings,
        "crossings_total": int(c.total),
    }


def runup_payload(req: PlanIn, plan: plan_model.Plan, tones: ToneSet) -> dict[str, Any]:
    """The run-up through the plan's recommended chain, as asked for in ``req.runup``."""
    assert req.runup is not None
    lo, hi = plan.speed_range
    if hi <= lo:
        raise RequestError(
            "a run-up needs a speed range: give speed_range_rpm (with nominal_rpm) or "
            "speed_tolerance_pct above 0",
            field="runup",
        )
    n = req.runup.n_speeds
    interest = req.runup.orders_of_interest
    n_lines = len(tones) + sum(not isinstance(x, str) for x in interest or ())
    n_targets = len(interest) if interest else n_lines
    work = n * n_lines * n_targets
    if work > RUNUP_MAX_WORK:
        limit = RUNUP_MAX_WORK // (n_lines * n_targets)
        fewer = (
            f"use n_speeds <= {limit}"
            if limit >= 2
            else "name a few orders_of_interest, or plan for fewer sources"
        )
        raise RequestError(
            f"a run-up of {n_lines} lines against {n_targets} lines of interest at {n} "
            f"speeds is {work:,} comparisons, more than the limit of {RUNUP_MAX_WORK:,}; " + fewer,
            field="runup.n_speeds" if limit >= 2 else "runup.orders_of_interest",
            value=n,
            limit=limit if limit >= 2 else None,
        )
    with _core_errors("runup"):
        ru = runup.run_up(
            tones,
            plan.chain,
            np.linspace(lo, hi, n),
            nominal_rpm=req.nominal_rpm,
            band_hz=plan.band_hz,
            orders_of_interest=req.runup.orders_of_interest,
            lines=plan.record.lines,
            tolerance_hz=req.runup.tolerance_hz,
        )
    return _runup_dict(ru, RUNUP_MAX_CROSSINGS)


def _check_work(req: PlanIn, n_tones: int) -> None:
    n_rates = (
        len(set(req.rates_hz))
        if req.rates_hz is not None
        else len(
            plan_common.ANALYSER_RATES_HZ
            if req.rate_series == "analyser"
            else plan_common.CONVERTER_RATES_HZ
        )
    )
    n_filters = (
        len(req.filters) if req.filters is not None else len(filter_catalogue.DEFAULT_FILTERS)
    )
    work = n_tones * n_rates * n_filters
    if work <= PLAN_MAX_WORK:
        return
    if req.rates_hz is not None and n_rates > 1:
        field = "rates_hz"
    elif req.filters is not None and n_filters > 1:
        field = "filters"
    else:
        field = "sources" if req.sources else "tones"
    raise RequestError(
        f"{n_tones:,} tones × {n_rates} rates × {n_filters} filters is {work:,} "
        f"combinations to search, more than the limit of {PLAN_MAX_WORK:,}; offer fewer "
        "rates or filters, or plan for fewer tones",
        field=field,
        value=work,
        limit=PLAN_MAX_WORK,
    )


#: Aliased tones weighed for the confirming rate (the worst margins first).
CONFIRM_MAX_TONES = 50


def confirm_rate(req: PlanIn, out: dict[str, Any]) -> dict[str, Any] | None:
    """A second rate to confirm aliases: of the rates the plan considered, the one at
    which the planned aliased tones land farthest from real lines at their apparent
    frequencies (:func:`service.core.multirate_settle.settle_rate`); None when none alias."""
    rows = [t for t in out["tones"] if t["aliases_into_band"] and t["true_hz"] is not None]
    if not rows:
        return None
    rows.sort(key=lambda t: t["margin_db"] if t["margin_db"] is not None else math.inf)
    rows = rows[:CONFIRM_MAX_TONES]
    rec = out["recommendation"]
    offered = (
        req.rates_hz
        if req.rates_hz is not None
        else plan_common.RATE_SERIES[req.rate_series or "converter"]
    )
    # Common practice: analysed span = rate / 2.56; the second capture still covers the band.
    pool = [r for r in offered if r / 2.56 >= out["band_hz"][1]] or list(offered)
    # An alias and a real line at its apparent frequency read the same at the planned
    # rate; the other rate must set every such pair apart (two different tones close
    # together stay close at any rate, so only the pairs count). Lower rate on a tie.
    rate, bins = math.nan, -1.0
    for r in sorted(set(pool) - {rec["sample_rate_hz"]}):
        worst = min(
            settle_rate([t["true_hz"], t["apparent_hz"]], (r,), lines=rec["lines"])[1] for t in rows
        )
        if worst > bins * (1 + 1e-9) + 1e-12:
            rate, bins = float(r), worst
    if not math.isfinite(rate):
        return None
    names = [t["label"] for t in rows]
    listed = ", ".join(names[:3]) + (f" and {len(names) - 3} more" if len(names) > 3 else "")
    sentence = (
        f"To confirm the aliases ({listed}), capture also at {rate:g} S/s with "
        f"{rec['lines']} lines: there each lands at least {bins:.0f} bins from a real "
        "line at its apparent frequency, so the aliases move and real lines stay."
    )
    if bins < 2:
        sentence = (
            f"Of the rates considered, {rate:g} S/s separates the aliases ({listed}) from "
            f"real lines best, but by only {bins:.1f} bins at {rec['lines']} lines: "
            "offer more rates, or confirm with a wider-band measurement."
        )
    return {
        "sample_rate_hz": rate,
        "separation_bins": round(bins, 2),
        "tones": names,
        "sentence": sentence,
    }


def plan_payload(req: PlanIn, settings: Settings) -> dict[str, Any]:
    """Plan (and, when asked, the run-up) for a validated request, as plain JSON data.

    Raises :class:`RequestError` for input the core rejects (naming the field) and
    :class:`PlanImpossibleError` (with ``suggestions``) when no offered setup works.
    """
    tones = tones_from_request(req, min(settings.max_tones, PLAN_MAX_TONES))  # type: ignore[arg-type]
    core_req = plan_request_from_model(req, tones=tones)
    _check_work(req, len(tones))
    try:
        with _core_errors("body"):
            result = plan_search.plan(core_req)
    except plan_common.PlanImpossible as exc:
        raise _impossible(exc, req) from exc
    out = plan_to_dict(result, tones, req.nominal_rpm)
    out["runup"] = runup_payload(req, result, tones) if req.runup is not None else None
    out["confirm_rate"] = confirm_rate(req, out)
    out["caution"] = CAUTION
    out["computation_version"] = COMPUTATION_VERSION
    return out
