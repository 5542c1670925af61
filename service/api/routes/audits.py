"""Audits of a server-side archive: submit, poll, read the results."""

from __future__ import annotations

import csv
import io
from pathlib import Path
from typing import Annotated, Any

from fastapi import APIRouter, Query, Request
from fastapi.responses import FileResponse, Response
from starlette.concurrency import run_in_threadpool

from ...contract.audit import AuditIn, AuditJobOut, AuditRecordingsOut
from ...contract.caution import CAUTION
from ...http.audit_jobs import AuditRunner
from ...http.deps import SettingsDep
from ...http.problems import Problem
from ...http.responses import FastJSON
from ...http.store_access import StoreAccess
from ...storage import AuditJob
from ...usecases.audit import audit_inputs, audit_out_dir, recordings_page

router = APIRouter(prefix="/api/v1/audits", tags=["audits"])

_PROBLEMS: dict[int | str, dict[str, Any]] = {
    403: {"description": "Audits are off: the server has no archive root"},
    404: {"description": "No audit with this id"},
    409: {"description": "The audit has not finished: its results are not written yet"},
    503: {"description": "The queue is full or the database does not answer (Retry-After)"},
}


_JOB_EXAMPLE: dict[str, Any] = {
    "id": "q3V9sYy2cXo0m4y5QeC1o6tKz8bN2wJ1",
    "status": "running",
    "done": 120,
    "total": 303,
    "errors": 0,
    "message": None,
    "created_at": "2026-12-04T18:00:00+00:00",
    "updated_at": "2026-12-04T18:00:09+00:00",
    "url": "/audits/q3V9sYy2cXo0m4y5QeC1o6tKz8bN2wJ1",
    "recordings_url": "/api/v1/audits/q3V9sYy2cXo0m4y5QeC1o6tKz8bN2wJ1/recordings",
    "peaks_url": "/api/v1/audits/q3V9sYy2cXo0m4y5QeC1o6tKz8bN2wJ1/peaks.parquet",
    "recordings_csv_url": "/api/v1/audits/q3V9sYy2cXo0m4y5QeC1o6tKz8bN2wJ1/recordings.csv",
    "saved": None,
    "summary": None,
    "caution": CAUTION,
}
_RECORDINGS_EXAMPLE: dict[str, Any] = {
    "total": 303,
    "offset": 0,
    "limit": 1,
    "items": [
        {
            "row": 1,
            "recording": "rec/00001-eol-12k8-sliced.npy",
            "channel": 0,
            "setup": "eol-12k8-sliced",
            "speed_rpm": 9000.0,
            "status": "ok",
            "error": None,
            "n_peaks": 14,
            "n_aliased": 6,
            "n_aliased_in_band": 4,
            "n_unexplained": 1,
            "strongest_alias_hz": 2800.0,
            "strongest_alias_db": -12.4,
            "strongest_alias_source": "inverter",
            "strongest_alias_true_hz": 10000.0,
            "nyquist_hz": 3200.0,
        }
    ],
    "caution": CAUTION,
}


def _example(status: int, description: str, example: dict[str, Any]) -> dict[int | str, Any]:
    return {
        status: {"description": description, "content": {"application/json": {"example": example}}}
    }


def _access(request: Request) -> StoreAccess:
    access: StoreAccess = request.app.state.store_access
    return access


def _runner(request: Request) -> AuditRunner:
    runner: AuditRunner = request.app.state.audit_runner
    return runner


def job_out(job: AuditJob) -> dict[str, Any]:
    """A job as the API answers it (:class:`AuditJobOut`)."""
    base = f"/api/v1/audits/{job.id}"
    saved = None
    if job.saved_id:
        saved = {
            "id": job.saved_id,
            "url": f"/d/{job.saved_id}",
            "api_url": f"/api/v1/diagnoses/{job.saved_id}",
        }
    return {
        "id": job.id,
        "status": job.status,
        "done": job.done,
        "total": job.total,
        "errors": job.errors,
        "message": job.message,
        "created_at": job.created_at.isoformat(),
        "updated_at": job.updated_at.isoformat(),
        "url": f"/audits/{job.id}",
        "recordings_url": f"{base}/recordings",
        "peaks_url": f"{base}/peaks.parquet",
        "recordings_csv_url": f"{base}/recordings.csv",
        "saved": saved,
        "summary": job.summary,
        "caution": CAUTION,
    }


