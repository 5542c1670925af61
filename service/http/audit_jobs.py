"""Submitted audits run off the event loop: one at a time per process, others queued.

The job's state lives in the store (``audit_job``), so a restarted web process loses no
job: at start-up, jobs left queued or running are taken up again — a resume is cheap,
since the engine skips the rows whose results its part files already hold. A job that
cannot be queued again is marked ``interrupted`` with a message saying what to do.
"""

from __future__ import annotations

import logging
import queue
import threading
import time
from typing import Any

from ..config import Settings
from ..contract.audit import AuditIn
from ..storage import AuditJob, StoreUnavailable
from ..usecases.audit import audit_result, audit_save_parts, run_submitted
from .problems import Problem
from .store_access import StoreAccess

__all__ = ["AuditRunner"]

log = logging.getLogger("foldwise.audit")

#: Progress is written to the store at most this often (seconds), and at the end.
PROGRESS_EVERY_S = 1.0


class AuditRunner:
    """A bounded queue of job ids and one thread that runs them."""

    def __init__(self, settings: Settings, access: StoreAccess) -> None:
        self.settings = settings
        self.access = access
        self._queue: queue.Queue[str] = queue.Queue(maxsize=max(1, settings.audit_queue + 1))
        self._thread: threading.Thread | None = None
        self._lock = threading.Lock()

    # ------------------------------------------------------------------ submission
    def full(self) -> bool:
        return self._queue.full()

    def busy_problem(self) -> Problem:
        return Problem(
            503,
            f"{self._queue.qsize()} audits are queued or running, the most this server "
            "takes; submit again when one has finished",
            kind="audit-queue-full",
            limit=self.settings.audit_queue + 1,
            headers={"Retry-After": "60"},
        )

    def enqueue(self, job_id: str) -> None:
        """Queue a job that is in the store; :meth:`busy_problem` when the queue is full."""
        try:
            self._queue.put_nowait(job_id)
        except queue.Full:
            raise self.busy_problem() from None
        self._start_thread()

    def resume_all(self) -> None:
        """At start-up: take up jobs left queued or running by an earlier process."""
        store = self.access.store
        try:
            self.access.ping()
            left = store.jobs_with_status("running", "queued")
        except StoreUnavailable as exc:
            log.warning("audit jobs not resumed: %s", exc)
            return
        for job in left:
            try:
                self._queue.put_nowait(job.id)
            except queue.Full:
                store.update_job(
                    job.id,
                    status="interrupted",
                    message="the server restarted with more audits waiting than it queues; "
                    "submit this audit again (rows already done are skipped)",
                )
                continue
            if job.status == "running":
                store.update_job(job.id, status="queued", message="resumed after a restart")
        if not self._queue.empty():
            self._start_thread()

    # ------------------------------------------------------------------ running
    def _start_thread(self) -> None:
        with self._lock:
            if self._thread is None or not self._thread.is_alive():
                self._thread = threading.Thread(target=self._loop, name="audit", daemon=True)
                self._thread.start()

    def _loop(self) -> None:
        while True:
            try:
                job_id = self._queue.get(timeout=5.0)
            except queue.Empty:
                return  # idle: the next submission starts a new thread
            try:
                self.run_one(job_id)
            except Exception:  # the store is away, or a bug: never kill the thread
                log.exception("audit job %s", job_id)
            finally:
                self._queue.task_done()

    def run_one(self, job_id: str) -> None:
        """Run one job to its end, writing its state and progress to the store."""
        store = self.access.store
        job: AuditJob | None = store.get_job(job_id)
        if job is None or job.status not in ("queued", "running"):
            return
        req = AuditIn.model_validate(job.request)
        store.update_job(job_id, status="running", message=None)
        last = [0.0]

        def progress(done: int, total: int) -> None:
            now = time.monotonic()
            if now - last[0] >= PROGRESS_EVERY_S or done == total:
                last[0] = now
                store.update_job(job_id, done=done, total=total)

        try:
            summary = run_submitted(req, self.settings, job_id, progress)
            result = audit_result(summary, req, job_id)
            link = self.access.save_sync("audit", audit_save_parts(req, result), req.title)
        except Exception as exc:
            message = getattr(exc, "detail", None) or f"{type(exc).__name__}: {exc}"
            store.update_job(job_id, status="failed", message=str(message)[:2000])
            log.warning("audit job %s failed: %s", job_id, message)
            return
        counts: dict[str, Any] = result["counts"]
        store.update_job(
            job_id,
            status="done",
            done=summary.total,
            total=summary.total,
            errors=summary.errors,
            summary=counts,
            saved_id=link["id"],
            message=None,
        )

    def wait_idle(self, timeout: float) -> bool:
        """For tests and shutdown: True once every queued job has been run."""
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            if self._queue.unfinished_tasks == 0:
                return True
            time.sleep(0.05)
        return False
