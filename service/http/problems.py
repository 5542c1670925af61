"""Errors as ``application/problem+json`` (RFC 9457) that name the field, value and limit.

Every error a client can cause ends here as a 4xx problem; anything unexpected becomes a
plain 500 problem with no stack trace (the trace goes to the log only).
"""

from __future__ import annotations

import logging
from collections.abc import Sequence
from typing import Any

from fastapi import FastAPI, Request
from fastapi.exceptions import RequestValidationError
from fastapi.responses import JSONResponse, Response
from starlette.exceptions import HTTPException as StarletteHTTPException
from starlette.requests import ClientDisconnect

from ..contract.common import UNION_TAG_PREFIX
from ..core.errors import InputError, plain

__all__ = [
    "ANSWERABLE",
    "PROBLEM_JSON",
    "Problem",
    "as_problem",
    "http_problem",
    "install_problem_handlers",
    "wants_html",
]

PROBLEM_JSON = "application/problem+json"
log = logging.getLogger("foldwise.errors")

_TITLES = {
    400: "Bad request",
    401: "API key required",
    403: "Forbidden",
    404: "Not found",
    405: "Method not allowed",
    409: "Conflict",
    413: "Too large",
    415: "Unsupported media type",
    422: "Invalid input",
    429: "Too many requests",
    500: "Internal error",
    503: "Service unavailable",
}


class Problem(Exception):
    """An error to answer with: status, a sentence a person can act on, and the field."""

    def __init__(
        self,
        status: int,
        detail: str,
        *,
        field: str | None = None,
        value: Any = None,
        limit: Any = None,
        title: str | None = None,
        kind: str | None = None,
        headers: dict[str, str] | None = None,
        code: str | None = None,
        remedy: str | None = None,
    ) -> None:
        super().__init__(detail)
        #: The input error's stable reason (``rate_conflict``, ``ambiguous_columns`` ...)
        #: and what to do about it, when the error came with them.
        self.code = code
        self.remedy = remedy
        self.status = status
        self.detail = detail
        self.field = field
        self.value = value
        self.limit = limit
        self.title = title or _TITLES.get(status, "Error")
        self.kind = kind or self.title.lower().replace(" ", "-")
        self.headers = headers
        #: A plan no offered setup meets: sentences saying what would.
        self.suggestions: list[str] | None = None

    def body(self, instance: str | None = None) -> dict[str, Any]:
        out: dict[str, Any] = {
            "type": f"urn:foldwise:problem:{self.kind}",
            "title": self.title,
            "status": self.status,
            "detail": self.detail,
        }
        if instance:
            out["instance"] = instance
        if self.field is not None:
            err: dict[str, Any] = {"field": self.field, "message": self.detail}
            if self.value is not None:
                err["value"] = _jsonable(self.value)
            if self.limit is not None:
                err["limit"] = _jsonable(self.limit)
            if self.code is not None:
                err["code"] = self.code
            if self.remedy:
                err["remedy"] = self.remedy
            out["errors"] = [err]
        if self.suggestions is not None:
            out["suggestions"] = list(self.suggestions)
        return out


def _jsonable(v: Any) -> Any:
    if isinstance(v, float) and v != v:  # NaN is not JSON
        return "NaN"
    if isinstance(v, float) and v in (float("inf"), float("-inf")):
        return "Infinity" if v > 0 else "-Infinity"
    if isinstance(v, str | int | float | bool) or v is None:
        return v
    text = repr(v)
    return text if len(text) <= 200 else text[:197] + "..."


def as_problem(exc: Problem | InputError) -> Problem:
    """The problem to answer an error with: a :class:`Problem` as it is; an
    :class:`InputError` from the use-cases or the core with its status, field, value and
    limit (and a plan's ``suggestions``)."""
    if isinstance(exc, Problem):
        return exc
    errors = getattr(exc, "errors", None)
    if isinstance(errors, list):  # a saved request that does not fit its kind
        return _validation_problem(RequestValidationError(errors))
    p = Problem(
        exc.status,
        str(exc),
        field=exc.field,
        value=exc.value,
        limit=exc.limit,
        title=getattr(exc, "title", None),
        kind=getattr(exc, "kind", None),
        code=exc.code,
        remedy=exc.remedy,
    )
    suggestions = getattr(exc, "suggestions", None)
    if suggestions is not None:
        p.suggestions = list(suggestions)
    return p


#: What an adapter catches around a use-case: both become a :class:`Problem`.
ANSWERABLE = (Problem, InputError)


