"""Magnitude responses of the filters in an acquisition chain, as attenuation in dB.

Convention everywhere: ``attenuation_db = -20 * log10(|H|)``, positive for a loss and
negative where a stage amplifies (a sensor resonance). Magnitudes below ``1e-15`` are
floored there, so an exact null reads a large finite attenuation (300 dB), never
``inf`` or NaN.

Everything is vectorised over frequencies: arrays in, arrays out.

References
----------
.. [1] A. V. Oppenheim and R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
   Pearson, 2010, sec. 5.3 (magnitude response from poles and zeros), sec. 7.5 (FIR
   design by windowing), sec. 7.6 (Kaiser window method), sec. 4.6 (decimation).
.. [2] J. F. Kaiser, "Nonrecursive digital filter design using the I0-sinh window
   function", Proc. IEEE Int. Symp. Circuits and Systems, 1974, pp. 20-23.
.. [3] L. D. Paarmann, *Design and Analysis of Analog Filters*, Kluwer, 2001
   (Butterworth, Chebyshev I/II, elliptic and Bessel low-pass prototypes).
.. [4] C. M. Harris and A. G. Piersol, *Harris' Shock and Vibration Handbook*, 5th ed.,
   McGraw-Hill, 2002, ch. 2 (single-degree-of-freedom system, response to base
   excitation) and the chapter on vibration transducers (accelerometer mounted
   resonance); chapter details quoted from memory.
"""

from __future__ import annotations

import functools
import math

import numpy as np
import scipy.signal as sig
from numpy.typing import ArrayLike, NDArray

from .checks import check_freqs, check_int, check_positive, show
from .errors import InputError

__all__ = [
    "ANALOG_FAMILIES",
    "MAX_ATTENUATION_DB",
    "MAX_FIR_TAPS",
    "analog_attenuation_db",
    "decimation_filter",
    "design_lowpass_fir",
    "digital_attenuation_db",
    "sensor_attenuation_db",
    "table_attenuation_db",
]

FloatArray = NDArray[np.float64]

#: Analog low-pass families and whether each needs ``ripple_db`` / ``stop_atten_db``.
ANALOG_FAMILIES: dict[str, tuple[bool, bool]] = {
    "butterworth": (False, False),
    "chebyshev1": (True, False),
    "chebyshev2": (False, True),
    "elliptic": (True, True),
    "bessel": (False, False),
}

#: Attenuation reported for an exact null: magnitudes are floored at 1e-15.
MAX_ATTENUATION_DB = 300.0

#: Largest FIR the Kaiser design will return.
MAX_FIR_TAPS = 65_537

_MAX_ORDER = 20
_MAX_RIPPLE_DB = 6.0
_MAX_STOP_ATTEN_DB = 200.0
_MIN_FIR_ATTEN_DB = 10.0
_MAX_FIR_ATTEN_DB = 200.0
_MAX_DECIMATION = 4096
_MAX_IIR_DECIMATION = 13
# Above this many (frequency x coefficient) products the digital response is read from
# a dense cached grid instead of being evaluated exactly at each frequency.
_EXACT_WORK_LIMIT = 4_000_000
_GRID_MIN_POINTS = 2**18
_GRID_MAX_POINTS = 2**23
# Factors multiplied before one logarithm is taken; each pole pair is of degree 4 in
# the normalised frequency, so 4 of them stay finite up to f/fc ~ 1e19.
_LOG_GROUP = 4
_LOG10_2 = math.log10(2.0)
_LN10 = math.log(10.0)
_MAG_FLOOR = 10.0 ** (-MAX_ATTENUATION_DB / 20.0)


# --------------------------------------------------------------------------- checks


