"""The run-up page: upload a record (or run the invented demo) and read its map.

The form's fields are the contract's (:class:`~service.contract.runup.RunUpRecordIn` and its
``upload``), their hints the models' descriptions; the answer is the API's
(:func:`~service.usecases.runup.runup_payload`) and the figures come from its display
payload (:mod:`service.web.runup_figures`), so a saved result redraws unchanged.
"""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter, Request
from fastapi.responses import HTMLResponse
from pydantic import ValidationError
from starlette.concurrency import run_in_threadpool
from starlette.datastructures import UploadFile

from ..config import Settings
from ..contract.runup import RunUpRecordIn, RunUpUploadIn
from ..http.problems import ANSWERABLE, Problem, as_problem
from ..usecases.measure import Upload
from ..usecases.runup import demo_recording, demo_request, runup_payload
from ..usecases.save import saved_parts
from .diagnose_pages import error_page, save_result
from .rendering import render
from .runup_figures import runup_map_figure, runup_order_figure

__all__ = ["router", "runup_result_context"]

router = APIRouter(tags=["pages"], include_in_schema=False)

#: The form's fields: (name, label, model, model field). Hints come from the model.
_FIELDS = (
    ("vibration_channel", "Vibration channel", RunUpUploadIn, "vibration_channel"),
    ("tacho_channel", "Tacho channel", RunUpUploadIn, "tacho_channel"),
    ("pulses_per_rev", "Pulses per revolution", RunUpRecordIn, "pulses_per_rev"),
    ("sample_rate_hz", "Sample rate, Hz", RunUpUploadIn, "sample_rate_hz"),
    ("nperseg", "Frame length, samples", RunUpRecordIn, "nperseg"),
)
FORM_FIELDS = [
    {"name": n, "label": label, "hint": model.model_fields[f].description or ""}
    for n, label, model, f in _FIELDS
]


def runup_result_context(out: dict[str, Any]) -> dict[str, Any]:
    """What the result partial needs: the answer and its two figures."""
    return {
        "out": out,
        "map_fig": runup_map_figure(out),
        "order_fig": runup_order_figure(out) if out["display"]["order_spectrum"]["order"] else None,
        "aliased": [ln for ln in out["lines"] if ln["aliased"]],
    }


def _channel(text: str) -> int | str | None:
    text = text.strip()
    if not text:
        return None
    return int(text) if text.isdigit() else text


def _request_from_form(form: dict[str, str]) -> dict[str, Any]:
    upload: dict[str, Any] = {}
    for key in ("vibration_channel", "tacho_channel"):
        ch = _channel(form.get(key, ""))
        if ch is not None:
            upload[key] = ch
    body: dict[str, Any] = {"upload": upload}
    rate = form.get("sample_rate_hz", "").strip()
    if rate:
        upload["sample_rate_hz"] = rate
    for key in ("pulses_per_rev", "nperseg"):
        if form.get(key, "").strip():
            body[key] = form[key].strip()
    return body


def _page(
    request: Request,
    values: dict[str, str],
    result: dict[str, Any] | None = None,
    errors: list[str] | None = None,
    saved: dict[str, str] | None = None,
    demo: bool = False,
    status: int = 200,
) -> HTMLResponse:
    ctx = {
        "active": "run-up",
        "fields": FORM_FIELDS,
        "values": values,
        "result": result,
        "errors": errors or [],
        "saved": saved,
        "demo": demo,
    }
    return render(request, "runup.html", ctx, status_code=status)


def _demo(settings: Settings) -> tuple[RunUpRecordIn, dict[str, Any]]:
    req = demo_request()
    return req, runup_payload(req, settings, recording=demo_recording())


@router.get("/run-up", response_class=HTMLResponse)
async def runup_form(request: Request, demo: str | None = None) -> HTMLResponse:
    if demo in (None, "", "0"):
        return _page(request, {"vibration_channel": "0", "tacho_channel": "1"})
    settings: Settings = request.app.state.settings
    _, out = await run_in_threadpool(_demo, settings)
    return _page(request, {}, runup_result_context(out), demo=True)


@router.post("/run-up", response_class=HTMLResponse)
async def runup_submit(request: Request) -> HTMLResponse:
    settings: Settings = request.app.state.settings
    try:
        data = await request.form(
            max_files=1, max_fields=12, max_part_size=settings.max_upload_bytes
        )
    except Exception as exc:  # malformed or oversized form
        return error_page(request, Problem(400, f"the form cannot be read: {exc}"))
    try:
        values = {k: v for k, v in data.items() if isinstance(v, str)}
        file = data.get("file")
        name = file.filename if isinstance(file, UploadFile) else None
        raw = await file.read(settings.max_upload_bytes + 1) if name else b""
    finally:
        await data.close()  # the spooled upload file
    if not name or not isinstance(file, UploadFile):
        return _page(request, values, errors=["Choose a file to upload."], status=422)
    if len(raw) > settings.max_upload_bytes:
        return _page(
            request,
            values,
            errors=[f"The file is larger than {settings.max_upload_bytes} bytes."],
            status=413,
        )
    try:
        req = RunUpRecordIn.model_validate(_request_from_form(values))
    except ValidationError as exc:
        msgs = [f"{'.'.join(str(p) for p in e['loc'][-1:])}: {e['msg']}" for e in exc.errors()]
        return _page(request, values, errors=msgs, status=422)
    upload = Upload(raw, name)
    try:
        out = await run_in_threadpool(runup_payload, req, settings, upload)
        saved = None
        if values.get("save"):
            title = values.get("title", "").strip()[:200] or None
            saved = await save_result(request, "run-up", saved_parts("run-up", req, out), title)
    except ANSWERABLE as exc:
        p = as_problem(exc)
        where = f" ({p.field})" if p.field else ""
        return _page(request, values, errors=[f"{p.detail}{where}"], status=p.status)
    return _page(request, values, runup_result_context(out), saved=saved)


@router.post("/run-up/demo/share", response_class=HTMLResponse)
async def runup_demo_share(request: Request) -> HTMLResponse:
    """Save the demo's result under a link (the demo is generated again: it is fixed)."""
    settings: Settings = request.app.state.settings
    try:
        req, out = await run_in_threadpool(_demo, settings)
        saved = await save_result(request, "run-up", saved_parts("run-up", req, out), "Demo run-up")
    except ANSWERABLE as exc:
        return error_page(request, as_problem(exc))
    return render(request, "shared.html", {"active": "", "saved": saved, "kind": "run-up"})
