"""The use-cases' errors: :class:`InputError` placed on a request field.

A use-case never answers HTTP: it raises :class:`RequestError` (an
:class:`~service.core.errors.InputError` whose ``field`` is the request's path, such as
``sources[2]`` or ``spectrum.amplitude``), and the edges render it — a problem+json, a
message beside a form field, or a CLI line and exit status.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import Any

from ..core.errors import InputError

__all__ = ["InputError", "PlanImpossibleError", "RequestError", "input_errors"]


class RequestError(InputError):
    """An input error whose ``field`` already names the request field.

    ``title`` and ``kind`` refine the problem type an API adapter answers with; the
    default comes from ``status``.
    """

    title: str | None = None
    kind: str | None = None

    def __init__(self, message: str, *, status: int = 422, **kw: Any) -> None:
        super().__init__(message, status=status, **kw)
        # Values keep the type they were given: answers show them as before.
        self.value = kw.get("value")
        self.limit = kw.get("limit")

    @property
    def detail(self) -> str:
        return str(self)

    @classmethod
    def placed(cls, exc: InputError, field: str | None, status: int = 422) -> RequestError:
        """``exc`` with its own code, remedy, value, limit and status (413 for sizes)
        on the request field ``field``; ``status`` stands for a plain 422."""
        return cls(
            exc.message,
            field=field,
            status=exc.status if exc.status != 422 else status,
            code=exc.code,
            remedy=exc.remedy,
            value=exc.value,
            limit=exc.limit,
        )


class PlanImpossibleError(RequestError):
    """No offered setup meets the plan's requirements; ``suggestions`` say what would."""

    title = "No setup meets the requirements"
    kind = "plan-impossible"

    def __init__(self, message: str, suggestions: list[str], *, field: str) -> None:
        super().__init__(message, field=field, code="plan_impossible")
        self.suggestions = suggestions


@contextmanager
def input_errors(
    field: str | None = None,
    status: int = 422,
    *,
    under: str | None = None,
    rename: Callable[[InputError], str] | None = None,
) -> Iterator[None]:
    """A ``ValueError`` from the core or the readers becomes a :class:`RequestError`;
    errors already placed on a request field pass unchanged.

    Parameters
    ----------
    field : str, optional
        The request field to blame, in place of whatever the core named.
    status : int
        The status of the answer.
    under : str, optional
        Instead of ``field``: keep the core's own field and re-root it under this request
        path with :meth:`InputError.under` (``sources[2]`` + ``rpm`` ->
        ``sources[2].rpm``; ``""`` keeps it at the top level). The core's value and limit
        travel with it.
    rename : callable, optional
        Maps the core's error to the request's name of its field first (``stages[1]`` ->
        ``chain[1]``); called only when the core names a field.
    """
    try:
        yield
    except RequestError:
        raise
    except InputError as exc:
        # The field is placed on the request; code, remedy, value, limit travel on.
        if under is None:
            raise RequestError.placed(exc, field, status) from exc
        if exc.field is not None and rename is not None:
            exc.field = rename(exc)
        exc.under(under)
        raise RequestError.placed(exc, exc.field or field, status) from exc
    except ValueError as exc:
        raise RequestError(str(exc), field=field, status=status, code="invalid") from exc
