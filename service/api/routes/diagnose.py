"""POST /api/v1/diagnose and /api/v1/compare-rates: JSON bodies or multipart uploads."""

from __future__ import annotations

import json
from collections.abc import Callable
from typing import Any

from fastapi import APIRouter, Query, Request
from starlette.concurrency import run_in_threadpool

from ...contract.diagnose import CompareIn, CompareOut, DiagnoseIn, DiagnoseOut
from ...http.bodies import (
    body_openapi,
    is_multipart,
    parse_json_body,
    read_body,
    read_multipart,
    read_request_with_file,
)
from ...http.responses import FastJSON
from ...http.store_access import StoreAccess
from ...usecases.compare import compare_payload
from ...usecases.diagnose import diagnose_payload
from ...usecases.measure import Upload
from ...usecases.save import measured_spectra, saved_parts
from ..examples import COMPARE_EXAMPLES, DIAGNOSE_EXAMPLES

router = APIRouter(prefix="/api/v1", tags=["diagnose"])

_MULTIPART_DOC = {
    "multipart/form-data": {
        "schema": {
            "type": "object",
            "properties": {
                "file": {
                    "type": "string",
                    "format": "binary",
                    "description": "Spectrum text (CSV/TSV/whitespace) or a time "
                    "record (WAV, .npy, one-column text)",
                },
                "request": {
                    "type": "string",
                    "contentMediaType": "application/json",
                    "description": "The JSON request without spectrum/time_record; "
                    "`upload` says how to read the file",
                },
            },
            "required": ["file"],
            # The reader refuses any other form field.
            "additionalProperties": False,
        },
        "examples": {
            "spectrum_export": {
                "summary": "An analyser's spectrum export with several value columns",
                "description": "The header does not say which column is the amplitude, so "
                "`upload.amplitude_column` names it; the answer's summary says how the "
                "file was read (columns, frequency and amplitude units, linear or dB and "
                "why, dropped lines, the header block's metadata).",
                "value": {
                    "request": json.dumps(
                        {
                            "sample_rate_hz": 12800,
                            "upload": {"amplitude_column": "Ch1 (g)", "unit": "auto"},
                        }
                    )
                },
            },
            "npy_record": {
                "summary": "A .npy time record with the rate at the top level",
                "description": "The top-level `sample_rate_hz` serves an uploaded record; a "
                "WAV header or a time column that states another rate is a 422 "
                "(`code: rate_conflict`) naming both values.",
                "value": {"request": json.dumps({"sample_rate_hz": 12800})},
            },
        },
    }
}


def _doc(model: Any, examples: dict[str, Any], files: dict[str, Any]) -> dict[str, Any]:
    out = body_openapi(model, examples)
    content = out["requestBody"]["content"]
    content.update(files)
    return out


async def _answer(
    request: Request,
    kind: str,
    req: Any,
    compute: Callable[..., tuple[dict[str, Any], Any]],
    files: Any,
    save: bool,
    title: str | None,
) -> FastJSON:
    """Compute off the event loop; with ``save``, store the result and add its link."""
    settings = request.app.state.settings
    payload, measured = await run_in_threadpool(compute, req, settings, files)
    if save:
        # A diagnosis keeps its spectrum, a comparison one per capture.
        access: StoreAccess = request.app.state.store_access
        parts = saved_parts(kind, req, payload, **measured_spectra(kind, measured))
        payload["saved"] = await access.save(kind, parts, title)
    return FastJSON(payload)


@router.post(
    "/diagnose",
    response_model=DiagnoseOut,
    summary="Which peaks of a spectrum are aliases, of what, and how sure",
    description="Send a spectrum (frequency and amplitude arrays) or a time record as JSON, "
    "or upload a file as multipart/form-data (`file` plus a `request` JSON field). Each "
    "peak gets a verdict (alias, direct, family, mirror, unexplained), a confidence, the "
    "source and true frequency when known, one plain sentence, and the alternatives "
    "considered. With `?save=true` the result is also saved under a link.",
    openapi_extra=_doc(DiagnoseIn, DIAGNOSE_EXAMPLES, _MULTIPART_DOC),
)
async def diagnose(
    request: Request,
    save: bool = Query(False, description="Also save the result and return its link"),
    title: str | None = Query(None, max_length=200),
) -> FastJSON:
    settings = request.app.state.settings
    req, upload = await read_request_with_file(request, DiagnoseIn, settings)
    return await _answer(request, "diagnose", req, diagnose_payload, upload, save, title)


@router.post(
    "/compare-rates",
    response_model=CompareOut,
    summary="2 to 6 captures at different sample rates: which peaks stay, which move",
    description="The same signal captured at 2 to 6 sample rates. Peaks that stay put are "
    "real; peaks that move are aliases. Each group of matched peaks gets a verdict (real, "
    "alias, ambiguous, unmatched), its true frequency only when the captures make it "
    "unique, and the candidate table with its evidence; beyond the rates' unambiguous "
    "range the answer is 'ambiguous', with the period of the candidates and the sample "
    "rate that would settle it. JSON (`captures`, or `a` and `b`, each with a spectrum or "
    "time record and its rate), or multipart with files `file_0` ... `file_5` (or "
    "`file_a`, `file_b`) and a `request` JSON field.",
    openapi_extra=_doc(
        CompareIn,
        COMPARE_EXAMPLES,
        {
            "multipart/form-data": {
                "schema": {
                    "type": "object",
                    "properties": {
                        **{
                            f"file_{k}": {"type": "string", "format": "binary"}
                            for k in (*"ab", *"012345")
                        },
                        "request": {
                            "type": "string",
                            "contentMediaType": "application/json",
                            "description": "The JSON request: `captures` (or `a` and "
                            "`b`) without spectrum/time_record, one per file",
                        },
                    },
                    # The captures are listed in the request; the reader refuses any
                    # other form field.
                    "required": ["request"],
                    "additionalProperties": False,
                }
            }
        },
    ),
)
async def compare(
    request: Request,
    save: bool = Query(False, description="Also save the result and return its link"),
    title: str | None = Query(None, max_length=200),
) -> FastJSON:
    settings = request.app.state.settings
    uploads: dict[str, Upload] = {}
    if is_multipart(request):
        names = ("file_a", "file_b", *(f"file_{i}" for i in range(6)))
        raw, files = await read_multipart(request, names, settings.max_upload_bytes)
        # file_a/file_b feed the a/b form, file_<i> feeds captures[i].
        uploads = {(k[-1] if k[-1] in "ab" else f"captures[{k[-1]}]"): v for k, v in files.items()}
    else:
        raw = await read_body(request, settings.max_body_bytes)
    req = parse_json_body(CompareIn, raw)
    return await _answer(request, "compare", req, compare_payload, uploads, save, title)
