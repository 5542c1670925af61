"""The store as the web layer sees it: calls run off the event loop, migration happens
once (and is retried if the database was away at start), and an unreachable database
becomes a 503 problem that says so."""

from __future__ import annotations

import logging
import threading
from collections.abc import Callable
from typing import Any, TypeVar

from starlette.concurrency import run_in_threadpool

from .. import COMPUTATION_VERSION, __version__
from ..config import Settings
from ..storage import Store, StoreUnavailable
from ..usecases.save import SaveParts, saved_link
from .problems import Problem

__all__ = ["StoreAccess"]

log = logging.getLogger("foldwise.store")
T = TypeVar("T")


class StoreAccess:
    def __init__(self, settings: Settings) -> None:
        self.store = Store.from_url(settings.database_url or None, settings.data_dir)
        self._migrated = False
        self._lock = threading.Lock()

    def _ensure_migrated(self) -> None:
        if self._migrated:
            return
        with self._lock:
            if not self._migrated:
                self.store.migrate()
                self._migrated = True

    def try_migrate(self) -> None:
        """At start-up: migrate if the database answers; otherwise retry on first use."""
        try:
            self._ensure_migrated()
        except StoreUnavailable as exc:
            log.warning("database not reachable at start-up (%s); will retry on first use", exc)

    def ping(self) -> None:
        self.store.ping()
        self._ensure_migrated()

    async def call(self, fn: Callable[..., T], *args: Any, **kwargs: Any) -> T:
        def run() -> T:
            self._ensure_migrated()
            return fn(*args, **kwargs)

        try:
            return await run_in_threadpool(run)
        except StoreUnavailable as exc:
            log.warning("database unavailable: %s", exc)
            raise Problem(
                503,
                "the database that keeps saved diagnoses does not answer; nothing was "
                "lost — try again in a few seconds",
                kind="store-unavailable",
                headers={"Retry-After": "5"},
            ) from exc

    def _create(self, kind: str, parts: SaveParts, title: str | None) -> dict[str, str]:
        self._ensure_migrated()
        try:
            rid, token = self.store.create(
                kind,
                parts.request,
                parts.result,
                COMPUTATION_VERSION,
                __version__,
                spectrum=parts.spectrum,
                title=title,
                spectra=parts.spectra,
            )
        except ValueError as exc:
            raise Problem(413, str(exc), field="request") from exc
        return saved_link(rid, token)

    async def save(self, kind: str, parts: SaveParts, title: str | None) -> dict[str, str]:
        """The one save path: store ``parts`` and return :func:`saved_link`.

        A result too large for the store is a 413 problem naming ``request``.
        """
        return await self.call(self._create, kind, parts, title)

    def save_sync(self, kind: str, parts: SaveParts, title: str | None) -> dict[str, str]:
        """The same save from a thread that is not the event loop's (an audit job)."""
        return self._create(kind, parts, title)

    def close(self) -> None:
        self.store.close()
