"""The plan page: which sample rate, anti-alias filter and analysis lines keep the band of
interest clean over the speed range, how long the record must be, and the run-up.

The form's fields become the JSON request of POST /api/v1/plan (``PlanIn``); validation
and the computation are the API's own (``plan_payload``, in a worker thread), and every
error goes back to the form field it came from. The machine sources and the tone list are
the predict form's own fields (``forms``), so a bench described once reads the same on
every page.

Its ``router`` has GET/POST ``/plan`` and POST ``/plan/share``. A saved plan
(kind ``"plan"``) is drawn by the saved-result page from ``plan_result_context`` and the
template partial ``_plan_result.html``.
"""

from __future__ import annotations

import json
import math
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from fastapi import APIRouter, Request
from fastapi.responses import HTMLResponse
from pydantic import ValidationError
from starlette.concurrency import run_in_threadpool

from ..config import Settings
from ..contract.plan import PlanIn
from ..demo import demo_plan_request
from ..http.problems import ANSWERABLE, Problem, as_problem
from ..usecases.plan import plan_payload
from .diagnose_pages import error_page, read_page_form, recompute_shared, save_result
from .forms import (
    FIELD_LABELS,
    NUMBER_KINDS,
    FormState,
    _build_request,
    _locate,
    _Origin,
    form_from_request,
    form_message,
    in_form_words,
    json_field,
    read_number,
)
from .numbers import parse_quantity
from .plan_figures import runup_figure
from .rendering import render

__all__ = [
    "MAX_TABLE_CROSSINGS",
    "PLAN_LABELS",
    "PlanForm",
    "attach_plan_problem",
    "blank_plan_form",
    "parse_plan_form",
    "plan_form_from_request",
    "plan_result_context",
    "router",
]

router = APIRouter(include_in_schema=False)

#: Crossings listed in the table; all of them are on the plot (and in the JSON answer).
MAX_TABLE_CROSSINGS = 300
#: Form fields the plan form may send (sources add a few per row).

PLAN_WINDOWS = [
    ("hann", "Hann"),
    ("flattop", "flat top"),
    ("rectangular", "rectangular (none)"),
    ("hamming", "Hamming"),
    ("blackmanharris", "Blackman-Harris (4-term)"),
]
RATE_SERIES = [
    ("converter", "converter rates, 1 kS/s to 262.144 kS/s"),
    ("analyser", "analyser rates, 2.56 × 1-2-5 spans"),
]

#: Top-level fields of the plan form and the words shown for them in error messages.
PLAN_LABELS = {
    **FIELD_LABELS,
    "band_low_hz": "Band of interest, from",
    "band_high_hz": "Band of interest, to",
    "nominal_rpm": "Sources given at",
    "speed_min_rpm": "Lowest speed",
    "speed_max_rpm": "Highest speed",
    "speed_tolerance_pct": "Speed tolerance",
    "rejection_db": "Alias rejection",
    "floor": "Highest allowed alias level",
    "bin_width_hz": "Bin width at most",
    "resolve_a": "Resolve this tone",
    "resolve_b": "from this tone",
    "window": "Window",
    "rates_hz": "Candidate sample rates",
    "rate_series": "Rate series",
    "filters_json": "Anti-alias filters to offer (JSON)",
    "lines_options": "Analysis lines on offer",
    "max_band_loss_db": "Largest filter loss in the band",
    "averages": "Averages",
    "overlap_pct": "Overlap",
    "runup": "Show the run-up",
    "orders_of_interest": "Lines of interest",
    "n_speeds": "Speed points",
    "share_title": "Title of the link",
}
#: Request fields that are one form field of the same name.
_SAME = (
    "nominal_rpm",
    "speed_tolerance_pct",
    "rejection_db",
    "floor",
    "bin_width_hz",
    "window",
    "rate_series",
    "max_band_loss_db",
    "averages",
    "overlap_pct",
)
#: Form fields of the sources part (read by the predict form's parser).
_SOURCE_KEYS = ("sources_json", "tone_list")
_ROW_KEY = re.compile(r"^[a-z_]+-\d{1,4}-[a-z_]+$")
_BAND_IDS = {"band_low_hz", "band_high_hz"}
_DEMO_INTEREST: list[str | float] = ["first mesh 17/53: GMF 1×", 1.0]


