"""Audit an archive of recordings: the diagnosis over a manifest, on Dask, resumable.

Public surface: :func:`run_audit` (and :class:`AuditSummary`), the manifest and library
readers in :mod:`.library`, the result schemas in :mod:`.rows`, the one call into the
diagnosis in :mod:`.diagnose_one` and the demo archive in :mod:`.demo`. No web imports.
"""

from __future__ import annotations

from .diagnose_one import DiagnosisFailed, diagnose_recording
from .engine import AuditSummary, run_audit
from .library import AuditTask, Library, read_library, read_manifest
from .rows import PEAK_SCHEMA, SUMMARY_SCHEMA, is_aliased

__all__ = [
    "PEAK_SCHEMA",
    "SUMMARY_SCHEMA",
    "AuditSummary",
    "AuditTask",
    "DiagnosisFailed",
    "Library",
    "diagnose_recording",
    "is_aliased",
    "read_library",
    "read_manifest",
    "run_audit",
]
