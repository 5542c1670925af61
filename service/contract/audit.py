"""Audits submitted through the API: the request, the job's state, the result pages."""

from __future__ import annotations

from typing import Any, Literal

from pydantic import BaseModel, Field

from .common import StrictModel

__all__ = ["AuditIn", "AuditJobOut", "AuditRecordingsOut", "AuditSavedOut"]

_PATH_HELP = "relative to the server's archive root (FOLDWISE_AUDIT_ROOT); no '..', no '/'"


class AuditIn(StrictModel):
    """Where the archive is, on the server: every path is inside its archive root."""

    manifest: str = Field(
        min_length=1,
        max_length=1000,
        description=f"Manifest (CSV or Parquet), one row per recording and channel, {_PATH_HELP}",
    )
    library: str | None = Field(
        None,
        min_length=1,
        max_length=1000,
        description=f"JSON of named chains, source sets and options, {_PATH_HELP}",
    )
    folder: str | None = Field(
        None,
        min_length=1,
        max_length=1000,
        description=f"Folder the manifest's paths are relative to (default: the manifest's), "
        f"{_PATH_HELP}",
    )
    title: str | None = Field(None, max_length=200, description="A short title for the link")


class AuditSavedOut(BaseModel):
    """The saved summary of a finished audit (the delete token is never shown here)."""

    id: str
    url: str = Field(description="Page a colleague can open")
    api_url: str = Field(description="The saved summary in the JSON API")


class AuditJobOut(BaseModel):
    id: str = Field(description="Unguessable job id (192 random bits)")
    status: Literal["queued", "running", "done", "failed", "interrupted"] = Field(
        description="queued → running → done; failed says why in message; interrupted: the "
        "web process stopped and could not take the job up again (submit it again: rows "
        "already done are skipped)"
    )
    done: int = Field(description="Manifest rows finished (diagnosed, skipped or in error)")
    total: int = Field(description="Manifest rows in all (0 until the audit starts)")
    errors: int = Field(description="Rows that could not be diagnosed (each says why)")
    message: str | None = Field(None, description="Why a job failed, or what it is doing")
    created_at: str
    updated_at: str
    url: str = Field(description="The job's page")
    recordings_url: str = Field(description="Recording summaries, ranked, as paged JSON")
    peaks_url: str = Field(description="Every peak as a Parquet file (once done)")
    recordings_csv_url: str = Field(description="Recording summaries as CSV (once done)")
    saved: AuditSavedOut | None = Field(None, description="The saved summary, once done")
    summary: dict[str, Any] | None = Field(
        None, description="Counts of the finished audit: rows, diagnosed, skipped, errors, peaks"
    )
    caution: str


class AuditRecordingsOut(BaseModel):
    total: int = Field(description="Recording rows in all")
    offset: int
    limit: int
    items: list[dict[str, Any]] = Field(
        description="Recording summaries ranked by risk: strongest in-band alias level, "
        "aliased peaks, then rows in error (columns as service/audit/rows.py names them)"
    )
    caution: str
