"""Thinning large spectra for display without losing a peak.

A screen shows at most a few thousand columns; a spectrum with a million lines would
weigh tens of megabytes as JSON. Keeping the minimum and the maximum of every pixel-wide
bucket draws the same envelope as the full spectrum, and every peak survives.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = ["DEFAULT_BUCKETS", "minmax_decimate"]

#: About one bucket per pixel column of a wide figure, with margin.
DEFAULT_BUCKETS = 2000


def _check_buckets(buckets: int) -> int:
    if isinstance(buckets, bool) or not isinstance(buckets, int | np.integer):
        raise ValueError(f"buckets={buckets!r} must be an integer >= 1")
    if buckets < 1:
        raise ValueError(f"buckets={buckets} must be >= 1")
    return int(buckets)


def bucket_edges(n: int, buckets: int) -> NDArray[np.int64]:
    """Start index of each of ``buckets`` near-equal runs of ``n`` points, plus ``n``."""
    return np.linspace(0, n, buckets + 1).astype(np.int64)


def minmax_decimate(
    freq: ArrayLike, amp: ArrayLike, buckets: int = DEFAULT_BUCKETS
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Keep the smallest and the largest amplitude of each bucket of consecutive lines.

    Parameters
    ----------
    freq : array_like
        Line frequencies, Hz, ascending, 1-D.
    amp : array_like
        Amplitude of each line (any unit, linear or dB), same length as ``freq``.
        NaN counts as missing.
    buckets : int
        Number of buckets of near-equal length (about one per pixel column).

    Returns
    -------
    freq, amp : ndarray
        Two points per bucket, the minimum and the maximum in frequency order (so the
        line drawn through them keeps the envelope). Unchanged copies when the input
        has no more than ``2 * buckets`` lines.
    """
    buckets = _check_buckets(buckets)
    f = np.asarray(freq, dtype=np.float64)
    a = np.asarray(amp, dtype=np.float64)
    if f.ndim != 1 or a.shape != f.shape:
        raise ValueError(
            f"freq and amp must be 1-D of the same length, got shapes {f.shape} and {a.shape}"
        )
    n = f.size
    if n <= 2 * buckets:
        return f.copy(), a.copy()
    edges = bucket_edges(n, buckets)
    start, stop = edges[:-1], edges[1:]
    width = int((stop - start).max())
    # A (buckets, width) index grid; cells past a bucket's end are masked out.
    idx = start[:, None] + np.arange(width)[None, :]
    valid = idx < stop[:, None]
    vals = a[np.minimum(idx, n - 1)]
    missing = ~valid | np.isnan(vals)
    i_max = np.argmax(np.where(missing, -np.inf, vals), axis=1)
    i_min = np.argmin(np.where(missing, np.inf, vals), axis=1)
    rows = np.arange(buckets)
    j_max = idx[rows, i_max]
    j_min = idx[rows, i_min]
    pick = np.column_stack([np.minimum(j_min, j_max), np.maximum(j_min, j_max)]).ravel()
    return f[pick], a[pick]