async def _job(request: Request, job_id: str) -> AuditJob:
    access = _access(request)
    job = await access.call(access.store.get_job, job_id)
    if job is None:
        raise Problem(404, f"no audit with id {job_id!r}", field="id", value=job_id)
    return job


async def _finished_file(request: Request, job_id: str, name: str) -> Path:
    job = await _job(request, job_id)
    path = audit_out_dir(request.app.state.settings, job.id) / name
    if job.status != "done" or not path.is_file():
        raise Problem(
            409,
            f"the audit is {job.status}: its results are written when it is done; poll "
            f"/api/v1/audits/{job.id} until status is 'done'",
            field="id",
            value=job_id,
        )
    return path


@router.post(
    "",
    status_code=202,
    response_model=AuditJobOut,
    response_class=FastJSON,
    summary="Submit an audit of an archive on the server",
    responses={**_example(202, "Queued; poll the job's URL", _JOB_EXAMPLE), **_PROBLEMS},
)
async def submit(body: AuditIn, request: Request, settings: SettingsDep) -> FastJSON:
    await run_in_threadpool(audit_inputs, body, settings)
    runner = _runner(request)
    if runner.full():
        raise runner.busy_problem()
    access = _access(request)
    job_id = await access.call(access.store.create_job, body.model_dump(mode="json"))
    try:
        runner.enqueue(job_id)
    except Problem:
        await access.call(
            access.store.update_job,
            job_id,
            status="interrupted",
            message="the queue was full when the audit was submitted; submit it again",
        )
        raise
    job = await _job(request, job_id)
    return FastJSON(job_out(job), status_code=202, headers={"Location": f"/api/v1/audits/{job_id}"})


@router.get(
    "/{job_id}",
    response_model=AuditJobOut,
    response_class=FastJSON,
    summary="An audit's status and progress",
    responses={**_example(200, "The job", _JOB_EXAMPLE), **_PROBLEMS},
)
async def status(job_id: str, request: Request) -> FastJSON:
    return FastJSON(job_out(await _job(request, job_id)))


@router.get(
    "/{job_id}/recordings",
    response_model=AuditRecordingsOut,
    response_class=FastJSON,
    summary="Recording summaries of a finished audit, ranked by risk",
    responses={**_example(200, "A page of recordings", _RECORDINGS_EXAMPLE), **_PROBLEMS},
)
async def recordings(
    job_id: str,
    request: Request,
    offset: Annotated[int, Query(ge=0, le=10_000_000)] = 0,
    limit: Annotated[int, Query(ge=1, le=1000)] = 100,
) -> FastJSON:
    path = await _finished_file(request, job_id, "recordings.parquet")
    return FastJSON(await run_in_threadpool(recordings_page, path, offset, limit))


@router.get(
    "/{job_id}/peaks.parquet",
    summary="Every peak of a finished audit (Parquet)",
    response_class=FileResponse,
    responses={200: {"content": {"application/vnd.apache.parquet": {}}}, **_PROBLEMS},
)
async def peaks_parquet(job_id: str, request: Request) -> Response:
    path = await _finished_file(request, job_id, "peaks.parquet")
    return FileResponse(
        path, media_type="application/vnd.apache.parquet", filename=f"audit-{job_id}-peaks.parquet"
    )


def _csv(path: Path) -> bytes:
    rows = recordings_page(path, 0, 10**9)["items"]
    buf = io.StringIO()
    if rows:
        w = csv.DictWriter(buf, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)
    return buf.getvalue().encode()


@router.get(
    "/{job_id}/recordings.csv",
    summary="Recording summaries of a finished audit, ranked by risk (CSV)",
    response_class=Response,
    responses={200: {"content": {"text/csv": {}}}, **_PROBLEMS},
)
async def recordings_csv(job_id: str, request: Request) -> Response:
    path = await _finished_file(request, job_id, "recordings.parquet")
    data = await run_in_threadpool(_csv, path)
    return Response(
        data,
        media_type="text/csv; charset=utf-8",
        headers={"Content-Disposition": f'attachment; filename="audit-{job_id}-recordings.csv"'},
    )
