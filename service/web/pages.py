"""The server-rendered pages: home, predict, and saved results.

``install_pages(app)`` mounts ``/static``, the Plotly bundle route and the page router.
Each page computes through the same functions as the JSON API (``service.api.compute``),
builds its figures in :mod:`service.web.figures` and hands them to a template as JSON.
"""

from __future__ import annotations

import json
import math
from collections.abc import Awaitable, Callable
from typing import Any

import orjson
from fastapi import APIRouter, FastAPI, Request
from fastapi.responses import HTMLResponse
from fastapi.staticfiles import StaticFiles
from fastapi.templating import Jinja2Templates
from jinja2 import Environment, FileSystemLoader, StrictUndefined, select_autoescape
from markupsafe import Markup
from starlette.concurrency import run_in_threadpool

from .. import COMPUTATION_VERSION, __version__
from ..api.caution import CAUTION
from ..api.compute import fold_payload
from ..api.problems import Problem
from ..api.schemas import FoldIn, chain_from_request
from ..config import Settings
from ..demo import DEMO_RPM, demo_fold_request
from . import assets, figures
from .diagnose_forms import COMPARE_LABELS, DIAGNOSE_LABELS, READ_KINDS, UNITS, WINDOWS
from .diagnose_pages import (
    compare_result_context,
    diagnose_result_context,
    error_page,
    request_json,
)
from .diagnose_pages import router as diagnose_router
from .forms import (
    FIELD_LABELS,
    FILTER_FAMILIES,
    SOURCE_FORMS,
    SPEED_UNITS,
    FormState,
    attach_problem,
    form_from_request,
    parse_fold_form,
)

__all__ = [
    "CAUTION",
    "SECURITY_HEADERS",
    "WAYS_IN",
    "create_app_with_pages",
    "install_pages",
    "render",
    "router",
    "templates",
]

#: DESIGN.md §7, shown wherever a result or verdict is shown, and in the footer.

#: Scripts only from this origin: no inline script, no eval. Plotly sets inline styles on
#: its SVG from script, which needs 'unsafe-inline' for styles (not for scripts).
CSP = (
    "default-src 'self'; script-src 'self'; style-src 'self' 'unsafe-inline'; "
    "img-src 'self' data: blob:; font-src 'self'; connect-src 'self'; object-src 'none'; "
    "base-uri 'self'; form-action 'self'; frame-ancestors 'none'"
)
SECURITY_HEADERS = {
    "Content-Security-Policy": CSP,
    "X-Content-Type-Options": "nosniff",
    "Referrer-Policy": "same-origin",
}

#: Hook for saved results: ``app.state.saved_lookup = async fn(id) -> record | None``.
#: The record needs ``kind``, ``request``, ``result``, ``created_at`` and ``title``
#: (service.storage.SavedDiagnosis has them).
SavedLookup = Callable[[str], Awaitable[Any]]


def _figure_json(fig: dict[str, Any]) -> Markup:
    """Figure JSON safe inside ``<script type="application/json">``: no ``<``, ``>`` or
    ``&`` can end the element or open a comment."""
    text = orjson.dumps(fig).decode()
    text = text.replace("<", "\\u003c").replace(">", "\\u003e").replace("&", "\\u0026")
    return Markup(text)


def _hz(v: float | None) -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "–"
    if v >= 10_000:
        text, unit = f"{v / 1000:,.3f}", "kHz"
    else:
        text, unit = f"{v:,.1f}", "Hz"
    return f"{text.rstrip('0').rstrip('.')} {unit}"


def _db(amplitude: float | None) -> str:
    if amplitude is None or not amplitude > 0:
        return "–"
    return f"{20 * math.log10(amplitude):.1f}"


def _make_env() -> Environment:
    env = Environment(
        loader=FileSystemLoader(str(assets.web_dir("templates"))),
        autoescape=select_autoescape(default=True, default_for_string=True),
        undefined=StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )
    env.filters["figjson"] = _figure_json
    env.filters["hz"] = _hz
    env.filters["db"] = _db
    env.globals.update(
        CAUTION=CAUTION,
        PLOTLY_URL=assets.PLOTLY_URL,
        VERSION=__version__,
        COMPUTATION_VERSION=COMPUTATION_VERSION,
        FILTER_FAMILIES=FILTER_FAMILIES,
        SOURCE_FORMS=SOURCE_FORMS,
        SPEED_UNITS=SPEED_UNITS,
        FIELD_LABELS=FIELD_LABELS,
        READ_KINDS=READ_KINDS,
        UNITS=UNITS,
        WINDOWS=WINDOWS,
        DIAGNOSE_LABELS=DIAGNOSE_LABELS,
        COMPARE_LABELS=COMPARE_LABELS,
        VERDICT_STYLES=figures.VERDICT_STYLES,
    )
    return env


