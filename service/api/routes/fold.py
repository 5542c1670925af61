"""POST /api/v1/fold: where each known tone lands, and how strongly."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Body
from starlette.concurrency import run_in_threadpool

from ..compute import fold_payload
from ..deps import SettingsDep
from ..examples import FOLD_EXAMPLES
from ..responses import FastJSON
from ..schemas import FoldIn, FoldOut

router = APIRouter(prefix="/api/v1", tags=["predict"])


def _tone_count(req: FoldIn) -> int:
    n = len(req.tones or ())
    # Sources expand to a few dozen tones each at the defaults; a request with many
    # sources or explicit tone lists is treated as heavy.
    n += sum(40 if s.type != "tones" else len(s.freq_hz) for s in req.sources or ())
    return n


@router.post(
    "/fold",
    response_model=FoldOut,
    response_class=FastJSON,
    summary="Predict where each tone lands after the acquisition chain",
    description="Folds every tone (explicit or expanded from machine sources) through the "
    "chain: apparent frequency, Nyquist zone, inversion, attenuation per stage, predicted "
    "level, bin, and whether it lands in the band of interest; plus the aliases that land "
    "close enough to another line to mask it.",
)
async def fold(
    req: Annotated[FoldIn, Body(openapi_examples=FOLD_EXAMPLES)], settings: SettingsDep
) -> FastJSON:
    if _tone_count(req) <= settings.inline_tone_limit:
        # Small requests: a few hundred microseconds of numpy, cheaper than a thread hop.
        return FastJSON(fold_payload(req, settings))
    return FastJSON(await run_in_threadpool(fold_payload, req, settings))