def _check_family(
    family: str, ripple_db: float | None, stop_atten_db: float | None
) -> tuple[float | None, float | None]:
    if family not in ANALOG_FAMILIES:
        names = ", ".join(ANALOG_FAMILIES)
        raise InputError(
            f"family={show(family)} must be one of {names}",
            field="family",
            code="not_allowed",
            value=family,
        )
    needs_ripple, needs_stop = ANALOG_FAMILIES[family]
    rp: float | None = None
    rs: float | None = None
    if needs_ripple:
        if ripple_db is None:
            raise InputError(
                f"ripple_db is required for a {family} filter (0 < ripple_db <= 6)",
                field="ripple_db",
                code="empty",
            )
        rp = check_positive(ripple_db, "ripple_db", _MAX_RIPPLE_DB)
    elif ripple_db is not None:
        raise InputError(
            f"ripple_db={show(ripple_db)} does not apply to a {family} filter; omit it",
            field="ripple_db",
            code="conflict",
            value=ripple_db,
        )
    if needs_stop:
        if stop_atten_db is None:
            raise InputError(
                f"stop_atten_db is required for a {family} filter (<= {_MAX_STOP_ATTEN_DB:g} dB)",
                field="stop_atten_db",
                code="empty",
            )
        rs = check_positive(stop_atten_db, "stop_atten_db", _MAX_STOP_ATTEN_DB)
        if rp is not None and rs <= rp:
            raise InputError(
                f"stop_atten_db={show(stop_atten_db)} must be > ripple_db={show(ripple_db)}",
                field="stop_atten_db",
                code="below_limit",
                value=stop_atten_db,
            )
    elif stop_atten_db is not None:
        raise InputError(
            f"stop_atten_db={show(stop_atten_db)} does not apply to a {family} filter; omit it",
            field="stop_atten_db",
            code="conflict",
            value=stop_atten_db,
        )
    return rp, rs


def _check_table(table_hz: ArrayLike, table_gain_db: ArrayLike) -> tuple[FloatArray, FloatArray]:
    fx = np.asarray(table_hz, dtype=np.float64).ravel()
    gy = np.asarray(table_gain_db, dtype=np.float64).ravel()
    if fx.size < 2:
        raise InputError(
            f"table_hz has {fx.size} points; at least 2 are needed", field="table_hz", code="empty"
        )
    if gy.size != fx.size:
        raise InputError(
            f"table_gain_db has {gy.size} values; expected {fx.size} (one per table_hz)",
            field="table_gain_db",
            code="mismatched_lengths",
        )
    if not np.isfinite(fx).all() or (fx <= 0).any():
        bad = float(fx[~np.isfinite(fx) | (fx <= 0)][0])
        raise InputError(
            f"table_hz contains {bad!r}; frequencies must be finite and > 0 Hz",
            field="table_hz",
            code="not_finite",
        )
    if (np.diff(fx) <= 0).any():
        i = int(np.flatnonzero(np.diff(fx) <= 0)[0]) + 1
        raise InputError(
            f"table_hz[{i}]={float(fx[i])!r} is not above table_hz[{i - 1}]={float(fx[i - 1])!r}; "
            "frequencies must be strictly increasing",
            field=f"table_hz[{i}]",
            code="not_increasing",
            value=float(fx[i]),
        )
    if not np.isfinite(gy).all():
        raise InputError(
            f"table_gain_db contains {float(gy[~np.isfinite(gy)][0])!r}; gains must be finite",
            field="table_gain_db",
            code="not_finite",
        )
    return fx, gy


def _check_coefficients(values: ArrayLike, name: str) -> FloatArray:
    c = np.atleast_1d(np.asarray(values, dtype=np.float64))
    if c.ndim != 1 or c.size == 0:
        raise InputError(
            f"{name} must be a non-empty 1-D sequence of coefficients", field=name, code="invalid"
        )
    if not np.isfinite(c).all():
        raise InputError(
            f"{name} contains {float(c[~np.isfinite(c)][0])!r}; coefficients must be finite",
            field=name,
            code="not_finite",
        )
    return c


# --------------------------------------------------------------------------- helpers


def _to_attenuation(att: FloatArray) -> FloatArray:
    """Cap at MAX_ATTENUATION_DB (the 1e-15 magnitude floor), in place."""
    np.minimum(att, MAX_ATTENUATION_DB, out=att)
    return att


def _magnitude_to_attenuation(mag: FloatArray) -> FloatArray:
    """-20 log10 |H| with |H| floored at 1e-15; works in place on ``mag``."""
    np.maximum(mag, _MAG_FLOOR, out=mag)
    np.log2(mag, out=mag)  # log2 is about twice as fast as log10 in numpy
    mag *= -20.0 * _LOG10_2
    return mag


