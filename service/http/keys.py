"""Optional API keys for the endpoints that write."""

from __future__ import annotations

import hmac
import re
from urllib.parse import parse_qsl

from fastapi import Request

from ..config import Settings
from .asgi import ASGIApp, Receive, Scope, Send, header, send_problem
from .problems import Problem

API_KEY_HEADER = "X-API-Key"


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
            presented = header(scope, API_KEY_HEADER.lower().encode())
            if not key_matches(presented, self.keys):
                await send_problem(scope, receive, send, _key_problem(presented))
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
