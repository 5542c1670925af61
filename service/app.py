"""The one application factory: the only module that knows both the API and the pages."""

from __future__ import annotations

import gc
import logging
from collections.abc import AsyncIterator
from contextlib import asynccontextmanager

from fastapi import FastAPI
from starlette.concurrency import run_in_threadpool

from . import COMPUTATION_VERSION, __version__
from .api.examples import install_examples
from .api.routes import audits, diagnose, diagnoses, fold, health, plan, runup
from .config import Settings, get_settings
from .http.audit_jobs import AuditRunner
from .http.bodies import ResponseCache
from .http.observability import install_observability
from .http.problems import install_problem_handlers
from .http.security import install_security
from .http.store_access import StoreAccess
from .web.pages import install_pages

__all__ = ["create_app"]

log = logging.getLogger("foldwise")

DESCRIPTION = """
Foldwise tells which peaks of a machine spectrum are real and which are aliases folded
back from above the Nyquist frequency, and of what.

* **fold** — predict where each known tone lands through an acquisition chain, and how strongly.
* **diagnose** — which peaks of a measured spectrum or time record are aliases, of what, how sure.
* **compare-rates** — two captures at different sample rates: peaks that stay are real, peaks
  that move are aliases, with the true frequencies consistent with both.
* **plan** — the cheapest sample rate, anti-alias filter and analysis lines that keep aliases
  out of the band of interest over the whole speed range, with the run-up folding.
* **audits** — diagnose every recording of an archive on the server (a manifest), on Dask;
  poll the job, read the recordings ranked by risk and every peak as Parquet.
* **diagnoses** — save any result under an unguessable link; delete it with its token.

Errors are `application/problem+json` (RFC 9457) and name the field, the value and the limit.

**Caution.** An alias verdict is a hypothesis about the measurement, not about the machine.
Before a peak is dismissed in a decision about machine protection or safety, confirm it with
a second sample rate or a wider-band measurement, and follow the applicable standards, site
procedures and qualified personnel.
"""


def create_app(settings: Settings | None = None) -> FastAPI:
    settings = settings or get_settings()

    @asynccontextmanager
    async def lifespan(app: FastAPI) -> AsyncIterator[None]:
        access = StoreAccess(settings)
        app.state.store_access = access
        app.state.store = access
        await run_in_threadpool(access.try_migrate)
        runner = AuditRunner(settings, access)
        app.state.audit_runner = runner
        await run_in_threadpool(runner.resume_all)  # jobs an earlier process left
        # Everything imported and built so far lives as long as the process: moving it
        # out of the collector's reach keeps full collections short under load.
        gc.collect()
        gc.freeze()
        try:
            yield
        finally:
            access.close()

    app = FastAPI(
        title="Foldwise",
        version=f"{__version__} (computation {COMPUTATION_VERSION})",
        description=DESCRIPTION,
        lifespan=lifespan,
        # Metrics and logs are the app's own (Prometheus, JSON lines); FastAPI's
        # OpenTelemetry hooks would only ask, on every request, whether a provider exists.
        telemetry={"tracing": False, "metrics": False, "logs": False},
    )
    app.state.settings = settings
    app.state.fold_cache = ResponseCache(settings.fold_cache_entries)
    install_problem_handlers(app)
    install_security(app, settings)
    install_observability(app, settings)
    app.include_router(health.router)
    app.include_router(fold.router)
    app.include_router(diagnose.router)
    app.include_router(plan.router)
    app.include_router(runup.router)
    app.include_router(diagnoses.router)
    app.include_router(audits.router)
    install_examples(app, settings)

    async def saved_lookup(record_id: str) -> object:
        access: StoreAccess = app.state.store_access
        return await access.call(access.store.get, record_id)

    app.state.saved_lookup = saved_lookup
    install_pages(app)
    return app
