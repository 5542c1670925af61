"""What each kind of result needs to be saved: its request model and how to compute it.

A saved result is stored with the request that produced it and the computation version,
and is rendered from what was stored — never recomputed — so a link shows the same
verdicts after a restart or an upgrade, and says what computed them.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np
from fastapi.exceptions import RequestValidationError
from pydantic import BaseModel, ValidationError

from ..config import Settings
from .compute import fold_payload
from .diagnose_schemas import CompareIn, DiagnoseIn
from .diagnosis import compare_payload, diagnose_payload
from .plan_compute import plan_payload
from .plan_schemas import PlanIn
from .schemas import FoldIn

__all__ = ["SAVEABLE", "SaveParts", "validate_for_kind"]


@dataclass(frozen=True)
class SaveParts:
    request: dict[str, Any]
    result: dict[str, Any]
    spectrum: tuple[np.ndarray, np.ndarray] | None = None


def _fold(req: BaseModel, settings: Settings) -> SaveParts:
    assert isinstance(req, FoldIn)
    return SaveParts(
        request=req.model_dump(mode="json", exclude_none=True),
        result=fold_payload(req, settings),
    )


def _diagnose(req: BaseModel, settings: Settings) -> SaveParts:
    assert isinstance(req, DiagnoseIn)
    payload, m = diagnose_payload(req, settings)
    return SaveParts(
        request=req.model_dump(mode="json", exclude_none=True, exclude={"spectrum", "time_record"}),
        result=payload,
        spectrum=(m.freq_hz, m.amplitude),
    )


def _compare(req: BaseModel, settings: Settings) -> SaveParts:
    assert isinstance(req, CompareIn)
    payload, _ = compare_payload(req, settings)
    side = {"spectrum", "time_record"}
    return SaveParts(
        request=req.model_dump(mode="json", exclude_none=True, exclude={"a": side, "b": side}),
        result=payload,
    )


def _plan(req: BaseModel, settings: Settings) -> SaveParts:
    assert isinstance(req, PlanIn)
    return SaveParts(
        request=req.model_dump(mode="json", exclude_none=True),
        result=plan_payload(req, settings),
    )


#: kind → (request model, compute-and-split function). Other kinds register here.
SAVEABLE: dict[str, tuple[type[BaseModel], Callable[[BaseModel, Settings], SaveParts]]] = {
    "fold": (FoldIn, _fold),
    "diagnose": (DiagnoseIn, _diagnose),
    "compare": (CompareIn, _compare),
    "plan": (PlanIn, _plan),
}


def validate_for_kind(kind: str, request: dict[str, Any]) -> BaseModel:
    """Validate ``request`` against the model of ``kind``; errors point into ``request``."""
    model, _ = SAVEABLE[kind]
    try:
        return model.model_validate(request)
    except ValidationError as exc:
        errors = []
        for e in exc.errors():
            e = dict(e)
            e["loc"] = ("body", "request", *e["loc"])
            errors.append(e)
        raise RequestValidationError(errors) from None
