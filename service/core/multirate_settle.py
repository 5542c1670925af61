"""Which additional sample rate would settle an ambiguous multi-rate answer."""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
from numpy.typing import ArrayLike

from .folding import fold
from .multirate_crt import check_array, check_number

__all__ = ["DEFAULT_SETTLE_RATES_HZ", "settle_rate"]

#: Converter rates offered when the caller gives none, S/s (binary DAQ series and the
#: audio rates).
DEFAULT_SETTLE_RATES_HZ: tuple[float, ...] = (
    2048.0, 2560.0, 4096.0, 5120.0, 8000.0, 8192.0, 10240.0, 12800.0, 16000.0, 16384.0,
    20480.0, 25600.0, 32000.0, 32768.0, 40960.0, 44100.0, 48000.0, 51200.0, 65536.0,
    96000.0, 102400.0, 131072.0, 192000.0, 204800.0,
)  # fmt: skip


def settle_rate(
    candidates_hz: ArrayLike,
    rates_hz: Sequence[float] | None = None,
    exclude_hz: Sequence[float] = (),
    lines: int = 3200,
) -> tuple[float, float]:
    """The additional sample rate that best tells candidate true frequencies apart.

    Parameters
    ----------
    candidates_hz : array_like
        Candidate true frequencies, Hz (at least 2).
    rates_hz : sequence of float, optional
        The converter's available rates, S/s; default :data:`DEFAULT_SETTLE_RATES_HZ`.
    exclude_hz : sequence of float
        Rates already used, S/s.
    lines : int
        Analysis lines of the new capture: bin width = ``rate / 2.56 / lines``.

    Returns
    -------
    (rate_hz, separation_bins)
        The rate whose folded apparent frequencies of the candidates lie farthest apart
        (the largest smallest pairwise distance, in that capture's bins; lower rate on a
        tie); ``(nan, nan)`` when fewer than two candidates or no rate is left.
    """
    c = np.unique(check_array(candidates_hz, "candidates_hz"))
    lines_ = int(check_number(lines, "lines"))
    pool = DEFAULT_SETTLE_RATES_HZ if rates_hz is None else tuple(rates_hz)
    pool = tuple(
        r
        for r in (check_number(x, "rates_hz") for x in pool)
        if not any(math.isclose(r, e, rel_tol=1e-9) for e in exclude_hz)
    )
    if c.size < 2 or not pool:
        return math.nan, math.nan
    best_rate, best_sep = math.nan, -1.0
    iu = np.triu_indices(c.size, 1)
    for r in sorted(pool):  # a few dozen rates
        a = fold(c, r)
        sep = float(np.min(np.abs(a[iu[0]] - a[iu[1]]))) / (r / 2.56 / lines_)
        if sep > best_sep * (1 + 1e-9) + 1e-12:
            best_rate, best_sep = r, sep
    return best_rate, best_sep