def _root_factors(roots: NDArray[np.complex128]) -> list[tuple[float | None, float]]:
    """Coefficients ``(e, c2)`` of the real factors of ``prod |jw - r|^2``.

    A conjugate pair p, p* gives ``|(jw - p)(jw - p*)|^2 = (|p|^2 - w^2)^2 + 4 Re(p)^2 w^2
    = w^2 (w^2 + e) + c2`` with ``e = 4 Re(p)^2 - 2 |p|^2`` and ``c2 = |p|^4`` [1]_; a
    real root p gives ``w^2 + c2`` with ``c2 = p^2`` and ``e = None``.
    """
    roots = np.asarray(roots, dtype=np.complex128)
    scale = np.maximum(np.abs(roots), 1e-300)
    is_real = np.abs(roots.imag) <= 1e-10 * scale
    upper = roots[~is_real & (roots.imag > 0)]
    real = roots[is_real].real
    if 2 * upper.size + real.size != roots.size:  # pragma: no cover - scipy keeps symmetry
        raise InputError("filter roots are not in conjugate pairs", field=None, code="invalid")
    c = np.abs(upper) ** 2
    pairs: list[tuple[float | None, float]] = [
        (float(4.0 * pr**2 - 2.0 * ci), float(ci**2)) for pr, ci in zip(upper.real, c, strict=True)
    ]
    return [*pairs, *((None, float(r**2)) for r in real)]


def _group_product(
    w2: FloatArray, factors: list[tuple[float | None, float]], prod: FloatArray, tmp: FloatArray
) -> bool:
    """``prod = product of the factors at w2`` (see :func:`_root_factors`); False if none."""
    for n, (e, c2) in enumerate(factors):
        dst = prod if n == 0 else tmp
        if e is None:
            np.add(w2, c2, out=dst)
        else:
            np.add(w2, e, out=dst)
            dst *= w2
            dst += c2
        if n:
            prod *= tmp
    return bool(factors)


