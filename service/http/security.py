"""What stands between a client and the routes: headers, keys, CORS, rate and size limits.

``install_security(app, settings)`` adds, outermost first:

* security headers on every response, errors and pages included (a strict
  Content-Security-Policy: scripts only from this origin, never inline);
* CORS, only when ``settings.cors_origins`` names origins (closed otherwise);
* a per-client rate limit on ``/api/`` when ``settings.rate_limit_per_minute`` > 0;
* optional API keys for the endpoints that write (``settings.api_keys``);
* a body size limit enforced before any route reads the body;
* the API documentation (Swagger UI at ``/docs``) served from a local copy (the
  ``fastapi-offline`` package's files), so it works offline and under the same CSP as
  every page;
* uploads spooled to ``<data_dir>/tmp``, never elsewhere and never under a name the
  client chose.

The rate limit and the spool folder are per process: with several workers each one
counts its own clients, so the effective limit is the setting times the worker count.
"""

from __future__ import annotations

import hashlib
import hmac
import html
import importlib.resources
import math
import re
import tempfile
import time
from collections.abc import AsyncIterator, Awaitable, Callable, MutableMapping
from contextlib import asynccontextmanager
from pathlib import Path
from typing import Any
from urllib.parse import parse_qsl

from fastapi import FastAPI, Request
from fastapi.responses import HTMLResponse, JSONResponse, Response
from fastapi.staticfiles import StaticFiles
from starlette.middleware.cors import CORSMiddleware

from ..config import Settings
from .problems import PROBLEM_JSON, Problem

__all__ = [
    "API_KEY_HEADER",
    "CSP",
    "SECURITY_HEADERS",
    "ApiKeyGuard",
    "BodyLimit",
    "RateLimit",
    "SecurityHeaders",
    "document_problems",
    "install_security",
    "key_matches",
    "needs_api_key",
    "require_api_key",
]

Scope = MutableMapping[str, Any]
Message = MutableMapping[str, Any]
Receive = Callable[[], Awaitable[Message]]
Send = Callable[[Message], Awaitable[None]]
ASGIApp = Callable[[Scope, Receive, Send], Awaitable[None]]

#: Scripts only from this origin: no inline script, no eval. Plotly and Swagger UI set
#: inline styles from script, which needs 'unsafe-inline' for styles (not for scripts).
CSP = (
    "default-src 'self'; script-src 'self'; style-src 'self' 'unsafe-inline'; "
    "img-src 'self' data: blob:; font-src 'self'; connect-src 'self'; object-src 'none'; "
    "base-uri 'self'; form-action 'self'; frame-ancestors 'none'"
)
SECURITY_HEADERS = {
    "Content-Security-Policy": CSP,
    "X-Content-Type-Options": "nosniff",
    "X-Frame-Options": "DENY",
    "Referrer-Policy": "same-origin",
    "Permissions-Policy": "camera=(), microphone=(), geolocation=(), payment=(), usb=()",
    "Cross-Origin-Opener-Policy": "same-origin",
}

API_KEY_HEADER = "X-API-Key"

# --------------------------------------------------------------------------- helpers


async def _send_problem(scope: Scope, receive: Receive, send: Send, problem: Problem) -> None:
    response = JSONResponse(
        problem.body(instance=scope.get("path")),
        status_code=problem.status,
        media_type=PROBLEM_JSON,
        headers=problem.headers,
    )
    await response(scope, receive, send)  # type: ignore[arg-type]


def _header(scope: Scope, name: bytes) -> str | None:
    for key, value in scope.get("headers", ()):
        if key.lower() == name:
            return str(value.decode("latin-1"))
    return None


def _wrap_outermost(app: FastAPI, wrapper: Callable[[ASGIApp], ASGIApp]) -> None:
    """Put ``wrapper`` outside Starlette's error middleware, so it also sees the 500
    answer that middleware writes for an unhandled exception."""
    build = app.build_middleware_stack

    def build_wrapped() -> ASGIApp:
        return wrapper(build())  # type: ignore[arg-type]

    app.build_middleware_stack = build_wrapped  # type: ignore[method-assign]


