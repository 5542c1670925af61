"""Acquisition chains: the stages a tone passes from the sensor to the analysed record.

A chain is an ordered tuple of stages: optional sensor resonance and analog low-pass
filters (acting on the true frequency), one converter (``Sample``), then digital
low-pass filters and decimators (acting on the frequency as folded at the rate in
force at that point). ``Chain.evaluate`` pushes an array of tone frequencies through
all of them at once.

With integer decimation the apparent frequency after the whole chain is
``fold(f, final_rate)``, because ``fold(fold(f, fs), fs/M) = fold(f, fs/M)`` for integer
``M``: folding at fs shifts ``f`` by a multiple of fs (a multiple of fs/M) and possibly
mirrors it, and both leave the fold at fs/M unchanged [1]_. The chain decides only the
attenuation.

References
----------
.. [1] R. E. Crochiere and L. R. Rabiner, *Multirate Digital Signal Processing*,
   Prentice-Hall, 1983, ch. 2 (decimation by an integer factor and its aliasing).
.. [2] A. V. Oppenheim and R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
   Pearson, 2010, sec. 4.2 (sampling) and sec. 4.6 (changing the sample rate).
"""

from __future__ import annotations

import dataclasses
import functools
from dataclasses import dataclass, field
from typing import Any, ClassVar

import numpy as np
from numpy.typing import ArrayLike, NDArray

from service.core import digital as _dig
from service.core import filters as _flt
from service.core.checks import bad, check_finite, check_freqs, check_int, show
from service.core.folding import check_fold_range, fold_unchecked, zone_unchecked

from .errors import InputError

__all__ = [
    "AnalogLowpass",
    "Chain",
    "ChainResponse",
    "Decimate",
    "DigitalLowpass",
    "Sample",
    "SensorResonance",
    "Stage",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]

_MAX_DECIMATION = 4096
_MIN_FINAL_RATE_HZ = 1.0
_DECIMATE_FILTERS = ("fir", "iir", "none")


# --------------------------------------------------------------------------- helpers


def _check_number(
    value: Any, name: str, *, low: float = 0.0, high: float | None = None, strict: bool = True
) -> float:
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


def _as_floats(values: Any, name: str) -> tuple[float, ...]:
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


def _fmt_number(x: float) -> str:
    return f"{x:.4g}"


def _fmt_hz(x: float, unit: str = "Hz") -> str:
    """'6.4 kHz', '512 Hz', '1.2 MHz' (up to four significant digits)."""
    for scale, prefix in ((1e9, "G"), (1e6, "M"), (1e3, "k")):
        if abs(x) >= scale:
            return f"{_fmt_number(x / scale)} {prefix}{unit}"
    return f"{_fmt_number(x)} {unit}"


def _fmt_range(lo: float, hi: float) -> str:
    """'1.6 and 6.4 kHz' when both share a unit, else '800 Hz and 1.6 kHz'."""
    a, b = _fmt_hz(lo), _fmt_hz(hi)
    unit_a, unit_b = a.split(" ")[1], b.split(" ")[1]
    if unit_a == unit_b:
        return f"{a.split(' ')[0]} and {b}"
    return f"{a} and {b}"


def _ordinal(n: int) -> str:
    if 10 <= n % 100 <= 20:
        suffix = "th"
    else:
        suffix = {1: "st", 2: "nd", 3: "rd"}.get(n % 10, "th")
    return f"{n}{suffix}"


_FAMILY_NAMES = {
    "butterworth": "butterworth",
    "chebyshev1": "chebyshev I",
    "chebyshev2": "chebyshev II",
    "elliptic": "elliptic",
    "bessel": "bessel",
}


