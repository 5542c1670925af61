"""Request ids, one JSON access-log line per request, and Prometheus metrics.

``install_observability(app, settings)`` wraps the whole app (outside the error
middleware, so an unhandled error is logged and counted as the 500 it became) and adds
``GET /metrics`` (Prometheus text format 0.0.4).

* ``X-Request-ID``: a client's id is echoed if it is a plain token (letters, digits,
  ``._:-``, at most 128 characters), otherwise a new random one is made; the id is in
  ``request.state.request_id`` for the routes and in every log line.
* Logger ``foldwise.access``: one JSON object per line, on standard error, with
  ``ts``, ``method``, ``path`` (the route template, never the concrete path, so saved
  result ids — the links — stay out of the logs), ``status``, ``duration_ms``,
  ``client`` and ``request_id``. The level follows ``settings.log_level``.
* Metrics live in a registry of each app (several apps in one process, as in the tests,
  never share counts); with several worker processes each serves its own counts.
"""

from __future__ import annotations

import logging
import os
import re
import sys
import time
from collections.abc import Iterator, Sequence
from datetime import UTC, datetime

import orjson
from fastapi import FastAPI
from fastapi.responses import Response
from prometheus_client import (
    CollectorRegistry,
    Counter,
    Gauge,
    Histogram,
    disable_created_metrics,
    generate_latest,
)
from prometheus_client.core import CounterMetricFamily, Metric
from prometheus_client.registry import Collector
from starlette.routing import BaseRoute, Mount

from ..config import Settings
from .asgi import ASGIApp, Message, Receive, Scope, Send
from .keys import needs_api_key

__all__ = [
    "ACCESS_LOGGER",
    "METRICS_CONTENT_TYPE",
    "REQUEST_ID_HEADER",
    "AppMetrics",
    "RequestObserver",
    "install_observability",
    "route_template",
]


ACCESS_LOGGER = "foldwise.access"
REQUEST_ID_HEADER = "X-Request-ID"
METRICS_CONTENT_TYPE = "text/plain; version=0.0.4; charset=utf-8"
UNMATCHED = "<unmatched>"

_ID_NAME = REQUEST_ID_HEADER.lower().encode("latin-1")
_REQUEST_ID = re.compile(r"[A-Za-z0-9._:-]{1,128}")
_METHODS = frozenset({"GET", "HEAD", "POST", "PUT", "PATCH", "DELETE", "OPTIONS"})
#: Seconds; from a cached fold (well under 5 ms) to a long time-record diagnosis.
_LATENCY_BUCKETS = (0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0, 30.0)


def route_template(scope: Scope, routes: Sequence[BaseRoute] = ()) -> str:
    """The path template of the route that answered (``/api/v1/diagnoses/{rid}``), or
    ``<unmatched>``: labels and log lines stay few and never carry an id.

    FastAPI records the route it chose in ``scope["route"]``, except for a mount (static
    files); those are found among ``routes`` by their prefix."""
    route = scope.get("route")
    path = getattr(route, "path", None)
    if isinstance(path, str) and not isinstance(route, Mount):
        return path or "/"
    here = scope.get("path", "")
    for r in routes:
        if isinstance(r, Mount) and here.startswith(r.path.rstrip("/") + "/"):
            return f"{r.path}/{{path}}"
    return UNMATCHED


# --------------------------------------------------------------------------- metrics


class _StateCollector(Collector):
    """Counts read at scrape time from the app's own objects."""

    def __init__(self, app: FastAPI) -> None:
        self.app = app

    def collect(self) -> Iterator[Metric]:
        cache = getattr(self.app.state, "fold_cache", None)
        if cache is not None:
            yield CounterMetricFamily(
                "foldwise_fold_cache_hits",
                "Fold requests answered from the response cache",
                value=cache.hits,
            )
            yield CounterMetricFamily(
                "foldwise_fold_cache_misses",
                "Fold requests computed (not in the response cache)",
                value=cache.misses,
            )


class AppMetrics:
    """The metrics of one app, in a registry of its own."""

    def __init__(self, app: FastAPI) -> None:
        disable_created_metrics()  # no *_created series: counters start with the process
        self.registry = CollectorRegistry()
        self.requests = Counter(
            "foldwise_http_requests",
            "HTTP requests answered, by method, route template and status class",
            ["method", "route", "status_class"],
            registry=self.registry,
        )
        self.latency = Histogram(
            "foldwise_http_request_duration_seconds",
            "Time from request to the end of the response, by method and route template",
            ["method", "route"],
            buckets=_LATENCY_BUCKETS,
            registry=self.registry,
        )
        self.in_flight = Gauge(
            "foldwise_http_requests_in_flight",
            "Requests being answered now",
            registry=self.registry,
        )
        self.saved = Counter(
            "foldwise_saved_results_created",
            "Results saved under a link by this process",
            registry=self.registry,
        )
        self.deleted = Counter(
            "foldwise_saved_results_deleted",
            "Saved results deleted with their token by this process",
            registry=self.registry,
        )
        self.registry.register(_StateCollector(app))

    def observe(self, method: str, route: str, status: int, seconds: float, query: str) -> None:
        method = method if method in _METHODS else "OTHER"
        self.requests.labels(method, route, f"{status // 100}xx").inc()
        self.latency.labels(method, route).observe(seconds)
        if method == "POST" and route == "/api/v1/diagnoses" and status == 201:
            self.saved.inc()
        elif (
            method == "POST"
            and route in ("/api/v1/diagnose", "/api/v1/compare-rates")
            and status == 200
            and _asks_to_save(query)
        ):
            self.saved.inc()
        elif method == "DELETE" and route == "/api/v1/diagnoses/{rid}" and status == 204:
            self.deleted.inc()

    def render(self) -> bytes:
        return generate_latest(self.registry)


