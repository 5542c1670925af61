"""Folding of frequencies at a sample rate: apparent frequency, Nyquist zone, inversion.

Everything here is vectorised: arrays of frequencies in, arrays out.

References
----------
.. [1] A. V. Oppenheim and R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
   Pearson, 2010, sec. 4.2 (sampling, aliasing of a continuous-time sinusoid).
.. [2] R. G. Lyons, *Understanding Digital Signal Processing*, 3rd ed., 2011, sec. 2.3
   (band-pass sampling, Nyquist zones, spectral inversion in even zones).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .checks import bad, check_freqs, check_positive

__all__ = [
    "MAX_FOLD_RATIO",
    "check_fold_range",
    "fold",
    "fold_intervals",
    "fold_line",
    "fold_offset",
    "fold_unchecked",
    "is_inverted",
    "nyquist_zone",
    "zone_unchecked",
]

FloatArray = NDArray[np.float64]

#: Largest true frequency, as a multiple of the sample rate, that is folded. Beyond it
#: ``f / fs`` keeps too few fractional digits in double precision (machine epsilon
#: 2.2e-16 × 1e12 ≈ 2e-4 of fs) for the apparent frequency to mean anything. The API's
#: own bounds (rates from 1 S/s, tones up to 1e10 Hz) stay well inside it.
MAX_FOLD_RATIO = 1e12


def check_fold_range(f: FloatArray, sample_rate_hz: float, name: str = "freq_hz") -> None:
    """Refuse true frequencies above ``MAX_FOLD_RATIO`` times the sample rate.

    Parameters
    ----------
    f : ndarray
        Checked true frequencies, Hz (finite, >= 0).
    sample_rate_hz : float
        Checked sample rate, Hz (> 0).
    name : str
        Parameter name for the message and the error's ``field``.

    Raises
    ------
    InputError
        Code ``above_limit``, limit ``MAX_FOLD_RATIO * sample_rate_hz`` in Hz.
    """
    if f.size == 0:
        return
    top = float(np.max(f))
    limit = MAX_FOLD_RATIO * sample_rate_hz
    if top > limit:
        raise bad(
            f"{name} contains {top!r} Hz, more than {MAX_FOLD_RATIO:g} times the sample "
            f"rate {sample_rate_hz!r} Hz; its apparent frequency cannot be computed in "
            "double precision",
            name,
            "above_limit",
            value=top,
            limit=limit,
        )


def fold(freq_hz: ArrayLike, sample_rate_hz: float) -> FloatArray:
    """Apparent frequency of a sinusoid after sampling.

    Parameters
    ----------
    freq_hz : array_like
        True frequencies, Hz, >= 0.
    sample_rate_hz : float
        Sample rate, Hz (samples per second), > 0.

    Returns
    -------
    ndarray
        Apparent frequencies in [0, sample_rate_hz / 2], Hz.

    Notes
    -----
    ``fold(f, fs) = |f - fs * round(f / fs)|`` [1]_. A tone at exactly an odd multiple of
    fs/2 reads fs/2; at a multiple of fs it reads 0 Hz (DC).

    References
    ----------
    .. [1] Oppenheim and Schafer, *Discrete-Time Signal Processing*, sec. 4.2.
    """
    fs = check_positive(sample_rate_hz, "sample_rate_hz")
    f = check_freqs(freq_hz)
    check_fold_range(f, fs)
    return fold_unchecked(f, fs)


def fold_offset(f: FloatArray, fs: float | FloatArray) -> FloatArray:
    """Signed offset ``f - fs·round(f/fs)`` of each frequency from its nearest multiple of fs.

    The one home of the fold formula: :func:`fold` is its absolute value. Its sign says
    which way the fold runs there: >= 0 where a rising true frequency gives a rising
    apparent one, < 0 where it falls. Inputs are not checked (arrays of finite
    frequencies >= 0, ``fs > 0``; see :func:`check_fold_range`).

    Parameters
    ----------
    f : ndarray
        True frequencies, Hz.
    fs : float or ndarray
        Sample rate(s), Hz, broadcast against ``f``.

    Returns
    -------
    ndarray
        Offsets, Hz, in ``[-fs/2, fs/2]``.

    References
    ----------
    .. [1] Oppenheim and Schafer, *Discrete-Time Signal Processing*, sec. 4.2.
    """
    huge = fs > 1e290 if isinstance(fs, float) else bool(np.any(fs > 1e290))
    if huge:
        # fs·round(f/fs) may pass the largest double (~1.8e308): work in units of fs.
        r = f / fs
        big: FloatArray = (r - np.rint(r)) * fs
        return big
    out: FloatArray = f - fs * np.rint(f / fs)
    return out


def fold_unchecked(f: FloatArray, fs: float | FloatArray) -> FloatArray:
    """:func:`fold` without the input checks, for callers that checked already."""
    out: FloatArray = np.abs(fold_offset(f, fs))
    return out


def nyquist_zone(freq_hz: ArrayLike, sample_rate_hz: float) -> NDArray[np.int64]:
    """Nyquist zone of each frequency, counted from 1.

    Zone ``k`` covers ``((k - 1) * fs/2, k * fs/2]``; 0 Hz belongs to zone 1. A tone in
    zone 1 is not aliased; one in a higher zone folds back into zone 1 [2]_.

    Parameters
    ----------
    freq_hz : array_like
        True frequencies, Hz, >= 0.
    sample_rate_hz : float
        Sample rate, Hz, > 0.

    Returns
    -------
    ndarray of int
        Zone numbers, >= 1.

    References
    ----------
    .. [2] Lyons, *Understanding Digital Signal Processing*, sec. 2.3.
    """
    fs = check_positive(sample_rate_hz, "sample_rate_hz")
    f = check_freqs(freq_hz)
    check_fold_range(f, fs)
    return zone_unchecked(f, fs)


def zone_unchecked(f: FloatArray, fs: float) -> NDArray[np.int64]:
    """:func:`nyquist_zone` without the range checks; a NaN still raises.

    Raises
    ------
    InputError
        ``not_finite`` when a frequency (or ``f / fs``) is NaN: it has no zone, and the
        cast to int64 would make one up.
    """
    # f / fs first, then the exact doubling: fs / 2 underflows for the smallest rates.
    # The clip keeps the cast to int64 defined for unchecked callers (2**62 < int64 max).
    ratio = (f / fs) * 2.0
    if ratio.size and np.isnan(np.max(ratio)):
        i = int(np.flatnonzero(np.isnan(ratio))[0])
        raise bad(
            f"freq_hz[{i}] is not a number; every frequency must be finite and >= 0 Hz",
            "freq_hz",
            "not_finite",
        )
    zone = np.ceil(np.minimum(ratio, 2.0**62))
    # Guard against round-off putting an exact multiple of fs/2 one zone high: the fold
    # formula is the arbiter, so zone and apparent frequency always agree.
    return np.maximum(zone, 1).astype(np.int64)


def fold_line(
    top_hz: float, sample_rate_hz: float, min_zones: int = 2
) -> tuple[FloatArray, FloatArray]:
    """Corners of the fold line from 0 Hz to the end of the Nyquist zone holding ``top_hz``.

    Apparent frequency is piecewise linear in true frequency, with corners at every
    multiple of fs/2: 0 Hz at even multiples, fs/2 at odd ones [1]_. The corners are
    the zone edges, folded with the one fold formula, so a figure drawn from them agrees
    with :func:`fold` everywhere.

    Parameters
    ----------
    top_hz : float
        Highest true frequency the line must reach, Hz, >= 0.
    sample_rate_hz : float
        Sample rate, Hz, > 0.
    min_zones : int
        Fewest zones to draw (the first alias zone is shown even when nothing reaches it).

    Returns
    -------
    true_hz, apparent_hz : ndarray
        ``zones + 1`` corner frequencies ``k·fs/2`` and their apparent values. The last
        true frequency is the end of the zone holding ``top_hz``; ``zones`` is
        ``len(true_hz) - 1``.
    """
    fs = check_positive(sample_rate_hz, "sample_rate_hz")
    zones = max(int(min_zones), int(np.max(nyquist_zone(top_hz, fs))))
    true_hz: FloatArray = np.arange(zones + 1, dtype=np.float64) * (fs / 2.0)
    return true_hz, fold_unchecked(true_hz, fs)


def is_inverted(freq_hz: ArrayLike, sample_rate_hz: float) -> NDArray[np.bool_]:
    """Whether the spectrum is mirrored where each frequency lands (even Nyquist zone).

    In an even zone a rising true frequency gives a falling apparent frequency, and
    upper and lower sidebands swap sides [2]_.

    Parameters
    ----------
    freq_hz : array_like
        True frequencies, Hz, >= 0.
    sample_rate_hz : float
        Sample rate, Hz, > 0.

    Returns
    -------
    ndarray of bool
    """
    out: NDArray[np.bool_] = nyquist_zone(freq_hz, sample_rate_hz) % 2 == 0
    return out


def fold_intervals(
    low_hz: ArrayLike, high_hz: ArrayLike, sample_rate_hz: float
) -> tuple[FloatArray, FloatArray]:
    """Fold frequency intervals (for example a tone with a speed tolerance).

    Inside one Nyquist zone the fold is monotonic, so an interval keeps its width. An
    interval that crosses one zone edge has two pieces that both reach that edge's
    apparent value (0 Hz or fs/2), so their union is again one interval. An interval
    that spans a whole zone covers the whole band ``[0, fs/2]``. The result is therefore
    always a single apparent interval per input interval.

    Parameters
    ----------
    low_hz, high_hz : array_like
        Interval ends, Hz, ``0 <= low <= high``; broadcast together.
    sample_rate_hz : float
        Sample rate, Hz, > 0.

    Returns
    -------
    apparent_low, apparent_high : ndarray
        Apparent interval ends, Hz, in ``[0, fs/2]``.
    """
    fs = check_positive(sample_rate_hz, "sample_rate_hz")
    lo = check_freqs(low_hz, "low_hz")
    hi = check_freqs(high_hz, "high_hz")
    check_fold_range(np.asarray(hi, dtype=np.float64), fs, "high_hz")
    lo, hi = (np.atleast_1d(a).astype(np.float64) for a in np.broadcast_arrays(lo, hi))
    if np.any(hi < lo):
        i = int(np.flatnonzero(hi < lo)[0])
        raise bad(
            f"high_hz[{i}]={float(hi[i])!r} is below low_hz[{i}]={float(lo[i])!r}",
            f"high_hz[{i}]",
            "below_limit",
            value=float(hi[i]),
            limit=float(lo[i]),
        )
    nyq = fs / 2.0
    a_lo = fold_unchecked(lo, fs)
    a_hi = fold_unchecked(hi, fs)
    z_lo = zone_unchecked(lo, fs)
    z_hi = zone_unchecked(hi, fs)
    # A low end exactly on a zone's upper edge: the interval runs into the next zone.
    on_edge = (hi > lo) & (lo > 0) & (lo == z_lo * nyq)
    z_lo = np.where(on_edge, z_lo + 1, z_lo)

    out_lo = np.minimum(a_lo, a_hi)
    out_hi = np.maximum(a_lo, a_hi)
    crosses = z_hi == z_lo + 1
    # An odd zone ends at fs/2 on the apparent axis, an even zone at 0 Hz.
    ends_at_nyquist = crosses & (z_lo % 2 == 1)
    ends_at_dc = crosses & (z_lo % 2 == 0)
    out_hi = np.where(ends_at_nyquist, nyq, out_hi)
    out_lo = np.where(ends_at_dc, 0.0, out_lo)
    spans = z_hi >= z_lo + 2
    out_lo = np.where(spans, 0.0, out_lo)
    out_hi = np.where(spans, nyq, out_hi)
    return out_lo, out_hi
