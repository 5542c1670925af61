"""The audit pages: a submitted audit's recordings ranked by risk, grouped by setup, and
each recording's full diagnosis on demand.

``/audits/{id}`` shows the job's progress until it is done, then its saved summary (the
same page a saved link ``/d/{id}`` of kind "audit" opens). ``/audits/{id}/recordings/{row}``
diagnoses that manifest row with the API's use-case and shows the diagnose result.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from fastapi import APIRouter, Request
from fastapi.responses import HTMLResponse
from starlette.concurrency import run_in_threadpool

from ..contract.audit import AuditIn
from ..http.problems import ANSWERABLE, as_problem
from ..http.store_access import StoreAccess
from ..usecases.audit import diagnose_row
from .audit_figures import alias_levels_by_setup
from .diagnose_pages import diagnose_result_context, error_page
from .rendering import render

__all__ = ["ROWS_PER_SETUP", "audit_context", "router"]

router = APIRouter(include_in_schema=False)

#: Recordings listed per setup on the page; the JSON API and the CSV list every one.
ROWS_PER_SETUP = 200


def audit_context(result: Mapping[str, Any]) -> dict[str, Any]:
    """What the audit page shows of a saved audit summary."""
    groups: dict[str, list[dict[str, Any]]] = {s["setup"]: [] for s in result["setups"]}
    for r in result["recordings"]:  # already ranked by risk
        groups.setdefault(r["setup"], []).append(r)
    setups = [
        {
            **s,
            "rows": groups[s["setup"]][:ROWS_PER_SETUP],
            "more": max(0, len(groups[s["setup"]]) - ROWS_PER_SETUP),
        }
        for s in result["setups"]
    ]
    return {
        "audit": result,
        "setups": setups,
        "job_id": result.get("job_id"),
        "levels_fig": alias_levels_by_setup(result),
    }


def _not_found(request: Request, what: str, ident: str) -> HTMLResponse:
    return render(
        request,
        "not_found.html",
        {"active": "", "what": what, "record_id": ident},
        status_code=404,
    )


@router.get("/audits/{job_id}", response_class=HTMLResponse)
async def audit_page(request: Request, job_id: str) -> HTMLResponse:
    access: StoreAccess = request.app.state.store_access
    try:
        job = await access.call(access.store.get_job, job_id)
        record = None
        if job is not None and job.saved_id:
            record = await access.call(access.store.get, job.saved_id)
    except ANSWERABLE as exc:
        return error_page(request, as_problem(exc))
    if job is None:
        return _not_found(request, "audit", job_id)
    ctx: dict[str, Any] = {"active": "", "job": job, "record": record}
    if record is not None:
        ctx.update(audit_context(record.result))
    response = render(request, "audit.html", ctx)
    if job.status in ("queued", "running"):
        response.headers["Refresh"] = "5"
    return response


def _diagnose(job_request: dict[str, Any], row: int, settings: Any) -> dict[str, Any]:
    req = AuditIn.model_validate(job_request)
    payload, spectrum, request_dict = diagnose_row(req, row, settings)
    return diagnose_result_context(payload, spectrum, request_dict)


@router.get("/audits/{job_id}/recordings/{row}", response_class=HTMLResponse)
async def audit_recording(request: Request, job_id: str, row: int) -> HTMLResponse:
    access: StoreAccess = request.app.state.store_access
    try:
        job = await access.call(access.store.get_job, job_id)
        if job is None:
            return _not_found(request, "audit", job_id)
        diag = await run_in_threadpool(_diagnose, job.request, row, request.app.state.settings)
    except ANSWERABLE as exc:
        return error_page(request, as_problem(exc))
    ctx = {"active": "", "job": job, "row": row, "diag": diag}
    return render(request, "audit_recording.html", ctx)
