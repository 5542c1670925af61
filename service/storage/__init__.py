"""Saved diagnoses: SQLite by default, PostgreSQL when a database URL is configured."""

from service.storage.models import JOB_STATES, KINDS
from service.storage.packing import pack_spectrum, unpack_spectrum
from service.storage.store import (
    DEFAULT_MAX_JSON_BYTES,
    AuditJob,
    DeleteOutcome,
    SavedDiagnosis,
    Store,
    StoreUnavailable,
)

__all__ = [
    "DEFAULT_MAX_JSON_BYTES",
    "JOB_STATES",
    "KINDS",
    "AuditJob",
    "DeleteOutcome",
    "SavedDiagnosis",
    "Store",
    "StoreUnavailable",
    "pack_spectrum",
    "unpack_spectrum",
]
