"""The server-rendered pages: home, predict, and saved results.

``install_pages(app)`` mounts ``/static``, the Plotly bundle route and the page router.
Each page computes through the same functions as the JSON API (``service.usecases.fold``),
builds its figures in :mod:`service.web.figures` and hands them to a template as JSON.
"""

from __future__ import annotations

import json
import math
from collections.abc import Awaitable, Callable
from typing import Any

from fastapi import APIRouter, FastAPI, Request
from fastapi.responses import HTMLResponse, Response
from fastapi.staticfiles import StaticFiles
from starlette.concurrency import run_in_threadpool
from starlette.exceptions import HTTPException as StarletteHTTPException

from .. import COMPUTATION_VERSION
from ..config import Settings
from ..contract.caution import CAUTION
from ..contract.fold import FoldIn, chain_from_request
from ..demo import DEMO_RPM, demo_fold_request
from ..http.problems import ANSWERABLE, as_problem, http_problem, wants_html
from ..usecases.fold import fold_payload
from . import assets, figures
from .audit_page import audit_context
from .audit_page import router as audit_router
from .diagnose_pages import (
    compare_result_context,
    diagnose_result_context,
    error_page,
    read_page_form,
    request_json,
)
from .diagnose_pages import router as diagnose_router
from .exports import collision_rows, in_band, level_words, peaks_csv, request_rows
from .forms import (
    FormState,
    attach_problem,
    form_from_request,
    parse_fold_form,
)
from .plan_page import plan_result_context
from .plan_page import router as plan_router
from .rendering import WAYS_IN, render, templates
from .runup_page import router as runup_router
from .runup_page import runup_result_context

__all__ = [
    "CAUTION",
    "install_pages",
    "render",
    "router",
    "templates",
]

#: Hook for saved results: ``app.state.saved_lookup = async fn(id) -> record | None``.
#: The record needs ``kind``, ``request``, ``result``, ``created_at`` and ``title``
#: (service.storage.SavedDiagnosis has them).
SavedLookup = Callable[[str], Awaitable[Any]]


router = APIRouter(include_in_schema=False)


# --------------------------------------------------------------------------- home


@router.get("/", response_class=HTMLResponse)
async def home(request: Request) -> HTMLResponse:
    return render(request, "home.html", {"active": "home", "ways": WAYS_IN, "demo_rpm": DEMO_RPM})


# --------------------------------------------------------------------------- predict


def _tone_rows(out: dict[str, Any]) -> list[dict[str, Any]]:
    rows = []
    for i, t in enumerate(out["tones"]):
        level = t.get("apparent_amplitude")
        rows.append(
            {
                **t,
                "index": i,
                "level_db": None if not level or level <= 0 else 20 * math.log10(level),
            }
        )
    rows.sort(key=lambda r: (r["apparent_hz"], r["freq_hz"]))
    return rows


def _headline(out: dict[str, Any]) -> dict[str, Any]:
    tones = out["tones"]
    aliased = [t for t in tones if t["aliased"]]
    listed = out["collisions"]
    inside = sum(1 for c in listed if in_band(out, c["apparent_hz"]))
    return {
        "tones": len(tones),
        "aliased": len(aliased),
        "aliased_in_band": sum(1 for t in aliased if t["in_band"]),
        # Only collisions inside the band of interest count in the headline.
        "collisions": inside,
        "collisions_partial": out["collisions_total"] > len(listed),
        "collisions_out_of_band": len(listed) - inside,
    }


def fold_result_context(req: FoldIn, out: dict[str, Any]) -> dict[str, Any]:
    """Everything the result part of the predict page shows, figures included."""
    chain = chain_from_request(req)
    rate = float(out["final_rate_hz"])
    top = max([t["freq_hz"] for t in out["tones"]] + [rate])
    x_max = figures.fold_axis_end_hz(top, rate)
    gain = figures.chain_gain_curve(chain, x_max)
    return {
        "out": out,
        "headline": _headline(out),
        "rows": _tone_rows(out),
        "collision_rows": collision_rows(out),
        "fold_fig": figures.folding_diagram(out, gain_curve=gain),
        "spectrum_fig": figures.predicted_spectrum(out),
        "collision_bins": req.collision_bins,
        "request_json": json.dumps(req.model_dump(mode="json", exclude_none=True), indent=2),
        "share_request": request_json(req),
    }


def _compute(req: FoldIn, settings: Settings) -> dict[str, Any]:
    return fold_result_context(req, fold_payload(req, settings))


async def _predict_response(
    request: Request, form: dict[str, str] | None, demo: bool = False
) -> HTMLResponse:
    settings: Settings = request.app.state.settings
    ctx: dict[str, Any] = {"active": "predict", "result": None, "demo": demo}
    if form is None:
        state = form_from_request(demo_fold_request()) if demo else _blank_form()
        req = FoldIn.model_validate(demo_fold_request()) if demo else None
        origin = None
    else:
        req, state, origin = parse_fold_form(form)
    if req is not None:
        try:
            ctx["result"] = await run_in_threadpool(_compute, req, settings)
        except ANSWERABLE as exc:
            p = as_problem(exc)
            if origin is not None:
                attach_problem(state, origin, p)
            else:
                state.add_error(None, "Inputs", p.detail)
    ctx["form"] = state
    status = 422 if state.summary else 200
    return render(request, "predict.html", ctx, status_code=status)