# --------------------------------------------------------------------------- headers


class SecurityHeaders:
    """Add :data:`SECURITY_HEADERS` to every HTTP response that does not set its own."""

    def __init__(self, app: ASGIApp, headers: dict[str, str] | None = None) -> None:
        self.app = app
        # Encoded once: this runs on every response.
        self.raw = [
            (name.lower().encode("latin-1"), value.encode("latin-1"))
            for name, value in (headers or SECURITY_HEADERS).items()
        ]

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return

        async def send_with_headers(message: Message) -> None:
            if message["type"] == "http.response.start":
                headers = list(message.get("headers", ()))
                present = {name.lower() for name, _ in headers}
                headers.extend(h for h in self.raw if h[0] not in present)
                message["headers"] = headers
            await send(message)

        await self.app(scope, receive, send_with_headers)


# --------------------------------------------------------------------------- API keys


def key_matches(presented: str | None, keys: frozenset[str]) -> bool:
    """Whether ``presented`` is one of ``keys``, compared in constant time.

    Every configured key is compared (no early exit), with :func:`hmac.compare_digest`,
    so the time taken tells nothing about which key or how much of it matched.
    """
    if not presented:
        return False
    given = presented.encode("utf-8")
    found = False
    for key in keys:
        found |= hmac.compare_digest(given, key.encode("utf-8"))
    return found


_FALSE = frozenset({"", "0", "false", "f", "no", "n", "off"})

#: (method, path pattern, only when the query asks to save).
_WRITE_ROUTES: list[tuple[str, re.Pattern[str], bool]] = [
    ("POST", re.compile(r"/api/v1/diagnoses/?"), False),
    ("DELETE", re.compile(r"/api/v1/diagnoses/[^/]+/?"), False),
    ("POST", re.compile(r"/api/v1/diagnose/?"), True),
    ("POST", re.compile(r"/api/v1/compare-rates/?"), True),
]


def needs_api_key(method: str, path: str, query_string: str = "") -> bool:
    """Whether a request writes: saving or deleting a result. Computations that do not
    save (fold, diagnose, compare, plan) and every read stay open."""
    for m, pattern, only_with_save in _WRITE_ROUTES:
        if method != m or not pattern.fullmatch(path):
            continue
        if not only_with_save:
            return True
        saves = [v for k, v in parse_qsl(query_string, keep_blank_values=True) if k == "save"]
        return any(v.strip().lower() not in _FALSE for v in saves)
    return False


def _key_problem(presented: str | None) -> Problem:
    detail = (
        f"this request saves or deletes a result and needs an API key in the "
        f"{API_KEY_HEADER} header"
        if not presented
        else f"the API key in the {API_KEY_HEADER} header is not valid"
    )
    return Problem(
        401,
        detail,
        field=API_KEY_HEADER,
        kind="api-key-required" if not presented else "api-key-invalid",
        headers={"WWW-Authenticate": f'ApiKey realm="foldwise", header="{API_KEY_HEADER}"'},
    )


class ApiKeyGuard:
    """Refuse writes without a valid ``X-API-Key`` when keys are configured."""

    def __init__(self, app: ASGIApp, keys: frozenset[str]) -> None:
        self.app = app
        self.keys = keys

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] == "http" and needs_api_key(
            scope["method"], scope["path"], scope.get("query_string", b"").decode("latin-1")
        ):
            presented = _header(scope, API_KEY_HEADER.lower().encode())
            if not key_matches(presented, self.keys):
                await _send_problem(scope, receive, send, _key_problem(presented))
                return
        await self.app(scope, receive, send)


