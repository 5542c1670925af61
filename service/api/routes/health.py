"""Liveness and readiness, for load balancers and orchestrators."""

from __future__ import annotations

import logging

from fastapi import APIRouter, Request
from starlette.concurrency import run_in_threadpool

from ... import COMPUTATION_VERSION, __version__
from ...http.problems import Problem

router = APIRouter(tags=["health"])
log = logging.getLogger("foldwise.health")


@router.get("/healthz", summary="Liveness: answers at once, touches nothing")
async def healthz() -> dict[str, str]:
    return {"status": "ok"}


@router.get("/readyz", summary="Readiness: the store answers")
async def readyz(request: Request) -> dict[str, str]:
    store = getattr(request.app.state, "store", None)
    if store is not None:
        try:
            await run_in_threadpool(store.ping)
        except Exception as exc:
            # The driver's message names hosts and users: it goes to the log only.
            log.warning("readiness check failed: %s", exc)
            raise Problem(
                503,
                "the database that keeps saved results does not answer; the service "
                "recovers by itself when it is back",
                kind="store-unavailable",
                headers={"Retry-After": "5"},
            ) from exc
    return {"status": "ready", "version": __version__, "computation": COMPUTATION_VERSION}
