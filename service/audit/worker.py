"""What runs on a Dask worker: read each recording, hash it, diagnose it unless done.

Workers read the files themselves; the client sends only paths and settings. A task's
memory is bounded by the diagnosis' own limits: the file size is checked against
``max_upload_bytes`` before it is read, and the readers enforce the line and sample limits.
"""

from __future__ import annotations

import hashlib
import os
from collections.abc import Iterable
from typing import Any

import pyarrow as pa

from ..config import Settings
from .diagnose_one import DiagnosisFailed, diagnose_recording
from .library import AuditTask
from .rows import PEAK_SCHEMA, error_summary, peak_rows, summary_row

__all__ = ["audit_chunk", "audit_one", "row_key"]


def row_key(content_sha256: str, settings_key: str) -> str:
    """The resume key of a row: the file's content hash joined with its settings' hash."""
    return hashlib.sha256(f"{content_sha256}:{settings_key}".encode()).hexdigest()


def audit_one(task: AuditTask, settings: Settings, done: Iterable[str] = ()) -> dict[str, Any]:
    """One row: ``status`` is "computed", "skipped" (key already done) or "error"."""
    out: dict[str, Any] = {"row": task.row, "key": "", "summary": None, "peaks": None}
    if task.request is None:
        return {**out, "status": "error", "summary": error_summary(task, task.error or "")}
    try:
        size = os.path.getsize(task.path)
        if size > settings.max_upload_bytes:
            raise DiagnosisFailed(
                f"{task.recording} is {size} bytes; the limit is {settings.max_upload_bytes}"
                " (FOLDWISE_MAX_UPLOAD_BYTES)",
                "path",
            )
        with open(task.path, "rb") as fh:
            data = fh.read()
    except OSError as exc:
        msg = f"{task.recording}: {exc.strerror or exc}"
        return {**out, "status": "error", "summary": error_summary(task, msg, "path")}
    except DiagnosisFailed as exc:
        return {**out, "status": "error", "summary": error_summary(task, exc.message, exc.field)}
    sha = hashlib.sha256(data).hexdigest()
    key = row_key(sha, task.settings_key)
    if key in done:
        return {**out, "key": key, "status": "skipped"}
    try:
        payload = diagnose_recording(task.path, task.request, settings, data=data)
    except DiagnosisFailed as exc:
        summary = error_summary(task, exc.message, exc.field, key=key, sha=sha)
        return {**out, "key": key, "status": "error", "summary": summary}
    del data
    return {
        **out,
        "key": key,
        "status": "computed",
        "summary": summary_row(task, key, sha, payload),
        "peaks": peak_rows(key, task.recording, task.channel, payload),
    }


def audit_chunk(
    tasks: list[AuditTask], settings: Settings, done: Iterable[str] = ()
) -> tuple[list[dict[str, Any]], pa.Table]:
    """A few rows in one Dask task, so scheduling costs little beside the diagnosis.

    Returns the rows' results without their peaks, and the peaks of the chunk as one
    Arrow table: Arrow buffers cross to the client far cheaper than lists of numbers.
    """
    results = [audit_one(t, settings, done) for t in tasks]
    cols: dict[str, list] = {n: [] for n in PEAK_SCHEMA.names}
    seen: set[str] = set()  # a key's peaks once, even if two rows share the key
    for r in results:
        peaks = r.pop("peaks")
        if peaks is not None and r["key"] not in seen:
            seen.add(r["key"])
            for n in PEAK_SCHEMA.names:
                cols[n].extend(peaks[n])
    return results, pa.table(cols, schema=PEAK_SCHEMA)
