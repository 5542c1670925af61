"""The stages of an acquisition chain, each a small frozen dataclass validated on
construction: sensor resonance, analog low-pass (designed or a measured table), the
converter's ``Sample``, digital low-pass and ``Decimate``.

Analog stages act on the true frequency; digital stages on the frequency folded at the
rate in force where they sit. :class:`~service.core.chain.Chain` orders and evaluates
them.

References
----------
.. [1] R. E. Crochiere and L. R. Rabiner, *Multirate Digital Signal Processing*,
   Prentice-Hall, 1983, ch. 2 (decimation by an integer factor and its aliasing).
.. [2] A. V. Oppenheim and R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
   Pearson, 2010, sec. 4.2 (sampling) and sec. 4.6 (changing the sample rate).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, ClassVar

import numpy as np
from numpy.typing import NDArray

from service.core import digital as _dig
from service.core import filters as _flt
from service.core.checks import bad, check_finite, check_int, check_range, show
from service.core.errors import InputError

__all__ = [
    "DECIMATE_FILTERS",
    "FAMILY_NAMES",
    "MAX_DECIMATION",
    "STAGE_TYPES",
    "AnalogLowpass",
    "Decimate",
    "DigitalLowpass",
    "Sample",
    "SensorResonance",
    "Stage",
    "as_floats",
    "check_number",
    "fmt_hz",
    "fmt_number",
    "fmt_range",
    "ordinal",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]


MAX_DECIMATION = 4096


DECIMATE_FILTERS = ("fir", "iir", "none")


def check_number(
    value: Any, name: str, *, low: float = 0.0, high: float | None = None, strict: bool = True
) -> float:
    """A finite number above ``low`` (or at least, with ``strict=False``) and at most ``high``."""
    v = check_finite(value, name)
    if (strict and v <= low) or (not strict and v < low):
        raise bad(
            f"{name}={show(value)} must be {'>' if strict else '>='} {low:g}",
            name,
            "not_positive" if strict and low == 0 else "below_limit",
            value=v,
            limit=low,
        )
    if high is not None and v > high:
        raise bad(
            f"{name}={show(value)} must be <= {high:g}", name, "above_limit", value=v, limit=high
        )
    return v


def as_floats(values: Any, name: str) -> tuple[float, ...]:
    """A flat sequence of numbers as a tuple of floats."""
    try:
        arr = np.atleast_1d(np.asarray(values, dtype=np.float64))
    except (TypeError, ValueError):
        raise InputError(
            f"{name}={values!r} must be a sequence of numbers",
            field=name,
            code="bad_type",
            value=values,
        ) from None
    if arr.ndim != 1:
        raise InputError(
            f"{name} must be a flat sequence of numbers, got shape {arr.shape}",
            field=name,
            code="bad_type",
        )
    return tuple(float(v) for v in arr)


def fmt_number(x: float) -> str:
    """A number for a stage name (``:g`` style)."""
    return f"{x:.4g}"


def fmt_hz(x: float, unit: str = "Hz") -> str:
    """'6.4 kHz', '512 Hz', '1.2 MHz' (up to four significant digits)."""
    for scale, prefix in ((1e9, "G"), (1e6, "M"), (1e3, "k")):
        if abs(x) >= scale:
            return f"{fmt_number(x / scale)} {prefix}{unit}"
    return f"{fmt_number(x)} {unit}"


def fmt_range(lo: float, hi: float) -> str:
    """'1.6 and 6.4 kHz' when both share a unit, else '800 Hz and 1.6 kHz'."""
    a, b = fmt_hz(lo), fmt_hz(hi)
    unit_a, unit_b = a.split(" ")[1], b.split(" ")[1]
    if unit_a == unit_b:
        return f"{a.split(' ')[0]} and {b}"
    return f"{a} and {b}"


def ordinal(n: int) -> str:
    """1st, 2nd, 3rd, 4th ..."""
    if 10 <= n % 100 <= 20:
        suffix = "th"
    else:
        suffix = {1: "st", 2: "nd", 3: "rd"}.get(n % 10, "th")
    return f"{n}{suffix}"


FAMILY_NAMES = {
    "butterworth": "butterworth",
    "chebyshev1": "chebyshev I",
    "chebyshev2": "chebyshev II",
    "elliptic": "elliptic",
    "bessel": "bessel",
}


@dataclass(frozen=True)
class SensorResonance:
    """Mounted resonance of the sensor, a second-order peak at the true frequency.

    Attributes
    ----------
    natural_hz : float
        Mounted resonance frequency, Hz, > 0.
    q : float
        Quality factor (gain at resonance), > 0 and <= 1000.
    """

    natural_hz: float
    q: float
    kind: ClassVar[str] = "sensor"

    def __post_init__(self) -> None:
        object.__setattr__(self, "natural_hz", check_number(self.natural_hz, "natural_hz"))
        object.__setattr__(self, "q", check_range(self.q, "q", _flt.MIN_Q, _flt.MAX_Q))

    def name(self) -> str:
        return f"sensor resonance {fmt_hz(self.natural_hz)}, Q {fmt_number(self.q)}"


@dataclass(frozen=True)
class AnalogLowpass:
    """Analog low-pass filter ahead of the converter: a family design or a measured table.

    Attributes
    ----------
    family : str, optional
        ``"butterworth"``, ``"chebyshev1"``, ``"chebyshev2"``, ``"elliptic"`` or
        ``"bessel"``; see :func:`service.core.filters.analog_attenuation_db` for what
        ``cutoff_hz`` means in each.
    order : int, optional
        Filter order, 1 to 20 (with ``family``).
    cutoff_hz : float, optional
        Cutoff frequency, Hz (with ``family``).
    ripple_db : float, optional
        Passband ripple, dB (Chebyshev I, elliptic).
    stop_atten_db : float, optional
        Stopband attenuation, dB (Chebyshev II, elliptic).
    table_hz : tuple of float, optional
        Measured response frequencies, Hz, strictly increasing (instead of ``family``).
    table_gain_db : tuple of float, optional
        Measured gain at each ``table_hz``, dB (negative = loss).
    """

    family: str | None = None
    order: int | None = None
    cutoff_hz: float | None = None
    ripple_db: float | None = None
    stop_atten_db: float | None = None
    table_hz: tuple[float, ...] | None = None
    table_gain_db: tuple[float, ...] | None = None
    kind: ClassVar[str] = "analog_lowpass"

    def __post_init__(self) -> None:
        set_ = object.__setattr__
        design = [
            n
            for n in ("family", "order", "cutoff_hz", "ripple_db", "stop_atten_db")
            if getattr(self, n) is not None
        ]
        table = [n for n in ("table_hz", "table_gain_db") if getattr(self, n) is not None]
        if design and table:
            raise InputError(
                f"give either a filter design (family, order, cutoff_hz) or a measured "
                f"table (table_hz, table_gain_db), not both: got {', '.join(design + table)}",
                field=None,
                code="conflict",
            )
        if table:
            if len(table) != 2:
                raise InputError(
                    "a measured table needs both table_hz and table_gain_db",
                    field="table_gain_db" if self.table_gain_db is None else "table_hz",
                    code="missing",
                )
            fx = as_floats(self.table_hz, "table_hz")
            gy = as_floats(self.table_gain_db, "table_gain_db")
            _flt.check_table(fx, gy)
            set_(self, "table_hz", fx)
            set_(self, "table_gain_db", gy)
            return
        if self.family is None or self.order is None or self.cutoff_hz is None:
            raise InputError(
                "an analog low-pass needs family, order and cutoff_hz (or a measured "
                "table_hz + table_gain_db)",
                field=None,
                code="missing",
            )
        rp, rs = _flt.check_family(self.family, self.ripple_db, self.stop_atten_db)
        set_(self, "order", check_int(self.order, "order", 1, 20))
        set_(self, "cutoff_hz", _flt.check_cutoff(self.cutoff_hz))
        set_(self, "ripple_db", rp)
        set_(self, "stop_atten_db", rs)

    @property
    def is_table(self) -> bool:
        return self.table_hz is not None

    def name(self) -> str:
        if self.table_hz is not None:
            return f"analog measured response ({len(self.table_hz)} points)"
        assert self.family is not None and self.order is not None
        assert self.cutoff_hz is not None
        text = (
            f"analog {FAMILY_NAMES[self.family]} {ordinal(self.order)} order, "
            f"{fmt_hz(self.cutoff_hz)}"
        )
        extras = []
        if self.ripple_db is not None:
            extras.append(f"{fmt_number(self.ripple_db)} dB ripple")
        if self.stop_atten_db is not None:
            extras.append(f"{fmt_number(self.stop_atten_db)} dB stopband")
        return text + (f" ({', '.join(extras)})" if extras else "")

    def attenuation_db(self, f: FloatArray, out: FloatArray | None = None) -> FloatArray:
        """Attenuation, dB, at true frequencies ``f``, Hz (checked by the caller)."""
        if self.table_hz is not None:
            assert self.table_gain_db is not None
            att = _flt.table_unchecked(f, np.asarray(self.table_hz), np.asarray(self.table_gain_db))
            if out is not None:
                out[...] = att
                return out
            return att
        assert self.family is not None and self.order is not None
        assert self.cutoff_hz is not None
        return _flt.analog_unchecked(
            f, self.family, self.order, self.cutoff_hz, self.ripple_db, self.stop_atten_db, out
        )


@dataclass(frozen=True)
class Sample:
    """The converter: samples the (filtered) analog signal at ``rate_hz``.

    Attributes
    ----------
    rate_hz : float
        Sample rate, Hz (samples per second), > 0. For a sigma-delta converter, the
        modulator rate, followed by its digital filter and decimation stages.
    """

    rate_hz: float
    kind: ClassVar[str] = "sample"

    def __post_init__(self) -> None:
        object.__setattr__(self, "rate_hz", check_number(self.rate_hz, "rate_hz"))

    def name(self) -> str:
        return f"sample {fmt_hz(self.rate_hz, 'S/s')}"


@dataclass(frozen=True)
class DigitalLowpass:
    """Digital low-pass filter at the current rate: a spec or explicit coefficients.

    Attributes
    ----------
    passband_hz, stopband_hz : float, optional
        Passband and stopband edges, Hz; a spec is designed as a Kaiser-window FIR at
        the rate in force where the stage sits
        (:func:`service.core.filters.design_lowpass_fir`).
    atten_db : float, optional
        Stopband attenuation of the spec, dB, 10 to 200.
    b, a : tuple of float, optional
        Explicit numerator and denominator coefficients (``a`` defaults to ``(1.0,)``,
        an FIR). An IIR must be stable.
    """

    passband_hz: float | None = None
    stopband_hz: float | None = None
    atten_db: float | None = None
    b: tuple[float, ...] | None = None
    a: tuple[float, ...] | None = None
    kind: ClassVar[str] = "digital_lowpass"

    def __post_init__(self) -> None:
        set_ = object.__setattr__
        spec = [
            n for n in ("passband_hz", "stopband_hz", "atten_db") if getattr(self, n) is not None
        ]
        coef = [n for n in ("b", "a") if getattr(self, n) is not None]
        if spec and coef:
            raise InputError(
                "give either a spec (passband_hz, stopband_hz, atten_db) or coefficients "
                f"(b, a), not both: got {', '.join(spec + coef)}",
                field=None,
                code="conflict",
            )
        if coef:
            if self.b is None:
                raise InputError(
                    "explicit coefficients need b (a defaults to (1.0,))",
                    field="b",
                    code="missing",
                )
            b = as_floats(self.b, "b")
            a = as_floats(self.a if self.a is not None else (1.0,), "a")
            _flt.check_coefficients(b, "b")
            _flt.check_coefficients(a, "a")
            if a[0] == 0:
                raise InputError(
                    f"a[0]={a[0]!r} must be non-zero", field="a[0]", code="invalid", value=a[0]
                )
            if len(a) > 1:
                # Coefficients up to 1e308 apart overflow the companion matrix: a radius
                # that is not finite is no usable (stable) filter either.
                with np.errstate(all="ignore"):
                    try:
                        radius = float(np.max(np.abs(np.roots(a))))
                    except (ValueError, np.linalg.LinAlgError):  # inf in the matrix
                        radius = float("inf")
                if not radius < 1.0:
                    raise InputError(
                        f"a={a!r} has a pole at radius {radius:.6g}; an IIR filter must be "
                        "stable (all poles inside the unit circle, radius < 1)",
                        field="a",
                        code="unstable",
                    )
            set_(self, "b", b)
            set_(self, "a", a)
            return
        if len(spec) != 3:
            raise InputError(
                "a digital low-pass needs passband_hz, stopband_hz and atten_db (or "
                "explicit coefficients b, a)",
                field=None,
                code="missing",
            )
        fp = check_number(self.passband_hz, "passband_hz")
        fstop = check_number(self.stopband_hz, "stopband_hz")
        att = check_number(self.atten_db, "atten_db", low=10.0, strict=False, high=200.0)
        if fp >= fstop:
            raise InputError(
                f"passband_hz={self.passband_hz!r} must be below stopband_hz={self.stopband_hz!r}",
                field="passband_hz",
                code="below_limit",
                value=self.passband_hz,
            )
        set_(self, "passband_hz", fp)
        set_(self, "stopband_hz", fstop)
        set_(self, "atten_db", att)

    @property
    def is_spec(self) -> bool:
        return self.b is None

    def coefficients(self, rate_hz: float) -> tuple[FloatArray, FloatArray]:
        """Numerator and denominator at ``rate_hz`` (a spec is designed there)."""
        if self.b is not None:
            assert self.a is not None
            return np.asarray(self.b), np.asarray(self.a)
        assert self.passband_hz is not None and self.stopband_hz is not None
        assert self.atten_db is not None
        taps = _dig.design_lowpass_fir(rate_hz, self.passband_hz, self.stopband_hz, self.atten_db)
        return taps, np.ones(1)

    def name(self, rate_hz: float) -> str:
        b, a = self.coefficients(rate_hz)
        if self.is_spec:
            assert self.passband_hz is not None and self.stopband_hz is not None
            assert self.atten_db is not None
            return (
                f"digital low-pass {fmt_hz(self.passband_hz)} to "
                f"{fmt_hz(self.stopband_hz)}, {fmt_number(self.atten_db)} dB "
                f"(FIR, {b.size} taps)"
            )
        if a.size > 1:
            return f"digital filter (IIR, order {max(b.size, a.size) - 1})"
        return f"digital filter (FIR, {b.size} taps)"


@dataclass(frozen=True)
class Decimate:
    """Keep every ``factor``-th sample, after an optional anti-alias filter.

    Attributes
    ----------
    factor : int
        Decimation factor M, 1 to 4096 (1 to 13 with ``filter="iir"``).
    filter : {"fir", "iir", "none"}
        ``"fir"`` and ``"iir"``: the filters scipy.signal.decimate applies
        (:func:`service.core.filters.decimation_filter`); ``"none"``: a plain slice
        ``x[::M]``, so everything between the new and the old Nyquist frequency folds.
    """

    factor: int
    filter: str = "fir"
    kind: ClassVar[str] = "decimate"

    def __post_init__(self) -> None:
        if self.filter not in DECIMATE_FILTERS:
            raise InputError(
                f"filter={show(self.filter)} must be one of 'fir', 'iir', 'none'",
                field="filter",
                code="not_allowed",
                value=self.filter,
            )
        high = 13 if self.filter == "iir" else MAX_DECIMATION
        factor = check_int(self.factor, "factor", 1, high)
        object.__setattr__(self, "factor", factor)

    def coefficients(self) -> tuple[FloatArray, FloatArray] | None:
        if self.filter == "none":
            return None
        return _dig.decimation_filter(self.factor, self.filter)

    def name(self) -> str:
        if self.filter == "none":
            return f"decimate ÷{self.factor} (no filter)"
        if self.filter == "fir":
            return f"decimate ÷{self.factor} (FIR, {20 * self.factor + 1} taps)"
        return f"decimate ÷{self.factor} (IIR chebyshev I, 8th order)"


Stage = SensorResonance | AnalogLowpass | Sample | DigitalLowpass | Decimate


STAGE_TYPES = (SensorResonance, AnalogLowpass, Sample, DigitalLowpass, Decimate)
