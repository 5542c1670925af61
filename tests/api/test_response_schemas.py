"""Every endpoint's real answers against its published response model.

Routes send pre-serialised bytes (orjson) for speed, so FastAPI never checks them against
``response_model``; this does. The answers are those of the golden requests (every
endpoint, several shapes each). An answer fits when the model accepts it and writing the
model back gives the same JSON: no undocumented key, no missing key, no coerced value.
"""

from __future__ import annotations

import json
import re
from pathlib import Path
from typing import Any

import pytest
from fastapi.testclient import TestClient
from pydantic import BaseModel

from service.app import create_app
from service.contract.diagnose import CompareOut, DiagnoseOut
from service.contract.fold import FoldOut
from service.contract.plan import PlanOut
from service.contract.saved import SavedOut, SavedRecordOut

from .golden.cases import run_cases
from .golden.settings import golden_settings


@pytest.fixture(scope="module")
def answered(tmp_path_factory: pytest.TempPathFactory) -> tuple[Any, dict[str, Any]]:
    app = create_app(golden_settings(Path(tmp_path_factory.mktemp("schemas"))))
    with TestClient(app) as c:
        return app, run_cases(c)


#: The published result models, by the name the OpenAPI document gives them.
MODELS: dict[str, type[BaseModel]] = {
    m.__name__: m for m in (FoldOut, DiagnoseOut, CompareOut, PlanOut, SavedOut, SavedRecordOut)
}


def _model_for(app: Any, method: str, url: str, status: int) -> type[BaseModel] | None:
    """The model the OpenAPI document publishes for this answer (None: no JSON model)."""
    path = url.split("?")[0]
    for template, ops in app.openapi()["paths"].items():
        if re.fullmatch(re.sub(r"\{[^}]+\}", "[^/]+", template), path):
            response = ops[method.lower()]["responses"][str(status)]
            schema = response.get("content", {}).get("application/json", {}).get("schema", {})
            ref = schema.get("$ref")
            return MODELS[ref.rsplit("/", 1)[-1]] if ref else None
    raise AssertionError(f"no published path for {method} {path}")


def fits(model: type[BaseModel], body: str) -> list[str]:
    """What in ``body`` the model does not describe (empty: it fits)."""
    sent = json.loads(body)
    back = model.model_validate_json(body).model_dump(mode="json")
    return _differences(sent, back, "")


def _differences(sent: Any, back: Any, where: str) -> list[str]:
    if isinstance(sent, dict) and isinstance(back, dict):
        out = [f"{where}.{k}: not in the schema" for k in sent.keys() - back.keys()]
        # An optional member may be left out (the schema does not require it).
        missing = [k for k in back.keys() - sent.keys() if back[k] is not None]
        out += [f"{where}.{k}: in the schema, not sent" for k in missing]
        for k in sent.keys() & back.keys():
            out += _differences(sent[k], back[k], f"{where}.{k}")
        return out
    if isinstance(sent, list) and isinstance(back, list) and len(sent) == len(back):
        return [
            d
            for i, (a, b) in enumerate(zip(sent, back, strict=True))
            for d in _differences(a, b, f"{where}[{i}]")
        ]
    if sent != back or (type(sent) is bool and type(back) is not bool):
        return [f"{where}: sent {sent!r}, the schema gives {back!r}"]
    return []


ROUTED = (
    "/api/v1/fold",
    "/api/v1/diagnose",
    "/api/v1/compare-rates",
    "/api/v1/plan",
    "/api/v1/diagnoses",
)


def test_basic(answered: tuple[Any, dict[str, Any]]) -> None:
    app, answers = answered
    checked: dict[str, int] = {}
    bad = []
    for name, a in answers.items():
        method, url = a["request"].split(" ", 1)
        if not (200 <= a["status"] < 300) or not a["body"]:
            continue
        model = _model_for(app, method, url, a["status"])
        if model is None:
            continue
        checked[
            f"{method} {url.split('?')[0].rsplit('/', 1)[0] if '<id' in url else url.split('?')[0]}"
        ] = 1
        bad += [f"{name}: {d}" for d in fits(model, a["body"])]
    assert not bad, "answers that do not fit their published schema:\n" + "\n".join(bad)
    # Every answering endpoint was checked at least once.
    for path in ROUTED:
        assert any(path in k for k in checked), path
    assert any(k.startswith("GET /api/v1/diagnoses") for k in checked)


def test_errors() -> None:
    # The check can fail: an undocumented key and a wrong type are both reported.
    body = {
        "nyquist_hz": 5000.0,
        "sample_rate_hz": 10000.0,
        "final_rate_hz": 10000.0,
        "band_hz": [0.0, 3906.25],
        "lines": 3200,
        "bin_width_hz": 1.22,
        "speed_tolerance_pct": 0.0,
        "stages": [],
        "notes": [],
        "tones": [],
        "collisions": [],
        "collisions_total": 0,
        "computation_version": "x",
    }
    assert fits(FoldOut, json.dumps(body)) == []
    assert fits(FoldOut, json.dumps({**body, "surprise": 1})) == [".surprise: not in the schema"]
    with pytest.raises(ValueError):
        fits(FoldOut, json.dumps({**body, "lines": "many"}))