@dataclass
class PlanForm:
    """A parsed plan form: the request (None when invalid), what to show, and where each
    source and tone came from."""

    req: PlanIn | None
    state: FormState
    origin: _Origin
    runup_asked: bool = False
    runup_skipped: bool = False
    suggestions: list[str] = field(default_factory=list)


# --------------------------------------------------------------------------- to the form


def _num(v: Any) -> str:
    if v is None:
        return ""
    if isinstance(v, float) and math.isfinite(v) and v.is_integer() and abs(v) < 1e15:
        return str(int(v))
    return str(v)


def _list(values: Sequence[Any] | None) -> str:
    return ", ".join(_num(v) for v in values or ())


def blank_plan_form() -> FormState:
    """The empty form: sensible defaults where the planner has them."""
    st = FormState()
    st.values = {
        "band_low_hz": "0",
        "window": "hann",
        "rate_series": "converter",
        "averages": "1",
        "overlap_pct": "0",
        "runup": "1",
        "n_speeds": "200",
    }
    return st


def plan_form_from_request(req: Mapping[str, Any]) -> FormState:
    """The form filled in from a plan request dict (e.g. the demo request)."""
    base = form_from_request({"sources": req.get("sources"), "tones": req.get("tones")})
    st = FormState(rows=base.rows)
    st.values = {k: base.values[k] for k in _SOURCE_KEYS if base.values.get(k)}
    band = req.get("band_hz") or ("", "")
    st.values["band_low_hz"], st.values["band_high_hz"] = _num(band[0]), _num(band[1])
    for key in _SAME:
        if req.get(key) is not None:
            st.values[key] = _num(req[key])
    st.values.setdefault("window", "hann")
    speeds = req.get("speed_range_rpm")
    if speeds:
        st.values["speed_min_rpm"], st.values["speed_max_rpm"] = _num(speeds[0]), _num(speeds[1])
    if req.get("resolve"):
        st.values["resolve_a"], st.values["resolve_b"] = req["resolve"]
    if req.get("rates_hz"):
        st.values["rates_hz"] = _list(req["rates_hz"])
    elif not req.get("rate_series"):
        st.values["rate_series"] = "converter"
    if req.get("filters"):
        st.values["filters_json"] = json.dumps(req["filters"], indent=2)
    if req.get("lines_options"):
        st.values["lines_options"] = _list(req["lines_options"])
    runup = req.get("runup")
    if runup is not None:
        st.values["runup"] = "1"
        st.values["n_speeds"] = _num(runup.get("n_speeds", 200))
        st.values["orders_of_interest"] = "\n".join(
            _num(v) for v in runup.get("orders_of_interest") or ()
        )
    return st


# --------------------------------------------------------------------------- from the form


def _split_list(text: str) -> list[str]:
    return [p for p in re.split(r"[,;\s]+", text.strip()) if p]


def _order_or_label(text: str) -> str | float:
    try:
        value = float(text)
    except ValueError:
        return text
    return value if math.isfinite(value) else text


def _json_list(st: FormState, name: str) -> list[Any] | None:
    ok, value = json_field(st, name, PLAN_LABELS[name])
    if not ok:
        return None
    if isinstance(value, dict):
        value = [value]
    if not isinstance(value, list):
        st.add_error(name, PLAN_LABELS[name], "must be a JSON list of objects")
        return None
    return value


def _is_rate(text: str) -> bool:
    try:
        parse_quantity(text, "rate")
    except ValueError:
        return False
    return True


def _rate_list(st: FormState, text: str) -> list[str]:
    """Candidate rates, one per comma, semicolon or line (``12.8k; 25.6 kS/s``)."""
    rates = []
    for part in (p.strip() for p in re.split(r"[;\n]|,(?!\d{3}(?!\d))", text)):
        if not part:
            continue
        # "12 800" is one rate; "12800 25600" two.
        for piece in [part] if _is_rate(part) else part.split():
            try:
                rates.append(_num(parse_quantity(piece, "rate").value))
            except ValueError as exc:
                st.add_error("rates_hz", PLAN_LABELS["rates_hz"], str(exc))
    return rates


