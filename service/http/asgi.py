"""Plain ASGI types and helpers shared by the middlewares."""

from __future__ import annotations

from collections.abc import Awaitable, Callable, MutableMapping
from typing import Any

from fastapi import FastAPI
from fastapi.responses import JSONResponse

from .problems import PROBLEM_JSON, Problem

Scope = MutableMapping[str, Any]
Message = MutableMapping[str, Any]
Receive = Callable[[], Awaitable[Message]]
Send = Callable[[Message], Awaitable[None]]
ASGIApp = Callable[[Scope, Receive, Send], Awaitable[None]]


async def send_problem(scope: Scope, receive: Receive, send: Send, problem: Problem) -> None:
    response = JSONResponse(
        problem.body(instance=scope.get("path")),
        status_code=problem.status,
        media_type=PROBLEM_JSON,
        headers=problem.headers,
    )
    await response(scope, receive, send)  # type: ignore[arg-type]


def header(scope: Scope, name: bytes) -> str | None:
    for key, value in scope.get("headers", ()):
        if key.lower() == name:
            return str(value.decode("latin-1"))
    return None


def wrap_outermost(app: FastAPI, wrapper: Callable[[ASGIApp], ASGIApp]) -> None:
    """Put ``wrapper`` outside Starlette's error middleware, so it also sees the 500
    answer that middleware writes for an unhandled exception."""
    build = app.build_middleware_stack

    def build_wrapped() -> ASGIApp:
        return wrapper(build())  # type: ignore[arg-type]

    app.build_middleware_stack = build_wrapped  # type: ignore[method-assign]
