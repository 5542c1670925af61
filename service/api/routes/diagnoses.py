"""Saved results: create, read by link, delete with the token given at creation."""

from __future__ import annotations

from typing import Annotated, Any, Literal

from fastapi import APIRouter, Header, Query, Request, Response
from pydantic import BaseModel, ConfigDict, Field
from starlette.concurrency import run_in_threadpool

from ... import COMPUTATION_VERSION, __version__
from ..deps import SettingsDep
from ..examples import SAVE_EXAMPLES
from ..problems import Problem
from ..responses import FastJSON
from ..saving import SAVEABLE, validate_for_kind
from ..store_access import StoreAccess

router = APIRouter(prefix="/api/v1/diagnoses", tags=["saved results"])


class SaveIn(BaseModel):
    model_config = ConfigDict(extra="forbid")

    kind: Literal["fold", "diagnose", "compare", "plan"] = Field(
        description="Which computation: the request is what that endpoint takes"
    )
    request: dict[str, Any] = Field(description="The request body of that endpoint")
    title: str | None = Field(None, max_length=200, description="A short title for the link")


class SavedOut(BaseModel):
    id: str = Field(description="Unguessable id (192 random bits)")
    delete_token: str = Field(description="Keep this: it is the only way to delete the result")
    url: str = Field(description="Page a colleague can open")
    api_url: str
    kind: str
    computation_version: str
    result: dict[str, Any]


class SavedRecordOut(BaseModel):
    id: str
    kind: str
    title: str | None
    created_at: str
    computation_version: str = Field(description="Version of the computation that made it")
    app_version: str
    current_computation_version: str
    request: dict[str, Any]
    result: dict[str, Any]
    spectrum: dict[str, list[float]] | None = Field(
        None, description="The measured spectrum, if the result has one (freq_hz, amplitude)"
    )


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
    access = _access(request)
    try:
        rid, token = await access.call(
            access.store.create,
            body.kind,
            parts.request,
            parts.result,
            COMPUTATION_VERSION,
            __version__,
            spectrum=parts.spectrum,
            title=body.title,
        )
    except ValueError as exc:
        raise Problem(413, str(exc), field="request") from exc
    out = {
        "id": rid,
        "delete_token": token,
        "url": f"/d/{rid}",
        "api_url": f"/api/v1/diagnoses/{rid}",
        "kind": body.kind,
        "computation_version": COMPUTATION_VERSION,
        "result": parts.result,
    }
    return FastJSON(out, status_code=201, headers={"Location": f"/api/v1/diagnoses/{rid}"})


def record_to_dict(rec: Any, include_spectrum: bool = True) -> dict[str, Any]:
    spectrum = None
    if include_spectrum and rec.spectrum is not None:
        f, a = rec.spectrum
        spectrum = {"freq_hz": f.tolist(), "amplitude": a.tolist()}
    return {
        "id": rec.id,
        "kind": rec.kind,
        "title": rec.title,
        "created_at": rec.created_at.isoformat(),
        "computation_version": rec.computation_version,
        "app_version": rec.app_version,
        "current_computation_version": COMPUTATION_VERSION,
        "request": rec.request,
        "result": rec.result,
        "spectrum": spectrum,
    }


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
    return FastJSON(record_to_dict(rec, include_spectrum=spectrum))


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
