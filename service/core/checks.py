"""Argument checks shared by the whole core.

Every check raises :class:`service.core.errors.InputError` with ``field`` set to the
parameter name exactly as the message starts (``sample_rate_hz=-5 must be > 0`` →
``field="sample_rate_hz"``), the offending ``value``, the ``limit`` it broke and a stable
``code``. Messages print numbers as Python writes them: numpy scalars are unwrapped first,
so a message shows ``62.5``, never ``np.float64(62.5)``.

Codes
-----
``not_a_number``, ``not_finite``, ``not_positive``, ``below_limit``, ``above_limit``,
``out_of_range``, ``not_integer``, ``not_allowed`` (not one of a fixed set), ``empty``,
``too_many``, ``mismatched_lengths``, ``bad_shape``, ``not_increasing``, ``conflict``
(two inputs that exclude each other), ``missing`` (a required input absent),
``not_found``, ``ambiguous``, ``too_large`` (work beyond what the machine can do).
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .errors import InputError

__all__ = [
    "bad",
    "check_band_hz",
    "check_finite",
    "check_finite_array",
    "check_freqs",
    "check_int",
    "check_one_of",
    "check_positive",
    "check_range",
    "refuse_first",
    "show",
]

FloatArray = NDArray[np.float64]


def show(value: object, cut: int | None = None) -> str:
    """``repr`` of a value for a message, numpy scalars unwrapped, optionally cut.

    Parameters
    ----------
    value : object
        Any value.
    cut : int, optional
        Longest text kept; longer text ends in ``...``.
    """
    if isinstance(value, np.generic):
        value = value.item()
    text = repr(value)
    if cut is not None and len(text) > cut:
        text = text[: cut - 3] + "..."
    return text


def bad(
    message: str,
    field: str | None,
    code: str,
    *,
    value: Any = None,
    limit: Any = None,
) -> InputError:
    """An :class:`InputError` for ``field``, to be raised by the caller."""
    return InputError(message, field=field, value=value, limit=limit, code=code)


def refuse_first(
    where: NDArray[np.bool_],
    values: NDArray[np.float64],
    name: str,
    says: str,
    code: str,
    *,
    limit: float | None = None,
) -> None:
    """Raise for the first element where ``where`` holds: ``name[i]=value says``.

    Raises
    ------
    InputError
        ``code``, field ``name[i]``, the element's value and ``limit``.
    """
    if where.any():
        i = int(np.argmax(where))
        v = float(values[i])
        raise bad(f"{name}[{i}]={v!r} {says}", f"{name}[{i}]", code, value=v, limit=limit)


def _is_number(value: object) -> bool:
    return not isinstance(value, bool) and isinstance(value, int | float | np.integer | np.floating)


def check_finite(value: object, name: str, *, cut: int | None = None) -> float:
    """``value`` as a finite float.

    Raises
    ------
    InputError
        ``not_a_number`` (``{name}=... must be a number``) or ``not_finite``
        (``{name}=... must be a finite number``).
    """
    if not _is_number(value):
        raise bad(f"{name}={show(value, cut)} must be a number", name, "not_a_number", value=value)
    v = float(value)  # type: ignore[arg-type]
    if not math.isfinite(v):
        raise bad(f"{name}={show(value, cut)} must be a finite number", name, "not_finite", value=v)
    return v


def check_positive(
    value: object,
    name: str,
    upper: float | None = None,
    *,
    unit: str = "",
    upper_words: str = "<=",
    separate: bool = False,
    cut: int | None = None,
) -> float:
    """``value`` as a finite float > 0 (and <= ``upper`` when given).

    Parameters
    ----------
    value : object
        The input.
    name : str
        Parameter name, as the message starts.
    upper : float, optional
        Largest value allowed (same unit as ``value``).
    unit : str
        Unit text appended to the ``> 0`` clause (``" Hz"``).
    upper_words : str
        How the upper bound is worded (``"<="`` or ``"at most"``).
    separate : bool
        Report a non-finite value as ``must be a finite number`` and a value <= 0 as
        ``must be > 0`` (instead of one ``must be a finite number > 0``).
    cut : int, optional
        Longest shown value text.

    Raises
    ------
    InputError
        Codes ``not_a_number``, ``not_finite``, ``not_positive``, ``above_limit``.
    """
    if separate:
        v = check_finite(value, name, cut=cut)
        if v <= 0:
            raise bad(
                f"{name}={show(value, cut)} must be > 0{unit}",
                name,
                "not_positive",
                value=v,
                limit=0,
            )
    else:
        if not _is_number(value):
            raise bad(
                f"{name}={show(value, cut)} must be a number", name, "not_a_number", value=value
            )
        v = float(value)  # type: ignore[arg-type]
        if not math.isfinite(v) or v <= 0:
            code = "not_finite" if not math.isfinite(v) else "not_positive"
            raise bad(
                f"{name}={show(value, cut)} must be a finite number > 0{unit}",
                name,
                code,
                value=v,
                limit=0,
            )
    if upper is not None and v > upper:
        raise bad(
            f"{name}={show(value, cut)} must be {upper_words} {upper:g}",
            name,
            "above_limit",
            value=v,
            limit=upper,
        )
    return v


def check_range(
    value: object, name: str, low: float, high: float, *, unit: str = "", text: str = ""
) -> float:
    """``value`` as a finite float in ``[low, high]``.

    ``text`` replaces the default ``between {low:g} and {high:g}{unit}`` clause.

    Raises
    ------
    InputError
        ``not_a_number``, ``not_finite``, ``below_limit`` or ``above_limit``.
    """
    clause = text or f"between {low:g} and {high:g}{unit}"
    if not _is_number(value):
        raise bad(f"{name}={show(value)} must be {clause}", name, "not_a_number", value=value)
    v = float(value)  # type: ignore[arg-type]
    if not math.isfinite(v):
        raise bad(f"{name}={show(value)} must be {clause}", name, "not_finite", value=v)
    if v < low:
        raise bad(f"{name}={show(value)} must be {clause}", name, "below_limit", value=v, limit=low)
    if v > high:
        raise bad(
            f"{name}={show(value)} must be {clause}", name, "above_limit", value=v, limit=high
        )
    return v


def check_int(
    value: object,
    name: str,
    low: int,
    high: int,
    *,
    word: str = "an integer",
    integral_floats: bool = False,
    one_message: bool = False,
    type_text: str | None = None,
    cut: int | None = None,
) -> int:
    """``value`` as an int in ``[low, high]``.

    Parameters
    ----------
    word : str
        ``"an integer"`` or ``"a whole number"``, as the message says it.
    integral_floats : bool
        Accept floats with an integral value (``4.0``).
    one_message : bool
        Use ``must be {word} between {low} and {high}`` for range errors too
        (otherwise ``must be between {low} and {high}``).
    type_text : str, optional
        Message clause for a non-integer (default ``{word} between {low} and {high}``).

    Raises
    ------
    InputError
        ``not_integer``, ``below_limit`` or ``above_limit``.
    """
    full = f"{name}={show(value, cut)} must be {word} between {low} and {high}"
    type_msg = full if type_text is None else f"{name}={show(value, cut)} must be {type_text}"
    if not _is_number(value):
        raise bad(type_msg, name, "not_integer", value=value)
    if isinstance(value, float | np.floating):
        x = float(value)
        if not integral_floats or not math.isfinite(x) or x != round(x):
            raise bad(type_msg, name, "not_integer", value=value)
    v = int(value)  # type: ignore[call-overload]
    if not low <= v <= high:
        msg = full if one_message else f"{name}={show(value, cut)} must be between {low} and {high}"
        code = "below_limit" if v < low else "above_limit"
        raise bad(msg, name, code, value=v, limit=low if v < low else high)
    return v


def check_one_of(value: object, name: str, allowed: list[str] | tuple[str, ...]) -> str:
    """``value`` lower-cased, when it is one of ``allowed`` (code ``not_allowed``)."""
    if not isinstance(value, str) or value.lower() not in allowed:
        raise bad(
            f"{name}={show(value)} must be one of {', '.join(allowed)}",
            name,
            "not_allowed",
            value=value,
            limit=list(allowed),
        )
    return value.lower()


def check_freqs(freq_hz: ArrayLike, name: str = "freq_hz") -> FloatArray:
    """Frequencies as a float array, every one finite and >= 0 Hz.

    Raises
    ------
    InputError
        ``not_finite`` or ``below_limit``.
    """
    f = np.asarray(freq_hz, dtype=np.float64)
    finite = np.isfinite(f)
    if not finite.all():
        b = float(f[~finite].ravel()[0])
        raise bad(
            f"{name} contains {b!r}; every frequency must be finite", name, "not_finite", value=b
        )
    if (f < 0).any():
        b = float(f[f < 0].ravel()[0])
        raise bad(
            f"{name} contains {b!r}; frequencies must be >= 0 Hz",
            name,
            "below_limit",
            value=b,
            limit=0,
        )
    return f


def check_finite_array(values: ArrayLike, name: str, min_len: int = 1) -> FloatArray:
    """A 1-D float array of at least ``min_len`` finite values.

    Raises
    ------
    InputError
        ``bad_shape``, ``empty`` (too few values) or ``not_finite`` (field
        ``{name}[i]``).
    """
    a = np.asarray(values, dtype=np.float64)
    if a.ndim != 1:
        raise bad(f"{name} must be 1-D; got shape {a.shape}", name, "bad_shape")
    if a.size < min_len:
        raise bad(
            f"{name} has {a.size} values; at least {min_len} are needed",
            name,
            "empty",
            value=a.size,
            limit=min_len,
        )
    not_ok = ~np.isfinite(a)
    if np.any(not_ok):
        i = int(np.argmax(not_ok))
        raise bad(
            f"{name}[{i}]={float(a[i])!r}; every value must be finite",
            f"{name}[{i}]",
            "not_finite",
            value=float(a[i]),
        )
    return a


def check_band_hz(
    band_hz: tuple[float, float] | None, default: tuple[float, float]
) -> tuple[float, float]:
    """A band of interest ``(low, high)`` in Hz with ``0 <= low < high``, or ``default``.

    Raises
    ------
    InputError
        ``bad_type`` (not two numbers) or ``out_of_range`` (not finite, negative or empty),
        field ``band_hz``.
    """
    if band_hz is None:
        return default
    try:
        lo, hi = (float(v) for v in band_hz)
    except (TypeError, ValueError):
        raise bad(
            f"band_hz={show(band_hz)} must be two numbers (low, high) in Hz",
            "band_hz",
            "bad_type",
            value=band_hz,
        ) from None
    if not (math.isfinite(lo) and math.isfinite(hi)) or lo < 0 or hi <= lo:
        raise bad(
            f"band_hz={[lo, hi]!r} must be two finite numbers with 0 <= low < high",
            "band_hz",
            "out_of_range",
            value=[lo, hi],
        )
    return (lo, hi)
