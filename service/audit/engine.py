"""Running an audit on Dask: a local cluster by default, or a scheduler by address.

The client resolves the manifest into small tasks (paths and settings), submits them in
chunks with a bounded number in flight, writes finished rows to part files as they come
and, at the end, the two result tables. Its memory is bounded by the window of chunks in
flight and the flush size, not by the manifest's length.
"""

from __future__ import annotations

import os
import time
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from itertools import islice
from pathlib import Path
from typing import Any

import pyarrow as pa
import pyarrow.compute as pc
from distributed import Client, LocalCluster, as_completed
from tqdm import tqdm

from ..config import Settings, get_settings
from .library import AuditTask, read_library, read_manifest
from .results import PartStore
from .rows import error_summary
from .worker import audit_chunk

__all__ = ["AuditSummary", "run_audit"]


@dataclass(frozen=True)
class AuditSummary:
    """What an audit did. Every manifest row is counted once in exactly one of
    ``computed``, ``skipped`` (done by an earlier run) or ``errors``."""

    total: int
    computed: int
    skipped: int
    errors: int
    peaks: int
    workers: int
    elapsed_s: float
    peaks_path: Path
    recordings_path: Path


#: The settings a diagnosis on a worker needs: its limits, and nothing else.
_LIMITS = ("max_tones", "max_upload_bytes", "max_spectrum_lines", "max_time_samples")


def _worker_settings(settings: Settings) -> Settings:
    """The limits only: API keys and the database URL never travel to the workers."""
    return Settings.model_construct(**{k: getattr(settings, k) for k in _LIMITS})


