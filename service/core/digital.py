"""Digital filters in an acquisition chain: Kaiser FIR design, decimation filters and
their magnitude response at folded frequencies, as attenuation in dB.

Same convention as :mod:`service.core.filters`: ``attenuation_db = -20 * log10(|H|)``,
magnitudes floored at ``1e-15`` (300 dB).

References
----------
.. [1] A. V. Oppenheim and R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
   Pearson, 2010, sec. 5.3 (magnitude response from poles and zeros), sec. 7.5 (FIR
   design by windowing), sec. 7.6 (Kaiser window method), sec. 4.6 (decimation).
.. [2] J. F. Kaiser, "Nonrecursive digital filter design using the I0-sinh window
   function", Proc. IEEE Int. Symp. Circuits and Systems, 1974, pp. 20-23.
"""

from __future__ import annotations

import functools
import math

import numpy as np
import scipy.signal as sig
from numpy.typing import ArrayLike, NDArray

from .checks import check_freqs, check_int, check_positive, show
from .errors import InputError
from .filters import MAX_ATTENUATION_DB, check_coefficients, magnitude_to_attenuation

__all__ = [
    "MAX_FIR_TAPS",
    "decimation_filter",
    "design_lowpass_fir",
    "digital_attenuation_db",
    "digital_exact",
    "digital_unchecked",
    "exact_is_cheaper",
    "grid_lookup",
    "grid_position",
    "grid_table",
]

FloatArray = NDArray[np.float64]

#: Largest FIR the Kaiser design will return.
MAX_FIR_TAPS = 65_537

_MIN_FIR_ATTEN_DB = 10.0
_MAX_FIR_ATTEN_DB = 200.0
_MAX_DECIMATION = 4096
_MAX_IIR_DECIMATION = 13
# Above this many (frequency x coefficient) products the digital response is read from
# a dense cached grid instead of being evaluated exactly at each frequency.
_EXACT_WORK_LIMIT = 4_000_000
_GRID_MIN_POINTS = 2**18
_GRID_MAX_POINTS = 2**23
_LN10 = math.log(10.0)
_MAG_FLOOR = 10.0 ** (-MAX_ATTENUATION_DB / 20.0)


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
    bb = check_coefficients(b, "b")
    aa = check_coefficients(a, "a")
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
    return digital_unchecked(f, rate, bb, aa)


def digital_unchecked(
    f: FloatArray, rate: float, b: FloatArray, a: FloatArray, out: FloatArray | None = None
) -> FloatArray:
    """Attenuation, dB, of ``b, a`` at folded frequencies ``f`` (Hz) at ``rate`` (Hz).

    No input checks: for callers that checked already.
    """
    if exact_is_cheaper(f.size, b, a):
        return digital_exact(f, rate, b, a, out)
    lo, step = grid_table(b.tobytes(), a.tobytes())
    i, frac = grid_position(f, rate, lo.size - 1)
    return grid_lookup(lo, step, i, frac, out)


def exact_is_cheaper(n: int, b: FloatArray, a: FloatArray) -> bool:
    """Whether ``n`` frequencies are evaluated exactly (below the work limit), not on the grid."""
    return n * (b.size + a.size - 1) < _EXACT_WORK_LIMIT


def digital_exact(
    f: FloatArray, rate: float, b: FloatArray, a: FloatArray, out: FloatArray | None = None
) -> FloatArray:
    """Exact attenuation, dB, from scipy.signal.freqz at frequencies ``f`` (Hz)."""
    if rate > 1e300:
        # In radians per sample, f / rate first: 2π·f overflows near the float limit.
        _, h = sig.freqz(b, a, worN=np.ravel(f) / rate * (2.0 * np.pi))
    else:
        _, h = sig.freqz(b, a, worN=np.ravel(f), fs=rate)
    att = magnitude_to_attenuation(np.abs(h).reshape(f.shape))
    if out is None:
        return att
    out[...] = att
    return out


def grid_position(
    f: FloatArray, rate: float, cells: int
) -> tuple[NDArray[np.intp], NDArray[np.float32]]:
    """Cell index and fraction of each frequency on ``cells`` equal cells from 0 to rate/2.

    A frequency at (or a rounding error above) rate/2 lands in cell ``cells``, the
    table's flat pad, so no clipping pass is needed.
    """
    x = np.multiply(f, 2.0 * cells / rate)
    frac, whole = np.modf(x, out=(x, np.empty_like(x)))
    return whole.astype(np.intp), frac.astype(np.float32)


def grid_lookup(
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
def grid_table(b_bytes: bytes, a_bytes: bytes) -> tuple[NDArray[np.float32], NDArray[np.float32]]:
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