def _pair(st: FormState, req: dict[str, Any], key: str, ids: tuple[str, str], why: str) -> None:
    a, b = (read_number(st, i, PLAN_LABELS[i]) for i in ids)
    if a is None or b is None:
        return
    if a and b:
        req[key] = [a, b]
    elif a or b:
        missing = ids[1] if a else ids[0]
        st.add_error(missing, PLAN_LABELS[missing], why)


def _build_plan_request(
    form: Mapping[str, str],
) -> tuple[dict[str, Any], FormState, _Origin, bool, bool]:
    """The request dict the form describes; errors found on the way are on the state."""
    sources_part = {k: v for k, v in form.items() if _ROW_KEY.match(k) or k in _SOURCE_KEYS}
    src_req, st, origin = _build_request(sources_part)
    st.values = {k: v for k, v in form.items() if not _ROW_KEY.match(k)}
    v = st.values
    req: dict[str, Any] = {k: src_req[k] for k in ("sources", "tones") if k in src_req}

    _pair(st, req, "band_hz", ("band_low_hz", "band_high_hz"), "give both ends of the band")
    if "band_hz" not in req and not any(k in ("band_low_hz", "band_high_hz") for k in st.errors):
        st.add_error("band_high_hz", PLAN_LABELS["band_high_hz"], "give the band of interest")
    for key in _SAME:
        raw = v.get(key, "").strip()
        if key in NUMBER_KINDS:
            raw = read_number(st, key, PLAN_LABELS[key]) or ""
        if raw and key != "rate_series":
            req[key] = raw
    _pair(
        st,
        req,
        "speed_range_rpm",
        ("speed_min_rpm", "speed_max_rpm"),
        "give both the lowest and the highest speed, or neither",
    )
    _pair(st, req, "resolve", ("resolve_a", "resolve_b"), "name both tones, or neither")
    rates = _rate_list(st, v.get("rates_hz", ""))
    if rates:
        req["rates_hz"] = rates
    elif v.get("rate_series", "").strip():
        req["rate_series"] = v["rate_series"].strip()
    filters = _json_list(st, "filters_json")
    if filters is not None:
        req["filters"] = filters
    lines = _split_list(v.get("lines_options", ""))
    if lines:
        req["lines_options"] = lines

    asked = v.get("runup") in ("1", "on")
    skipped = False
    if asked:
        has_range = (
            "speed_range_rpm" in req and req["speed_range_rpm"][0] != req["speed_range_rpm"][1]
        )
        tol = v.get("speed_tolerance_pct", "").strip()
        has_tol = bool(tol) and _order_or_label(tol) not in (0.0, "0")
        if has_range or has_tol:
            runup: dict[str, Any] = {}
            items = [x.strip() for x in v.get("orders_of_interest", "").splitlines()]
            interest = [_order_or_label(x) for x in items if x]
            if interest:
                runup["orders_of_interest"] = interest
            if v.get("n_speeds", "").strip():
                runup["n_speeds"] = v["n_speeds"].strip()
            req["runup"] = runup
        else:
            skipped = True  # a run-up needs speeds to run up through
    return req, st, origin, asked, skipped


_HEADS = {
    **{k: k for k in _SAME},
    "rates_hz": "rates_hz",
    "filters": "filters_json",
    "lines_options": "lines_options",
    "runup": "runup",
}


