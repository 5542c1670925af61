"""What the plan search and the run-up share: candidate rate series, the checks of
band, speed range and tones, and how numbers are written in their sentences.

Speeds are factors of the nominal speed (1 = nominal); a tone's true frequency at factor
``s`` is ``|fixed_hz + s·speed_hz|``.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import NDArray

from service.core.tones import ToneSet

from .checks import check_finite
from .errors import InputError
from .filters import MIN_CUTOFF_HZ

__all__ = [
    "ANALYSER_RATES_HZ",
    "CHUNK_ELEMENTS",
    "CONVERTER_RATES_HZ",
    "MAX_SPEEDS",
    "MINUS",
    "RATE_SERIES",
    "PlanImpossible",
    "check_band",
    "check_speed_range",
    "check_tones",
    "find_tone",
    "fmt_db",
    "fmt_hz",
    "fmt_num",
    "fmt_rate",
    "ordinal",
    "speed_range_from_tolerance",
    "true_freq",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]


#: Sample rates an analyser offers for 1-2-5 spans from 10 Hz to 200 kHz: 2.56 × span.
ANALYSER_RATES_HZ: tuple[float, ...] = tuple(
    sorted(2.56 * m * 10.0**e for e in range(1, 6) for m in (1, 2, 5) if m * 10.0**e <= 2e5)
)


#: Usual converter rates, 1 kS/s to 262.144 kS/s: 1.024 k·2**n, 1 k·2**n,
#: 51.2 k/2**n (sigma-delta families: 51.2, 25.6, 12.8, 6.4, 3.2, 1.6 k),
#: and 48 k, 96 k, 192 k, 102.4 k, 204.8 k.
CONVERTER_RATES_HZ: tuple[float, ...] = tuple(
    sorted(
        {1024.0 * 2**n for n in range(9)}
        | {1000.0 * 2**n for n in range(9)}
        | {51200.0 / 2**n for n in range(6)}
        | {48e3, 96e3, 192e3, 102.4e3, 204.8e3}
    )
)


RATE_SERIES = {"converter": CONVERTER_RATES_HZ, "analyser": ANALYSER_RATES_HZ}


MINUS = "\u2212"


MAX_SPEEDS = 20_000


CHUNK_ELEMENTS = 4_000_000


class PlanImpossible(ValueError):
    """No offered setup meets the requirements.

    Attributes
    ----------
    suggestions : list of str
        What would make a plan possible (a higher rate, a steeper filter, a lower
        rejection, a narrower band, more lines), each a sentence.
    """

    def __init__(self, message: str, suggestions: list[str]) -> None:
        super().__init__(message)
        self.suggestions = suggestions


def check_band(band_hz: object) -> tuple[float, float]:
    """The band of interest ``(low, high)``, Hz, with 0 <= low < high."""
    try:
        lo_raw, hi_raw = list(band_hz)  # type: ignore[call-overload]
    except (TypeError, ValueError):
        raise InputError(
            f"band_hz={band_hz!r} must be two numbers (low, high) in Hz",
            field="band_hz",
            code="bad_type",
            value=band_hz,
        ) from None
    lo = check_finite(lo_raw, "band_hz[0]")
    hi = check_finite(hi_raw, "band_hz[1]")
    if lo < 0:
        raise InputError(
            f"band_hz[0]={lo_raw!r} must be >= 0 Hz",
            field="band_hz[0]",
            code="below_limit",
            value=lo_raw,
        )
    if hi <= lo:
        raise InputError(
            f"band_hz[1]={hi_raw!r} must be above band_hz[0]={lo_raw!r}",
            field="band_hz[1]",
            code="not_increasing",
            value=hi_raw,
        )
    if hi < MIN_CUTOFF_HZ:
        # The plan puts filter cutoffs at the band edge; none is designed below this.
        raise InputError(
            f"band_hz[1]={hi_raw!r} must be >= {MIN_CUTOFF_HZ:g} Hz, the lowest cutoff an "
            "anti-alias filter is designed for",
            field="band_hz[1]",
            code="below_limit",
            value=hi_raw,
            limit=MIN_CUTOFF_HZ,
        )
    return lo, hi


def check_speed_range(speed_range: object) -> tuple[float, float]:
    """The speed range ``(min, max)`` as factors of nominal speed (0 to 100)."""
    try:
        lo_raw, hi_raw = list(speed_range)  # type: ignore[call-overload]
    except (TypeError, ValueError):
        raise InputError(
            f"speed_range={speed_range!r} must be two speed factors (min, max), 1 = nominal",
            field="speed_range",
            code="bad_type",
            value=speed_range,
        ) from None
    lo = check_finite(lo_raw, "speed_range[0]")
    hi = check_finite(hi_raw, "speed_range[1]")
    if lo < 0:
        raise InputError(
            f"speed_range[0]={lo_raw!r} must be >= 0 (a factor of nominal speed)",
            field="speed_range[0]",
            code="below_limit",
            value=lo_raw,
        )
    if hi < lo:
        raise InputError(
            f"speed_range[1]={hi_raw!r} is below speed_range[0]={lo_raw!r}; give (min, max)",
            field="speed_range[1]",
            code="not_increasing",
            value=hi_raw,
        )
    if hi > 100:
        raise InputError(
            f"speed_range[1]={hi_raw!r} must be <= 100 times nominal speed",
            field="speed_range[1]",
            code="above_limit",
            value=hi_raw,
        )
    return lo, hi


def check_tones(tones: object) -> ToneSet:
    """A non-empty ToneSet whose known amplitudes are > 0."""
    if not isinstance(tones, ToneSet):
        raise InputError(
            f"tones must be a ToneSet, got {type(tones).__name__}", field="tones", code="bad_type"
        )
    if len(tones) == 0:
        raise InputError(
            "tones is empty; give at least one tone to plan against", field="tones", code="empty"
        )
    if np.any(tones.amplitude[np.isfinite(tones.amplitude)] <= 0):
        raise InputError(
            "tones.amplitude must be > 0 where known (NaN where unknown)",
            field="tones.amplitude",
            code="not_positive",
        )
    return tones


def find_tone(tones: ToneSet, name: str, what: str) -> int:
    """Index of the tone called ``label`` or ``"source: label"``; must be unique."""
    if not isinstance(name, str) or not name:
        raise InputError(
            f"{what}={name!r} must be a tone label or 'source: label'", field=what, code="bad_type"
        )
    full = np.array([f"{s}: {lab}" for s, lab in zip(tones.source, tones.label, strict=True)])
    hits = np.flatnonzero((tones.label == name) | (full == name))
    if hits.size == 0:
        raise InputError(
            f"{what}={name!r} matches no tone label (nor 'source: label')",
            field=what,
            code="not_found",
        )
    if hits.size > 1:
        options = ", ".join(repr(str(x)) for x in full[hits][:5])
        raise InputError(
            f"{what}={name!r} matches {hits.size} tones; use one of {options}",
            field=what,
            code="ambiguous",
        )
    return int(hits[0])


def fmt_num(x: float, digits: int = 3) -> str:
    """Up to ``digits`` significant digits, thousands separated, real minus sign."""
    if x == 0 or not math.isfinite(x):
        return f"{x:g}"
    mag = math.floor(math.log10(abs(x)))
    decimals = max(0, digits - 1 - mag)
    text = f"{round(x, decimals - 0):,.{decimals}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return text.replace("-", MINUS)


def fmt_hz(x: float, unit: str = "Hz") -> str:
    """A frequency for a sentence, in Hz or kHz."""
    for scale, prefix in ((1e6, "M"), (1e3, "k")):
        if abs(x) >= scale:
            return f"{fmt_num(x / scale, 4)} {prefix}{unit}"
    return f"{fmt_num(x, 4)} {unit}"


def fmt_rate(x: float) -> str:
    """A sample rate for a sentence (S/s, kS/s)."""
    return fmt_hz(x, "S/s")


def fmt_db(x: float) -> str:
    """A level for a sentence, dB."""
    return f"{x:.0f}".replace("-", MINUS) + " dB"


def ordinal(n: int) -> str:
    """1st, 2nd, 3rd, 4th ..."""
    suffix = "th" if 10 <= n % 100 <= 20 else {1: "st", 2: "nd", 3: "rd"}.get(n % 10, "th")
    return f"{n}{suffix}"


def speed_range_from_tolerance(tolerance_pct: float) -> tuple[float, float]:
    """Speed factors ``(1 - p/100, 1 + p/100)`` for a ± tolerance of ``p`` percent (0-99)."""
    p = check_finite(tolerance_pct, "tolerance_pct")
    if not 0 <= p < 100:
        raise InputError(
            f"tolerance_pct={tolerance_pct!r} must be between 0 and 99.99 %",
            field="tolerance_pct",
            code="out_of_range",
            value=tolerance_pct,
        )
    return (1.0 - p / 100.0, 1.0 + p / 100.0)


def true_freq(tones: ToneSet, factors: FloatArray) -> FloatArray:
    """True frequencies ``|fixed + s·speed|``, Hz, of every tone at every speed factor.

    Shape (S, T) for S speed factors and T tones.
    """
    out: FloatArray = np.abs(tones.at_speed(factors))
    return out