def _blank_form() -> FormState:
    st = FormState()
    st.values = {"sample_rate_hz": "", "aa_family": "", "lines": "3200"}
    return st


@router.get("/predict", response_class=HTMLResponse)
async def predict_page(request: Request, demo: str | None = None) -> HTMLResponse:
    return await _predict_response(request, None, demo=demo not in (None, "", "0"))


@router.post("/predict", response_class=HTMLResponse)
async def predict_submit(request: Request) -> HTMLResponse:
    try:
        form = await read_page_form(request)
    except ANSWERABLE as exc:
        return error_page(request, as_problem(exc))
    return await _predict_response(request, form)


# --------------------------------------------------------------------------- saved results


@router.get("/d/{record_id}", response_class=HTMLResponse)
async def saved_result(request: Request, record_id: str) -> HTMLResponse:
    """A saved result, drawn from the stored record alone (never recomputed)."""
    lookup: SavedLookup | None = getattr(request.app.state, "saved_lookup", None)
    try:
        record = await lookup(record_id) if lookup is not None else None
    except ANSWERABLE as exc:
        p = as_problem(exc)
        return error_page(request, p)
    if record is None:
        return render(
            request,
            "not_found.html",
            {"active": "", "what": "saved result", "record_id": record_id},
            status_code=404,
        )
    ctx: dict[str, Any] = {
        "active": "",
        "record": record,
        "result": None,
        "diag": None,
        "cmp": None,
        "plan": None,
        "runup": None,
        "saved_here": True,
        "same_computation": record.computation_version == COMPUTATION_VERSION,
    }
    if record.kind == "fold":
        req = FoldIn.model_validate(record.request)
        # Already saved: the page shows its own link, not a share form.
        ctx["result"] = {**fold_result_context(req, record.result), "share_request": ""}
    elif record.kind == "diagnose":
        ctx["diag"] = await run_in_threadpool(
            diagnose_result_context,
            record.result,
            record.spectrum,
            record.request,
            "",
            "",  # the unit and kind the saved answer states
            f"/d/{record.id}/peaks.csv",
        )
    elif record.kind == "compare" and "captures" in record.result:
        # A comparison saved before the multi-rate answer has no page: its JSON stays.
        ctx["cmp"] = await run_in_threadpool(
            compare_result_context, record.result, list(record.spectra) or None
        )
    elif record.kind == "plan":
        ctx["plan"] = await run_in_threadpool(plan_result_context, record.request, record.result)
    elif record.kind == "run-up":
        ctx["runup"] = await run_in_threadpool(runup_result_context, record.result)
    elif record.kind == "audit":
        ctx = {"active": "", "job": None, "record": record, **audit_context(record.result)}
        return render(request, "audit.html", ctx)
    ctx["inputs"] = request_rows(record.request)
    return render(request, "saved.html", ctx)


@router.get("/d/{record_id}/peaks.csv")
async def saved_peaks_csv(request: Request, record_id: str) -> Response:
    """The peak table of a saved diagnosis as CSV: the stored answer's peaks, in order."""
    lookup: SavedLookup | None = getattr(request.app.state, "saved_lookup", None)
    try:
        record = await lookup(record_id) if lookup is not None else None
    except ANSWERABLE as exc:
        return error_page(request, as_problem(exc))
    if record is None or record.kind != "diagnose":
        what = "saved diagnosis" if record is None else "peak table for this kind of result"
        return render(
            request,
            "not_found.html",
            {"active": "", "what": what, "record_id": record_id},
            status_code=404,
        )
    text = peaks_csv(record.result, level_words(record.result))
    return Response(
        text,
        media_type="text/csv; charset=utf-8",
        headers={"Content-Disposition": f'attachment; filename="peaks-{record_id[:12]}.csv"'},
    )


# --------------------------------------------------------------------------- install


async def not_found_or_problem(request: Request, exc: StarletteHTTPException) -> Response:
    """A mistyped address: an HTML page for a browser, problem+json for everyone else
    (chosen by ``Accept``; under /api/ always problem+json)."""
    if exc.status_code == 404 and wants_html(request):
        return render(
            request,
            "not_found.html",
            {"active": "", "what": "page", "record_id": request.url.path},
            status_code=404,
        )
    return http_problem(request, exc)


def install_pages(app: FastAPI) -> None:
    """Mount ``/static``, the Plotly bundle at ``/assets/plotly.min.js`` and the pages,
    and answer a browser's mistyped address with a page.

    The app factory calls it once."""
    app.add_exception_handler(StarletteHTTPException, not_found_or_problem)  # type: ignore[arg-type]
    app.mount("/static", StaticFiles(directory=assets.web_dir("static")), name="static")
    app.include_router(assets.router)
    app.include_router(router)
    app.include_router(diagnose_router)
    app.include_router(plan_router)
    app.include_router(audit_router)
    app.include_router(runup_router)
