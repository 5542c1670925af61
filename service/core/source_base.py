"""What every machine source shares: limits, argument checks, speed units and the
plumbing that turns one source's arrays into a :class:`~service.core.tones.ToneSet`.

Speeds are in Hz inside the core (:func:`speed_to_hz` converts rpm and cpm). Amplitudes
are linear, in the user's unit; NaN where unknown.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import Any, ClassVar

import numpy as np
from numpy.typing import ArrayLike, NDArray

from service.core.errors import InputError
from service.core.tones import ToneSet

__all__ = [
    "MAX_BLADES",
    "MAX_ELEMENTS",
    "MAX_EXPLICIT_TONES",
    "MAX_HARMONICS",
    "MAX_LABEL_CHARS",
    "MAX_ORDER",
    "MAX_ORDERS",
    "MAX_POLE_PAIRS",
    "MAX_SIDEBANDS",
    "MAX_TEETH",
    "MAX_TONES_PER_SOURCE",
    "MINUS",
    "SPEED_UNITS",
    "Expandable",
    "as_float",
    "as_sequence",
    "check_amplitude",
    "check_amplitudes",
    "check_label",
    "check_one_amplitude_form",
    "family_amplitudes",
    "fmt_number",
    "object_array",
    "settle_amplitudes",
    "short_repr",
    "speed_to_hz",
]

FloatArray = NDArray[np.float64]


MAX_HARMONICS = 100


MAX_SIDEBANDS = 50


MAX_ORDERS = 200


MAX_ORDER = 1000.0


MAX_EXPLICIT_TONES = 100_000


MAX_TONES_PER_SOURCE = 100_000


MAX_TEETH = 10_000


MAX_BLADES = 1_000


MAX_ELEMENTS = 1_000


MAX_POLE_PAIRS = 1_000


MAX_LABEL_CHARS = 200


SPEED_UNITS: dict[str, float] = {"hz": 1.0, "rpm": 1.0 / 60.0, "cpm": 1.0 / 60.0}


MINUS = "\u2212"  # a real minus sign in labels: "carrier 1× − 2·f1"


def short_repr(value: object) -> str:
    """Short repr for messages: numpy scalars as plain numbers, long values cut."""
    if isinstance(value, np.generic):
        value = value.item()
    text = repr(value)
    return text if len(text) <= 80 else text[:77] + "..."


def check_label(value: object, name: str = "label") -> str:
    """A non-empty label of at most ``MAX_LABEL_CHARS`` characters."""
    if not isinstance(value, str) or not value.strip():
        raise InputError(
            f"{name}={short_repr(value)} must be a non-empty string",
            field=name,
            code="empty",
            value=value,
        )
    if len(value) > MAX_LABEL_CHARS:
        raise InputError(
            f"{name} has {len(value)} characters; must be at most {MAX_LABEL_CHARS}",
            field=name,
            code="above_limit",
        )
    return value


def as_float(value: object, name: str) -> float:
    """A number (not bool, not text) as float (code ``not_a_number``)."""
    if isinstance(value, bool) or not isinstance(value, int | float | np.integer | np.floating):
        raise InputError(
            f"{name}={short_repr(value)} must be a number", field=name, code="bad_type", value=value
        )
    return float(value)


def check_amplitude(value: object, name: str = "amplitude") -> float | None:
    """A linear amplitude >= 0, or None (unknown; NaN also means unknown)."""
    if value is None:
        return None
    x = as_float(value, name)
    if math.isnan(x):
        return None
    if not math.isfinite(x) or x < 0:
        raise InputError(
            f"{name}={short_repr(value)} must be a finite number >= 0 (or omitted)",
            field=name,
            code="below_limit",
            value=value,
        )
    return x


def check_amplitudes(
    values: object, name: str, max_len: int, exact: bool = False
) -> tuple[float, ...] | None:
    """A tuple of linear amplitudes >= 0 (NaN = unknown), or None."""
    if values is None:
        return None
    seq = as_sequence(values, name)
    if exact and len(seq) != max_len:
        raise InputError(
            f"{name} has {len(seq)} entries; expected {max_len}",
            field=name,
            code="mismatched_lengths",
        )
    if len(seq) > max_len:
        raise InputError(
            f"{name} has {len(seq)} entries; must be at most {max_len}",
            field=name,
            code="above_limit",
        )
    out = tuple(as_float(v, f"{name}[{i}]") for i, v in enumerate(seq))
    arr = np.asarray(out, dtype=np.float64)
    bad = np.flatnonzero(np.isinf(arr) | (arr < 0))
    if bad.size:
        i = int(bad[0])
        raise InputError(
            f"{name}[{i}]={out[i]!r} must be a finite number >= 0 (or NaN)",
            field=f"{name}[{i}]",
            code="below_limit",
            value=out[i],
        )
    return out


def settle_amplitudes(source: Any, lines: int) -> None:
    """Check and store a frozen source's ``amplitude`` and ``harmonic_amplitudes`` (at most
    ``lines`` of them), refusing both together: the one check every family source runs."""
    amplitude = check_amplitude(source.amplitude)
    object.__setattr__(source, "amplitude", amplitude)
    check_one_amplitude_form(amplitude, source.harmonic_amplitudes)
    harmonic = check_amplitudes(source.harmonic_amplitudes, "harmonic_amplitudes", lines)
    object.__setattr__(source, "harmonic_amplitudes", harmonic)


def check_one_amplitude_form(amplitude: float | None, harmonic_amplitudes: object) -> None:
    """Refuse ``amplitude`` and ``harmonic_amplitudes`` together."""
    if amplitude is not None and harmonic_amplitudes is not None:
        raise InputError(
            "give either amplitude (of the main line) or harmonic_amplitudes (one per "
            "line of the family), not both",
            field="harmonic_amplitudes",
            code="conflict",
        )


def as_sequence(values: object, name: str) -> list[Any]:
    """A list or array of values (not text, not a mapping) as a list."""
    if isinstance(values, str | bytes | Mapping) or not isinstance(values, Sequence | np.ndarray):
        raise InputError(
            f"{name}={short_repr(values)} must be a list of values",
            field=name,
            code="bad_type",
            value=values,
        )
    return list(values)


def fmt_number(x: float) -> str:
    """A compact number for labels: 1 → "1", 0.5 → "0.5", 1/3 → "0.333333"."""
    return format(float(x), ".6g")


def speed_to_hz(value: float, unit: str) -> float:
    """Convert a rotational speed to Hz (revolutions per second).

    Parameters
    ----------
    value : float
        Speed in ``unit``, >= 0.
    unit : {"rpm", "hz", "cpm"}
        Revolutions per minute, Hz, or cycles per minute (for a shaft, cpm = rpm).
        Case-insensitive.

    Returns
    -------
    float
        Speed, Hz.
    """
    key = unit.lower() if isinstance(unit, str) else unit
    if key not in SPEED_UNITS:
        raise InputError(
            f"unit={unit!r} must be one of {sorted(SPEED_UNITS)}",
            field="unit",
            code="not_allowed",
            value=unit,
        )
    x = as_float(value, "value")
    if not math.isfinite(x) or x < 0:
        raise InputError(
            f"value={short_repr(value)} must be a finite number >= 0",
            field="value",
            code="below_limit",
            value=value,
        )
    return x * SPEED_UNITS[key]


class Expandable:
    """Shared plumbing: turn arrays of one source into a ToneSet."""

    kind: ClassVar[str]
    label: str

    def _make(
        self,
        labels: Sequence[str],
        fixed_hz: ArrayLike,
        speed_hz: ArrayLike,
        amplitude: ArrayLike,
        family: Sequence[str],
        harmonic: ArrayLike,
    ) -> ToneSet:
        n = len(labels)
        if n > MAX_TONES_PER_SOURCE:
            raise InputError(
                f"source {self.label!r} expands to {n} tones; must be at most "
                f"{MAX_TONES_PER_SOURCE}",
                field=None,
                code="too_large",
            )
        return ToneSet(
            label=object_array(labels),
            source=object_array([self.label] * n),
            kind=object_array([self.kind] * n),
            fixed_hz=np.asarray(fixed_hz, dtype=np.float64),
            speed_hz=np.asarray(speed_hz, dtype=np.float64),
            amplitude=np.asarray(amplitude, dtype=np.float64),
            family=object_array(family),
            harmonic=np.asarray(harmonic, dtype=np.float64),
        )


def object_array(values: Sequence[str]) -> NDArray[np.object_]:
    """Strings as a 1-D object array."""
    out = np.empty(len(values), dtype=object)
    out[:] = list(values)
    return out


def family_amplitudes(
    count: int, amplitude: float | None, harmonic_amplitudes: tuple[float, ...] | None
) -> FloatArray:
    """Amplitude per harmonic 1..count: the given list padded with NaN, or the main line."""
    out = np.full(count, np.nan)
    if harmonic_amplitudes is not None:
        out[: len(harmonic_amplitudes)] = harmonic_amplitudes
    elif amplitude is not None:
        out[0] = amplitude
    return out
