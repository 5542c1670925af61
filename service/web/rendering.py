"""Templates and the one ``render`` every page uses: navigation, filters, globals."""

from __future__ import annotations

import math
from typing import Any

import orjson
from fastapi import Request
from fastapi.responses import HTMLResponse
from fastapi.templating import Jinja2Templates
from jinja2 import Environment, FileSystemLoader, StrictUndefined, select_autoescape
from markupsafe import Markup

from .. import COMPUTATION_VERSION, __version__
from ..contract.caution import CAUTION
from . import assets, figures
from .diagnose_forms import COMPARE_LABELS, DIAGNOSE_LABELS, READ_KINDS, UNITS, WINDOWS
from .exports import AMPLITUDE_KINDS, AMPLITUDE_UNITS
from .forms import FIELD_LABELS, FILTER_FAMILIES, SOURCE_FORMS, SPEED_UNITS

__all__ = ["WAYS_IN", "render", "templates"]


#: DESIGN.md §7, shown wherever a result or verdict is shown, and in the footer.


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
        AMPLITUDE_UNITS=AMPLITUDE_UNITS,
        AMPLITUDE_KINDS=AMPLITUDE_KINDS,
    )
    return env


templates = Jinja2Templates(env=_make_env())

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
        "title": "Compare rates",
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
    {
        "key": "run-up",
        "title": "Run-up",
        "path": "/run-up",
        "text": "A record taken while the speed sweeps, with its tacho: which lines of the "
        "frequency × speed map are real orders and which are folded back.",
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
    """A page with the navigation; the security headers are the app's one set
    (:data:`service.http.security.SECURITY_HEADERS`), added to every response."""
    keys_on = bool(request.app.state.settings.api_key_set)
    ctx = {"nav": _nav(context.get("active", "")), "api_keys_on": keys_on, **context}
    response: HTMLResponse = templates.TemplateResponse(request, name, ctx, status_code=status_code)
    return response
