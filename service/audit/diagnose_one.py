"""The one place the audit calls the diagnosis use-case.

Everything else in the audit goes through :func:`diagnose_recording`, and the answer is
the API's own: the same contract model and the same use-case.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from pydantic import ValidationError

from ..config import Settings
from ..contract.diagnose import DiagnoseIn
from ..usecases.diagnose import diagnose_payload, is_aliased
from ..usecases.measure import Measured, Upload

__all__ = ["DiagnosisFailed", "diagnose_recording", "diagnose_recording_measured", "is_aliased"]


class DiagnosisFailed(Exception):
    """The recording could not be diagnosed; ``message`` says why, ``field`` where."""

    def __init__(self, message: str, field: str | None = None) -> None:
        super().__init__(message)
        self.message = message
        self.field = field


def diagnose_recording(
    path: str | Path, request: dict[str, Any], settings: Settings, data: bytes | None = None
) -> dict[str, Any]:
    """Diagnose one recording file with the same use-case as the API; the JSON answer
    (see :func:`diagnose_recording_measured`, which also gives the spectrum)."""
    return diagnose_recording_measured(path, request, settings, data)[0]


def diagnose_recording_measured(
    path: str | Path, request: dict[str, Any], settings: Settings, data: bytes | None = None
) -> tuple[dict[str, Any], Measured]:
    """Diagnose one recording file with the same use-case as the API: the JSON answer and
    the spectrum it was computed from.

    Parameters
    ----------
    path : path of the recording (its name decides the reader, as for an upload).
    request : the diagnose request without its data (as :func:`library.build_request`
        makes it); validated here exactly as the API validates a body.
    settings : the limits the API applies (file size, lines, samples, tones).
    data : the file's bytes, when the caller has already read them.

    Raises
    ------
    DiagnosisFailed
        For anything the API would answer with a problem (validation, unreadable file,
        limits), with the message a person can act on.
    """
    p = Path(path)
    if data is None:
        data = p.read_bytes()
    try:
        req = DiagnoseIn.model_validate(request)
    except ValidationError as exc:
        first = exc.errors()[0]
        where = ".".join(str(x) for x in first["loc"])
        raise DiagnosisFailed(f"{where}: {first['msg']}", where or None) from None
    try:
        payload, measured = diagnose_payload(req, settings, Upload(data=data, filename=p.name))
    except ValueError as exc:
        raise DiagnosisFailed(str(exc), getattr(exc, "field", None)) from None
    except Exception as exc:
        detail = getattr(exc, "detail", None)
        if detail is None:  # not a problem the API would report: a real bug, let it out
            raise
        raise DiagnosisFailed(str(detail), getattr(exc, "field", None)) from None
    return payload, measured