# --------------------------------------------------------------------------- stages


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
        object.__setattr__(self, "natural_hz", _check_number(self.natural_hz, "natural_hz"))
        object.__setattr__(self, "q", _check_number(self.q, "q", high=1000.0))

    def name(self) -> str:
        return f"sensor resonance {_fmt_hz(self.natural_hz)}, Q {_fmt_number(self.q)}"


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
            fx = _as_floats(self.table_hz, "table_hz")
            gy = _as_floats(self.table_gain_db, "table_gain_db")
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
        set_(self, "cutoff_hz", _check_number(self.cutoff_hz, "cutoff_hz"))
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
            f"analog {_FAMILY_NAMES[self.family]} {_ordinal(self.order)} order, "
            f"{_fmt_hz(self.cutoff_hz)}"
        )
        extras = []
        if self.ripple_db is not None:
            extras.append(f"{_fmt_number(self.ripple_db)} dB ripple")
        if self.stop_atten_db is not None:
            extras.append(f"{_fmt_number(self.stop_atten_db)} dB stopband")
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
        object.__setattr__(self, "rate_hz", _check_number(self.rate_hz, "rate_hz"))

    def name(self) -> str:
        return f"sample {_fmt_hz(self.rate_hz, 'S/s')}"


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
            b = _as_floats(self.b, "b")
            a = _as_floats(self.a if self.a is not None else (1.0,), "a")
            _flt.check_coefficients(b, "b")
            _flt.check_coefficients(a, "a")
            if a[0] == 0:
                raise InputError(
                    f"a[0]={a[0]!r} must be non-zero", field="a[0]", code="invalid", value=a[0]
                )
            if len(a) > 1:
                radius = float(np.max(np.abs(np.roots(a))))
                if radius >= 1.0:
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
        fp = _check_number(self.passband_hz, "passband_hz")
        fstop = _check_number(self.stopband_hz, "stopband_hz")
        att = _check_number(self.atten_db, "atten_db", low=10.0, strict=False, high=200.0)
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
                f"digital low-pass {_fmt_hz(self.passband_hz)} to "
                f"{_fmt_hz(self.stopband_hz)}, {_fmt_number(self.atten_db)} dB "
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
        if self.filter not in _DECIMATE_FILTERS:
            raise InputError(
                f"filter={show(self.filter)} must be one of 'fir', 'iir', 'none'",
                field="filter",
                code="not_allowed",
                value=self.filter,
            )
        high = 13 if self.filter == "iir" else _MAX_DECIMATION
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
_STAGE_TYPES = (SensorResonance, AnalogLowpass, Sample, DigitalLowpass, Decimate)


# --------------------------------------------------------------------------- response


@dataclass(frozen=True)
class ChainResponse:
    """What a chain does to each tone.

    Attributes
    ----------
    freq_hz : ndarray
        True frequencies, Hz.
    apparent_hz : ndarray
        Apparent frequency after the whole chain, ``fold(f, final_rate_hz)``, Hz.
    zone : ndarray of int
        Nyquist zone of the true frequency at the final rate (1 = not aliased).
    inverted : ndarray of bool
        Whether the tone lands mirrored (even zone at the final rate).
    stage_attenuation_db : ndarray, shape (n_stages, n)
        Attenuation of each stage, dB (negative where a sensor resonance amplifies).
    attenuation_db : ndarray
        Total attenuation, dB (sum over stages).
    stage_names : tuple of str
        Short human-readable name of each stage.
    final_rate_hz : float
        Sample rate after all decimation, Hz.
    fold_stage : ndarray of int
        Index of the first stage at which the tone folds: the ``Sample`` stage if
        ``f > rate/2``, a ``Decimate`` stage if it folds there; -1 if never.
    """

    freq_hz: FloatArray
    apparent_hz: FloatArray
    zone: NDArray[np.int64]
    inverted: NDArray[np.bool_]
    stage_attenuation_db: FloatArray
    attenuation_db: FloatArray
    stage_names: tuple[str, ...]
    final_rate_hz: float
    fold_stage: NDArray[np.int64]


# --------------------------------------------------------------------------- chain


@dataclass(frozen=True)
class _Plan:
    """What the chain's structure implies: rates, filter coefficients and notes."""

    input_rates: tuple[float | None, ...]  # rate in force where each stage sits
    coefficients: tuple[tuple[FloatArray, FloatArray] | None, ...]
    sample_index: int
    sample_rate_hz: float
    final_rate_hz: float
    notes: tuple[str, ...]
    stage_names: tuple[str, ...]
    fold_thresholds: tuple[tuple[float, int], ...]  # (Nyquist frequency, stage) per fold
    fold_table: IntArray | None  # zone -> first folding stage (see _fold_table)