async def require_api_key(request: Request) -> None:
    """Dependency for a route that writes outside the rules of :func:`needs_api_key`
    (for example a page's share button): the ``X-API-Key`` header, or an ``api_key``
    form field for a browser form, must match when keys are configured."""
    settings: Settings = request.app.state.settings
    keys = settings.api_key_set
    if not keys:
        return
    presented = request.headers.get(API_KEY_HEADER)
    if presented is None and request.headers.get("content-type", "").startswith(
        ("application/x-www-form-urlencoded", "multipart/form-data")
    ):
        field = (await request.form()).get("api_key")
        presented = field if isinstance(field, str) else None
    if not key_matches(presented, keys):
        raise _key_problem(presented)


# --------------------------------------------------------------------------- rate limit


class RateLimit:
    """A token bucket per client on ``/api/``: ``per_minute`` requests in a burst, refilled
    at ``per_minute / 60`` per second. The client is its address plus the API key, if any
    (behind a proxy, run uvicorn with ``--proxy-headers`` so the address is the client's).

    In-process: each worker process keeps its own buckets.
    """

    max_clients = 10_000

    def __init__(
        self,
        app: ASGIApp,
        per_minute: int,
        clock: Callable[[], float] = time.monotonic,
        prefix: str = "/api/",
    ) -> None:
        self.app = app
        self.capacity = float(per_minute)
        self.rate = per_minute / 60.0
        self.clock = clock
        self.prefix = prefix
        self._buckets: dict[str, tuple[float, float]] = {}

    def _client(self, scope: Scope) -> str:
        client = scope.get("client")
        host = client[0] if client else "unknown"
        key = _header(scope, API_KEY_HEADER.lower().encode())
        if key:
            return f"{host}|{hashlib.sha256(key.encode()).hexdigest()[:16]}"
        return host

    def take(self, client: str) -> float:
        """Take one token for ``client``; 0 if allowed, else seconds until one is back."""
        now = self.clock()
        tokens, last = self._buckets.get(client, (self.capacity, now))
        tokens = min(self.capacity, tokens + (now - last) * self.rate)
        if tokens >= 1.0:
            self._buckets[client] = (tokens - 1.0, now)
            if len(self._buckets) > self.max_clients:
                self._forget_idle(now)
            return 0.0
        self._buckets[client] = (tokens, now)
        return (1.0 - tokens) / self.rate

    def _forget_idle(self, now: float) -> None:
        # A bucket that has refilled completely is the same as no bucket.
        full = [
            c
            for c, (tokens, last) in self._buckets.items()
            if tokens + (now - last) * self.rate >= self.capacity
        ]
        for c in full:
            del self._buckets[c]

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] == "http" and scope["path"].startswith(self.prefix):
            wait = self.take(self._client(scope))
            if wait > 0:
                retry = max(1, math.ceil(wait))
                limit = int(self.capacity)
                problem = Problem(
                    429,
                    f"more than {limit} requests per minute from this client; "
                    f"try again in {retry} s",
                    field="rate",
                    limit=f"{limit} per minute",
                    headers={"Retry-After": str(retry)},
                )
                await _send_problem(scope, receive, send, problem)
                return
        await self.app(scope, receive, send)


# --------------------------------------------------------------------------- body limit


class _BodyTooLarge(Exception):
    pass


