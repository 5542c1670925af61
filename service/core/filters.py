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

from .checks import check_freqs, check_int, check_positive, check_range, show
from .errors import InputError

__all__ = [
    "ANALOG_FAMILIES",
    "MAX_ATTENUATION_DB",
    "MAX_Q",
    "MIN_CUTOFF_HZ",
    "MIN_Q",
    "MIN_RIPPLE_DB",
    "MIN_STOP_ATTEN_DB",
    "analog_attenuation_db",
    "analog_unchecked",
    "check_coefficients",
    "check_cutoff",
    "check_family",
    "check_table",
    "magnitude_to_attenuation",
    "sensor_attenuation_db",
    "sensor_unchecked",
    "table_attenuation_db",
    "table_unchecked",
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


_MAX_ORDER = 20
_MAX_RIPPLE_DB = 6.0
_MAX_STOP_ATTEN_DB = 200.0
#: Smallest passband ripple designed, dB. scipy's Chebyshev I prototype divides by the
#: ripple factor sqrt(10^(rp/10) - 1), which rounds to 0 below about 1e-15 dB
#: (ZeroDivisionError); 0.001 dB is already a Butterworth in all but name.
MIN_RIPPLE_DB = 0.001
#: Smallest stopband attenuation designed, dB. scipy's Chebyshev II prototype divides
#: by the same factor of the stopband attenuation (ZeroDivisionError below ~1e-15 dB);
#: a stopband less than 1 dB down is not a stopband.
MIN_STOP_ATTEN_DB = 1.0
#: Lowest cutoff designed, Hz. The response is evaluated at f / cutoff; for a denormal
#: cutoff 1 / cutoff is infinite and 0 Hz gives NaN. No anti-alias filter sits below a
#: millihertz (the slowest rate followed is 1 S/s).
MIN_CUTOFF_HZ = 1e-3
#: Quality factor range of a sensor resonance. Below 1e-3 the damping term r²/Q²
#: overflows (Q² underflows to 0 for a denormal Q, found by fuzzing); a mounted sensor
#: is never that damped. Above 1000 no mounting rings.
MIN_Q = 1e-3
MAX_Q = 1000.0
# Factors multiplied before one logarithm is taken; each pole pair is of degree 4 in
# the normalised frequency, so 4 of them stay finite up to f/fc ~ 1e19.
_LOG_GROUP = 4
_LOG10_2 = math.log10(2.0)
_MAG_FLOOR = 10.0 ** (-MAX_ATTENUATION_DB / 20.0)


# --------------------------------------------------------------------------- checks


def check_cutoff(cutoff_hz: object) -> float:
    """A cutoff frequency, Hz: finite and at least :data:`MIN_CUTOFF_HZ`."""
    return check_range(
        cutoff_hz, "cutoff_hz", MIN_CUTOFF_HZ, math.inf, text=f">= {MIN_CUTOFF_HZ:g} Hz"
    )


def check_family(
    family: str, ripple_db: float | None, stop_atten_db: float | None
) -> tuple[float | None, float | None]:
    """Checked ``(ripple_db, stop_atten_db)`` for an analog family (each dB or None)."""
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
                f"ripple_db is required for a {family} filter ({MIN_RIPPLE_DB:g} to 6 dB)",
                field="ripple_db",
                code="missing",
            )
        rp = check_range(ripple_db, "ripple_db", MIN_RIPPLE_DB, _MAX_RIPPLE_DB, unit=" dB")
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
                f"stop_atten_db is required for a {family} filter "
                f"({MIN_STOP_ATTEN_DB:g} to {_MAX_STOP_ATTEN_DB:g} dB)",
                field="stop_atten_db",
                code="missing",
            )
        rs = check_range(
            stop_atten_db, "stop_atten_db", MIN_STOP_ATTEN_DB, _MAX_STOP_ATTEN_DB, unit=" dB"
        )
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


def check_table(table_hz: ArrayLike, table_gain_db: ArrayLike) -> tuple[FloatArray, FloatArray]:
    """A measured response table as arrays: frequencies (Hz, > 0, increasing) and gains (dB)."""
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


def check_coefficients(values: ArrayLike, name: str) -> FloatArray:
    """Filter coefficients as a non-empty 1-D array of finite values."""
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


def magnitude_to_attenuation(mag: FloatArray) -> FloatArray:
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


def analog_unchecked(
    f: FloatArray,
    family: str,
    order: int,
    cutoff_hz: float,
    ripple_db: float | None,
    stop_atten_db: float | None,
    out: FloatArray | None = None,
) -> FloatArray:
    """Attenuation, dB, of an analog design at frequencies ``f`` (Hz); inputs already checked."""
    with np.errstate(over="ignore"):  # a tiny cutoff gives inf here, clipped next
        w2 = np.multiply(f, 1.0 / cutoff_hz)
    # Beyond f/fc = 1e15 every response is at its high-frequency asymptote or capped at
    # MAX_ATTENUATION_DB (order 1: 20·log10(1e15) = 300 dB), so the clip changes no
    # result and keeps the square finite.
    np.minimum(w2, 1e15, out=w2)
    np.square(w2, out=w2)
    if out is None:
        out = np.empty_like(w2)
    if family == "butterworth":
        return _butterworth(w2, order, out)
    z, p, k = _analog_prototype(family, order, ripple_db, stop_atten_db)
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
    rp, rs = check_family(family, ripple_db, stop_atten_db)
    n = check_int(order, "order", 1, _MAX_ORDER)
    fc = check_cutoff(cutoff_hz)
    f = check_freqs(freq_hz)
    return analog_unchecked(f, family, n, fc, rp, rs)


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
    fx, gy = check_table(table_hz, table_gain_db)
    f = check_freqs(freq_hz)
    return table_unchecked(f, fx, gy)


def table_unchecked(f: FloatArray, fx: FloatArray, gy: FloatArray) -> FloatArray:
    """Attenuation, dB, from a measured table, interpolated on log-frequency; no checks."""
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
    qq = check_range(q, "q", MIN_Q, MAX_Q)
    f = check_freqs(freq_hz)
    return sensor_unchecked(f, fn, qq)


def sensor_unchecked(f: FloatArray, fn: float, q: float) -> FloatArray:
    """Attenuation, dB (negative near resonance), of a sensor resonance; no checks."""
    with np.errstate(over="ignore"):  # r far above 1e77 only: the attenuation caps anyway
        r2 = np.square(f / fn)
        den = np.square(1.0 - r2)
        den += r2 / (q * q)
        np.log10(den, out=den)
    den *= 10.0
    return _to_attenuation(den)