@dataclass(frozen=True)
class Chain:
    """An ordered acquisition chain.

    Attributes
    ----------
    stages : tuple of Stage
        Analog stages (``SensorResonance``, ``AnalogLowpass``), exactly one ``Sample``,
        then digital stages (``DigitalLowpass``, ``Decimate``), in signal order.

    Raises
    ------
    ValueError
        On construction, if the structure is impossible (see :meth:`validate`).
    """

    stages: tuple[Stage, ...]
    _plan: _Plan = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        stages = tuple(self.stages)
        for i, st in enumerate(stages):
            if not isinstance(st, _STAGE_TYPES):
                raise InputError(
                    f"stages[{i}]={st!r} is not a chain stage (SensorResonance, "
                    "AnalogLowpass, Sample, DigitalLowpass or Decimate)",
                    field=f"stages[{i}]",
                    code="bad_type",
                    value=st,
                )
        object.__setattr__(self, "stages", stages)
        object.__setattr__(self, "_plan", _analyse(stages))

    @classmethod
    def shorthand(cls, sample_rate_hz: float, anti_alias: AnalogLowpass | None = None) -> Chain:
        """A converter at ``sample_rate_hz``, Hz, behind an optional analog anti-alias filter."""
        stages: tuple[Stage, ...] = (Sample(sample_rate_hz),)
        if anti_alias is not None:
            if not isinstance(anti_alias, AnalogLowpass):
                raise InputError(
                    f"anti_alias={anti_alias!r} must be an AnalogLowpass or None",
                    field="anti_alias",
                    code="bad_type",
                    value=anti_alias,
                )
            stages = (anti_alias, *stages)
        return cls(stages)

    def validate(self) -> list[str]:
        """Check the structure; return human-readable notes (warnings).

        Errors (``ValueError``): no ``Sample`` stage or more than one; a digital stage or
        ``Decimate`` before the ``Sample``; an analog stage after it; a digital spec whose
        stopband is above the Nyquist frequency where it runs, or that needs too many
        taps; decimation bringing the rate below 1 Hz.

        Notes: no analog anti-alias filter; an analog cutoff above the Nyquist
        frequency; a decimation without a filter; a digital low-pass whose stopband
        edge is above the Nyquist frequency after the unfiltered decimation that
        follows it.
        """
        # The stages are immutable and were analysed (errors raised) at construction.
        return list(self._plan.notes)

    @property
    def sample_rate_hz(self) -> float:
        """The converter's sample rate, Hz."""
        return self._plan.sample_rate_hz

    @property
    def final_rate_hz(self) -> float:
        """Sample rate after all decimation, Hz."""
        return self._plan.final_rate_hz

    @property
    def nyquist_hz(self) -> float:
        """Nyquist frequency of the final record, Hz."""
        return self._plan.final_rate_hz / 2.0

    @property
    def stage_names(self) -> tuple[str, ...]:
        return self._plan.stage_names

    def describe(self) -> list[dict[str, Any]]:
        """Each stage as a plain dict: ``type`` plus the parameters that are set."""
        out = []
        for st in self.stages:
            d: dict[str, Any] = {"type": st.kind}
            for fld in dataclasses.fields(st):
                value = getattr(st, fld.name)
                if value is None:
                    continue
                d[fld.name] = list(value) if isinstance(value, tuple) else value
            out.append(d)
        return out

    def evaluate(self, freq_hz: ArrayLike) -> ChainResponse:
        """Push tones through the chain.

        Parameters
        ----------
        freq_hz : array_like
            True tone frequencies, Hz, >= 0; a scalar or a 1-D array of ``n``.

        Returns
        -------
        ChainResponse
            Apparent frequency, zone, inversion, attenuation per stage and in total.

        Notes
        -----
        Analog stages act on the true frequency; the ``Sample`` stage adds 0 dB;
        digital stages act on the frequency folded at the rate in force where they sit
        (their response is periodic in that rate); a ``Decimate`` with a filter applies
        it at the rate before decimation, then the rate divides by M [2]_.

        References
        ----------
        .. [2] Oppenheim and Schafer, *Discrete-Time Signal Processing*, sec. 4.6.
        """
        f = check_freqs(freq_hz)
        if f.ndim > 1:
            raise InputError(
                f"freq_hz must be a scalar or 1-D, got shape {f.shape}",
                field="freq_hz",
                code="bad_type",
            )
        f = np.atleast_1d(f)
        n = f.size
        plan = self._plan
        check_fold_range(f, plan.final_rate_hz)
        rows = np.empty((len(self.stages), n))
        active: list[int] = []  # rows that are not identically 0 dB
        folded = f  # frequency seen at the current rate (true frequency before sampling)
        positions: dict[tuple[float, int], tuple[NDArray[np.intp], NDArray[np.float32]]] = {}
        for i, st in enumerate(self.stages):
            rate = plan.input_rates[i]
            if isinstance(st, SensorResonance):
                rows[i] = _flt.sensor_unchecked(f, st.natural_hz, st.q)
                active.append(i)
            elif isinstance(st, AnalogLowpass):
                st.attenuation_db(f, out=rows[i])
                active.append(i)
            elif isinstance(st, Sample):
                rows[i] = 0.0
                folded = fold_unchecked(f, st.rate_hz)
            else:
                assert rate is not None
                coef = plan.coefficients[i]
                if coef is None:
                    rows[i] = 0.0
                else:
                    _digital(folded, rate, coef, positions, rows[i])
                    active.append(i)
                if isinstance(st, Decimate) and st.factor > 1:
                    new_rate = rate / st.factor
                    # fold(fold(f, fs), fs/M) == fold(f, fs/M): fold the true frequency.
                    folded = fold_unchecked(f, new_rate)
        final = plan.final_rate_hz
        zone = zone_unchecked(f, final)
        fold_stage = _fold_stages(f, zone, plan.fold_thresholds, plan.fold_table)
        if not active:
            total = np.zeros(n)
        elif len(active) == 1:
            total = rows[active[0]].copy()
        else:
            total = np.add(rows[active[0]], rows[active[1]])
            for i in active[2:]:
                total += rows[i]
        return ChainResponse(
            freq_hz=f,
            apparent_hz=folded,
            zone=zone,
            inverted=(zone & 1) == 0,
            stage_attenuation_db=rows,
            attenuation_db=total,
            stage_names=self.stage_names,
            final_rate_hz=final,
            fold_stage=fold_stage,
        )