def _log2_gain_sq_inv(
    w2: FloatArray, poles: NDArray[np.complex128], zeros: NDArray[np.complex128], out: FloatArray
) -> FloatArray:
    """``out = log2(prod |jw - p|^2 / prod |jw - z|^2)`` for ``w2 = w^2 <= 1e30``.

    Real arithmetic only. Up to four pole and four zero factors are multiplied and
    divided before one logarithm is taken: fewer logarithms, and with w2 <= 1e30 no
    group overflows. The Horner form loses relative accuracy of about
    ``eps * |p|^2 / Re(p)^2`` next to a pole, negligible for these prototypes. An exact
    transmission zero gives +inf, capped by the caller.
    """
    fp, fz = _root_factors(poles), _root_factors(zeros)
    prod, zprod, tmp = np.empty_like(w2), np.empty_like(w2), np.empty_like(w2)
    groups = -(-max(len(fp), len(fz)) // _LOG_GROUP)
    out[...] = 0.0
    with np.errstate(divide="ignore"):
        for g in range(groups):
            part = slice(g * _LOG_GROUP, (g + 1) * _LOG_GROUP)
            has_p = _group_product(w2, fp[part], prod, tmp)
            if _group_product(w2, fz[part], zprod, tmp):
                if has_p:
                    prod /= zprod
                else:
                    np.divide(1.0, zprod, out=prod)
            np.log2(prod, out=prod)
            out += prod
    return out


@functools.lru_cache(maxsize=64)
def _analog_prototype(
    family: str, order: int, ripple_db: float | None, stop_atten_db: float | None
) -> tuple[NDArray[np.complex128], NDArray[np.complex128], float]:
    """Zeros, poles and gain of the low-pass prototype with its cutoff at 1 rad/s."""
    if family == "butterworth":
        z, p, k = sig.butter(order, 1.0, analog=True, output="zpk")
    elif family == "chebyshev1":
        z, p, k = sig.cheby1(order, ripple_db, 1.0, analog=True, output="zpk")
    elif family == "chebyshev2":
        z, p, k = sig.cheby2(order, stop_atten_db, 1.0, analog=True, output="zpk")
    elif family == "elliptic":
        z, p, k = sig.ellip(order, ripple_db, stop_atten_db, 1.0, analog=True, output="zpk")
    else:
        z, p, k = sig.bessel(order, 1.0, analog=True, output="zpk", norm="mag")
    return np.asarray(z, np.complex128), np.asarray(p, np.complex128), float(k)


def _analog_unchecked(
    f: FloatArray,
    family: str,
    order: int,
    cutoff_hz: float,
    ripple_db: float | None,
    stop_atten_db: float | None,
    out: FloatArray | None = None,
) -> FloatArray:
    w2 = np.multiply(f, 1.0 / cutoff_hz)
    np.square(w2, out=w2)
    if out is None:
        out = np.empty_like(w2)
    if family == "butterworth":
        return _butterworth(w2, order, out)
    z, p, k = _analog_prototype(family, order, ripple_db, stop_atten_db)
    # Beyond f/fc = 1e15 every prototype is either at its constant high-frequency
    # asymptote (as many zeros as poles) or more than 300 dB down, so clipping there
    # changes no result and keeps every product finite.
    np.minimum(w2, 1e30, out=w2)
    # |H|^2 = k^2 prod|jw - z|^2 / prod|jw - p|^2, so A = 10 log10(P / Z) - 20 log10 k;
    # the logarithm is taken in base 2, which numpy computes about twice as fast.
    _log2_gain_sq_inv(w2, p, z, out)
    out *= 10.0 * _LOG10_2
    out -= 20.0 * math.log10(abs(k))
    return _to_attenuation(out)


def _butterworth(w2: FloatArray, order: int, out: FloatArray) -> FloatArray:
    """Closed form ``|H|^2 = 1 / (1 + (f/fc)^(2N))`` [3]_; ``w2 = (f/fc)^2`` is reused.

    The same values as the pole sum (checked in the tests), in fewer passes: the power
    is built by repeated squaring.
    """
    power: FloatArray | None = None  # w2 ** order, by binary exponentiation
    n = order
    with np.errstate(over="ignore"):  # f/fc beyond ~1e15 at order 20: inf, capped below
        while n:
            if n & 1:
                if power is None:
                    power = w2.copy() if n > 1 else w2
                else:
                    power *= w2
            n >>= 1
            if n:
                np.square(w2, out=w2)
    assert power is not None
    np.add(power, 1.0, out=out)
    np.log2(out, out=out)
    out *= 10.0 * _LOG10_2
    return _to_attenuation(out)


# --------------------------------------------------------------------------- analog


def analog_attenuation_db(
    freq_hz: ArrayLike,
    family: str,
    order: int,
    cutoff_hz: float,
    ripple_db: float | None = None,
    stop_atten_db: float | None = None,
) -> FloatArray:
    """Attenuation of an analog low-pass filter designed from a classical prototype.

    Parameters
    ----------
    freq_hz : array_like
        Frequencies, Hz, >= 0.
    family : {"butterworth", "chebyshev1", "chebyshev2", "elliptic", "bessel"}
        Prototype. Bessel is normalised by magnitude (``norm="mag"``).
    order : int
        Filter order, 1 to 20.
    cutoff_hz : float
        Cutoff frequency, Hz, > 0. Its meaning follows scipy.signal's ``Wn``:
        Butterworth and Bessel: the -3 dB frequency; Chebyshev I and elliptic: the
        passband edge, where the attenuation last equals ``ripple_db``; Chebyshev II:
        the stopband edge, where the attenuation first reaches ``stop_atten_db``.
    ripple_db : float, optional
        Passband ripple, dB, 0 < ripple_db <= 6; required for Chebyshev I and elliptic,
        not allowed otherwise.
    stop_atten_db : float, optional
        Minimum stopband attenuation, dB, <= 200 and above ``ripple_db``; required for
        Chebyshev II and elliptic, not allowed otherwise.

    Returns
    -------
    ndarray
        Attenuation, dB (``-20 log10 |H(j 2 pi f)|``), capped at 300 dB. An even-order
        Chebyshev I (and elliptic) filter reads ``ripple_db`` at DC: that is how such a
        filter behaves, not an error.

    Notes
    -----
    The prototype's zeros, poles and gain come from scipy.signal (``output="zpk"``,
    ``analog=True``, cutoff 1 rad/s) and the magnitude is evaluated at ``f/cutoff`` as a
    sum of log-magnitudes over conjugate root pairs, which stays accurate at order 20
    where the polynomial (``ba``) form loses all precision [1]_, [3]_.

    References
    ----------
    .. [1] Oppenheim and Schafer, *Discrete-Time Signal Processing*, sec. 5.3.
    .. [3] Paarmann, *Design and Analysis of Analog Filters*, 2001.
    """
    rp, rs = _check_family(family, ripple_db, stop_atten_db)
    n = check_int(order, "order", 1, _MAX_ORDER)
    fc = check_positive(cutoff_hz, "cutoff_hz")
    f = check_freqs(freq_hz)
    return _analog_unchecked(f, family, n, fc, rp, rs)


def table_attenuation_db(
    freq_hz: ArrayLike, table_hz: ArrayLike, table_gain_db: ArrayLike
) -> FloatArray:
    """Attenuation from a measured response table.

    Parameters
    ----------
    freq_hz : array_like
        Frequencies, Hz, >= 0.
    table_hz : array_like
        Measured frequencies, Hz, > 0, strictly increasing, at least 2.
    table_gain_db : array_like
        Measured gain at each table frequency, dB (negative = loss).

    Returns
    -------
    ndarray
        Attenuation, dB (``-gain``), capped at 300 dB.

    Notes
    -----
    Between table points the gain in dB is interpolated linearly in ``log10 f`` (a
    straight line on a Bode plot). Below the first point the first value is held (an
    anti-alias filter is flat towards DC). Above the last point the last segment's
    slope in dB per decade is continued if it is a roll-off, because an analog filter
    keeps falling at its asymptotic rate (20 dB/decade per pole) beyond the last
    measured point; a rising or flat last segment is held instead, so an
    extrapolation never invents gain. Filters with a stopband floor (Chebyshev II,
    elliptic) should be measured far enough to show that floor.
    """
    fx, gy = _check_table(table_hz, table_gain_db)
    f = check_freqs(freq_hz)
    return _table_unchecked(f, fx, gy)


def _table_unchecked(f: FloatArray, fx: FloatArray, gy: FloatArray) -> FloatArray:
    lx = np.log10(fx)
    lf = np.log10(np.maximum(f, fx[0]))
    att = -np.interp(lf, lx, gy)
    slope = (gy[-1] - gy[-2]) / (lx[-1] - lx[-2])  # dB per decade
    if slope < 0:
        above = lf > lx[-1]
        att[above] = -(gy[-1] + slope * (lf[above] - lx[-1]))
    return _to_attenuation(att)


def sensor_attenuation_db(freq_hz: ArrayLike, natural_hz: float, q: float) -> FloatArray:
    """Attenuation of a mounted accelerometer's second-order resonance.

    Parameters
    ----------
    freq_hz : array_like
        Frequencies, Hz, >= 0.
    natural_hz : float
        Mounted resonance (natural) frequency, Hz, > 0.
    q : float
        Quality factor at the resonance, > 0 and <= 1000 (the gain at resonance is Q).

    Returns
    -------
    ndarray
        Attenuation, dB; negative where the resonance amplifies (``-20 log10 Q`` at
        ``f = natural_hz``), 0 at DC.

    Notes
    -----
    ``|H| = 1 / sqrt((1 - r^2)^2 + (r/Q)^2)`` with ``r = f / natural_hz``: the
    single-degree-of-freedom response of a seismic (mass-spring) accelerometer to base
    acceleration [4]_.

    References
    ----------
    .. [4] Harris' Shock and Vibration Handbook, 5th ed., 2002, ch. 2 (from memory).
    """
    fn = check_positive(natural_hz, "natural_hz")
    qq = check_positive(q, "q", 1000.0)
    f = check_freqs(freq_hz)
    return _sensor_unchecked(f, fn, qq)


def _sensor_unchecked(f: FloatArray, fn: float, q: float) -> FloatArray:
    with np.errstate(over="ignore"):  # r far above 1e77 only: the attenuation caps anyway
        r2 = np.square(f / fn)
        den = np.square(1.0 - r2)
        den += r2 / (q * q)
        np.log10(den, out=den)
    den *= 10.0
    return _to_attenuation(den)


# --------------------------------------------------------------------------- digital


def design_lowpass_fir(
    rate_hz: float, passband_hz: float, stopband_hz: float, atten_db: float
) -> FloatArray:
    """Linear-phase FIR low-pass designed with the Kaiser window method.

    Parameters
    ----------
    rate_hz : float
        Sample rate the filter runs at, Hz, > 0.
    passband_hz : float
        Passband edge, Hz, > 0.
    stopband_hz : float
        Stopband edge, Hz, above ``passband_hz`` and <= ``rate_hz / 2``.
    atten_db : float
        Required stopband attenuation (and passband deviation), dB, 10 to 200.

    Returns
    -------
    ndarray
        Filter taps (unity gain at DC), at most 65537.

    Notes
    -----
    The length and Kaiser ``beta`` follow Kaiser's empirical formulas for the
    transition width ``stopband - passband`` and ``atten_db`` (scipy.signal.kaiserord);
    the ideal low-pass is cut at the middle of the transition band
    (scipy.signal.firwin) [2]_.

    References
    ----------
    .. [2] Kaiser, Proc. IEEE ISCAS, 1974.
    """
    rate = check_positive(rate_hz, "rate_hz")
    fp = check_positive(passband_hz, "passband_hz")
    fstop = check_positive(stopband_hz, "stopband_hz")
    a = check_positive(atten_db, "atten_db", _MAX_FIR_ATTEN_DB)
    if a < _MIN_FIR_ATTEN_DB:
        raise InputError(
            f"atten_db={show(atten_db)} must be >= {_MIN_FIR_ATTEN_DB:g}",
            field="atten_db",
            code="below_limit",
            value=atten_db,
        )
    if fp >= fstop:
        raise InputError(
            f"passband_hz={show(passband_hz)} must be below stopband_hz={show(stopband_hz)}",
            field="passband_hz",
            code="below_limit",
            value=passband_hz,
        )
    if fstop > rate / 2:
        raise InputError(
            f"stopband_hz={show(stopband_hz)} must be <= the Nyquist frequency {rate / 2:g} Hz "
            f"of rate_hz={show(rate_hz)}",
            field="stopband_hz",
            code="above_limit",
            value=stopband_hz,
        )
    return np.array(_kaiser_fir(rate, fp, fstop, a))


@functools.lru_cache(maxsize=64)
def _kaiser_fir(rate: float, fp: float, fstop: float, atten: float) -> tuple[float, ...]:
    nyq = rate / 2
    numtaps, beta = sig.kaiserord(atten, (fstop - fp) / nyq)
    if numtaps > MAX_FIR_TAPS:
        raise InputError(
            f"a low-pass with passband {fp:g} Hz, stopband {fstop:g} Hz and {atten:g} dB at "
            f"{rate:g} S/s needs {numtaps} taps; at most {MAX_FIR_TAPS}: widen the "
            "transition band or decimate first",
            field=None,
            code="above_limit",
        )
    taps = sig.firwin(numtaps, (fp + fstop) / 2, window=("kaiser", beta), fs=rate)
    return tuple(float(t) for t in taps)


def decimation_filter(factor: int, kind: str = "fir") -> tuple[FloatArray, FloatArray]:
    """The anti-alias filter scipy.signal.decimate applies before keeping every M-th sample.

    Parameters
    ----------
    factor : int
        Decimation factor M, 1 to 4096 (1 to 13 for ``"iir"``, scipy's own advice: cascade
        several stages for more).
    kind : {"fir", "iir"}
        ``"fir"``: ``firwin(20*M + 1, 1/M, window="hamming")``; ``"iir"``: an 8th-order
        Chebyshev I, 0.05 dB ripple, passband edge ``0.8/M`` of the Nyquist frequency.
        Both as in scipy.signal.decimate with its default order.

    Returns
    -------
    b, a : ndarray
        Numerator and denominator (``a = [1.0]`` for the FIR).

    Notes
    -----
    scipy.signal.decimate with its default ``zero_phase=True`` runs the IIR forwards and
    backwards, which doubles its attenuation in dB; this module models a single pass
    (``zero_phase=False``, or a converter's causal decimator), the conservative
    choice. The FIR is applied once either way.
    """
    if kind not in ("fir", "iir"):
        raise InputError(
            f"kind={show(kind)} must be 'fir' or 'iir'", field="kind", code="invalid", value=kind
        )
    high = _MAX_DECIMATION if kind == "fir" else _MAX_IIR_DECIMATION
    m = check_int(factor, "factor", 1, high)
    b, a = _decimation_ba(m, kind)
    return np.array(b), np.array(a)


@functools.lru_cache(maxsize=64)
def _decimation_ba(m: int, kind: str) -> tuple[tuple[float, ...], tuple[float, ...]]:
    if m == 1:
        return (1.0,), (1.0,)
    if kind == "fir":
        b = sig.firwin(20 * m + 1, 1.0 / m, window="hamming")
        return tuple(map(float, b)), (1.0,)
    bb, aa = sig.cheby1(8, 0.05, 0.8 / m)
    return tuple(map(float, bb)), tuple(map(float, aa))


def digital_attenuation_db(
    apparent_hz: ArrayLike,
    rate_hz: float,
    b: ArrayLike,
    a: ArrayLike = (1.0,),
) -> FloatArray:
    """Attenuation of a digital filter at frequencies inside its first Nyquist zone.

    Parameters
    ----------
    apparent_hz : array_like
        Frequencies, Hz, in ``[0, rate_hz / 2]`` (already folded at ``rate_hz``).
    rate_hz : float
        Sample rate the filter runs at, Hz, > 0.
    b, a : array_like
        Numerator and denominator coefficients (``a[0] != 0``; FIR: ``a = (1.0,)``).

    Returns
    -------
    ndarray
        Attenuation, dB, capped at 300 dB.

    Notes
    -----
    ``H(e^{jw}) = B(e^{-jw}) / A(e^{-jw})``, ``w = 2 pi f / rate`` [1]_. Small problems
    (frequencies x coefficients < 4e6) are evaluated exactly with
    scipy.signal.freqz; larger ones read a dense response (an rfft of the zero-padded
    coefficients on at least 2^18 points and 128 points per tap, cached per filter)
    interpolated linearly in magnitude, in single precision. That stays within 0.05 dB
    of the exact value wherever the attenuation is below 80 dB (a few thousandths of a
    dB for filters a few hundred taps long); deeper down, next to exact nulls, it may
    read a shallower null than the truth, the cautious direction for alias prediction.
    An explicit ``b, a`` is used as given: a recursive filter's stability is the
    caller's business (``chain.DigitalLowpass`` checks it).

    References
    ----------
    .. [1] Oppenheim and Schafer, *Discrete-Time Signal Processing*, sec. 5.3.
    """
    rate = check_positive(rate_hz, "rate_hz")
    bb = _check_coefficients(b, "b")
    aa = _check_coefficients(a, "a")
    if aa[0] == 0:
        raise InputError("a[0]=0.0 must be non-zero", field="a[0]", code="invalid")
    f = check_freqs(apparent_hz, "apparent_hz")
    if (f > rate / 2 * (1 + 1e-12)).any():
        bad = float(f[f > rate / 2 * (1 + 1e-12)].ravel()[0])
        raise InputError(
            f"apparent_hz contains {bad!r}; it must be <= the Nyquist frequency {rate / 2:g} Hz "
            "(fold the frequencies first)",
            field="apparent_hz",
            code="above_limit",
        )
    return _digital_unchecked(f, rate, bb, aa)


def _digital_unchecked(
    f: FloatArray, rate: float, b: FloatArray, a: FloatArray, out: FloatArray | None = None
) -> FloatArray:
    if _use_exact(f.size, b, a):
        return _digital_exact(f, rate, b, a, out)
    lo, step = _grid_table(b.tobytes(), a.tobytes())
    i, frac = _grid_position(f, rate, lo.size - 1)
    return _grid_lookup(lo, step, i, frac, out)


def _use_exact(n: int, b: FloatArray, a: FloatArray) -> bool:
    return n * (b.size + a.size - 1) < _EXACT_WORK_LIMIT


def _digital_exact(
    f: FloatArray, rate: float, b: FloatArray, a: FloatArray, out: FloatArray | None = None
) -> FloatArray:
    _, h = sig.freqz(b, a, worN=np.ravel(f), fs=rate)
    att = _magnitude_to_attenuation(np.abs(h).reshape(f.shape))
    if out is None:
        return att
    out[...] = att
    return out


def _grid_position(
    f: FloatArray, rate: float, cells: int
) -> tuple[NDArray[np.intp], NDArray[np.float32]]:
    """Cell index and fraction of each frequency on ``cells`` equal cells from 0 to rate/2.

    A frequency at (or a rounding error above) rate/2 lands in cell ``cells``, the
    table's flat pad, so no clipping pass is needed.
    """
    x = np.multiply(f, 2.0 * cells / rate)
    frac, whole = np.modf(x, out=(x, np.empty_like(x)))
    return whole.astype(np.intp), frac.astype(np.float32)


def _grid_lookup(
    lo: NDArray[np.float32],
    step: NDArray[np.float32],
    i: NDArray[np.intp],
    frac: NDArray[np.float32],
    out: FloatArray | None = None,
) -> FloatArray:
    """Attenuation from |H| interpolated linearly between grid points ``i`` and ``i + 1``.

    Interpolating the magnitude rather than the dB value keeps the error small next to
    the nulls of a stopband, where the dB curve is far from straight. The arithmetic is
    single precision (relative error ~1e-7, about 1e-5 dB, far inside the
    interpolation error) because a gather and a logarithm over 1e6 tones take half the
    time in float32. The table is floored at 1e-15, so the interpolated magnitude is too.
    """
    if out is None:
        out = np.empty(i.shape)
    mag = np.take(step, i)
    mag *= frac
    mag += np.take(lo, i)
    np.log(mag, out=mag)  # float32 log is vectorised in numpy; log2/log10 are not
    np.multiply(mag, -20.0 / _LN10, out=out)
    return out


@functools.lru_cache(maxsize=8)
def _grid_table(b_bytes: bytes, a_bytes: bytes) -> tuple[NDArray[np.float32], NDArray[np.float32]]:
    """|H| on ``cells + 1`` equally spaced frequencies from 0 to the Nyquist frequency.

    Returned as ``lo = |H_i|`` and ``step = |H_{i+1}| - |H_i|`` per cell, plus one flat
    pad cell at the Nyquist frequency. ``2 * cells`` is at least 2^18 and at least 128
    times the filter length (up to 2^23), so that linear interpolation stays within
    about 0.05 dB of the exact response wherever the attenuation is below 80 dB.
    """
    b = np.frombuffer(b_bytes, dtype=np.float64)
    a = np.frombuffer(a_bytes, dtype=np.float64)
    length = max(b.size, a.size)
    nfft = _GRID_MIN_POINTS
    while nfft < 128 * length and nfft < _GRID_MAX_POINTS:
        nfft *= 2
    h = np.abs(np.fft.rfft(b, nfft))
    if a.size > 1:
        den = np.abs(np.fft.rfft(a, nfft))
        with np.errstate(divide="ignore"):
            h /= den
    else:
        h /= abs(a[0])
    # Floor at 1e-15 (300 dB) and cap at 1e30 so float32 holds every value.
    np.clip(h, _MAG_FLOOR, 1e30, out=h)
    lo = h.astype(np.float32)
    step = np.zeros_like(lo)
    np.subtract(lo[1:], lo[:-1], out=step[:-1])
    lo.setflags(write=False)
    step.setflags(write=False)
    return lo, step