def _asks_to_save(query: str) -> bool:
    # The same reading of ?save= as the API key check.
    return needs_api_key("POST", "/api/v1/diagnose", query)


# --------------------------------------------------------------------------- logging


class _StderrLines(logging.Handler):
    """One line per record on whatever ``sys.stderr`` is at the time (test runners swap
    it). The access log's message is already the whole JSON line: it is written as it
    is, without a Formatter pass."""

    def emit(self, record: logging.LogRecord) -> None:
        try:
            stream = sys.stderr
            stream.write(record.getMessage() + "\n")
            stream.flush()
        except Exception:
            self.handleError(record)


def _configure_access_logger(level: str) -> logging.Logger:
    logger = logging.getLogger(ACCESS_LOGGER)
    if not any(isinstance(h, _StderrLines) for h in logger.handlers):
        logger.addHandler(_StderrLines())
    logger.propagate = False  # one line per request, whatever the root logger does
    logger.setLevel(getattr(logging, level.upper(), logging.INFO))
    return logger


# --------------------------------------------------------------------------- middleware


def _client_id(scope: Scope) -> str:
    for key, value in scope.get("headers", ()):
        if key.lower() == b"x-request-id":
            given = value.decode("latin-1")
            if _REQUEST_ID.fullmatch(given):
                return str(given)
            break
    return os.urandom(16).hex()  # 32 hex digits, like uuid4().hex without building a UUID


class RequestObserver:
    """Request id, timing, one access-log line and the metrics, for every HTTP request."""

    def __init__(
        self,
        app: ASGIApp,
        metrics: AppMetrics,
        logger: logging.Logger,
        routes: Sequence[BaseRoute] = (),
    ) -> None:
        self.app = app
        self.metrics = metrics
        self.logger = logger
        self.routes = routes

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        request_id = _client_id(scope)
        scope.setdefault("state", {})["request_id"] = request_id
        status = 500
        start = time.perf_counter()

        async def send_with_id(message: Message) -> None:
            nonlocal status
            if message["type"] == "http.response.start":
                status = int(message["status"])
                message["headers"] = [
                    *(h for h in message.get("headers", ()) if h[0].lower() != _ID_NAME),
                    (_ID_NAME, request_id.encode("latin-1")),
                ]
            await send(message)

        self.metrics.in_flight.inc()
        try:
            await self.app(scope, receive, send_with_id)
        finally:
            seconds = time.perf_counter() - start
            self.metrics.in_flight.dec()
            route = route_template(scope, self.routes)
            query = scope.get("query_string", b"").decode("latin-1")
            self.metrics.observe(scope["method"], route, status, seconds, query)
            if self.logger.isEnabledFor(logging.INFO):
                client = scope.get("client")
                line = {
                    "ts": datetime.now(UTC).isoformat(timespec="milliseconds"),
                    "method": scope["method"],
                    "path": route,
                    "status": status,
                    "duration_ms": round(seconds * 1000.0, 2),
                    "client": client[0] if client else None,
                    "request_id": request_id,
                }
                # A record made directly: Logger.info would walk the stack to find the
                # caller's file and line on every request, which this line never shows.
                record = self.logger.makeRecord(
                    self.logger.name,
                    logging.INFO,
                    __file__,
                    0,
                    orjson.dumps(line).decode(),
                    None,
                    None,
                )
                self.logger.handle(record)


# --------------------------------------------------------------------------- install


def install_observability(app: FastAPI, settings: Settings) -> None:
    """Wrap ``app`` with :class:`RequestObserver` and add ``GET /metrics``."""
    metrics = AppMetrics(app)
    app.state.metrics = metrics
    logger = _configure_access_logger(settings.log_level)

    build = app.build_middleware_stack

    def build_observed() -> ASGIApp:
        # Outside Starlette's error middleware: an unhandled error is seen as its 500.
        return RequestObserver(build(), metrics, logger, app.router.routes)  # type: ignore[arg-type]

    app.build_middleware_stack = build_observed  # type: ignore[method-assign]

    async def metrics_endpoint() -> Response:
        return Response(metrics.render(), media_type=METRICS_CONTENT_TYPE)

    app.add_api_route("/metrics", metrics_endpoint, methods=["GET"], include_in_schema=False)