templates = Jinja2Templates(env=_make_env())
router = APIRouter(include_in_schema=False)

#: The ways in, in the order the home page lists them. ``path`` None: not built yet.
WAYS_IN = [
    {
        "key": "predict",
        "title": "Predict",
        "path": "/predict",
        "text": "Before a test: where will each shaft order, gear mesh, bearing tone, blade "
        "pass, supply harmonic and inverter line land with this sample rate and anti-alias "
        "filter, and how strong will it be?",
    },
    {
        "key": "diagnose",
        "title": "Diagnose",
        "path": "/diagnose",
        "text": "After a test: which peaks of a measured spectrum are probably aliases, of "
        "what, and how sure is that?",
    },
    {
        "key": "compare",
        "title": "Compare two rates",
        "path": "/compare",
        "text": "The same signal captured at two sample rates: peaks that stay put are real, "
        "peaks that move are aliases.",
    },
    {
        "key": "plan",
        "title": "Plan",
        "path": "/plan",
        "text": "Which sample rate, anti-alias filter and analysis lines keep the band of "
        "interest clean, and how long the record must be.",
    },
]


def _nav(active: str) -> list[dict[str, Any]]:
    items = [{"key": "home", "title": "Home", "path": "/"}]
    items += [w for w in WAYS_IN if w["path"]]
    items.append({"key": "api", "title": "JSON API", "path": "/docs"})
    return [{**i, "active": i["key"] == active} for i in items]


def render(
    request: Request, name: str, context: dict[str, Any], status_code: int = 200
) -> HTMLResponse:
    """A page with the navigation and the security headers."""
    keys_on = bool(request.app.state.settings.api_key_set)
    ctx = {"nav": _nav(context.get("active", "")), "api_keys_on": keys_on, **context}
    response: HTMLResponse = templates.TemplateResponse(
        request, name, ctx, status_code=status_code, headers=SECURITY_HEADERS
    )
    return response


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
    return {
        "tones": len(tones),
        "aliased": len(aliased),
        "aliased_in_band": sum(1 for t in aliased if t["in_band"]),
        "collisions": out["collisions_total"],
    }


def fold_result_context(req: FoldIn, out: dict[str, Any]) -> dict[str, Any]:
    """Everything the result part of the predict page shows, figures included."""
    chain = chain_from_request(req)
    rate = float(out["final_rate_hz"])
    top = max([t["freq_hz"] for t in out["tones"]] + [rate])
    x_max = figures.zone_count(top * 1.03, rate) * rate / 2.0
    gain = figures.chain_gain_curve(chain, x_max)
    return {
        "out": out,
        "headline": _headline(out),
        "rows": _tone_rows(out),
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
        except Problem as p:
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
    data = await request.form()
    form = {k: v for k, v in data.items() if isinstance(v, str)}
    return await _predict_response(request, form)


# --------------------------------------------------------------------------- saved results


@router.get("/d/{record_id}", response_class=HTMLResponse)
async def saved_result(request: Request, record_id: str) -> HTMLResponse:
    """A saved result, drawn from the stored record alone (never recomputed)."""
    lookup: SavedLookup | None = getattr(request.app.state, "saved_lookup", None)
    try:
        record = await lookup(record_id) if lookup is not None else None
    except Problem as p:
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
        "saved_here": True,
        "same_computation": record.computation_version == COMPUTATION_VERSION,
    }
    if record.kind == "fold":
        req = FoldIn.model_validate(record.request)
        # Already saved: the page shows its own link, not a share form.
        ctx["result"] = {**fold_result_context(req, record.result), "share_request": ""}
    elif record.kind == "diagnose":
        ctx["diag"] = await run_in_threadpool(
            diagnose_result_context, record.result, record.spectrum, record.request
        )
    elif record.kind == "compare":
        ctx["cmp"] = compare_result_context(record.result, {"a": None, "b": None})
    elif record.kind == "plan":
        from .plan_page import plan_result_context

        ctx["plan"] = await run_in_threadpool(plan_result_context, record.request, record.result)
    return render(request, "saved.html", ctx)


# --------------------------------------------------------------------------- install


def install_pages(app: FastAPI) -> None:
    """Mount ``/static``, the Plotly bundle at ``/assets/plotly.min.js`` and the pages.

    Calling it again on the same app does nothing."""
    if getattr(app.state, "pages_installed", False):
        return
    app.state.pages_installed = True
    app.mount("/static", StaticFiles(directory=assets.web_dir("static")), name="static")
    app.include_router(assets.router)
    app.include_router(router)
    app.include_router(diagnose_router)


def create_app_with_pages() -> FastAPI:
    """An app factory with the pages (for ``uvicorn --factory`` and the browser tests)."""
    from ..api.app import create_app

    return create_app()  # the factory installs the pages itself