def _fold_table(thresholds: tuple[tuple[float, int], ...], final_rate: float) -> IntArray | None:
    """Lookup from Nyquist zone (at the final rate) to the first stage that folds.

    The Nyquist frequencies only fall along the chain and a tone keeps its true
    frequency until it first folds, so its first fold is at the first stage whose
    Nyquist frequency its true frequency exceeds. Each such Nyquist frequency is an
    integer multiple P of the final one, so "f exceeds it" is "zone > P" and one table
    lookup on the zone answers for all stages at once. None for very deep decimation
    (the table would be too long): then each Nyquist frequency is compared.
    """
    multiples = [max(1, round(2.0 * nyq / final_rate)) for nyq, _ in thresholds]
    top = max(multiples, default=1) + 1
    if top > 1 << 20:
        return None
    table = np.full(top + 1, -1, dtype=np.int64)
    for p, (_, i) in reversed(list(zip(multiples, thresholds, strict=True))):
        table[p + 1 :] = i
    table.setflags(write=False)
    return table


def _fold_stages(
    f: FloatArray,
    zone: NDArray[np.int64],
    thresholds: tuple[tuple[float, int], ...],
    table: IntArray | None,
) -> NDArray[np.int64]:
    """Index of the first stage at which each tone folds (-1 if never)."""
    if table is None:
        out = np.full(f.size, -1, dtype=np.int64)
        for nyq, i in reversed(thresholds):
            out = np.where(f > nyq, i, out)
        return out
    return table.take(np.minimum(zone, table.size - 1))


def _digital(
    folded: FloatArray,
    rate: float,
    coef: tuple[FloatArray, FloatArray],
    positions: dict[tuple[float, int], tuple[NDArray[np.intp], NDArray[np.float32]]],
    out: FloatArray,
) -> None:
    """Digital response at folded frequencies; grid positions are shared per rate."""
    b, a = coef
    if _dig.exact_is_cheaper(folded.size, b, a):
        _dig.digital_exact(folded, rate, b, a, out)
        return
    lo, step = _dig.grid_table(b.tobytes(), a.tobytes())
    key = (rate, lo.size)
    if key not in positions:
        positions[key] = _dig.grid_position(folded, rate, lo.size - 1)
    i, frac = positions[key]
    _dig.grid_lookup(lo, step, i, frac, out)


