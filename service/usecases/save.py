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
from pydantic import BaseModel, ValidationError

from .. import COMPUTATION_VERSION
from ..config import Settings
from ..contract.diagnose import CompareIn, DiagnoseIn
from ..contract.fold import FoldIn
from ..contract.plan import PlanIn
from ..contract.runup import RunUpRecordIn
from .compare import compare_payload
from .diagnose import diagnose_payload
from .errors import RequestError
from .fold import fold_payload
from .plan import plan_payload
from .runup import runup_payload

__all__ = [
    "SAVEABLE",
    "InvalidSavedRequest",
    "SaveParts",
    "measured_spectra",
    "saved_link",
    "saved_parts",
    "saved_record",
    "stored_request",
    "validate_for_kind",
]

#: Inputs that are stored as the spectrum (packed) rather than in the request JSON.
_SIDE = {"spectrum", "time_record"}


@dataclass(frozen=True)
class SaveParts:
    request: dict[str, Any]
    result: dict[str, Any]
    spectrum: tuple[np.ndarray, np.ndarray] | None = None
    #: A comparison's spectra, one per capture (stored instead of ``spectrum``).
    spectra: list[tuple[np.ndarray, np.ndarray]] | None = None


def stored_request(kind: str, req: BaseModel) -> dict[str, Any]:
    """The request as it is stored: measured arrays are kept apart (packed spectrum)."""
    exclude: Any = None
    if kind == "diagnose":
        exclude = _SIDE
    elif kind == "compare":
        exclude = {"a": _SIDE, "b": _SIDE, "captures": {"__all__": _SIDE}}
    elif kind == "run-up":
        exclude = {"vibration", "tacho"}  # the record is not kept; its display payload is
    dumped: dict[str, Any] = req.model_dump(mode="json", exclude_none=True, exclude=exclude)
    return dumped


def saved_parts(
    kind: str,
    req: BaseModel,
    result: dict[str, Any],
    spectrum: tuple[np.ndarray, np.ndarray] | None = None,
    spectra: list[tuple[np.ndarray, np.ndarray]] | None = None,
) -> SaveParts:
    """What is stored for a result already computed (``?save=true``, a page's form)."""
    return SaveParts(
        request=stored_request(kind, req), result=result, spectrum=spectrum, spectra=spectra
    )


def measured_spectra(kind: str, measured: Any) -> dict[str, Any]:
    """The spectra a result keeps: a diagnosis its one spectrum, a comparison one per
    capture (enough to redraw its page)."""
    if kind == "diagnose":
        return {"spectrum": (measured.freq_hz, measured.amplitude)}
    if kind == "compare":
        return {"spectra": [(m.freq_hz, m.amplitude) for m in measured]}
    return {}


def saved_link(rid: str, token: str) -> dict[str, str]:
    """The one link shape of every saved kind: id, delete token, page and API paths."""
    return {
        "id": rid,
        "delete_token": token,
        "url": f"/d/{rid}",
        "api_url": f"/api/v1/diagnoses/{rid}",
    }


def _fold(req: BaseModel, settings: Settings) -> SaveParts:
    assert isinstance(req, FoldIn)
    return saved_parts("fold", req, fold_payload(req, settings))


def _diagnose(req: BaseModel, settings: Settings) -> SaveParts:
    assert isinstance(req, DiagnoseIn)
    payload, m = diagnose_payload(req, settings)
    return saved_parts("diagnose", req, payload, (m.freq_hz, m.amplitude))


def _compare(req: BaseModel, settings: Settings) -> SaveParts:
    assert isinstance(req, CompareIn)
    payload, measured = compare_payload(req, settings)
    return saved_parts("compare", req, payload, **measured_spectra("compare", measured))


def _plan(req: BaseModel, settings: Settings) -> SaveParts:
    assert isinstance(req, PlanIn)
    return saved_parts("plan", req, plan_payload(req, settings))


def _runup(req: BaseModel, settings: Settings) -> SaveParts:
    assert isinstance(req, RunUpRecordIn)
    return saved_parts("run-up", req, runup_payload(req, settings))


#: kind → (request model, compute-and-split function). Other kinds register here.
SAVEABLE: dict[str, tuple[type[BaseModel], Callable[[BaseModel, Settings], SaveParts]]] = {
    "fold": (FoldIn, _fold),
    "diagnose": (DiagnoseIn, _diagnose),
    "compare": (CompareIn, _compare),
    "plan": (PlanIn, _plan),
    "run-up": (RunUpRecordIn, _runup),
}


class InvalidSavedRequest(RequestError):
    """The inner request of a save does not fit its kind; ``errors`` are pydantic's,
    with locations rooted at ``request``."""

    def __init__(self, errors: list[dict[str, Any]]) -> None:
        super().__init__("the request does not fit its kind", field="request")
        self.errors = errors


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
        raise InvalidSavedRequest(errors) from None


def saved_record(rec: Any, include_spectrum: bool = True) -> dict[str, Any]:
    """A stored record as the API answers it (the measured spectrum as lists)."""
    spectrum = None
    spectra = None
    if include_spectrum and rec.spectrum is not None:
        f, a = rec.spectrum
        spectrum = {"freq_hz": f.tolist(), "amplitude": a.tolist()}
    if include_spectrum and len(getattr(rec, "spectra", ())) > 1:
        spectra = [{"freq_hz": f.tolist(), "amplitude": a.tolist()} for f, a in rec.spectra]
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
        "spectra": spectra,
    }