def _field_path(loc: Sequence[Any]) -> str:
    parts = [p for p in loc if p not in ("body", "query", "path", "form", "header")]
    out = ""
    for p in parts:
        if isinstance(p, int):
            out += f"[{p}]"
        elif (isinstance(p, str) and p.startswith(("function-", UNION_TAG_PREFIX))) or p in (
            "tagged-union",
        ):
            continue
        else:
            out += ("." if out else "") + str(p)
    return out or "body"


_LIMIT_KEYS = ("gt", "ge", "lt", "le", "min_length", "max_length", "expected", "pattern")


def _validation_problem(exc: RequestValidationError) -> Problem:
    errors = []
    for e in exc.errors():
        etype = e.get("type", "")
        if etype == "json_invalid":
            ctx = e.get("ctx") or {}
            where = e.get("loc", ("body", 0))
            pos = where[1] if len(where) > 1 else 0
            detail = f"malformed JSON at character {pos}: {ctx.get('error', 'cannot parse')}"
            return Problem(400, detail, field="body", title="Malformed JSON", kind="malformed-json")
        field = _field_path(e.get("loc", ()))
        ctx = e.get("ctx") or {}
        # Plain numbers: "ge 1", not "ge 1.0".
        limit = next((f"{k} {plain(ctx[k])}" for k in _LIMIT_KEYS if k in ctx), None)
        msg = str(e.get("msg", "invalid"))
        if msg.startswith("Value error, "):
            msg = msg[len("Value error, ") :]
        entry: dict[str, Any] = {"field": field, "message": msg}
        if "input" in e and etype != "missing" and not isinstance(e["input"], dict | list):
            entry["value"] = _jsonable(e["input"])
        if limit:
            entry["limit"] = limit
        errors.append(entry)
    first = errors[0] if errors else {"field": "body", "message": "invalid"}
    shown = f"{first['field']}: {first['message']}"
    if "value" in first:
        shown += f" (got {first['value']!r})"
    more = f" and {len(errors) - 1} more" if len(errors) > 1 else ""
    p = Problem(422, shown + more, title="Invalid input", kind="invalid-input")
    p.errors = errors  # type: ignore[attr-defined]
    return p


def _respond(request: Request, p: Problem) -> JSONResponse:
    body = p.body(instance=request.url.path)
    extra = getattr(p, "errors", None)
    if extra:
        body["errors"] = extra
    return JSONResponse(body, status_code=p.status, media_type=PROBLEM_JSON, headers=p.headers)


def http_problem(request: Request, exc: StarletteHTTPException) -> JSONResponse:
    """A routing error (404, 405, ...) as problem+json."""
    detail = exc.detail if isinstance(exc.detail, str) else _TITLES.get(exc.status_code, "")
    if exc.status_code == 404 and detail == "Not Found":
        detail = f"no such resource: {request.url.path}"
    if exc.status_code == 405:
        detail = f"{request.method} is not allowed on {request.url.path}"
    return _respond(request, Problem(exc.status_code, detail, headers=exc.headers))


def wants_html(request: Request) -> bool:
    """A browser asking for a page: ``Accept`` names text/html before any JSON type, and
    the address is not under the API (API clients always get problem+json)."""
    if request.url.path.startswith("/api/"):
        return False
    accept = request.headers.get("accept", "").lower()
    html = accept.find("text/html")
    json_at = min((i for i in (accept.find("json"),) if i >= 0), default=len(accept) + 1)
    return html >= 0 and html < json_at


def install_problem_handlers(app: FastAPI) -> None:
    @app.exception_handler(Problem)
    async def _problem(request: Request, exc: Problem) -> JSONResponse:
        return _respond(request, exc)

    @app.exception_handler(InputError)
    async def _input(request: Request, exc: InputError) -> JSONResponse:
        return _respond(request, as_problem(exc))

    @app.exception_handler(RequestValidationError)
    async def _invalid(request: Request, exc: RequestValidationError) -> JSONResponse:
        return _respond(request, _validation_problem(exc))

    app.add_exception_handler(StarletteHTTPException, http_problem)  # type: ignore[arg-type]

    @app.exception_handler(ClientDisconnect)
    async def _gone(request: Request, exc: ClientDisconnect) -> Response:
        # The client hung up mid-body (a load generator stopping, a closed tab): nothing
        # to answer and nothing wrong with the service, so no traceback in the log.
        log.info("client disconnected during %s %s", request.method, request.url.path)
        return Response(status_code=400)

    @app.exception_handler(Exception)
    async def _unexpected(request: Request, exc: Exception) -> JSONResponse:
        log.exception("unhandled error on %s %s", request.method, request.url.path)
        return _respond(
            request,
            Problem(500, "an internal error occurred; it has been logged", kind="internal"),
        )
