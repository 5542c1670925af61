"""The audit use-case: a submitted audit's inputs checked, run, summarised and saved.

The API, the pages and the CLI go through here; the engine itself is
:func:`service.audit.run_audit`, the one diagnosis inside it
:mod:`service.audit.diagnose_one`. Paths in a request are relative to the configured
archive root and never leave it.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pyarrow.parquet as pq

from .. import COMPUTATION_VERSION
from ..audit import AuditSummary, read_library, read_manifest, run_audit
from ..audit.diagnose_one import DiagnosisFailed, diagnose_recording_measured
from ..config import Settings
from ..contract.audit import AuditIn
from ..contract.caution import CAUTION
from .errors import RequestError
from .save import SaveParts, saved_parts

__all__ = [
    "MAX_SAVED_RECORDINGS",
    "AuditInputs",
    "AuditsOff",
    "audit_inputs",
    "audit_out_dir",
    "audit_result",
    "audit_save_parts",
    "diagnose_row",
    "ranked",
    "recordings_page",
    "run_submitted",
]

#: Recordings kept in a saved summary (the riskiest first); the Parquet files hold all.
MAX_SAVED_RECORDINGS = 5_000

#: Summary columns a recording row carries in answers and the saved summary.
_ROW_FIELDS = (
    "row",
    "recording",
    "channel",
    "setup",
    "speed_rpm",
    "status",
    "error",
    "n_peaks",
    "n_aliased",
    "n_aliased_in_band",
    "n_unexplained",
    "strongest_alias_hz",
    "strongest_alias_db",
    "strongest_alias_source",
    "strongest_alias_true_hz",
    "nyquist_hz",
)


class AuditsOff(RequestError):
    """The server has no archive root: audits cannot be submitted through the API."""

    title = "Audits are not enabled on this server"
    kind = "audits-off"


class AuditInputs:
    """The resolved, checked paths of a submitted audit."""

    def __init__(self, manifest: Path, library: Path | None, folder: Path) -> None:
        self.manifest = manifest
        self.library = library
        self.folder = folder


def _inside(root: Path, rel: str, field: str, must: str) -> Path:
    if Path(rel).is_absolute() or ".." in Path(rel).parts or "\\" in rel or "\x00" in rel:
        raise RequestError(
            f"{field}={rel!r} must be a path relative to the archive root, without '..'",
            field=field,
            value=rel,
            limit="inside the archive root",
        )
    path = (root / rel).resolve()
    if not path.is_relative_to(root):  # a symbolic link pointing out
        raise RequestError(
            f"{field}={rel!r} leads outside the archive root",
            field=field,
            value=rel,
            limit="inside the archive root",
        )
    ok = path.is_file() if must == "file" else path.is_dir()
    if not ok:
        raise RequestError(
            f"{field}={rel!r}: no such {must} under the archive root; give a path relative to it",
            field=field,
            value=rel,
            status=422,
        )
    return path


def audit_inputs(req: AuditIn, settings: Settings) -> AuditInputs:
    """Resolve a request's paths inside the archive root and read the manifest and the
    library once, so that a wrong manifest is a 422 at submission, not a failed job."""
    if settings.audit_root is None:
        raise AuditsOff(
            "audits through the API are off: the server has no archive root; an operator "
            "sets FOLDWISE_AUDIT_ROOT to the folder that holds the archives",
            field="manifest",
            status=403,
            limit="FOLDWISE_AUDIT_ROOT",
        )
    root = Path(settings.audit_root).resolve()
    manifest = _inside(root, req.manifest, "manifest", "file")
    library = None if req.library is None else _inside(root, req.library, "library", "file")
    folder = manifest.parent if req.folder is None else _inside(root, req.folder, "folder", "dir")
    try:
        lib = read_library(library)
    except (OSError, ValueError) as exc:
        raise RequestError(f"library: {exc}", field="library", value=req.library) from None
    try:
        read_manifest(manifest, lib, folder)
    except (OSError, ValueError) as exc:
        raise RequestError(f"manifest: {exc}", field="manifest", value=req.manifest) from None
    return AuditInputs(manifest, library, folder)


def audit_out_dir(settings: Settings, job_id: str) -> Path:
    """Where a submitted audit writes its results (its part files make a resume cheap)."""
    return Path(settings.data_dir) / "audits" / job_id


def run_submitted(
    req: AuditIn,
    settings: Settings,
    job_id: str,
    on_progress: Callable[[int, int], None] | None = None,
) -> AuditSummary:
    """Run (or resume) a submitted audit on the configured cluster."""
    inputs = audit_inputs(req, settings)
    return run_audit(
        inputs.manifest,
        inputs.library,
        inputs.folder,
        audit_out_dir(settings, job_id),
        scheduler=settings.audit_scheduler or None,
        workers=settings.audit_workers,
        progress=False,
        settings=settings,
        on_progress=on_progress,
    )


def _clean(v: Any) -> Any:
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return v


def _risk(r: dict[str, Any]) -> tuple[float, int, int, int]:
    level = r.get("strongest_alias_db")
    return (
        -math.inf if level is None else float(level),
        int(r.get("n_aliased_in_band") or 0),
        int(r.get("n_aliased") or 0),
        1 if r.get("status") == "error" else 0,
    )


def ranked(rows: list[dict[str, Any]]) -> list[dict[str, Any]]:
    """Recordings by risk: strongest in-band alias level (dB), then in-band and all
    aliased peaks, then rows in error above clean ones; manifest order breaks ties."""
    rows = sorted(rows, key=lambda r: int(r["row"]))
    return sorted(rows, key=_risk, reverse=True)


def _read_rows(path: Path) -> list[dict[str, Any]]:
    table = pq.read_table(path, columns=list(_ROW_FIELDS))
    return [{k: _clean(v) for k, v in r.items()} for r in table.to_pylist()]


def _setups(rows: list[dict[str, Any]]) -> list[dict[str, Any]]:
    out: dict[str, dict[str, Any]] = {}
    for r in rows:
        s = out.setdefault(
            r["setup"],
            {
                "setup": r["setup"],
                "recordings": 0,
                "errors": 0,
                "with_alias_in_band": 0,
                "worst_alias_db": None,
                "levels_db": [],
            },
        )
        s["recordings"] += 1
        if r["status"] == "error":
            s["errors"] += 1
            continue
        if (r["n_aliased_in_band"] or 0) > 0:
            s["with_alias_in_band"] += 1
        level = r["strongest_alias_db"]
        if level is not None:
            s["levels_db"].append(level)
            s["worst_alias_db"] = max(level, s["worst_alias_db"] or -math.inf)
    return sorted(
        out.values(),
        key=lambda s: (
            -math.inf if s["worst_alias_db"] is None else s["worst_alias_db"],
            s["with_alias_in_band"],
        ),
        reverse=True,
    )


def audit_result(summary: AuditSummary, req: AuditIn, job_id: str) -> dict[str, Any]:
    """The saved summary of a finished audit: counts, setups by risk, recordings by risk
    (the :data:`MAX_SAVED_RECORDINGS` riskiest), and the caution."""
    rows = ranked(_read_rows(summary.recordings_path))
    return {
        "job_id": job_id,
        "title": req.title,
        "manifest": req.manifest,
        "counts": {
            "rows": summary.total,
            "diagnosed": summary.computed,
            "skipped": summary.skipped,
            "errors": summary.errors,
            "peaks": summary.peaks,
            "with_alias_in_band": sum(1 for r in rows if (r["n_aliased_in_band"] or 0) > 0),
        },
        "setups": _setups(rows),
        "recordings": rows[:MAX_SAVED_RECORDINGS],
        "recordings_total": len(rows),
        "computation_version": COMPUTATION_VERSION,
        "caution": CAUTION,
    }


def audit_save_parts(req: AuditIn, result: dict[str, Any]) -> SaveParts:
    """What the one save path stores for a finished audit."""
    return saved_parts("audit", req, result)


def recordings_page(path: Path, offset: int, limit: int) -> dict[str, Any]:
    """Recording summaries ranked by risk, ``limit`` from ``offset``."""
    rows = ranked(_read_rows(path))
    return {
        "total": len(rows),
        "offset": offset,
        "limit": limit,
        "items": rows[offset : offset + limit],
        "caution": CAUTION,
    }


def diagnose_row(
    req: AuditIn, row: int, settings: Settings
) -> tuple[dict[str, Any], tuple[Any, Any], dict[str, Any]]:
    """Diagnose one manifest row of a submitted audit on demand, with the API's use-case:
    the answer, the spectrum (Hz, linear amplitude) and the request it ran."""
    inputs = audit_inputs(req, settings)
    tasks = read_manifest(inputs.manifest, read_library(inputs.library), inputs.folder)
    if not 0 <= row < len(tasks):
        raise RequestError(
            f"row={row} is not in the manifest (rows 0 to {len(tasks) - 1})",
            field="row",
            value=row,
            limit=len(tasks) - 1,
            status=404,
        )
    task = tasks[row]
    if task.request is None:
        raise RequestError(task.error or "the row is wrong", field="row", value=row)
    try:
        payload, m = diagnose_recording_measured(task.path, task.request, settings)
    except OSError as exc:
        raise RequestError(
            f"{task.recording}: {exc.strerror or exc}", field="row", value=row
        ) from None
    except DiagnosisFailed as exc:
        raise RequestError(f"{task.recording}: {exc.message}", field="row", value=row) from None
    return payload, (m.freq_hz, m.amplitude), task.request
