"""POST /api/v1/plan: the cheapest sample rate and anti-alias filter, and the run-up."""

from __future__ import annotations

from fastapi import APIRouter, Request, Response
from starlette.concurrency import run_in_threadpool

from ...config import Settings
from ...contract.plan import PlanIn, PlanOut
from ...http.bodies import body_openapi, parse_json_body, read_body
from ...http.deps import SettingsDep
from ...http.problems import PROBLEM_JSON
from ...http.responses import json_bytes
from ...usecases.plan import plan_payload
from ..examples import PLAN_EXAMPLES

router = APIRouter(prefix="/api/v1", tags=["plan"])


def _render(req: PlanIn, settings: Settings) -> bytes:
    return json_bytes(plan_payload(req, settings))


@router.post(
    "/plan",
    response_model=PlanOut,
    summary="Plan an acquisition: sample rate, anti-alias filter, lines and record length",
    description="Searches the candidate sample rates and anti-alias filters, cheapest "
    "first (lowest rate, then fewest poles, then the plainest family), for a setup that "
    "keeps every tone's alias out of the band of interest or below the required level "
    "over the whole speed range; then picks the analysis lines that meet the resolution. "
    "Reports each tone's worst alias, why every cheaper option fails and what risk "
    "remains; with `runup`, every line's apparent frequency along the speed range, its "
    "fold lines and the speeds where an alias crosses a line of interest. When no offered "
    "setup works the answer is a 422 problem whose `suggestions` say what would.",
    openapi_extra=body_openapi(PlanIn, PLAN_EXAMPLES),
    responses={
        422: {
            "description": "Invalid input, or no offered setup meets the requirements "
            "(type urn:foldwise:problem:plan-impossible, with `suggestions`)",
            "content": {PROBLEM_JSON: {}},
        }
    },
)
async def plan(request: Request, settings: SettingsDep) -> Response:
    raw = await read_body(request, settings.max_body_bytes)
    req = parse_json_body(PlanIn, raw)
    body = await run_in_threadpool(_render, req, settings)
    return Response(body, media_type="application/json")