def _locate_plan(loc: Sequence[Any], origin: _Origin) -> tuple[str | None, str]:
    """Form field id and words for an error location in the plan request."""
    if not loc:
        return None, "Inputs"
    head = loc[0]
    nxt = loc[1] if len(loc) > 1 else None
    if head == "band_hz":
        fid = "band_high_hz" if nxt == 1 else "band_low_hz"
        return fid, PLAN_LABELS[fid]
    if head == "speed_range_rpm":
        fid = "speed_max_rpm" if nxt == 1 else "speed_min_rpm"
        return fid, PLAN_LABELS[fid]
    if head == "resolve":
        fid = "resolve_b" if nxt == 1 else "resolve_a"
        return fid, PLAN_LABELS[fid]
    if head == "runup" and nxt in ("orders_of_interest", "n_speeds"):
        return str(nxt), PLAN_LABELS[str(nxt)]
    if head == "filters" and isinstance(nxt, int):
        return "filters_json", f"{PLAN_LABELS['filters_json']}, item {nxt + 1}"
    if head in _HEADS:
        fid = _HEADS[head]
        return fid, PLAN_LABELS[fid]
    if head in ("sources", "tones") and nxt is None:
        return "tone_list", "Sources and tones"
    if head in ("sources", "tones"):
        return _locate(loc, origin)
    return None, str(head)


def _loc_of(field_path: str) -> list[Any]:
    """``"sources[2].teeth"`` → ``["sources", 2, "teeth"]``."""
    loc: list[Any] = []
    for part in re.findall(r"[A-Za-z_]+|\[\d+\]", field_path):
        loc.append(int(part[1:-1]) if part.startswith("[") else part)
    return loc


def parse_plan_form(form: Mapping[str, str]) -> PlanForm:
    """Validate the form as a plan request; errors are attached to their fields."""
    req, st, origin, asked, skipped = _build_plan_request(form)
    out = PlanForm(None, st, origin, runup_asked=asked, runup_skipped=skipped)
    # Validate even when the form already has errors, so that one round shows them all;
    # a field the form already reported on is not reported twice.
    reported = set(st.errors)
    try:
        valid = PlanIn.model_validate(req)
    except ValidationError as exc:
        for e in exc.errors():
            loc = [p for p in e.get("loc", ()) if not (isinstance(p, str) and "[" in p)]
            fid, words = _locate_plan(loc, origin)
            if fid in reported or (loc and loc[0] == "band_hz" and _BAND_IDS & reported):
                continue
            st.add_error(fid, words, form_message(e, PLAN_LABELS))
    else:
        if not st.summary:
            out.req = valid
    return out


def attach_plan_problem(f: PlanForm, p: Problem) -> None:
    """Show a problem the computation raised on the form; keep a plan's suggestions."""
    fid, words = _locate_plan(_loc_of(p.field or ""), f.origin)
    detail = in_form_words(p.detail, PLAN_LABELS)
    if p.suggestions is not None:
        f.suggestions = list(p.suggestions)
        detail = detail.split(". What would make it possible:")[0]
    f.state.add_error(fid, words, detail)


# --------------------------------------------------------------------------- the result


def _rate(v: float) -> str:
    if v >= 1000:
        return f"{v / 1000:,.4g} kS/s"
    return f"{v:,.4g} S/s"


def _seconds(v: float) -> str:
    if v >= 120:
        return f"{v / 60:,.3g} min"
    if v >= 1:
        return f"{v:,.3g} s"
    return f"{v * 1000:,.3g} ms"


def _tone_rows(out: Mapping[str, Any]) -> list[dict[str, Any]]:
    rows = [{**t, "index": i} for i, t in enumerate(out["tones"])]
    # The aliases that reach the band first, the smallest margin first.
    rows.sort(
        key=lambda r: (
            not r["aliases_into_band"],
            r["margin_db"] if r["margin_db"] is not None else math.inf,
            r["index"],
        )
    )
    return rows


