"""Typed input errors: what is wrong, where, and what would make it right.

Every layer raises :class:`InputError` (the core, the readers, the use-cases) so that the
edges never parse prose: the API turns one into ``application/problem+json`` with the
field, value, limit and code; a page puts the message beside the field; the CLI prints it
and exits with status 2. It subclasses ``ValueError`` so numeric code that catches
``ValueError`` keeps working.
"""

from __future__ import annotations

import math
from typing import Any

__all__ = ["InputError", "plain"]


def plain(value: Any) -> Any:
    """A value as a person would write it: numpy scalars become Python numbers.

    ``np.float64(62.5)`` prints as ``62.5`` and whole floats as integers
    (``12800.0`` -> ``12800``), so messages never show a library's repr.
    """
    item = getattr(value, "item", None)
    if callable(item) and getattr(value, "ndim", None) == 0:
        value = item()
    if isinstance(value, float) and math.isfinite(value) and value.is_integer():
        if abs(value) < 1e15:
            return int(value)
    return value


class InputError(ValueError):
    """An input the computation cannot honour.

    Parameters
    ----------
    message : str
        A sentence a person can act on; it names the parameter and the bad value.
    field : str, optional
        The path of the offending input as the caller wrote it (``sample_rate_hz``,
        ``tones[3].freq_hz``, ``file``). Outer layers may re-root it with :meth:`under`.
    value : object, optional
        The offending value (numbers are stored plain, see :func:`plain`).
    limit : object, optional
        The limit the value broke, where there is one.
    code : str
        A stable machine-readable reason (``not_positive``, ``above_limit``,
        ``ambiguous_columns`` ...). Rewording ``message`` never changes it.
    remedy : str, optional
        What to do about it, when that is not obvious from the message.
    status : int
        The HTTP status an API adapter should answer with (422 by default; 400 for
        unreadable bodies, 413 for sizes).
    """

    def __init__(
        self,
        message: str,
        *,
        field: str | None = None,
        value: Any = None,
        limit: Any = None,
        code: str = "invalid",
        remedy: str | None = None,
        status: int = 422,
    ) -> None:
        super().__init__(message)
        self.message = message
        self.field = field
        self.value = plain(value)
        self.limit = plain(limit)
        self.code = code
        self.remedy = remedy
        self.status = status

    def under(self, prefix: str) -> InputError:
        """Re-root the field path under ``prefix`` (``sources[2]`` + ``rpm``)."""
        if not prefix:
            return self
        if self.field is None:
            self.field = prefix
        elif self.field.startswith("["):
            self.field = prefix + self.field
        else:
            self.field = f"{prefix}.{self.field}"
        return self

    def __str__(self) -> str:
        return self.message if not self.remedy else f"{self.message}. {self.remedy}"
