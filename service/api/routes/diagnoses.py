"""Saved results: create, read by link, delete with the token given at creation."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Header, Query, Request, Response
from starlette.concurrency import run_in_threadpool

from ... import COMPUTATION_VERSION
from ...contract.saved import SavedOut, SavedRecordOut, SaveIn
from ...http.deps import SettingsDep
from ...http.problems import Problem
from ...http.responses import FastJSON
from ...http.store_access import StoreAccess
from ...usecases.save import SAVEABLE, saved_record, validate_for_kind
from ..examples import SAVE_EXAMPLES

router = APIRouter(prefix="/api/v1/diagnoses", tags=["saved results"])


def _access(request: Request) -> StoreAccess:
    access: StoreAccess = request.app.state.store_access
    return access


@router.post(
    "",
    status_code=201,
    response_model=SavedOut,
    response_class=FastJSON,
    summary="Compute and save a result under a link",
    responses={
        201: {"description": "Saved; the delete token is shown this once"},
        503: {"description": "The database does not answer"},
    },
)
async def save(
    body: Annotated[SaveIn, SAVE_EXAMPLES], request: Request, settings: SettingsDep
) -> FastJSON:
    if body.kind not in SAVEABLE:
        raise Problem(422, f"kind={body.kind!r} cannot be saved yet", field="kind")
    req = validate_for_kind(body.kind, body.request)
    _, compute = SAVEABLE[body.kind]
    parts = await run_in_threadpool(compute, req, settings)
    link = await _access(request).save(body.kind, parts, body.title)
    out = {
        **link,
        "kind": body.kind,
        "computation_version": COMPUTATION_VERSION,
        "result": parts.result,
    }
    return FastJSON(out, status_code=201, headers={"Location": link["api_url"]})


def _not_found(rid: str) -> Problem:
    return Problem(404, f"no saved result with id {rid!r}", field="id", value=rid)


@router.get(
    "/{rid}",
    response_model=SavedRecordOut,
    response_class=FastJSON,
    summary="Read a saved result",
)
async def read(
    rid: str,
    request: Request,
    spectrum: Annotated[bool, Query(description="Include the measured spectrum")] = True,
) -> FastJSON:
    access = _access(request)
    rec = await access.call(access.store.get, rid)
    if rec is None:
        raise _not_found(rid)
    return FastJSON(saved_record(rec, include_spectrum=spectrum))


@router.delete(
    "/{rid}",
    status_code=204,
    response_class=Response,
    summary="Delete a saved result with the token given when it was saved",
)
async def delete(
    rid: str,
    request: Request,
    x_delete_token: Annotated[str, Header(description="The delete token", max_length=256)],
) -> Response:
    access = _access(request)
    outcome = await access.call(access.store.delete, rid, x_delete_token)
    if outcome == "not_found":
        raise _not_found(rid)
    if outcome == "forbidden":
        raise Problem(
            403, "the delete token does not match this saved result", field="X-Delete-Token"
        )
    return Response(status_code=204)
