"""Numbers as engineers type them into a form: ``12.8k``, ``12,800``, ``12 800``,
``5 kHz``, ``12.8 kS/s``, ``1480 rpm``.

One function, :func:`parse_quantity`, reads a form box of a given kind and returns the
value in the unit the contract field expects (Hz, S/s, rpm, ...). It accepts only what
is unambiguous: a comma is a thousands separator only between groups of three digits
(``12,8`` is refused, not guessed), the SI prefixes are k, M and G (``m`` could be milli
or mega), and a unit must belong to the field (``5 kHz`` in a speed box is refused).
"""

from __future__ import annotations

import re
from dataclasses import dataclass

__all__ = ["KINDS", "Quantity", "parse_quantity"]

_PREFIX = {"": 1.0, "k": 1e3, "K": 1e3, "M": 1e6, "G": 1e9}

#: Units each kind of field accepts (lower case), with their factor to the field's unit.
#: A speed keeps its unit: the form's own unit choice is overridden by a typed one.
KINDS: dict[str, dict[str, float]] = {
    "rate": {"s/s": 1.0, "sa/s": 1.0, "sps": 1.0, "hz": 1.0},
    "freq": {"hz": 1.0},
    "speed": {"rpm": 1.0, "hz": 1.0, "cpm": 1.0, "r/min": 1.0},
    "count": {"": 1.0, "lines": 1.0},
    "db": {"db": 1.0},
    "percent": {"%": 1.0},
    "plain": {},
}

_NUMBER = (
    r"(?P<sign>[-+−]?)"
    r"(?P<int>\d{1,3}(?:(?P<sep>[,\u00a0\u202f\u2009 _\'])\d{3})(?:(?P=sep)\d{3})*|\d*)"
    r"(?P<frac>\.\d*)?"
    r"(?:[eE](?P<exp>[-+]?\d{1,3}))?"
)
_QUANTITY = re.compile(
    rf"^{_NUMBER}\s*(?P<prefix>[kKMG]?)\s*(?P<unit>[A-Za-z%/]*)$",
)


@dataclass(frozen=True)
class Quantity:
    """A value in the field's unit; ``unit`` is the typed unit for a speed (rpm, hz,
    cpm), else None."""

    value: float
    unit: str | None = None


def _example(kind: str) -> str:
    return {
        "rate": "12800, 12.8k, 12,800, 12 800 or 12.8 kS/s",
        "freq": "5000, 5k, 5,000 or 5 kHz",
        "speed": "1480, 1,480 or 1480 rpm (or 24.7 Hz, 1480 cpm)",
        "count": "3200, 3,200 or 3.2k",
        "db": "60 or 60 dB",
        "percent": "2 or 2 %",
        "plain": "0.5, 1.2e-3 or 1,000",
    }[kind]


def parse_quantity(text: str, kind: str) -> Quantity:
    """Read a number typed in a form box of ``kind`` (a key of :data:`KINDS`).

    Returns the value in the field's unit (S/s for a rate, Hz for a frequency, the typed
    or the form's unit for a speed, dB, %). Raises ``ValueError`` with a sentence that
    says what to write when the text is not a number of that kind.
    """
    raw = text.strip().replace("\u2212", "-")
    m = _QUANTITY.match(raw)
    ok = m is not None and (m["int"] or (m["frac"] or "").strip(".") != "")
    if not ok or m is None:
        raise ValueError(f"{text.strip()!r} is not a number; write e.g. {_example(kind)}")
    sep = m["sep"]
    digits = m["int"].replace(sep, "") if sep else m["int"]
    number = float(
        f"{m['sign'].replace('−', '-')}{digits or '0'}{m['frac'] or ''}"
        f"{'e' + m['exp'] if m['exp'] else ''}"
    )
    prefix, unit = m["prefix"], m["unit"]
    # "5 kHz" splits as prefix k + unit Hz; "12.8 M" as prefix M; "1480 rpm" has no prefix
    # but a unit that starts with a letter the prefix group could have taken.
    allowed = KINDS[kind]
    key = unit.lower()
    if prefix and unit and key not in allowed and (prefix + unit).lower() in allowed:
        prefix, key = "", (prefix + unit).lower()
    if key and key not in allowed:
        raise ValueError(
            f"{text.strip()!r}: {unit!r} is not a unit this box takes; write e.g. {_example(kind)}"
        )
    if prefix and kind in ("db", "percent", "speed"):
        raise ValueError(f"{text.strip()!r}: no prefix here; write e.g. {_example(kind)}")
    value = number * _PREFIX[prefix] * allowed.get(key, 1.0)
    if kind == "count" and not float(value).is_integer():
        raise ValueError(f"{text.strip()!r} is not a whole number; write e.g. {_example(kind)}")
    speed_unit = {"rpm": "rpm", "r/min": "rpm", "hz": "hz", "cpm": "cpm"}.get(key)
    return Quantity(value, speed_unit if kind == "speed" else None)
