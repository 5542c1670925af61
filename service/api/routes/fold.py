"""POST /api/v1/fold: where each known tone lands, and how strongly."""

from __future__ import annotations

from fastapi import APIRouter, Request, Response
from starlette.concurrency import run_in_threadpool

from ...config import Settings
from ...contract.fold import FoldIn, FoldOut
from ...http.bodies import body_openapi, parse_json_body, read_body
from ...http.responses import json_bytes
from ...usecases.fold import fold_payload
from ..examples import FOLD_EXAMPLES

router = APIRouter(prefix="/api/v1", tags=["predict"])


def _tone_count(req: FoldIn) -> int:
    n = len(req.tones or ())
    # Sources expand to a few dozen tones each at the defaults; a request with many
    # sources or explicit tone lists is treated as heavy.
    n += sum(40 if s.type != "tones" else len(s.freq_hz) for s in req.sources or ())
    return n


def _render(req: FoldIn, settings: Settings) -> bytes:
    return json_bytes(fold_payload(req, settings))


@router.post(
    "/fold",
    response_model=FoldOut,
    summary="Predict where each tone lands after the acquisition chain",
    description="Folds every tone (explicit or expanded from machine sources) through the "
    "chain: apparent frequency, Nyquist zone, inversion, attenuation per stage, predicted "
    "level, bin, and whether it lands in the band of interest; plus the aliases that land "
    "close enough to another line to mask it. An identical request is answered from a "
    "small cache (header `X-Foldwise-Cache: hit`).",
    openapi_extra=body_openapi(FoldIn, FOLD_EXAMPLES),
)
async def fold(request: Request) -> Response:
    # The hottest route: settings straight from the app, not through a dependency
    # (FastAPI's dependency solving costs more than the lookup).
    settings: Settings = request.app.state.settings
    raw = await read_body(request, settings.max_body_bytes)
    cache = request.app.state.fold_cache
    hit = cache.get(raw)
    if hit is not None:
        return Response(hit, media_type="application/json", headers={"X-Foldwise-Cache": "hit"})
    req = parse_json_body(FoldIn, raw)
    if _tone_count(req) <= settings.inline_tone_limit:
        # Small requests: cheaper than a hop to a worker thread.
        body = _render(req, settings)
    else:
        body = await run_in_threadpool(_render, req, settings)
    cache.put(raw, body)
    return Response(body, media_type="application/json", headers={"X-Foldwise-Cache": "miss"})