def plan_result_context(
    request_dict: Mapping[str, Any], result_dict: Mapping[str, Any], *, share: bool = False
) -> dict[str, Any]:
    """Everything the result part of the plan page shows, from the request and the API
    payload alone (so a saved plan is drawn exactly as it was computed).

    With ``share`` the context carries the request for the "Save and share" form.
    """
    out = result_dict
    rec = out["recommendation"]
    runup = out.get("runup")
    crossings = list(runup["crossings"]) if runup else []
    fig = runup_figure(out) if runup else None
    aliases = [t for t in out["tones"] if t["aliases_into_band"]]
    compact = json.dumps(request_dict, separators=(",", ":"), ensure_ascii=False)
    return {
        "out": out,
        "rec": rec,
        "headline": {
            "rate": _rate(rec["sample_rate_hz"]),
            "filter": rec["filter"]["name"],
            "record": _seconds(rec["record_s"]),
            "total": _seconds(rec["total_s"]),
            "aliases_in_band": len(aliases),
            "tones": len(out["tones"]),
        },
        "tone_rows": _tone_rows(out),
        "rejected": out["rejected"],
        "runup": runup,
        "runup_fig": fig,
        "lines_drawn": fig["layout"]["meta"]["lines_drawn"] if fig else 0,
        "crossings": crossings[:MAX_TABLE_CROSSINGS],
        "crossings_total": runup["crossings_total"] if runup else 0,
        "request_json": json.dumps(request_dict, indent=2, ensure_ascii=False),
        "share_request": compact if share else "",
    }


# --------------------------------------------------------------------------- routes


def _render(
    request: Request, name: str, ctx: dict[str, Any], status_code: int = 200
) -> HTMLResponse:
    return render(request, name, ctx, status_code=status_code)


def _demo_request() -> dict[str, Any]:
    return {
        **demo_plan_request(),
        "runup": {"orders_of_interest": list(_DEMO_INTEREST), "n_speeds": 200},
    }


def _compute(req: PlanIn, settings: Settings, share: bool) -> dict[str, Any]:
    stored = req.model_dump(mode="json", exclude_none=True)
    return plan_result_context(stored, plan_payload(req, settings), share=share)


async def _page(
    request: Request, f: PlanForm, result: dict[str, Any] | None, demo: bool = False
) -> HTMLResponse:
    ctx = {
        "active": "plan",
        "form": f.state,
        "result": result,
        "demo": demo,
        "suggestions": f.suggestions,
        "runup_skipped": f.runup_skipped,
        "labels": PLAN_LABELS,
        "PLAN_WINDOWS": PLAN_WINDOWS,
        "RATE_SERIES": RATE_SERIES,
    }
    status = 422 if f.state.summary else 200
    return _render(request, "plan.html", ctx, status_code=status)


async def _answer(request: Request, f: PlanForm, demo: bool = False) -> HTMLResponse:
    settings: Settings = request.app.state.settings
    result = None
    if f.req is not None:
        try:
            result = await run_in_threadpool(_compute, f.req, settings, True)
        except ANSWERABLE as exc:
            p = as_problem(exc)
            attach_plan_problem(f, p)
    return await _page(request, f, result, demo=demo)


@router.get("/plan", response_class=HTMLResponse)
async def plan_form(request: Request, demo: str | None = None) -> HTMLResponse:
    if demo in (None, "", "0"):
        return await _page(request, PlanForm(None, blank_plan_form(), _Origin()), None)
    req = _demo_request()
    f = PlanForm(PlanIn.model_validate(req), plan_form_from_request(req), _Origin())
    return await _answer(request, f, demo=True)


@router.post("/plan", response_class=HTMLResponse)
async def plan_submit(request: Request) -> HTMLResponse:
    try:
        form = await read_page_form(request)
    except ANSWERABLE as exc:
        return error_page(request, as_problem(exc))
    return await _answer(request, parse_plan_form(form))


def _share_plan(body: str, settings: Settings) -> tuple[dict[str, Any], dict[str, Any]]:
    req = PlanIn.model_validate_json(body)
    return req.model_dump(mode="json", exclude_none=True), plan_payload(req, settings)


@router.post("/plan/share", response_class=HTMLResponse)
async def plan_share(request: Request) -> HTMLResponse:
    """Save a plan under a link: its request travels in the form and is recomputed."""
    settings: Settings = request.app.state.settings
    try:
        form = await read_page_form(request)
        title = str(form.get("title", "")).strip()[:200] or None
        parts = await recompute_shared(_share_plan, str(form.get("request", "")), settings)
        saved = await save_result(request, "plan", parts, title)
    except ANSWERABLE as exc:
        p = as_problem(exc)
        return error_page(request, p)
    return _render(request, "shared.html", {"active": "", "saved": saved, "kind": "plan"})


# --------------------------------------------------------------------------- install