# A test cell asks about the same few chains again and again; the stages are immutable
# (and hashable), so their analysis (filter design included) is kept.
@functools.lru_cache(maxsize=128)
def _analyse(stages: tuple[Stage, ...]) -> _Plan:
    sample_at = [i for i, st in enumerate(stages) if isinstance(st, Sample)]
    if not sample_at:
        raise InputError(
            "the chain has no Sample stage; add the converter's sample rate",
            field="stages",
            code="missing",
        )
    if len(sample_at) > 1:
        raise InputError(
            f"the chain has {len(sample_at)} Sample stages (at positions {sample_at}); "
            "exactly one is allowed",
            field="stages",
            code="conflict",
        )
    s_idx = sample_at[0]
    for i, st in enumerate(stages):
        if i < s_idx and isinstance(st, DigitalLowpass | Decimate):
            raise InputError(
                f"stages[{i}] ({st.kind}) comes before the Sample stage at position {s_idx}; "
                "digital stages act on samples and must follow it",
                field=f"stages[{i}]",
                code="bad_order",
            )
        if i > s_idx and isinstance(st, SensorResonance | AnalogLowpass):
            raise InputError(
                f"stages[{i}] ({st.kind}) comes after the Sample stage at position {s_idx}; "
                "analog stages must precede the converter",
                field=f"stages[{i}]",
                code="bad_order",
            )
    sample = stages[s_idx]
    assert isinstance(sample, Sample)
    fs = sample.rate_hz
    notes: list[str] = []

    analog = [st for st in stages[:s_idx] if isinstance(st, AnalogLowpass)]
    if not analog:
        notes.append(
            "no anti-alias filter before the converter: everything above the Nyquist "
            f"frequency {_fmt_hz(fs / 2)} folds into the band unattenuated"
        )
    for st in analog:
        if st.cutoff_hz is not None and st.cutoff_hz > fs / 2:
            notes.append(
                f"the anti-alias filter's cutoff {_fmt_hz(st.cutoff_hz)} is above the "
                f"Nyquist frequency {_fmt_hz(fs / 2)}: it cannot protect the band"
            )

    rates: list[float | None] = []
    coefs: list[tuple[FloatArray, FloatArray] | None] = []
    rate: float | None = None
    last_lowpass: DigitalLowpass | None = None  # at the current rate
    thresholds: list[tuple[float, int]] = []  # (Nyquist frequency, stage) per fold
    for i, st in enumerate(stages):
        rates.append(rate)
        coefs.append(None)
        if isinstance(st, Sample):
            rate = st.rate_hz
            thresholds.append((rate / 2.0, i))
        elif isinstance(st, DigitalLowpass):
            assert rate is not None
            if st.is_spec:
                assert st.stopband_hz is not None
                if st.stopband_hz > rate / 2:
                    raise InputError(
                        f"stages[{i}] digital low-pass stopband_hz={st.stopband_hz:g} is above "
                        f"the Nyquist frequency {rate / 2:g} Hz of the rate where it runs",
                        field=f"stages[{i}].stopband_hz",
                        code="above_limit",
                    )
            coefs[i] = st.coefficients(rate)
            last_lowpass = st
        elif isinstance(st, Decimate):
            assert rate is not None
            new_rate = rate / st.factor
            if new_rate < _MIN_FINAL_RATE_HZ:
                raise InputError(
                    f"stages[{i}] decimate by {st.factor} brings the rate to {new_rate:g} Hz; "
                    f"it must stay >= {_MIN_FINAL_RATE_HZ:g} Hz",
                    field=f"stages[{i}].factor",
                    code="above_limit",
                )
            coefs[i] = st.coefficients()
            if st.filter == "none" and st.factor > 1:
                notes.extend(_slice_notes(st.factor, rate, new_rate, last_lowpass))
            if st.factor > 1:
                last_lowpass = None
                thresholds.append((new_rate / 2.0, i))
            rate = new_rate
    assert rate is not None
    for c in coefs:
        for arr in c or ():
            arr.setflags(write=False)  # shared by every chain with these stages
    names: list[str] = []
    for st, r in zip(stages, rates, strict=True):
        if isinstance(st, DigitalLowpass):
            assert r is not None  # digital stages follow the Sample (checked above)
            names.append(st.name(r))
        else:
            names.append(st.name())
    return _Plan(
        input_rates=tuple(rates),
        coefficients=tuple(coefs),
        sample_index=s_idx,
        sample_rate_hz=fs,
        final_rate_hz=rate,
        notes=tuple(notes),
        stage_names=tuple(names),
        fold_thresholds=tuple(thresholds),
        fold_table=_fold_table(tuple(thresholds), rate),
    )


def _slice_notes(
    factor: int, rate: float, new_rate: float, lowpass: DigitalLowpass | None
) -> list[str]:
    old_nyq, new_nyq = rate / 2, new_rate / 2
    if lowpass is None:
        return [
            f"decimate by {factor} without a filter: everything between "
            f"{_fmt_range(new_nyq, old_nyq)} folds into the band"
        ]
    if lowpass.is_spec:
        assert lowpass.stopband_hz is not None
        if lowpass.stopband_hz > new_nyq:
            return [
                f"the digital low-pass's stopband edge {_fmt_hz(lowpass.stopband_hz)} is "
                f"above the Nyquist frequency {_fmt_hz(new_nyq)} after decimate by {factor}: "
                f"content between {_fmt_range(new_nyq, lowpass.stopband_hz)} is not fully "
                "suppressed and folds into the band"
            ]
    return []
