"""Limits: a per-client request rate, the body size, and where uploads spool."""

from __future__ import annotations

import hashlib
import math
import tempfile
import time
from collections.abc import AsyncIterator, Callable
from contextlib import asynccontextmanager
from pathlib import Path
from typing import Any

from fastapi import FastAPI

from ..config import Settings
from .asgi import ASGIApp, Message, Receive, Scope, Send, header, send_problem
from .keys import API_KEY_HEADER
from .problems import Problem


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
        key = header(scope, API_KEY_HEADER.lower().encode())
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
                await send_problem(scope, receive, send, problem)
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
        ctype = (header(scope, b"content-type") or "").lower()
        if ctype.startswith("multipart/"):
            limit, setting = self.upload_limit, "max_upload_bytes"
        else:
            limit, setting = self.body_limit, "max_body_bytes"
        declared = header(scope, b"content-length")
        if declared is not None and declared.strip().isdigit() and int(declared) > limit:
            await send_problem(scope, receive, send, self._problem(limit, setting, int(declared)))
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
            await send_problem(scope, receive, send, self._problem(limit, setting, None))


def install_upload_spool(app: FastAPI, settings: Settings) -> None:
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
