"""Acquisition planning: the cheapest sample rate and anti-alias filter, and run-ups.

:func:`plan` searches candidate sample rates and analog anti-alias filters for the
cheapest setup (lowest rate, then fewest poles, then the plainest family) that keeps
every tone's alias out of the band of interest, or below a required level, over the
whole speed range; it then picks the analysis lines that meet the required resolution
and reports record length, each tone's worst alias and why every cheaper option fails.

:func:`run_up` follows every tone through a chain along a speed grid and finds the
fold lines (speeds where a tone crosses a multiple of fs/2) and the speeds where an
aliased line crosses a line of interest.

Conventions: frequencies in Hz, levels as ``20·log10(amplitude)`` in dB re one unit of
the user's amplitude unit, attenuation positive for a loss. Speeds are factors of the
nominal speed (1 = nominal); a tone's true frequency at factor ``s`` is
``|fixed_hz + s·speed_hz|`` (a lower sideband that passes through 0 Hz reappears at
positive frequency).

References
----------
.. [1] A. V. Oppenheim and R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
   Pearson, 2010, sec. 4.2 (aliasing of a sampled sinusoid).
.. [2] J. O. Smith III, *Spectral Audio Signal Processing*, W3K Publishing, 2011,
   "Resolving sinusoids" (two tones are cleanly resolved when they are at least one
   main-lobe width apart; an L-term cosine window's main lobe is 2L bins wide).
.. [3] F. J. Harris, "On the use of windows for harmonic analysis with the discrete
   Fourier transform", *Proc. IEEE* 66(1), 1978, pp. 51-83 (main-lobe widths).
.. [4] P. D. Welch, "The use of fast Fourier transform for the estimation of power
   spectra", *IEEE Trans. Audio Electroacoust.* 15(2), 1967, pp. 70-73 (averaging
   overlapped segments).
.. [5] Common practice (no single source): the alias-protected span is fs/2.56, the
   record holds N = 2.56·lines samples, bin width = span / lines = fs / N.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.optimize import brentq

from service.core import filters as _flt
from service.core.chain import AnalogLowpass, Chain, Sample, SensorResonance, Stage
from service.core.tones import ToneSet

from .checks import check_finite, check_int, check_positive
from .errors import InputError

__all__ = [
    "ANALYSER_RATES_HZ",
    "CONVERTER_RATES_HZ",
    "DEFAULT_FILTERS",
    "MAINLOBE_BINS",
    "SPAN_DIVISOR",
    "STANDARD_LINES",
    "Crossings",
    "FilterOption",
    "FoldLines",
    "Plan",
    "PlanImpossible",
    "PlanRequest",
    "RecordLength",
    "RejectedOption",
    "RunUp",
    "ToneAlias",
    "plan",
    "record_length",
    "resolution_bins",
    "run_up",
    "speed_range_from_tolerance",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]

#: Common practice: an analyser shows DC to fs/2.56 as its alias-protected span [5]_.
SPAN_DIVISOR = 2.56

#: Standard analysis lines, 100·2**n from 100 to 102,400 (the 400·2**n series of many
#: analysers, 400 ... 51,200, is contained in it). With these, N = 2.56·lines = 2**(8+n).
STANDARD_LINES: tuple[int, ...] = tuple(100 * 2**n for n in range(11))

#: Main-lobe width, null to null, in bins [2]_, [3]_: an L-term cosine window has 2L
#: (rectangular 2, Hann and Hamming 4, 4-term Blackman-Harris 8); the 5-term flat top
#: (scipy.signal's ``flattop``) has 10.
MAINLOBE_BINS: dict[str, float] = {
    "rectangular": 2.0,
    "hann": 4.0,
    "hamming": 4.0,
    "blackmanharris": 8.0,
    "flattop": 10.0,
}

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

_RATE_SERIES = {"converter": CONVERTER_RATES_HZ, "analyser": ANALYSER_RATES_HZ}
_FAMILY_RANK = {
    "none": 0,
    "table": 1,
    "bessel": 2,
    "butterworth": 3,
    "chebyshev1": 4,
    "chebyshev2": 5,
    "elliptic": 6,
}
_FAMILY_TEXT = {
    "bessel": "Bessel",
    "butterworth": "Butterworth",
    "chebyshev1": "Chebyshev I",
    "chebyshev2": "Chebyshev II",
    "elliptic": "elliptic",
}
_MINUS = "\u2212"
_DEFAULT_MAX_BAND_LOSS_DB = 3.1  # a Butterworth's -3.01 dB point on the band edge passes
_BAND_LOSS_POINTS = 65
_MAX_SPEEDS = 20_000
_MAX_RATES = 1000
_MAX_FILTERS = 100
_EXCESS_TOL_DB = 1e-9
_MAX_CROSSINGS = 20_000
_CHUNK_ELEMENTS = 4_000_000


# --------------------------------------------------------------------------- errors


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


# --------------------------------------------------------------------------- checks


def _check_band(band_hz: object) -> tuple[float, float]:
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
    return lo, hi


def _check_speed_range(speed_range: object) -> tuple[float, float]:
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


def _check_window(window: object) -> str:
    if not isinstance(window, str) or window.lower() not in MAINLOBE_BINS:
        raise InputError(
            f"window={window!r} must be one of {', '.join(MAINLOBE_BINS)}",
            field="window",
            code="not_allowed",
            value=window,
        )
    return window.lower()


def _check_tones(tones: object) -> ToneSet:
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


def _find_tone(tones: ToneSet, name: str, what: str) -> int:
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


# --------------------------------------------------------------------------- formatting


def _num(x: float, digits: int = 3) -> str:
    """Up to ``digits`` significant digits, thousands separated, real minus sign."""
    if x == 0 or not math.isfinite(x):
        return f"{x:g}"
    mag = math.floor(math.log10(abs(x)))
    decimals = max(0, digits - 1 - mag)
    text = f"{round(x, decimals - 0):,.{decimals}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return text.replace("-", _MINUS)


def _hz(x: float, unit: str = "Hz") -> str:
    for scale, prefix in ((1e6, "M"), (1e3, "k")):
        if abs(x) >= scale:
            return f"{_num(x / scale, 4)} {prefix}{unit}"
    return f"{_num(x, 4)} {unit}"


def _rate(x: float) -> str:
    return _hz(x, "S/s")


def _db(x: float) -> str:
    return f"{x:.0f}".replace("-", _MINUS) + " dB"


def _ordinal(n: int) -> str:
    suffix = "th" if 10 <= n % 100 <= 20 else {1: "st", 2: "nd", 3: "rd"}.get(n % 10, "th")
    return f"{n}{suffix}"


# --------------------------------------------------------------------------- options


@dataclass(frozen=True)
class FilterOption:
    """One analog anti-alias filter the planner may choose.

    Attributes
    ----------
    family : str
        ``"none"`` (no filter), ``"butterworth"``, ``"bessel"``, ``"chebyshev1"``,
        ``"chebyshev2"``, ``"elliptic"``, or ``"table"`` (a measured response).
    order : int
        Filter order, 1 to 20 for a family design; 0 for ``"none"`` and ``"table"``.
    ripple_db, stop_atten_db : float, optional
        Passband ripple and stopband attenuation, dB, where the family needs them.
    cutoff_hz : float, optional
        Fixed cutoff, Hz (a filter that does not follow the sample rate).
    cutoff_fraction : float, optional
        Cutoff as a fraction of the sample rate (0 < fraction <= 0.5), e.g. 0.39 for
        fs/2.56. With neither cutoff given, the cutoff sits at the band's upper edge:
        the -3 dB point for Butterworth and Bessel, the passband edge (ripple) for
        Chebyshev I and elliptic, the -3 dB point (found numerically) for Chebyshev II.
    table_hz, table_gain_db : tuple of float, optional
        A measured response, Hz and dB (gain, negative = loss), for ``"table"``.
    name : str
        Optional display name (used for tables).
    """

    family: str = "butterworth"
    order: int = 0
    ripple_db: float | None = None
    stop_atten_db: float | None = None
    cutoff_hz: float | None = None
    cutoff_fraction: float | None = None
    table_hz: tuple[float, ...] | None = None
    table_gain_db: tuple[float, ...] | None = None
    name: str = ""

    def __post_init__(self) -> None:
        set_ = object.__setattr__
        fam = self.family
        if fam not in _FAMILY_RANK:
            raise InputError(
                f"family={fam!r} must be one of {', '.join(_FAMILY_RANK)}",
                field="family",
                code="not_allowed",
                value=fam,
            )
        if self.cutoff_hz is not None and self.cutoff_fraction is not None:
            raise InputError(
                "give cutoff_hz or cutoff_fraction, not both",
                field="cutoff_fraction",
                code="conflict",
            )
        if self.cutoff_hz is not None:
            set_(
                self,
                "cutoff_hz",
                check_positive(self.cutoff_hz, "cutoff_hz", unit=" Hz", separate=True),
            )
        if self.cutoff_fraction is not None:
            frac = check_positive(self.cutoff_fraction, "cutoff_fraction", separate=True)
            if frac > 0.5:
                raise InputError(
                    f"cutoff_fraction={frac!r} must be <= 0.5 (of the sample rate)",
                    field="cutoff_fraction",
                    code="above_limit",
                    value=frac,
                )
            set_(self, "cutoff_fraction", frac)
        if fam in ("none", "table"):
            if self.order not in (0, None):
                raise InputError(
                    f"order={self.order!r} does not apply to family {fam!r}; use 0",
                    field="order",
                    code="conflict",
                    value=self.order,
                )
            set_(self, "order", 0)
            if fam == "none" and (self.cutoff_hz is not None or self.cutoff_fraction is not None):
                raise InputError(
                    "family 'none' (no filter) takes no cutoff", field="cutoff_hz", code="conflict"
                )
        if fam == "table":
            if self.table_hz is None or self.table_gain_db is None:
                raise InputError(
                    "family 'table' needs table_hz and table_gain_db",
                    field="table_hz",
                    code="missing",
                )
            if self.cutoff_hz is not None or self.cutoff_fraction is not None:
                raise InputError(
                    "a measured table is fixed; it takes no cutoff",
                    field="cutoff_hz",
                    code="conflict",
                )
            fx, gy = _flt.check_table(self.table_hz, self.table_gain_db)
            set_(self, "table_hz", tuple(float(v) for v in fx))
            set_(self, "table_gain_db", tuple(float(v) for v in gy))
            return
        if self.table_hz is not None or self.table_gain_db is not None:
            raise InputError(
                f"table_hz/table_gain_db apply only to family 'table', not {fam!r}",
                field="table_hz",
                code="conflict",
            )
        if fam == "none":
            if self.ripple_db is not None or self.stop_atten_db is not None:
                raise InputError(
                    "family 'none' (no filter) takes no ripple_db or stop_atten_db",
                    field="ripple_db",
                    code="conflict",
                )
            return
        set_(self, "order", check_int(self.order, "order", 1, 20, word="a whole number"))
        rp, rs = _flt.check_family(fam, self.ripple_db, self.stop_atten_db)
        set_(self, "ripple_db", rp)
        set_(self, "stop_atten_db", rs)

    @property
    def poles(self) -> int:
        """Number of poles (0 for no filter and for a measured table)."""
        return self.order

    @property
    def follows_rate(self) -> bool:
        """Whether the cutoff moves with the sample rate."""
        return self.cutoff_fraction is not None

    def cost(self) -> tuple[int, int]:
        """Sort key among filters: fewer poles first, then the plainer family."""
        return (self.poles, _FAMILY_RANK[self.family])

    def cutoff_for(self, sample_rate_hz: float, band_hz: tuple[float, float]) -> float | None:
        """Cutoff in Hz at this rate and band (None for no filter and tables)."""
        if self.family in ("none", "table"):
            return None
        if self.cutoff_hz is not None:
            return self.cutoff_hz
        if self.cutoff_fraction is not None:
            return self.cutoff_fraction * sample_rate_hz
        if self.family == "chebyshev2":
            return band_hz[1] / _cheby2_3db_ratio(self.order, float(self.stop_atten_db or 0))
        return band_hz[1]

    def describe(self, cutoff_hz: float | None = None) -> str:
        """E.g. ``"4th-order Butterworth at 10 kHz"``."""
        if self.family == "none":
            return "no anti-alias filter"
        if self.family == "table":
            return f"the measured filter {self.name!r}" if self.name else "the measured filter"
        text = f"{_ordinal(self.order)}-order {_FAMILY_TEXT[self.family]}"
        extras = []
        if self.ripple_db is not None:
            extras.append(f"{_num(self.ripple_db)} dB ripple")
        if self.stop_atten_db is not None:
            extras.append(f"{_num(self.stop_atten_db)} dB stopband")
        if extras:
            text += f" ({', '.join(extras)})"
        if cutoff_hz is not None:
            text += f" at {_hz(cutoff_hz)}"
        return text

    def stage(self, cutoff_hz: float | None) -> AnalogLowpass | None:
        """The chain stage for this option (None for no filter)."""
        if self.family == "none":
            return None
        if self.family == "table":
            return AnalogLowpass(table_hz=self.table_hz, table_gain_db=self.table_gain_db)
        return AnalogLowpass(
            family=self.family,
            order=self.order,
            cutoff_hz=cutoff_hz,
            ripple_db=self.ripple_db,
            stop_atten_db=self.stop_atten_db,
        )

    def _attenuation(self, f: FloatArray, cutoff_hz: float) -> FloatArray:
        if self.family == "none":
            return np.zeros_like(f)
        if self.family == "table":
            assert self.table_hz is not None and self.table_gain_db is not None
            return _flt.table_unchecked(
                f, np.asarray(self.table_hz), np.asarray(self.table_gain_db)
            )
        return _flt.analog_unchecked(
            np.array(f, dtype=np.float64),
            self.family,
            self.order,
            cutoff_hz,
            self.ripple_db,
            self.stop_atten_db,
        )


def _cheby2_3db_ratio(order: int, stop_atten_db: float) -> float:
    """Where a Chebyshev II prototype (stopband edge 1) is 3 dB down, as a fraction of 1."""

    def loss(x: float) -> float:
        return (
            float(
                _flt.analog_unchecked(np.array([x]), "chebyshev2", order, 1.0, None, stop_atten_db)[
                    0
                ]
            )
            - 3.0103
        )

    return float(brentq(loss, 1e-6, 1.0, xtol=1e-12))


#: The filters tried when none are given, cheapest first: none; Butterworth 2, 4, 6, 8;
#: Chebyshev I (0.5 dB ripple) 8; elliptic 8 (0.1 dB ripple, 90 dB stopband); all with
#: the cutoff at the band's upper edge.
DEFAULT_FILTERS: tuple[FilterOption, ...] = (
    FilterOption("none"),
    FilterOption("butterworth", 2),
    FilterOption("butterworth", 4),
    FilterOption("butterworth", 6),
    FilterOption("butterworth", 8),
    FilterOption("chebyshev1", 8, ripple_db=0.5),
    FilterOption("elliptic", 8, ripple_db=0.1, stop_atten_db=90.0),
)


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


def resolution_bins(window: str) -> float:
    """Main-lobe width of a window, null to null, in bins.

    Two tones closer than this in frequency merge into one peak or pull each other's
    peaks off their frequencies; at or beyond it they are cleanly resolved [2]_, [3]_.

    Parameters
    ----------
    window : str
        ``"rectangular"`` (2 bins), ``"hann"`` (4), ``"hamming"`` (4),
        ``"blackmanharris"`` (4-term, 8) or ``"flattop"`` (5-term, 10).

    Returns
    -------
    float
        Width, bins.

    References
    ----------
    .. [2] Smith, *Spectral Audio Signal Processing*, "Resolving sinusoids".
    .. [3] Harris, *Proc. IEEE* 66(1), 1978.
    """
    return MAINLOBE_BINS[_check_window(window)]


@dataclass(frozen=True)
class RecordLength:
    """Analysis arithmetic for one sample rate and number of lines.

    Attributes
    ----------
    sample_rate_hz : float
        Sample rate, Hz.
    lines : int
        Analysis lines.
    span_hz : float
        Alias-protected span fs/2.56, Hz.
    bin_width_hz : float
        span / lines = fs / N, Hz.
    samples : int
        Samples per record, N = 2.56·lines (rounded).
    record_s : float
        Record length N / fs = 1 / bin width, s.
    averages : int
        Records averaged.
    overlap_pct : float
        Overlap between records, percent.
    total_s : float
        Acquisition time for all averages, s.
    """

    sample_rate_hz: float
    lines: int
    span_hz: float
    bin_width_hz: float
    samples: int
    record_s: float
    averages: int
    overlap_pct: float
    total_s: float


def record_length(
    sample_rate_hz: float, lines: int, averages: int = 1, overlap_pct: float = 0.0
) -> RecordLength:
    """Span, bin width, record length and total time for averaged, overlapped records.

    Parameters
    ----------
    sample_rate_hz : float
        Sample rate, Hz, > 0.
    lines : int
        Analysis lines, 1 to 1,048,576.
    averages : int
        Number of records averaged, 1 to 100,000.
    overlap_pct : float
        Overlap of consecutive records, percent, 0 <= overlap < 100.

    Returns
    -------
    RecordLength

    Notes
    -----
    Span ``fs/2.56``, ``N = 2.56·lines`` samples, bin width ``span/lines = fs/N``, record
    ``T = N/fs`` [5]_; ``n`` records overlapped by ``r`` (the overlap rounded to whole
    samples, as in the averaged spectrum) need ``N + (n - 1)·(N - round(r·N))`` samples
    [4]_.

    References
    ----------
    .. [4] Welch, *IEEE Trans. Audio Electroacoust.* 15(2), 1967.
    .. [5] Common practice.
    """
    fs = check_positive(sample_rate_hz, "sample_rate_hz", unit=" Hz", separate=True)
    n_lines = check_int(lines, "lines", 1, 1_048_576, word="a whole number")
    n_avg = check_int(averages, "averages", 1, 100_000, word="a whole number")
    ov = check_finite(overlap_pct, "overlap_pct")
    if not 0 <= ov < 100:
        raise InputError(
            f"overlap_pct={overlap_pct!r} must be >= 0 and < 100",
            field="overlap_pct",
            code="below_limit",
            value=overlap_pct,
        )
    samples = round(SPAN_DIVISOR * n_lines)
    step = samples - min(round(samples * ov / 100.0), samples - 1)
    total = samples + (n_avg - 1) * step
    return RecordLength(
        sample_rate_hz=fs,
        lines=n_lines,
        span_hz=fs / SPAN_DIVISOR,
        bin_width_hz=fs / samples,
        samples=samples,
        record_s=samples / fs,
        averages=n_avg,
        overlap_pct=ov,
        total_s=total / fs,
    )


# --------------------------------------------------------------------------- request


@dataclass(frozen=True)
class PlanRequest:
    """What the plan must achieve and what it may choose from.

    Attributes
    ----------
    tones : ToneSet
        Tones at the sensor at nominal speed (amplitudes in the user's unit, NaN where
        unknown).
    band_hz : (float, float)
        Band of interest, Hz, ``0 <= low < high``.
    rejection_db : float, optional
        Required alias rejection, dB below the strongest tone in the band (0 to 300).
    floor : float, optional
        Required alias level, absolute, in the amplitude unit (> 0). Exactly one of
        ``rejection_db`` and ``floor``.
    speed_range : (float, float)
        Minimum and maximum speed as factors of nominal (1 = nominal); see
        :func:`speed_range_from_tolerance` for a ± tolerance.
    nominal_rpm : float, optional
        Nominal speed, rpm; lets sentences give speeds in rpm instead of percent.
    bin_width_hz : float, optional
        Required bin width, Hz (at most this wide).
    resolve : (str, str), optional
        Two tones (label or ``"source: label"``) that must be resolved over the whole
        speed range; the bin width must be at most their smallest separation divided
        by the window's main-lobe width in bins.
    window : str
        Analysis window, see :func:`resolution_bins`.
    rates_hz : tuple of float, optional
        Candidate sample rates, Hz; default the ``rate_series``.
    rate_series : {"converter", "analyser"}
        Common series used when ``rates_hz`` is not given (:data:`CONVERTER_RATES_HZ`,
        :data:`ANALYSER_RATES_HZ`).
    filters : tuple of FilterOption, optional
        Candidate anti-alias filters; default :data:`DEFAULT_FILTERS`.
    lines_options : tuple of int
        Analysis lines the analyser offers; default :data:`STANDARD_LINES`.
    averages : int
        Records to average, 1 to 100,000.
    overlap_pct : float
        Overlap of consecutive records, percent, 0 to < 100.
    max_band_loss_db : float
        Largest loss the filter may take anywhere in the band, dB (default 3.1, so a
        Butterworth with its -3 dB point on the band edge passes).
    sensor : SensorResonance, optional
        Mounted sensor resonance ahead of the filter (it can lift an alias).
    n_speeds : int
        Points of the speed grid (2 to 20,000; the interval's ends are always on it).
    """

    tones: ToneSet
    band_hz: tuple[float, float]
    rejection_db: float | None = None
    floor: float | None = None
    speed_range: tuple[float, float] = (1.0, 1.0)
    nominal_rpm: float | None = None
    bin_width_hz: float | None = None
    resolve: tuple[str, str] | None = None
    window: str = "hann"
    rates_hz: tuple[float, ...] | None = None
    rate_series: str = "converter"
    filters: tuple[FilterOption, ...] | None = None
    lines_options: tuple[int, ...] = STANDARD_LINES
    averages: int = 1
    overlap_pct: float = 0.0
    max_band_loss_db: float = _DEFAULT_MAX_BAND_LOSS_DB
    sensor: SensorResonance | None = None
    n_speeds: int = 200


# --------------------------------------------------------------------------- results


@dataclass(frozen=True)
class ToneAlias:
    """A tone's worst alias in the band for the chosen setup.

    Attributes
    ----------
    index : int
        Position in the request's ToneSet.
    label, source : str
        The tone's label and source.
    aliases_into_band : bool
        Whether any alias of the tone lands in the band over the speed range; the
        fields below are NaN (zone 0) when not.
    true_hz, apparent_hz : float
        True and apparent frequency at the worst speed, Hz.
    zone : int
        Nyquist zone of the true frequency there.
    speed_factor : float
        Speed (factor of nominal) where the alias is strongest; NaN for a tone that
        does not move with speed.
    rpm : float, optional
        The same speed in rpm when the nominal rpm is known.
    level : float
        Alias level after the chain, amplitude unit (dB value in ``level_db``).
    level_db : float
        ``20·log10(level)``, dB re one unit.
    margin_db : float
        Limit minus level, dB (>= 0: meets the requirement).
    amplitude_assumed : bool
        True where the tone's amplitude was unknown and assumed (see the plan's
        residual risk).
    """

    index: int
    label: str
    source: str
    aliases_into_band: bool
    true_hz: float
    apparent_hz: float
    zone: int
    speed_factor: float
    rpm: float | None
    level: float
    level_db: float
    margin_db: float
    amplitude_assumed: bool


@dataclass(frozen=True)
class RejectedOption:
    """A cheaper setup than the chosen one, and why it fails.

    Attributes
    ----------
    sample_rate_hz : float
        Sample rate, Hz.
    filter : FilterOption
        The filter option.
    cutoff_hz : float, optional
        Its cutoff at this rate, Hz.
    failure : {"span", "resolution", "band_loss", "alias"}
        What failed.
    reason : str
        One sentence for a person.
    tone_index : int, optional
        The offending tone (for ``"alias"``).
    speed_factor : float
        Speed of the worst alias (factor of nominal; NaN when it does not apply).
    apparent_hz : float
        Where that alias lands, Hz (NaN when it does not apply).
    excess_db : float
        How far the worst alias exceeds the limit, dB (NaN when it does not apply).
    """

    sample_rate_hz: float
    filter: FilterOption
    cutoff_hz: float | None
    failure: str
    reason: str
    tone_index: int | None = None
    speed_factor: float = math.nan
    apparent_hz: float = math.nan
    excess_db: float = math.nan


@dataclass(frozen=True)
class Plan:
    """The cheapest setup that meets the requirements.

    Attributes
    ----------
    sample_rate_hz : float
        Chosen sample rate, Hz.
    filter : FilterOption
        Chosen anti-alias filter option.
    cutoff_hz : float, optional
        Its cutoff, Hz (None for no filter or a table).
    chain : Chain
        The chosen acquisition chain (sensor, filter, sample).
    band_hz : (float, float)
        Band of interest, Hz.
    record : RecordLength
        Lines, span, bin width, record length and total time.
    window : str
        Analysis window.
    mainlobe_bins : float
        Its main-lobe width, bins.
    required_bin_hz : float, optional
        Largest bin width the resolution requirement allows, Hz.
    limit_db : float
        Highest allowed alias level, dB re one unit.
    reference_db : float, optional
        Level of the strongest in-band tone, dB re one unit (rejection mode).
    worst_margin_db : float
        Smallest margin over all tones, dB (inf when no alias reaches the band).
    band_loss_db : float
        Largest filter loss inside the band, dB.
    speed_range : (float, float)
        Speed factors planned for.
    tones : tuple of ToneAlias
        Every tone's worst in-band alias.
    rejected : tuple of RejectedOption
        Every cheaper option, in cost order, with its reason.
    residual_risk : tuple of str
        What the plan does not cover.
    """

    sample_rate_hz: float
    filter: FilterOption
    cutoff_hz: float | None
    chain: Chain
    band_hz: tuple[float, float]
    record: RecordLength
    window: str
    mainlobe_bins: float
    required_bin_hz: float | None
    limit_db: float
    reference_db: float | None
    worst_margin_db: float
    band_loss_db: float
    speed_range: tuple[float, float]
    tones: tuple[ToneAlias, ...]
    rejected: tuple[RejectedOption, ...]
    residual_risk: tuple[str, ...]


# --------------------------------------------------------------------------- engine


@dataclass
class _Problem:
    """Prepared arrays shared by every candidate."""

    tones: ToneSet
    band: tuple[float, float]
    factors: FloatArray  # (S,)
    f_grid: FloatArray  # (S*T,) true frequencies, speed-major
    fmin: FloatArray  # (T,)
    fmax: FloatArray  # (T,)
    amp_db: FloatArray  # (T,)
    assumed: BoolArray  # (T,)
    limit_db: float
    reference_db: float | None
    sensor: SensorResonance | None
    sensor_grid: FloatArray | None = None
    n_speeds: int = 0
    n_tones: int = 0


@dataclass
class _Outcome:
    """Evaluation of rates x filters: codes and the worst alias of each pair."""

    rates: FloatArray
    filters: tuple[FilterOption, ...]
    cutoffs: list[list[float | None]]
    code: NDArray[np.int8]  # 0 pass, 1 span, 2 resolution, 3 band loss, 4 alias
    excess: FloatArray  # (R, K) worst level minus limit, dB (-inf: no alias in band)
    tone: IntArray  # (R, K) tone of the worst alias (-1 none)
    true_hz: FloatArray  # (R, K)
    band_loss: FloatArray  # (R, K)
    lines: IntArray  # (R,) lines meeting the resolution (0 none)
    evaluated: BoolArray  # (R,)


def _true_freq(tones: ToneSet, factors: FloatArray) -> FloatArray:
    out: FloatArray = np.abs(tones.at_speed(factors))
    return out


def _freq_range(tones: ToneSet, lo: float, hi: float) -> tuple[FloatArray, FloatArray]:
    g1 = tones.fixed_hz + lo * tones.speed_hz
    g2 = tones.fixed_hz + hi * tones.speed_hz
    fmax = np.maximum(np.abs(g1), np.abs(g2))
    fmin = np.where(g1 * g2 < 0, 0.0, np.minimum(np.abs(g1), np.abs(g2)))
    return fmin, fmax


def _prepare(req: PlanRequest) -> tuple[_Problem, dict[str, object]]:
    tones = _check_tones(req.tones)
    band = _check_band(req.band_hz)
    s_lo, s_hi = _check_speed_range(req.speed_range)
    n_speeds = check_int(req.n_speeds, "n_speeds", 2, _MAX_SPEEDS, word="a whole number")
    if (req.rejection_db is None) == (req.floor is None):
        raise InputError(
            "give exactly one of rejection_db (dB below the strongest in-band "
            "tone) and floor (absolute level in the amplitude unit)",
            field="rejection_db",
            code="conflict",
        )
    factors = np.linspace(s_lo, s_hi, n_speeds) if s_hi > s_lo else np.array([s_lo])
    f = _true_freq(tones, factors)
    fmin, fmax = _freq_range(tones, s_lo, s_hi)

    amp = tones.amplitude
    known = np.isfinite(amp)
    assumed = ~known
    if req.floor is not None:
        floor = check_positive(req.floor, "floor", separate=True)
        if not known.any():
            raise InputError(
                "floor needs tone amplitudes: no tone has one; give amplitudes or use "
                "rejection_db instead",
                field="floor",
                code="missing",
            )
        limit_db = 20.0 * math.log10(floor)
        reference_db = None
    else:
        rej = check_finite(req.rejection_db, "rejection_db")
        if not 0 <= rej <= 300:
            raise InputError(
                f"rejection_db={req.rejection_db!r} must be between 0 and 300 dB",
                field="rejection_db",
                code="out_of_range",
                value=req.rejection_db,
            )
        in_band = (fmax >= band[0]) & (fmin <= band[1])
        if not in_band.any():
            raise InputError(
                f"no tone lies in the band {_hz(band[0])} to {_hz(band[1])} over the speed "
                "range, so rejection_db has no reference; give an absolute floor instead",
                field="rejection_db",
                code="no_reference",
            )
        reference_db = 0.0  # all amplitudes unknown: every tone at one common level
    strongest_db = float(20.0 * np.log10(np.max(amp[known]))) if known.any() else 0.0
    amp_db = np.where(known, 20.0 * np.log10(np.where(known, amp, 1.0)), strongest_db)
    if req.floor is None:
        reference_db = float(np.max(amp_db[in_band]))
        limit_db = reference_db - rej
    prob = _Problem(
        tones=tones,
        band=band,
        factors=factors,
        f_grid=f.ravel(),
        fmin=fmin,
        fmax=fmax,
        amp_db=amp_db,
        assumed=assumed,
        limit_db=limit_db,
        reference_db=reference_db,
        sensor=req.sensor,
        n_speeds=factors.size,
        n_tones=len(tones),
    )
    if req.sensor is not None:
        if not isinstance(req.sensor, SensorResonance):
            raise InputError(
                f"sensor={req.sensor!r} must be a SensorResonance or None",
                field="sensor",
                code="bad_type",
                value=req.sensor,
            )
        prob.sensor_grid = _flt.sensor_unchecked(prob.f_grid, req.sensor.natural_hz, req.sensor.q)
    return prob, {"speed_range": (s_lo, s_hi)}


def _critical(prob: _Problem, rates: FloatArray) -> FloatArray:
    """Lowest true frequency of each tone whose alias lands in the band, per rate.

    For a low-pass anti-alias filter whose loss grows with frequency, the strongest
    in-band alias of a tone comes from the lowest frequency in its range that folds
    into the band: either the bottom of the range or the first start of an interval
    ``[k·fs - high, k·fs - low]`` or ``[k·fs + low, k·fs + high]`` above it [1]_.
    Returns NaN where no alias reaches the band. Shape (R, T).
    """
    lo, hi = prob.band
    fs = rates[:, None]
    fmin = prob.fmin[None, :]
    fmax = prob.fmax[None, :]
    app = np.abs(fmin - fs * np.rint(fmin / fs))
    inside = (fmin > fs / 2) & (app >= lo) & (app <= hi)
    k_a = np.maximum(np.ceil((fmin + hi) / fs), 1.0)
    k_b = np.maximum(np.ceil((fmin - lo) / fs), 1.0)
    start = np.minimum(k_a * fs - hi, k_b * fs + lo)
    crit = np.where(inside, fmin, start)
    out: FloatArray = np.where(crit <= fmax, crit, np.nan)
    return out


def _speed_at(tones: ToneSet, f: FloatArray, s_lo: float, s_hi: float) -> FloatArray:
    """Speed factor at which each tone (last axis) has true frequency ``|f|``; NaN if fixed."""
    v = tones.speed_hz
    with np.errstate(divide="ignore", invalid="ignore"):
        a = (f - tones.fixed_hz) / v
        b = (-f - tones.fixed_hz) / v
    tol = 1e-9 * max(1.0, abs(s_hi))
    ok_a = (a >= s_lo - tol) & (a <= s_hi + tol)
    s = np.where(ok_a, a, b)
    s = np.clip(s, s_lo, s_hi)
    out: FloatArray = np.where(v == 0, np.nan, s)
    return out


def _speed_one(prob: _Problem, i: int, f: float, s_lo: float, s_hi: float) -> float:
    """Scalar :func:`_speed_at` for tone ``i`` (used per sentence, so kept cheap)."""
    v = float(prob.tones.speed_hz[i])
    if v == 0:
        return math.nan
    fixed = float(prob.tones.fixed_hz[i])
    a = (f - fixed) / v
    tol = 1e-9 * max(1.0, abs(s_hi))
    s = a if s_lo - tol <= a <= s_hi + tol else (-f - fixed) / v
    return min(max(s, s_lo), s_hi)


def _lines_for(fs: float, required_bin: float | None, options: Sequence[int]) -> int:
    opts = sorted(options)
    if required_bin is None:
        return 3200 if 3200 in opts else opts[0]
    for n in opts:
        if fs / (SPAN_DIVISOR * n) <= required_bin * (1 + 1e-12):
            return n
    return 0


def _evaluate(
    prob: _Problem,
    rates: FloatArray,
    filters: tuple[FilterOption, ...],
    required_bin: float | None,
    lines_options: Sequence[int],
    max_band_loss_db: float,
    stop_at_first: bool,
) -> _Outcome:
    """Evaluate every (rate, filter) pair in cost order; optionally stop at a pass."""
    lo, hi = prob.band
    r_n, k_n, t_n = rates.size, len(filters), prob.n_tones
    crit = _critical(prob, rates)  # (R, T)
    crit_f = np.nan_to_num(crit, nan=0.0)
    band_pts = np.linspace(lo, hi, _BAND_LOSS_POINTS)

    # Attenuation: one call per filter on the whole grid plus every rate's critical
    # row; a filter whose cutoff follows the rate is evaluated on normalised
    # frequencies f / cutoff for all rates at once.
    grid = prob.f_grid
    att_grid: list[FloatArray | None] = []
    att_crit = np.empty((k_n, r_n, t_n))
    loss = np.empty((r_n, k_n))
    cutoffs: list[list[float | None]] = [[None] * k_n for _ in range(r_n)]
    for k, opt in enumerate(filters):
        for r in range(r_n):
            cutoffs[r][k] = opt.cutoff_for(float(rates[r]), prob.band)
        if opt.follows_rate:
            att_grid.append(None)
            c = opt.cutoff_fraction * rates  # type: ignore[operator]
            both = np.concatenate(
                [(crit_f / c[:, None]).ravel(), (band_pts[None, :] / c[:, None]).ravel()]
            )
            att = opt._attenuation(both, 1.0)
            att_crit[k] = att[: r_n * t_n].reshape(r_n, t_n)
            loss[:, k] = att[r_n * t_n :].reshape(r_n, -1).max(axis=1)
        else:
            cut = opt.cutoff_for(float(rates[0]), prob.band) or 1.0
            both = np.concatenate([grid, crit_f.ravel(), band_pts])
            att = opt._attenuation(both, cut)
            att_grid.append(att[: grid.size])
            att_crit[k] = att[grid.size : grid.size + r_n * t_n].reshape(r_n, t_n)
            loss[:, k] = att[grid.size + r_n * t_n :].max()
    if prob.sensor is not None:
        s = prob.sensor
        att_crit += _flt.sensor_unchecked(crit_f, s.natural_hz, s.q)[None]
        loss += float(np.max(_flt.sensor_unchecked(band_pts, s.natural_hz, s.q)))

    code = np.zeros((r_n, k_n), dtype=np.int8)
    excess = np.full((r_n, k_n), -np.inf)
    tone = np.full((r_n, k_n), -1, dtype=np.int64)
    true_hz = np.full((r_n, k_n), np.nan)
    lines = np.zeros(r_n, dtype=np.int64)
    evaluated = np.zeros(r_n, dtype=bool)
    tone_of = np.tile(np.arange(t_n), prob.n_speeds)
    for r in np.argsort(rates, kind="stable"):
        fs = float(rates[r])
        evaluated[r] = True
        if fs / SPAN_DIVISOR < hi * (1 - 1e-12):
            code[r] = 1
            continue
        lines[r] = _lines_for(fs, required_bin, lines_options)
        if lines[r] == 0:
            code[r] = 2
            continue
        # Grid points whose alias lands in the band at this rate.
        app = np.abs(grid - fs * np.rint(grid / fs))
        idx = np.flatnonzero((grid > fs / 2) & (app >= lo) & (app <= hi))
        t_idx = tone_of[idx]
        base = prob.amp_db[t_idx]
        if prob.sensor_grid is not None:
            base = base - prob.sensor_grid[idx]
        c_t = np.flatnonzero(np.isfinite(crit[r]))
        for k, opt in enumerate(filters):
            g_att = att_grid[k]
            if g_att is None:  # cutoff follows the rate: only the in-band aliases
                cut = float(opt.cutoff_fraction * fs)  # type: ignore[operator]
                lev = base - opt._attenuation(grid[idx], cut)
            else:
                lev = base - g_att[idx]
            c_lev = prob.amp_db[c_t] - att_crit[k, r, c_t]
            best = -np.inf
            if lev.size:
                j = int(np.argmax(lev))
                best = float(lev[j])
                tone[r, k] = t_idx[j]
                true_hz[r, k] = grid[idx[j]]
            if c_lev.size:
                j = int(np.argmax(c_lev))
                if c_lev[j] >= best:
                    best = float(c_lev[j])
                    tone[r, k] = c_t[j]
                    true_hz[r, k] = crit[r, c_t[j]]
            excess[r, k] = best - prob.limit_db
            if loss[r, k] > max_band_loss_db:
                code[r, k] = 3
            elif excess[r, k] > _EXCESS_TOL_DB:
                code[r, k] = 4
        if stop_at_first and np.any(code[r] == 0):
            break
    return _Outcome(
        rates=rates,
        filters=filters,
        cutoffs=cutoffs,
        code=code,
        excess=excess,
        tone=tone,
        true_hz=true_hz,
        band_loss=loss,
        lines=lines,
        evaluated=evaluated,
    )


# --------------------------------------------------------------------------- plan


def _check_rates(rates_hz: object, series: object) -> FloatArray:
    if rates_hz is None:
        if series not in _RATE_SERIES:
            raise InputError(
                f"rate_series={series!r} must be one of {', '.join(_RATE_SERIES)}",
                field="rate_series",
                code="not_allowed",
                value=series,
            )
        return np.asarray(_RATE_SERIES[str(series)], dtype=np.float64)
    try:
        vals = list(rates_hz)  # type: ignore[call-overload]
    except TypeError:
        raise InputError(
            f"rates_hz={rates_hz!r} must be a list of sample rates in Hz",
            field="rates_hz",
            code="bad_type",
            value=rates_hz,
        ) from None
    if not vals:
        raise InputError(
            "rates_hz is empty; give at least one sample rate (Hz)", field="rates_hz", code="empty"
        )
    if len(vals) > _MAX_RATES:
        raise InputError(
            f"rates_hz has {len(vals)} entries; at most {_MAX_RATES}",
            field="rates_hz",
            code="above_limit",
        )
    out = [
        check_positive(v, f"rates_hz[{i}]", unit=" Hz", separate=True) for i, v in enumerate(vals)
    ]
    return np.unique(np.asarray(out, dtype=np.float64))


def _check_filters(filters: object) -> tuple[FilterOption, ...]:
    if filters is None:
        return DEFAULT_FILTERS
    try:
        vals = list(filters)  # type: ignore[call-overload]
    except TypeError:
        raise InputError(
            f"filters={filters!r} must be a list of FilterOption",
            field="filters",
            code="bad_type",
            value=filters,
        ) from None
    if not vals:
        raise InputError(
            "filters is empty; give at least one FilterOption (family 'none' for no filter)",
            field="filters",
            code="empty",
        )
    if len(vals) > _MAX_FILTERS:
        raise InputError(
            f"filters has {len(vals)} entries; at most {_MAX_FILTERS}",
            field="filters",
            code="above_limit",
        )
    for i, v in enumerate(vals):
        if not isinstance(v, FilterOption):
            raise InputError(
                f"filters[{i}]={v!r} must be a FilterOption",
                field=f"filters[{i}]",
                code="bad_type",
                value=v,
            )
    return tuple(sorted(vals, key=lambda o: o.cost()))


def _check_lines_options(options: object) -> tuple[int, ...]:
    try:
        vals = list(options)  # type: ignore[call-overload]
    except TypeError:
        raise InputError(
            f"lines_options={options!r} must be a list of whole numbers",
            field="lines_options",
            code="bad_type",
            value=options,
        ) from None
    if not vals:
        raise InputError(
            "lines_options is empty; give at least one number of lines",
            field="lines_options",
            code="empty",
        )
    return tuple(
        sorted(
            {
                check_int(v, f"lines_options[{i}]", 1, 1_048_576, word="a whole number")
                for i, v in enumerate(vals)
            }
        )
    )


def _required_bin(req: PlanRequest, prob: _Problem, mainlobe: float) -> tuple[float | None, str]:
    """Largest allowed bin width, Hz, and a phrase saying where it comes from."""
    need: float | None = None
    why = ""
    if req.bin_width_hz is not None:
        need = check_positive(req.bin_width_hz, "bin_width_hz", unit=" Hz", separate=True)
        why = f"the requested {_hz(need)} bins"
    if req.resolve is not None:
        try:
            name_a, name_b = req.resolve
        except (TypeError, ValueError):
            raise InputError(
                f"resolve={req.resolve!r} must be two tone labels",
                field="resolve",
                code="bad_type",
                value=req.resolve,
            ) from None
        a = _find_tone(prob.tones, name_a, "resolve[0]")
        b = _find_tone(prob.tones, name_b, "resolve[1]")
        if a == b:
            raise InputError(
                f"resolve names the same tone twice ({name_a!r})", field="resolve", code="conflict"
            )
        f = prob.f_grid.reshape(prob.n_speeds, prob.n_tones)
        diff = f[:, a] - f[:, b]
        if np.any(diff == 0) or np.any(np.sign(diff[:-1]) != np.sign(diff[1:])):
            raise InputError(
                f"the tones {name_a!r} and {name_b!r} meet in frequency within the speed "
                "range, so no bin width resolves them at every speed",
                field="resolve",
                code="not_resolvable",
            )
        sep = float(np.min(np.abs(diff)))
        b_need = sep / mainlobe
        if need is None or b_need < need:
            need = b_need
            why = (
                f"resolving {name_a!r} and {name_b!r} ({_hz(sep)} apart, "
                f"{_num(mainlobe)}-bin main lobe)"
            )
    return need, why


def _tone_name(tones: ToneSet, i: int) -> str:
    return f"{tones.label[i]} ({tones.source[i]})"


def _speed_phrase(
    prob: _Problem, i: int, true_hz: float, s_range: tuple[float, float], rpm: float | None
) -> str:
    if prob.tones.speed_hz[i] == 0 or s_range[1] == s_range[0]:
        return ""
    s = _speed_one(prob, i, true_hz, *s_range)
    if rpm is not None:
        return f" at {_num(s * rpm, 4)} rpm"
    return f" at {_num(100 * s, 3)} % of nominal speed"


def _level_text(level_db: float, prob: _Problem) -> str:
    if prob.reference_db is not None:
        return _db(level_db - prob.reference_db)
    return _num(10.0 ** (level_db / 20.0))


def _limit_text(req: PlanRequest) -> str:
    if req.rejection_db is not None:
        return f"{_num(float(req.rejection_db))} dB rejection"
    return f"the floor of {_num(float(req.floor or 0.0))}"


class _Context:
    """Request, prepared problem and checked options, for sentences and suggestions."""

    def __init__(self, req: PlanRequest) -> None:
        self.req = req
        self.prob, meta = _prepare(req)
        self.s_range: tuple[float, float] = meta["speed_range"]  # type: ignore[assignment]
        self.window = _check_window(req.window)
        self.mainlobe = MAINLOBE_BINS[self.window]
        self.rates = _check_rates(req.rates_hz, req.rate_series)
        self.filters = _check_filters(req.filters)
        self.lines_options = _check_lines_options(req.lines_options)
        record_length(1000.0, 100, req.averages, req.overlap_pct)  # validates both
        self.max_loss = check_finite(req.max_band_loss_db, "max_band_loss_db")
        if self.max_loss < 0:
            raise InputError(
                f"max_band_loss_db={req.max_band_loss_db!r} must be >= 0 dB",
                field="max_band_loss_db",
                code="below_limit",
                value=req.max_band_loss_db,
            )
        self.rpm = (
            None
            if req.nominal_rpm is None
            else check_positive(req.nominal_rpm, "nominal_rpm", unit=" rpm", separate=True)
        )
        self.required_bin, self.bin_why = _required_bin(req, self.prob, self.mainlobe)

    def run(
        self,
        rates: FloatArray,
        filters: tuple[FilterOption, ...],
        stop: bool,
        prob: _Problem | None = None,
    ) -> _Outcome:
        return _evaluate(
            prob or self.prob,
            rates,
            filters,
            self.required_bin,
            self.lines_options,
            self.max_loss,
            stop,
        )

    def reason(self, out: _Outcome, r: int, k: int) -> RejectedOption:
        fs = float(out.rates[r])
        opt = out.filters[k]
        cut = out.cutoffs[r][k]
        code = int(out.code[r, k])
        hi = self.prob.band[1]
        if code == 1:
            text = (
                f"at {_rate(fs)} the span fs/2.56 = {_hz(fs / SPAN_DIVISOR)} does not "
                f"reach the band edge {_hz(hi)}"
            )
            return RejectedOption(fs, opt, cut, "span", text)
        if code == 2:
            n = max(self.lines_options)
            text = (
                f"at {_rate(fs)} even {n:,} lines give {_hz(fs / (SPAN_DIVISOR * n))} "
                f"bins, wider than the {_hz(self.required_bin or 0.0)} needed for "
                f"{self.bin_why}"
            )
            return RejectedOption(fs, opt, cut, "resolution", text)
        if code == 3:
            text = (
                f"at {_rate(fs)} {opt.describe(cut)} takes {out.band_loss[r, k]:.1f} dB "
                f"off the band, more than the {_num(self.max_loss)} dB allowed"
            )
            return RejectedOption(fs, opt, cut, "band_loss", text)
        i = int(out.tone[r, k])
        f_true = float(out.true_hz[r, k])
        app = float(np.abs(f_true - fs * np.rint(f_true / fs)))
        ex = float(out.excess[r, k])
        level_db = ex + self.prob.limit_db
        limit = "limit" if self.prob.reference_db is not None else "floor"
        text = (
            f"at {_rate(fs)} with {opt.describe(cut)} the "
            f"{_tone_name(self.prob.tones, i)} folds to {_hz(app)} at "
            f"{_level_text(level_db, self.prob)}, {_num(ex, 2)} dB above your {limit}"
            f"{_speed_phrase(self.prob, i, f_true, self.s_range, self.rpm)}"
        )
        s = _speed_one(self.prob, i, f_true, *self.s_range)
        return RejectedOption(fs, opt, cut, "alias", text, i, s, app, ex)


def plan(request: PlanRequest) -> Plan:
    """Choose the cheapest sample rate and anti-alias filter, lines and record length.

    Parameters
    ----------
    request : PlanRequest
        Tones, band (Hz), speed range, rejection (dB) or floor (amplitude unit),
        resolution (Hz or two tones), candidate rates (Hz), filters, lines, averages.

    Returns
    -------
    Plan

    Raises
    ------
    PlanImpossible
        No offered setup meets the requirements; ``suggestions`` says what would.
    ValueError
        Invalid input (the message names the field, the value and the limit).

    Notes
    -----
    Cost order: lowest sample rate; then fewest filter poles; then no filter, a
    measured table, Bessel, Butterworth, Chebyshev I, Chebyshev II, elliptic. A rate
    qualifies when its span fs/2.56 covers the band [5]_ and a line count from
    ``lines_options`` gives bins no wider than required (main-lobe width rule [2]_).
    A filter qualifies when its loss inside the band stays within
    ``max_band_loss_db`` and, on a speed grid of ``n_speeds`` points, every alias
    (true frequency above fs/2, folded by ``|f - fs·round(f/fs)|`` [1]_) that lands in
    the band is at or below the limit. Beside the grid, each tone's lowest true
    frequency that folds into the band is checked exactly: for a low-pass filter whose
    loss grows with frequency this is where its in-band alias is strongest, so the
    grid cannot step over it. Tones without an amplitude are taken at the level of the
    strongest tone with one (all at one common level when none has one). Without a
    resolution requirement the plan uses 3200 lines (or the smallest offered count
    when 3200 is not offered).

    References
    ----------
    .. [1] Oppenheim and Schafer, *Discrete-Time Signal Processing*, sec. 4.2.
    .. [2] Smith, *Spectral Audio Signal Processing*, "Resolving sinusoids".
    .. [5] Common practice: span fs/2.56, bin width span/lines.
    """
    ctx = _Context(request)
    out = ctx.run(ctx.rates, ctx.filters, stop=True)
    passing = np.argwhere(out.code == 0)
    if passing.size == 0:
        raise _impossible(ctx, out)
    order = np.argsort(out.rates, kind="stable")
    rank = np.empty_like(order)
    rank[order] = np.arange(order.size)
    r_win, k_win = min(((int(r), int(k)) for r, k in passing), key=lambda p: (rank[p[0]], p[1]))
    rejected: list[RejectedOption] = []
    for r in order:
        if rank[r] > rank[r_win]:
            break
        if out.code[r, 0] in (1, 2):
            rejected.append(ctx.reason(out, int(r), 0))
            continue
        for k in range(len(ctx.filters)):
            if r == r_win and k >= k_win:
                break
            rejected.append(ctx.reason(out, int(r), k))
    return _build_plan(ctx, out, r_win, k_win, tuple(rejected))


def _build_plan(
    ctx: _Context, out: _Outcome, r: int, k: int, rejected: tuple[RejectedOption, ...]
) -> Plan:
    prob, req = ctx.prob, ctx.req
    fs = float(out.rates[r])
    opt = out.filters[k]
    cut = out.cutoffs[r][k]
    stages: list[Stage] = []
    if prob.sensor is not None:
        stages.append(prob.sensor)
    st = opt.stage(cut)
    if st is not None:
        stages.append(st)
    stages.append(Sample(fs))
    chain = Chain(tuple(stages))

    # The chosen chain, through the chain engine: the grid plus each tone's critical
    # frequency, in one call.
    s_n, t_n = prob.n_speeds, prob.n_tones
    crit = _critical(prob, np.array([fs]))[0]
    resp = chain.evaluate(np.concatenate([prob.f_grid, np.nan_to_num(crit, nan=0.0)]))
    lo, hi = prob.band
    app = resp.apparent_hz
    hit = (resp.zone > 1) & (app >= lo) & (app <= hi)
    hit[s_n * t_n :] &= np.isfinite(crit)
    amp_db = np.concatenate([np.tile(prob.amp_db, s_n), prob.amp_db])
    lev = np.where(hit, amp_db - resp.attenuation_db, -np.inf).reshape(s_n + 1, t_n)
    j = np.argmax(lev, axis=0)
    worst = lev[j, np.arange(t_n)]
    flat = j * t_n + np.arange(t_n)
    f_true = resp.freq_hz[flat]
    speeds = _speed_at(prob.tones, f_true, *ctx.s_range)
    reports = []
    for i in range(t_n):
        ok = bool(np.isfinite(worst[i]))
        nan = math.nan
        s = float(speeds[i]) if ok else nan
        reports.append(
            ToneAlias(
                index=i,
                label=str(prob.tones.label[i]),
                source=str(prob.tones.source[i]),
                aliases_into_band=ok,
                true_hz=float(f_true[i]) if ok else nan,
                apparent_hz=float(app[flat[i]]) if ok else nan,
                zone=int(resp.zone[flat[i]]) if ok else 0,
                speed_factor=s,
                rpm=(s * ctx.rpm if ctx.rpm is not None and ok and math.isfinite(s) else None),
                level=float(10.0 ** (worst[i] / 20.0)) if ok else nan,
                level_db=float(worst[i]) if ok else nan,
                margin_db=float(prob.limit_db - worst[i]) if ok else nan,
                amplitude_assumed=bool(prob.assumed[i]),
            )
        )
    margins = [t.margin_db for t in reports if t.aliases_into_band]
    rec = record_length(fs, int(out.lines[r]), req.averages, req.overlap_pct)
    return Plan(
        sample_rate_hz=fs,
        filter=opt,
        cutoff_hz=cut,
        chain=chain,
        band_hz=prob.band,
        record=rec,
        window=ctx.window,
        mainlobe_bins=ctx.mainlobe,
        required_bin_hz=ctx.required_bin,
        limit_db=prob.limit_db,
        reference_db=prob.reference_db,
        worst_margin_db=min(margins) if margins else math.inf,
        band_loss_db=float(out.band_loss[r, k]),
        speed_range=ctx.s_range,
        tones=tuple(reports),
        rejected=rejected,
        residual_risk=tuple(_residual_risk(ctx, chain)),
    )


def _residual_risk(ctx: _Context, chain: Chain) -> list[str]:
    prob = ctx.prob
    notes: list[str] = []
    n_assumed = int(prob.assumed.sum())
    if n_assumed == prob.n_tones:
        notes.append(
            "no tone has an amplitude, so every tone was taken at one common level: the "
            "rejection is the attenuation each alias gets relative to the in-band tones"
        )
    elif n_assumed:
        notes.append(
            f"{n_assumed} tone(s) without an amplitude were assumed as strong as the "
            "strongest tone with one; a stronger unknown tone would need more rejection"
        )
    notes.append(
        "only the listed tones were checked: broadband content and unlisted tones above "
        f"{_hz(chain.sample_rate_hz / 2)} fold into the band too, attenuated by the same "
        "filter"
    )
    if ctx.s_range[1] > ctx.s_range[0]:
        notes.append(
            f"speeds outside {_num(100 * ctx.s_range[0], 3)} to "
            f"{_num(100 * ctx.s_range[1], 3)} % of nominal were not checked"
        )
    if prob.sensor is not None:
        notes.append(
            "the sensor resonance was checked on the speed grid only; a tone "
            "sweeping through it between grid points can be a little stronger"
        )
    notes.extend(chain.validate())
    return notes


def _impossible(ctx: _Context, out: _Outcome) -> PlanImpossible:
    prob, req = ctx.prob, ctx.req
    lo, hi = prob.band
    rates = out.rates
    fs_max = float(rates.max())
    codes = out.code
    span_ok = codes[:, 0] != 1
    if not span_ok.any():
        need = SPAN_DIVISOR * hi
        return PlanImpossible(
            f"no listed rate covers the band up to {_hz(hi)}: the highest, {_rate(fs_max)}, "
            f"gives a span of {_hz(fs_max / SPAN_DIVISOR)}",
            [
                f"offer a sample rate of at least {_rate(need)} (the span fs/2.56 must reach "
                f"{_hz(hi)})",
                f"or narrow the band to {_hz(lo)} to {_hz(fs_max / SPAN_DIVISOR)}",
            ],
        )
    usable = span_ok & (codes[:, 0] != 2)
    if not usable.any():
        fs = float(rates[span_ok].min())
        n = max(ctx.lines_options)
        bin_hz = fs / (SPAN_DIVISOR * n)
        need = ctx.required_bin or bin_hz
        lines_needed = 100 * 2 ** max(0, math.ceil(math.log2(fs / (SPAN_DIVISOR * need * 100))))
        lowest = SPAN_DIVISOR * hi
        return PlanImpossible(
            f"no listed setup meets the resolution: the lowest usable rate, {_rate(fs)}, "
            f"with {n:,} lines gives {_hz(bin_hz)} bins; {_hz(need)} are needed for "
            f"{ctx.bin_why}",
            [
                f"offer more analysis lines ({lines_needed:,} at {_rate(fs)})",
                f"or relax the resolution to {_hz(bin_hz)}",
                f"or offer a rate nearer {_rate(lowest)}, the lowest whose span covers the band",
                "or narrow the band so that a lower rate covers it",
            ],
        )
    alias = usable[:, None] & (codes == 4)
    if not alias.any():
        loss = float(out.band_loss[usable].min())
        return PlanImpossible(
            f"every listed filter takes more than {_num(ctx.max_loss)} dB off the band "
            f"(the least: {loss:.1f} dB)",
            [
                f"allow up to {math.ceil(loss * 10) / 10:g} dB band loss (max_band_loss_db)",
                "or put the cutoff at the band edge (give neither cutoff_hz nor cutoff_fraction)",
            ],
        )
    ex = np.where(alias, out.excess, np.inf)
    flat_best = int(np.argmin(ex))
    r, k = flat_best // ex.shape[1], flat_best % ex.shape[1]
    i = int(out.tone[r, k])
    excess = float(out.excess[r, k])
    level_db = excess + prob.limit_db
    fs_best = float(rates[r])
    msg = (
        f"no listed option reaches {_limit_text(req)}: the best, {_rate(fs_best)} with "
        f"{out.filters[k].describe(out.cutoffs[r][k])}, leaves the "
        f"{_tone_name(prob.tones, i)} at {_level_text(level_db, prob)}, "
        f"{_num(excess, 2)} dB above your "
        f"{'limit' if prob.reference_db is not None else 'floor'}"
        f"{_speed_phrase(prob, i, float(out.true_hz[r, k]), ctx.s_range, ctx.rpm)}"
    )
    return PlanImpossible(msg, _suggestions(ctx, out, r, k, excess))


def _suggestions(ctx: _Context, out: _Outcome, r: int, k: int, excess: float) -> list[str]:
    prob, req = ctx.prob, ctx.req
    rates = out.rates
    fs_max = float(rates.max())
    tips: list[str] = []
    # A higher rate than any offered, with the offered filters.
    higher = sorted(
        {x for x in (*CONVERTER_RATES_HZ, *ANALYSER_RATES_HZ) if fs_max < x <= 64 * fs_max}
        | {fs_max * 2.0**n for n in range(1, 7)}
    )
    more = ctx.run(np.asarray(higher), ctx.filters, stop=True)
    ok = np.argwhere(more.code == 0)
    if ok.size:
        rr, kk = min(((int(a), int(b)) for a, b in ok), key=lambda p: (more.rates[p[0]], p[1]))
        tips.append(
            f"offer {_rate(float(more.rates[rr]))} (it passes with "
            f"{more.filters[kk].describe(more.cutoffs[rr][kk])})"
        )
    # A steeper filter at the best rate.
    opt = out.filters[k]
    fam = opt.family if opt.family not in ("none", "table") else "butterworth"
    steeper = tuple(
        FilterOption(
            fam,
            n,
            ripple_db=opt.ripple_db if fam == opt.family else None,
            stop_atten_db=opt.stop_atten_db if fam == opt.family else None,
            cutoff_hz=opt.cutoff_hz if fam == opt.family else None,
            cutoff_fraction=opt.cutoff_fraction if fam == opt.family else None,
        )
        for n in range(max(opt.order, 0) + 1, 21)
    )
    if steeper:
        st = ctx.run(rates[r : r + 1], steeper, stop=True)
        good = np.flatnonzero(st.code[0] == 0)
        if good.size:
            g = int(good[0])
            what = steeper[g].describe(st.cutoffs[0][g])
            article = "an" if what[:1] in "8" or what[:2] in ("11", "18") else "a"
            tips.append(f"or {article} {what} at {_rate(float(rates[r]))}")
    # A lower requirement.
    if req.rejection_db is not None:
        tips.append(f"or accept {math.floor(float(req.rejection_db) - excess)} dB rejection")
    else:
        tips.append(f"or accept a floor of {_num(float(req.floor or 0) * 10 ** (excess / 20))}")
    # A narrower band, with the best option.
    lo, hi = prob.band
    one_rate, one_filter = rates[r : r + 1], (opt,)

    def passes(h: float) -> bool:
        sub = _Problem(**{**prob.__dict__, "band": (lo, h)})
        res = ctx.run(one_rate, one_filter, stop=True, prob=sub)
        return bool(res.code[0, 0] == 0)

    h_low = lo + 0.01 * (hi - lo)
    if passes(h_low):
        a, b = h_low, hi
        for _ in range(20):
            mid = 0.5 * (a + b)
            a, b = (mid, b) if passes(mid) else (a, mid)
        tips.append(f"or narrow the band to {_hz(lo)}–{_hz(a)}")
    return tips


# --------------------------------------------------------------------------- run-up


@dataclass(frozen=True)
class FoldLines:
    """Speeds at which a tone's true frequency crosses a multiple of fs/2.

    Attributes
    ----------
    tone_index : ndarray of int
        Line (index into the run-up's lines) that crosses.
    speed_factor : ndarray
        Speed, factor of nominal.
    rpm : ndarray, optional
        Speed in rpm when the nominal rpm is known.
    true_hz : ndarray
        The multiple crossed, ``multiple · fs/2``, Hz.
    multiple : ndarray of int
        k: the tone crosses k·fs/2 (odd k: apparent frequency fs/2, even k: 0 Hz).
    total : int
        Number of fold lines (only the first 200,000 are listed).
    """

    tone_index: IntArray
    speed_factor: FloatArray
    rpm: FloatArray | None
    true_hz: FloatArray
    multiple: IntArray
    total: int


@dataclass(frozen=True)
class Crossings:
    """Speeds where an aliased line meets a direct line of interest (within one bin).

    Attributes
    ----------
    speed_factor : ndarray
        Speed of the crossing, factor of nominal (linear interpolation between grid
        points).
    rpm : ndarray, optional
        Same in rpm when the nominal rpm is known.
    apparent_hz : ndarray
        Apparent frequency there, Hz.
    alias_index, crossed_index : ndarray of int
        The aliased line and the direct line it meets (indices into the run-up's lines).
    alias_level, crossed_level : ndarray
        Their levels after the chain, amplitude unit (NaN where unknown).
    touching : ndarray of bool
        False: the lines cross (the difference changes sign); True: they approach
        within the tolerance without crossing.
    total : int
        Number found (only the first 20,000, by speed, are listed).
    """

    speed_factor: FloatArray
    rpm: FloatArray | None
    apparent_hz: FloatArray
    alias_index: IntArray
    crossed_index: IntArray
    alias_level: FloatArray
    crossed_level: FloatArray
    touching: BoolArray
    total: int


@dataclass(frozen=True)
class RunUp:
    """Every line through a chain along a speed grid.

    Attributes
    ----------
    speed_factor : ndarray, shape (S,)
        Speed grid, factors of nominal.
    rpm : ndarray, optional
        The grid in rpm when the nominal rpm is known.
    label, source : tuple of str
        Each line: the tones first, then any numeric orders of interest
        (source ``"orders of interest"``).
    true_hz, apparent_hz : ndarray, shape (S, L)
        True and apparent frequency, Hz.
    zone : ndarray of int, shape (S, L)
        Nyquist zone at the final rate.
    attenuation_db : ndarray, shape (S, L)
        Total attenuation of the chain, dB.
    level : ndarray, shape (S, L)
        Level after the chain, amplitude unit (NaN where the amplitude is unknown).
    in_band : ndarray of bool, shape (S, L)
        Apparent frequency inside the band.
    interest : ndarray of int
        Lines of interest (the crossed side of the crossings).
    band_hz : (float, float)
        Band, Hz.
    final_rate_hz : float
        Rate after the chain, Hz.
    tolerance_hz : float
        Crossing tolerance, Hz (default one bin).
    fold_lines : FoldLines
    crossings : Crossings
    """

    speed_factor: FloatArray
    rpm: FloatArray | None
    label: tuple[str, ...]
    source: tuple[str, ...]
    true_hz: FloatArray
    apparent_hz: FloatArray
    zone: IntArray
    attenuation_db: FloatArray
    level: FloatArray
    in_band: BoolArray
    interest: IntArray
    band_hz: tuple[float, float]
    final_rate_hz: float
    tolerance_hz: float
    fold_lines: FoldLines
    crossings: Crossings


_MAX_FOLD_LINES = 200_000


def _fold_lines(
    tones: ToneSet, s_lo: float, s_hi: float, fs: float, rpm: float | None
) -> FoldLines:
    """Analytic: ``fixed + s·speed = ±k·fs/2`` for s inside the speed interval."""
    half = fs / 2.0
    g1 = tones.fixed_hz + s_lo * tones.speed_hz
    g2 = tones.fixed_hz + s_hi * tones.speed_hz
    a, b = np.minimum(g1, g2), np.maximum(g1, g2)
    moving = tones.speed_hz != 0
    m_lo = np.where(moving, np.floor(a / half) + 1, 0).astype(np.int64)  # strictly inside
    m_hi = np.where(moving, np.ceil(b / half) - 1, -1).astype(np.int64)
    count = np.maximum(m_hi - m_lo + 1, 0)
    total = int(count.sum())
    tone = np.repeat(np.arange(len(tones)), count)
    start = np.repeat(m_lo, count)
    offs = np.arange(total) - np.repeat(np.cumsum(count) - count, count)
    m = start + offs
    keep = m != 0  # a sideband passing 0 Hz is not a fold at fs/2
    tone, m = tone[keep][:_MAX_FOLD_LINES], m[keep][:_MAX_FOLD_LINES]
    speed = (m * half - tones.fixed_hz[tone]) / tones.speed_hz[tone]
    order = np.lexsort((tone, speed))
    tone, m, speed = tone[order], m[order], speed[order]
    return FoldLines(
        tone_index=tone,
        speed_factor=speed,
        rpm=None if rpm is None else speed * rpm,
        true_hz=np.abs(m) * half,
        multiple=np.abs(m),
        total=int(keep.sum()),
    )


def _crossings(
    s: FloatArray,
    app: FloatArray,
    aliased: BoolArray,
    true_hz: FloatArray,
    level: FloatArray,
    alias_idx: IntArray,
    target_idx: IntArray,
    band: tuple[float, float],
    tol: float,
) -> tuple[FloatArray, FloatArray, IntArray, IntArray, FloatArray, FloatArray, BoolArray]:
    """Sign changes (and near misses) of alias minus target along the speed grid."""
    n_s = s.size
    d_n = target_idx.size
    out: list[tuple[NDArray[np.generic], ...]] = []
    chunk = max(1, _CHUNK_ELEMENTS // max(1, n_s * d_n))
    direct_t = ~aliased[:, target_idx]  # (S, D)
    app_t = app[:, target_idx]
    true_t = true_hz[:, target_idx]
    for c0 in range(0, alias_idx.size, chunk):
        a_idx = alias_idx[c0 : c0 + chunk]
        diff = app[:, a_idx, None] - app_t[:, None, :]  # (S, A, D)
        valid = aliased[:, a_idx, None] & direct_t[:, None, :]
        valid &= np.abs(true_hz[:, a_idx, None] - true_t[:, None, :]) > tol
        valid &= a_idx[None, :, None] != target_idx[None, None, :]
        both = valid[:-1] & valid[1:]
        d0, d1 = diff[:-1], diff[1:]
        cross = both & (((d0 < 0) & (d1 > 0)) | ((d0 > 0) & (d1 < 0)) | (d0 == 0))
        absd = np.abs(diff)
        # Near misses: a local minimum of |difference| within tolerance, no sign change
        # in the neighbouring intervals.
        near = valid & (absd <= tol) & (diff != 0)
        prev_ok = np.ones_like(near)
        next_ok = np.ones_like(near)
        prev_ok[1:] = absd[1:] <= absd[:-1]
        next_ok[:-1] = absd[:-1] < absd[1:]
        near &= prev_ok & next_ok
        adj = np.zeros_like(near)
        adj[:-1] |= cross
        adj[1:] |= cross
        near &= ~adj
        for mask, touching in ((cross, False), (near, True)):
            i, a, d = np.nonzero(mask)
            if i.size == 0:
                continue
            if touching:
                frac = np.zeros(i.size)
                i1 = i
            else:
                v0, v1 = d0[i, a, d], d1[i, a, d]
                with np.errstate(divide="ignore", invalid="ignore"):
                    frac = np.where(v0 == 0, 0.0, v0 / (v0 - v1))
                i1 = i + 1
            ai, ti = a_idx[a], target_idx[d]
            sp = s[i] + frac * (s[i1] - s[i])
            ap = app[i, ai] + frac * (app[i1, ai] - app[i, ai])
            la = level[i, ai] + frac * (level[i1, ai] - level[i, ai])
            lt = level[i, ti] + frac * (level[i1, ti] - level[i, ti])
            inb = (ap >= band[0]) & (ap <= band[1])
            out.append(
                (
                    sp[inb],
                    ap[inb],
                    ai[inb],
                    ti[inb],
                    la[inb],
                    lt[inb],
                    np.full(int(inb.sum()), touching),
                )
            )
    if not out:
        e = np.empty(0)
        ei = np.empty(0, dtype=np.int64)
        return e, e, ei, ei, e, e, np.empty(0, dtype=bool)
    cols = [np.concatenate([o[j] for o in out]) for j in range(7)]
    order = np.lexsort((cols[3], cols[2], cols[0]))
    return tuple(c[order] for c in cols)  # type: ignore[return-value]


def run_up(
    tones: ToneSet,
    chain: Chain,
    speed_factors: ArrayLike | None = None,
    *,
    rpm: ArrayLike | None = None,
    nominal_rpm: float | None = None,
    band_hz: tuple[float, float] | None = None,
    orders_of_interest: Sequence[str | float] | None = None,
    lines: int = 3200,
    tolerance_hz: float | None = None,
) -> RunUp:
    """Apparent frequency of every tone against speed, fold lines and alias crossings.

    Parameters
    ----------
    tones : ToneSet
        Tones at nominal speed.
    chain : Chain
        Acquisition chain.
    speed_factors : array_like, optional
        Speed grid, factors of nominal (>= 0, increasing, 2 to 20,000 points). Give
        this or ``rpm``.
    rpm : array_like, optional
        Speed grid in rpm; needs ``nominal_rpm``.
    nominal_rpm : float, optional
        Nominal speed, rpm (the speed at which ``tones`` are given); numeric orders of
        interest are multiples of it.
    band_hz : (float, float), optional
        Band, Hz; crossings outside it are dropped. Default DC to final rate / 2.56.
    orders_of_interest : sequence of str or float, optional
        Lines an alias must not hide: tone labels (``label`` or ``"source: label"``) or
        numeric orders of the nominal shaft speed (need ``nominal_rpm``). Default: every
        tone while it is direct.
    lines : int
        Analysis lines over final rate / 2.56, for the default tolerance of one bin.
    tolerance_hz : float, optional
        How close, Hz, two lines must come to count as meeting; default one bin.

    Returns
    -------
    RunUp

    Notes
    -----
    Apparent frequency ``|f - fs·round(f/fs)|`` at the chain's final rate [1]_ is
    continuous and piecewise linear in speed, so the difference between an aliased
    line and a direct one changes sign exactly where they cross; the crossing speed
    is refined by linear interpolation between the grid points. Fold lines solve
    ``fixed + s·speed = k·fs/2`` exactly.

    References
    ----------
    .. [1] Oppenheim and Schafer, *Discrete-Time Signal Processing*, sec. 4.2.
    """
    tones = _check_tones(tones)
    if not isinstance(chain, Chain):
        raise InputError(
            f"chain must be a Chain, got {type(chain).__name__}", field="chain", code="invalid"
        )
    n_rpm = (
        None
        if nominal_rpm is None
        else check_positive(nominal_rpm, "nominal_rpm", unit=" rpm", separate=True)
    )
    if (speed_factors is None) == (rpm is None):
        raise InputError("give exactly one of speed_factors and rpm", field="rpm", code="conflict")
    if rpm is not None:
        if n_rpm is None:
            raise InputError(
                "an rpm grid needs nominal_rpm (the speed the tones are given at)",
                field="nominal_rpm",
                code="missing",
            )
        grid = np.asarray(rpm, dtype=np.float64).ravel() / n_rpm
        gname = "rpm"
    else:
        grid = np.asarray(speed_factors, dtype=np.float64).ravel()
        gname = "speed_factors"
    if not 2 <= grid.size <= _MAX_SPEEDS:
        raise InputError(
            f"{gname} has {grid.size} points; give 2 to {_MAX_SPEEDS}",
            field=gname,
            code="out_of_range",
        )
    if not np.all(np.isfinite(grid)) or np.any(grid < 0):
        raise InputError(f"{gname} must be finite and >= 0", field=gname, code="not_finite")
    if np.any(np.diff(grid) <= 0):
        i = int(np.flatnonzero(np.diff(grid) <= 0)[0]) + 1
        raise InputError(
            f"{gname}[{i}] is not above {gname}[{i - 1}]; the grid must increase",
            field=f"{gname}[{i}]",
            code="not_increasing",
        )
    fs = chain.final_rate_hz
    band = (0.0, fs / SPAN_DIVISOR) if band_hz is None else _check_band(band_hz)
    n_lines = check_int(lines, "lines", 1, 1_048_576, word="a whole number")
    tol = (
        fs / (SPAN_DIVISOR * n_lines)
        if tolerance_hz is None
        else check_positive(tolerance_hz, "tolerance_hz", unit=" Hz", separate=True)
    )

    # Lines: the tones, then numeric orders of interest.
    n_t = len(tones)
    interest: list[int] = []
    extra: list[float] = []
    for j, item in enumerate(orders_of_interest or ()):
        if isinstance(item, str):
            interest.append(_find_tone(tones, item, f"orders_of_interest[{j}]"))
        else:
            order = check_positive(item, f"orders_of_interest[{j}]", separate=True)
            if n_rpm is None:
                raise InputError(
                    f"orders_of_interest[{j}]={item!r} is a numeric order; it needs nominal_rpm",
                    field=f"orders_of_interest[{j}]",
                    code="missing",
                    value=item,
                )
            interest.append(n_t + len(extra))
            extra.append(order)
    all_lines = tones
    if extra:
        assert n_rpm is not None
        o = np.asarray(extra)
        all_lines = ToneSet.concat(
            [
                tones,
                ToneSet(
                    label=np.array([f"order {_num(x, 6)}" for x in extra], dtype=object),
                    source=np.array(["orders of interest"] * o.size, dtype=object),
                    kind=np.array(["shaft"] * o.size, dtype=object),
                    fixed_hz=np.zeros(o.size),
                    speed_hz=o * n_rpm / 60.0,
                    amplitude=np.full(o.size, np.nan),
                ),
            ]
        )
    f = _true_freq(all_lines, grid)  # (S, L)
    resp = chain.evaluate(f.ravel())
    shape = f.shape
    app = resp.apparent_hz.reshape(shape)
    zone = resp.zone.reshape(shape)
    att = resp.attenuation_db.reshape(shape)
    level = all_lines.amplitude[None, :] * 10.0 ** (-att / 20.0)
    in_band = (app >= band[0]) & (app <= band[1])
    aliased = zone > 1

    alias_idx = np.flatnonzero(aliased[:, :n_t].any(axis=0))
    target = np.unique(np.asarray(interest, dtype=np.int64)) if interest else np.arange(n_t)
    target = target[(~aliased[:, target]).any(axis=0)]
    sp, ap, ai, ti, la, lt, touch = _crossings(
        grid, app, aliased, f, level, alias_idx, target, band, tol
    )
    total = int(sp.size)
    keep = slice(0, _MAX_CROSSINGS)
    crossings = Crossings(
        speed_factor=sp[keep],
        rpm=None if n_rpm is None else sp[keep] * n_rpm,
        apparent_hz=ap[keep],
        alias_index=ai[keep],
        crossed_index=ti[keep],
        alias_level=la[keep],
        crossed_level=lt[keep],
        touching=touch[keep],
        total=total,
    )
    return RunUp(
        speed_factor=grid,
        rpm=None if n_rpm is None else grid * n_rpm,
        label=tuple(str(x) for x in all_lines.label),
        source=tuple(str(x) for x in all_lines.source),
        true_hz=f,
        apparent_hz=app,
        zone=zone,
        attenuation_db=att,
        level=level,
        in_band=in_band,
        interest=target if interest else np.arange(n_t),
        band_hz=band,
        final_rate_hz=fs,
        tolerance_hz=tol,
        fold_lines=_fold_lines(all_lines, float(grid[0]), float(grid[-1]), fs, n_rpm),
        crossings=crossings,
    )