class BodyLimit:
    """Refuse a body over the limit before a route has read it.

    A declared ``Content-Length`` over the limit is refused at once; otherwise the bytes
    are counted as they arrive and the request is stopped at the first byte over. Whatever
    the route made of the cut-off body is discarded and a 413 problem answers instead.
    Multipart bodies (uploads) use ``upload_limit``, all others ``body_limit``.
    """

    def __init__(self, app: ASGIApp, body_limit: int, upload_limit: int) -> None:
        self.app = app
        self.body_limit = body_limit
        self.upload_limit = upload_limit

    def _problem(self, limit: int, setting: str, size: int | None) -> Problem:
        said = f"is {size} bytes" if size is not None else "is over the limit"
        return Problem(
            413,
            f"the request body {said}; the limit is {limit} bytes ({setting})",
            field="body",
            value=size,
            limit=limit,
        )

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        ctype = (_header(scope, b"content-type") or "").lower()
        if ctype.startswith("multipart/"):
            limit, setting = self.upload_limit, "max_upload_bytes"
        else:
            limit, setting = self.body_limit, "max_body_bytes"
        declared = _header(scope, b"content-length")
        if declared is not None and declared.strip().isdigit() and int(declared) > limit:
            await _send_problem(scope, receive, send, self._problem(limit, setting, int(declared)))
            return

        received = 0
        over = False
        started = False

        async def counted_receive() -> Message:
            nonlocal received, over
            if over:
                raise _BodyTooLarge
            message = await receive()
            if message["type"] == "http.request":
                received += len(message.get("body", b""))
                if received > limit:
                    over = True
                    raise _BodyTooLarge
            return message

        async def guarded_send(message: Message) -> None:
            nonlocal started
            if over:
                return  # the route's answer to a cut-off body is replaced below
            if message["type"] == "http.response.start":
                started = True
            await send(message)

        try:
            await self.app(scope, counted_receive, guarded_send)
        except Exception:
            # Whatever a route turned the cut-off into, the cause is the size.
            if not over:
                raise
        if over and not started:
            await _send_problem(scope, receive, send, self._problem(limit, setting, None))


# --------------------------------------------------------------------------- API docs

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


def _install_local_docs(app: FastAPI) -> None:
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


# --------------------------------------------------------------------------- uploads


def _install_upload_spool(app: FastAPI, settings: Settings) -> None:
    """While the app runs, temporary files (Starlette spools an upload over 1 MiB to one)
    go to ``<data_dir>/tmp``. ``tempfile.tempdir`` is process-wide, so it is set when the
    app starts and put back when it stops. The files are unnamed (``O_TMPFILE``) or
    unlinked at once, and never take the client's file name."""
    inner = app.router.lifespan_context

    @asynccontextmanager
    async def lifespan(a: Any) -> AsyncIterator[Any]:
        spool = Path(settings.data_dir) / "tmp"
        spool.mkdir(parents=True, exist_ok=True)
        previous = tempfile.tempdir
        tempfile.tempdir = str(spool.resolve())
        try:
            async with inner(a) as state:
                yield state
        finally:
            tempfile.tempdir = previous

    app.router.lifespan_context = lifespan


# --------------------------------------------------------------------------- schema

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


# --------------------------------------------------------------------------- install


def install_security(app: FastAPI, settings: Settings) -> None:
    """Add the headers, CORS, rate limit, API keys, body limit, local docs and the
    upload spool folder to ``app`` (see the module docstring for the order)."""
    # add_middleware puts each new one outside the previous: innermost first.
    app.add_middleware(
        BodyLimit,  # type: ignore[arg-type]
        body_limit=settings.max_body_bytes,
        upload_limit=settings.max_upload_bytes,
    )
    if settings.api_key_set:
        app.add_middleware(ApiKeyGuard, keys=settings.api_key_set)  # type: ignore[arg-type]
    if settings.rate_limit_per_minute > 0:
        app.add_middleware(RateLimit, per_minute=settings.rate_limit_per_minute)  # type: ignore[arg-type]
    if settings.cors_origin_list:
        app.add_middleware(
            CORSMiddleware,
            allow_origins=settings.cors_origin_list,
            allow_methods=["GET", "POST", "DELETE"],
            allow_headers=["Content-Type", API_KEY_HEADER, "X-Delete-Token", "X-Request-ID"],
            expose_headers=["Location", "Retry-After", "X-Request-ID", "X-Foldwise-Cache"],
            max_age=600,
        )
    _wrap_outermost(app, SecurityHeaders)
    _install_local_docs(app)
    _install_upload_spool(app, settings)
    document_problems(app)
