"""POST /api/v1/run-up: a run-up record (JSON arrays or a multipart upload) analysed."""

from __future__ import annotations

from fastapi import APIRouter, Query, Request
from starlette.concurrency import run_in_threadpool

from ...contract.runup import RunUpRecordIn, RunUpRecordOut
from ...http.bodies import body_openapi, read_request_with_file
from ...http.responses import FastJSON
from ...http.store_access import StoreAccess
from ...usecases.runup import runup_payload
from ...usecases.save import saved_parts
from ..examples import RUNUP_EXAMPLES

router = APIRouter(prefix="/api/v1", tags=["run-up"])

_DOC = body_openapi(RunUpRecordIn, RUNUP_EXAMPLES)
_DOC["requestBody"]["content"]["multipart/form-data"] = {
    "schema": {
        "type": "object",
        "properties": {
            "file": {
                "type": "string",
                "format": "binary",
                "description": "The record: multi-channel WAV, .npy of shape (N, C) or "
                "(C, N), or CSV with one named column per channel",
            },
            "request": {
                "type": "string",
                "description": "The JSON request without vibration/tacho; `upload` names "
                "the vibration and tacho channels",
            },
        },
        "required": ["file"],
    }
}


@router.post(
    "/run-up",
    response_model=RunUpRecordOut,
    summary="A run-up record: which lines of the frequency × speed map are folded",
    description="Send the vibration samples with a tacho channel (and its pulses per "
    "revolution) or the controller's speed trace, and the acquisition chain, as JSON; or "
    "upload a multi-channel file as multipart/form-data (`file` plus a `request` JSON "
    "field whose `upload` names the channels). Each line of the map is classified as a "
    "real order, a folded order (zones, inverted or not, speed ranges), a fixed-frequency "
    "alias, a sideband, a resonance or unexplained, with a confidence and one sentence; "
    "the answer carries the chain's predicted folded lines, the order spectrum and a "
    "display payload bounded for any record size. With `?save=true` the result is also "
    "saved under a link.",
    openapi_extra=_DOC,
)
async def run_up(
    request: Request,
    save: bool = Query(False, description="Also save the result and return its link"),
    title: str | None = Query(None, max_length=200),
) -> FastJSON:
    settings = request.app.state.settings
    req, upload = await read_request_with_file(request, RunUpRecordIn, settings)
    payload = await run_in_threadpool(runup_payload, req, settings, upload)
    if save:
        access: StoreAccess = request.app.state.store_access
        payload["saved"] = await access.save("run-up", saved_parts("run-up", req, payload), title)
    return FastJSON(payload)