def _chunk_size(rows: int, workers: int) -> int:
    """Rows per task: large enough that scheduling costs little beside the diagnosis,
    small enough that every worker gets several tasks and a lost one costs little."""
    return max(1, min(32, rows // (8 * workers)))


def _chunks(tasks: list[AuditTask], size: int) -> Iterator[list[AuditTask]]:
    it = iter(tasks)
    while chunk := list(islice(it, size)):
        yield chunk


def _client(scheduler: str | None, workers: int | None, memory_limit: str) -> tuple[Any, Any]:
    if scheduler:
        return Client(scheduler), None
    cluster = LocalCluster(
        n_workers=workers or os.cpu_count() or 1,
        threads_per_worker=1,
        processes=True,
        memory_limit=memory_limit,
        host="127.0.0.1",
        dashboard_address=":0",  # any free port: never a clash with another cluster
    )
    return Client(cluster), cluster


def run_audit(
    manifest: str | Path,
    library: str | Path | None,
    folder: str | Path,
    out: str | Path,
    scheduler: str | None = None,
    workers: int | None = None,
    progress: bool = True,
    *,
    settings: Settings | None = None,
    chunk_size: int | None = None,
    window: int | None = None,
    flush_rows: int = 256,
    memory_limit: str = "1GiB",
    on_progress: Callable[[int, int], None] | None = None,
) -> AuditSummary:
    """Diagnose every row of a manifest; write ``peaks.parquet`` and ``recordings.parquet``.

    Parameters
    ----------
    manifest : CSV or Parquet manifest (see :mod:`service.audit.library`).
    library : JSON of named chains, source sets and options (None: rows carry their own).
    folder : the archive folder the manifest's paths are relative to.
    out : output folder; its ``parts/`` make a re-run skip rows already done.
    scheduler : address of an existing Dask scheduler (``tcp://host:8786``); None starts a
        local cluster of ``workers`` processes (default: one per core), one thread each.
    workers : size of the local cluster.
    progress : show a progress bar (tqdm, on stderr).
    settings : limits per recording (default: the service's settings).
    chunk_size : rows per Dask task (default: up to 32, at least 8 tasks per worker).
    window : chunks in flight at once (default 4 per worker).
    flush_rows : finished rows kept in memory before they are written to a part file.
    memory_limit : per worker of the local cluster (Dask pauses, then restarts, above it).
    on_progress : called with (rows finished, rows in all) after every chunk.
    """
    t0 = time.perf_counter()
    settings = _worker_settings(settings or get_settings())
    out = Path(out)
    store = PartStore(out)
    tasks = read_manifest(manifest, read_library(library), folder)
    by_row = {t.row: t for t in tasks}
    status: dict[int, str] = {}
    keys: dict[int, str] = {}
    errors: dict[int, dict[str, Any]] = {}
    buf_sum: list[dict[str, Any]] = []
    buf_peaks: list[Any] = []  # Arrow tables, one per chunk

    stored: set[str] = set()  # keys whose results this run has kept

    def record(res: dict[str, Any]) -> bool:
        """Count a row; True when its peaks are to be kept (first time its key is seen:
        two rows with the same file and settings have one diagnosis)."""
        row = res["row"]
        status[row] = res["status"]
        keys[row] = res["key"]
        if res["status"] == "error":
            errors[row] = res["summary"]
        elif res["status"] == "computed" and res["key"] not in stored:
            stored.add(res["key"])
            buf_sum.append(res["summary"])
            return True
        return False

    def flush() -> None:
        store.write_part(buf_sum, buf_peaks)
        buf_sum.clear()
        buf_peaks.clear()

    for t in tasks:  # rows wrong in the manifest never reach a worker
        if t.request is None:
            record(
                {
                    "row": t.row,
                    "key": "",
                    "status": "error",
                    "summary": error_summary(t, t.error or ""),
                }
            )
    to_run = [t for t in tasks if t.request is not None]

    bar = None
    if progress:
        bar = tqdm(total=len(tasks), unit="rec", desc="audit", initial=len(status))
    client, cluster = _client(scheduler, workers, memory_limit)
    try:
        n_workers = max(1, len(client.nthreads()))  # every worker, not a sample
        done = store.done_keys()
        # One copy of the done-index on every worker (a list, so the set stays whole).
        done_ref: Any = (
            client.scatter([frozenset(done)], broadcast=True)[0] if done else frozenset()
        )
        del done
        pending = _chunks(to_run, chunk_size or _chunk_size(len(to_run), n_workers))
        limit = window or 4 * n_workers
        futures: dict[Any, list[AuditTask]] = {}

        def submit() -> Any:
            chunk = next(pending, None)
            if chunk is None:
                return None
            fut = client.submit(audit_chunk, chunk, settings, done_ref, pure=False)
            futures[fut] = chunk
            return fut

        ac = as_completed([f for f in (submit() for _ in range(limit)) if f is not None])
        for fut in ac:
            chunk = futures.pop(fut)
            try:
                results, peaks = fut.result()
            except Exception as exc:  # e.g. a chunk that kept killing workers
                peaks = None
                results = [
                    {
                        "row": t.row,
                        "key": "",
                        "status": "error",
                        "summary": error_summary(t, f"the task failed: {exc!r}"),
                    }
                    for t in chunk
                ]
            fut.release()
            # Each row counted once, even if its chunk were ever delivered twice.
            fresh = [r for r in results if r["row"] not in status]
            keep = [r["key"] for r in fresh if record(r)]
            computed = sum(r["status"] == "computed" for r in results)
            if peaks is not None and peaks.num_rows and keep:
                if len(keep) < computed:
                    peaks = peaks.filter(pc.is_in(peaks.column("key"), pa.array(keep, pa.string())))
                buf_peaks.append(peaks)
            if len(buf_sum) >= flush_rows:
                flush()
            if bar is not None:
                bar.n = len(status)
                bar.refresh()
            if on_progress is not None:
                on_progress(len(status), len(tasks))
            nxt = submit()
            if nxt is not None:
                ac.add(nxt)
        flush()
    finally:
        flush()
        if bar is not None:
            bar.close()
        client.close()
        if cluster is not None:
            cluster.close()

    labels: dict[str, list[tuple[str, int]]] = {}
    for row in sorted(status):
        if status[row] in ("computed", "skipped"):
            t = by_row[row]
            labels.setdefault(keys[row], []).append((t.recording, t.channel))
    saved = store.summaries_for(set(labels))
    summaries = []
    for row in sorted(by_row):
        t = by_row[row]
        if status.get(row) == "error" or row not in status:
            summaries.append(errors.get(row) or error_summary(t, "not run"))
            continue
        s = dict(saved[keys[row]])
        s.update(
            row=t.row,
            recording=t.recording,
            channel=t.channel,
            setup=t.setup,
            sources_id=t.sources_id,
            speed_rpm=t.speed_rpm,
        )
        summaries.append(s)
    peaks_path, rec_path = out / "peaks.parquet", out / "recordings.parquet"
    n_peaks = store.write_peaks(labels, peaks_path)
    store.write_summaries(summaries, rec_path)
    counts = {s: sum(1 for v in status.values() if v == s) for s in ("computed", "skipped")}
    return AuditSummary(
        total=len(tasks),
        computed=counts["computed"],
        skipped=counts["skipped"],
        errors=sum(1 for s in summaries if s["status"] == "error"),
        peaks=n_peaks,
        workers=n_workers,
        elapsed_s=time.perf_counter() - t0,
        peaks_path=peaks_path,
        recordings_path=rec_path,
    )
