"""ORM table definitions. The migrations in ``migrations/versions`` create these tables;
the models here must stay in step with the newest migration (a test compares them)."""

from __future__ import annotations

from datetime import datetime
from typing import Any

from sqlalchemy import (
    JSON,
    CheckConstraint,
    DateTime,
    Index,
    Integer,
    LargeBinary,
    MetaData,
    String,
    Text,
)
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column

__all__ = ["JOB_STATES", "KINDS", "AuditJobRow", "Base", "SavedDiagnosisRow"]

# What a saved record holds: the output of one of the service's computations.
KINDS: tuple[str, ...] = ("diagnose", "compare", "fold", "plan", "audit", "run-up")

#: The states of an audit job, in the order a job goes through them.
JOB_STATES: tuple[str, ...] = ("queued", "running", "done", "failed", "interrupted")

# Stable constraint names, so later migrations can refer to them on both backends.
_NAMING = {
    "ix": "ix_%(table_name)s_%(column_0_name)s",
    "uq": "uq_%(table_name)s_%(column_0_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
    "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
}


class Base(DeclarativeBase):
    metadata = MetaData(naming_convention=_NAMING)


class SavedDiagnosisRow(Base):
    """One saved computation: inputs, results, and optionally the spectrum it was run on.

    ``request`` and ``result`` use the plain JSON type on every backend, PostgreSQL
    included: ``json`` keeps the document text as written, whereas ``jsonb`` rewrites
    numbers (``1e300`` comes back as a 301-digit integer) and nothing here queries inside
    the documents.
    """

    __tablename__ = "saved_diagnosis"

    id: Mapped[str] = mapped_column(String(64), primary_key=True)
    delete_token_hash: Mapped[str] = mapped_column(String(64))
    kind: Mapped[str] = mapped_column(String(16))
    created_at: Mapped[datetime] = mapped_column(DateTime(timezone=True))
    computation_version: Mapped[str] = mapped_column(String(64))
    app_version: Mapped[str] = mapped_column(String(64))
    request: Mapped[dict[str, Any]] = mapped_column(JSON)
    result: Mapped[dict[str, Any]] = mapped_column(JSON)
    spectrum: Mapped[bytes | None] = mapped_column(LargeBinary)
    title: Mapped[str | None] = mapped_column(String(200))

    __table_args__ = (
        CheckConstraint(
            "kind IN ('diagnose', 'compare', 'fold', 'plan', 'audit', 'run-up')", name="kind"
        ),
        # For a retention job that removes old records; ids themselves are never listed.
        Index("ix_saved_diagnosis_created_at", "created_at"),
    )


class AuditJobRow(Base):
    """One audit submitted through the API: where its inputs are, how far it got, and the
    saved summary once it is done. Kept in the store so a restarted web process finds
    every job again (and resumes the ones it was running)."""

    __tablename__ = "audit_job"

    id: Mapped[str] = mapped_column(String(64), primary_key=True)
    status: Mapped[str] = mapped_column(String(16))
    created_at: Mapped[datetime] = mapped_column(DateTime(timezone=True))
    updated_at: Mapped[datetime] = mapped_column(DateTime(timezone=True))
    request: Mapped[dict[str, Any]] = mapped_column(JSON)
    done: Mapped[int] = mapped_column(Integer)
    total: Mapped[int] = mapped_column(Integer)
    errors: Mapped[int] = mapped_column(Integer)
    message: Mapped[str | None] = mapped_column(Text)
    summary: Mapped[dict[str, Any] | None] = mapped_column(JSON)
    saved_id: Mapped[str | None] = mapped_column(String(64))

    __table_args__ = (
        CheckConstraint(
            "status IN ('queued', 'running', 'done', 'failed', 'interrupted')", name="status"
        ),
        Index("ix_audit_job_status", "status"),
    )
