"""The API documentation served from a local copy, and the problems every operation may answer."""

from __future__ import annotations

import html
import importlib.resources
from collections.abc import Awaitable, Callable
from pathlib import Path
from typing import Any

from fastapi import FastAPI
from fastapi.responses import HTMLResponse, Response
from fastapi.staticfiles import StaticFiles

from .keys import needs_api_key
from .problems import PROBLEM_JSON

_DOCS_ASSETS = "/assets/api-docs"

_SWAGGER_INIT = """\
"use strict";
(function () {
  var el = document.getElementById("swagger-ui");
  window.ui = SwaggerUIBundle({
    url: el.getAttribute("data-openapi-url"),
    dom_id: "#swagger-ui",
    layout: "BaseLayout",
    deepLinking: true,
    showExtensions: true,
    showCommonExtensions: true,
    validatorUrl: null,
    presets: [SwaggerUIBundle.presets.apis, SwaggerUIBundle.SwaggerUIStandalonePreset]
  });
})();
"""

_DOCS_PAGE = """<!doctype html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{title}</title>
<link rel="stylesheet" href="{assets}/swagger-ui.css">
<link rel="icon" href="/static/mark.svg">
</head>
<body>
<div id="swagger-ui" data-openapi-url="{openapi}"></div>
<script src="{assets}/swagger-ui-bundle.js"></script>
<script src="{init}"></script>
</body>
</html>
"""
_SWAGGER_INIT_URL = "/assets/api-docs-init/swagger-init.js"


def _docs_static_dir() -> Path | None:
    try:
        path = Path(str(importlib.resources.files("fastapi_offline").joinpath("static")))
    except ModuleNotFoundError:
        return None
    return path if (path / "swagger-ui-bundle.js").is_file() else None


def install_local_docs(app: FastAPI) -> None:
    """Replace FastAPI's /docs (which loads its code from a CDN and runs an inline script)
    by a page that loads a local copy of Swagger UI and an external start-up script.

    /redoc is removed: ReDoc builds its search worker from a ``blob:`` URL and loads a
    logo from its vendor's site, both of which the CSP refuses."""
    static = _docs_static_dir()
    docs_url, redoc_url, openapi_url = app.docs_url, app.redoc_url, app.openapi_url
    if openapi_url is None:
        return
    app.router.routes[:] = [
        r for r in app.router.routes if getattr(r, "path", None) not in (docs_url, redoc_url)
    ]
    if static is None:
        return  # no local copy: no docs page rather than one that loads a CDN
    app.mount(_DOCS_ASSETS, StaticFiles(directory=static), name="api-docs-assets")
    if not docs_url:
        return
    app.add_api_route(_SWAGGER_INIT_URL, _script_endpoint(_SWAGGER_INIT), include_in_schema=False)
    page = _DOCS_PAGE.format(
        title=html.escape(f"{app.title} – API"),
        assets=_DOCS_ASSETS,
        openapi=html.escape(openapi_url),
        init=_SWAGGER_INIT_URL,
    )

    async def swagger_page() -> HTMLResponse:
        return HTMLResponse(page)

    app.add_api_route(docs_url, swagger_page, include_in_schema=False)


def _script_endpoint(text: str) -> Callable[[], Awaitable[Response]]:
    async def script() -> Response:
        return Response(
            text,
            media_type="text/javascript; charset=utf-8",
            headers={"Cache-Control": "public, max-age=3600"},
        )

    return script


PROBLEM_SCHEMA: dict[str, Any] = {
    "title": "Problem",
    "description": "RFC 9457 problem details; `errors` names each field, value and limit.",
    "type": "object",
    "required": ["type", "title", "status", "detail"],
    "properties": {
        "type": {"type": "string"},
        "title": {"type": "string"},
        "status": {"type": "integer"},
        "detail": {"type": "string"},
        "instance": {"type": "string"},
        "errors": {
            "type": "array",
            "items": {
                "type": "object",
                "required": ["field", "message"],
                "properties": {
                    "field": {"type": "string"},
                    "message": {"type": "string"},
                    "value": {},
                    "limit": {},
                    "code": {
                        "type": "string",
                        "description": "Stable reason, e.g. rate_conflict, ambiguous_columns",
                    },
                    "remedy": {"type": "string", "description": "What to do about it"},
                },
            },
        },
    },
}

_PROBLEM_TEXT = {
    400: "Malformed JSON, an empty body or an unreadable multipart form",
    401: "Saving or deleting needs a valid `X-API-Key` when the service has API keys",
    403: "The delete token does not match",
    404: "No such saved result",
    413: "The body is over `max_body_bytes` (uploads: `max_upload_bytes`)",
    415: "The content type is not accepted",
    422: "Invalid input: the problem names the field, the value and the limit",
    429: "Too many requests from this client (`Retry-After` says when to try again)",
    503: "The database that keeps saved results does not answer (`Retry-After`)",
}


def _problems_for(path: str, method: str, op: dict[str, Any]) -> list[int]:
    params = {p.get("name") for p in op.get("parameters", [])}
    codes = [422] if params or "requestBody" in op else []
    if "requestBody" in op:
        codes += [400, 413, 415]
    if path.startswith("/api/"):
        codes.append(429)
    saves = "save" in params
    if path.startswith("/api/v1/diagnoses") or saves:
        codes += [503]
    if needs_api_key(method.upper(), path.replace("{rid}", "x"), "save=true" if saves else ""):
        codes.append(401)
    if "{" in path:
        codes.append(404)
    if method == "delete" and path.startswith("/api/v1/diagnoses/"):
        codes.append(403)
    if path == "/readyz":
        codes = [503]
    return codes


def document_problems(app: FastAPI) -> None:
    """Declare in the OpenAPI document the problems each operation can answer, as
    ``application/problem+json`` with one ``Problem`` schema (FastAPI's own 422 entry
    says ``application/json`` with its validation shape, which is not what is sent)."""
    original = app.openapi

    def openapi() -> dict[str, Any]:
        if app.openapi_schema:
            return app.openapi_schema
        schema = original()
        comps = schema.setdefault("components", {}).setdefault("schemas", {})
        comps.setdefault("Problem", PROBLEM_SCHEMA)
        problem = {PROBLEM_JSON: {"schema": {"$ref": "#/components/schemas/Problem"}}}
        for path, ops in schema.get("paths", {}).items():
            for method, op in ops.items():
                if not isinstance(op, dict) or "responses" not in op:
                    continue
                responses = op["responses"]
                for code in _problems_for(path, method, op):
                    entry = responses.setdefault(str(code), {})
                    entry.setdefault("description", _PROBLEM_TEXT[code])
                    entry["content"] = problem
        for unused in ("HTTPValidationError", "ValidationError"):
            comps.pop(unused, None)
        app.openapi_schema = schema
        return schema

    app.openapi = openapi  # type: ignore[method-assign]
