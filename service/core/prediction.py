"""Push labelled tones through an acquisition chain: where each lands and how strongly.

References
----------
.. [1] Common practice (no single source): the analysed span is fs/2.56 and the
   bin width is span / lines.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from .analysis_lines import SPAN_DIVISOR
from .chain import Chain, ChainResponse
from .checks import check_band_hz, check_int, check_range
from .errors import InputError
from .folding import fold_intervals
from .tones import ToneSet

__all__ = [
    "DEFAULT_LINES",
    "Collisions",
    "Prediction",
    "predict",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]

#: Common practice: an analyser shows DC to fs/2.56 as its analysed span.
#: Analysis lines assumed for bin numbers and collision tolerance when none are given.
DEFAULT_LINES = 3200
#: How close (in bins) a predicted alias may come to another line before it can mask it.
DEFAULT_COLLISION_BINS = 3.0
#: At most this many collisions are listed; the total is always counted.
MAX_COLLISIONS = 2000
#: Up to this many tones every pair is checked at once; above, a sorted window search.
_ALL_PAIRS_MAX = 48


@dataclass(frozen=True)
class Collisions:
    """Pairs of tones whose apparent frequencies come within ``tolerance_hz``.

    ``separation_hz`` is the gap between the two apparent intervals (0 where they overlap).

    ``alias`` always indexes an aliased tone; ``other`` is any other tone (direct or
    aliased) with a different true frequency.
    """

    alias: IntArray
    other: IntArray
    separation_hz: FloatArray
    tolerance_hz: float
    total: int


@dataclass(frozen=True)
class Prediction:
    """Where each tone lands after the chain, and how strongly."""

    tones: ToneSet
    chain: Chain
    response: ChainResponse
    band_hz: tuple[float, float]
    lines: int
    bin_width_hz: float
    bin: IntArray
    apparent_low_hz: FloatArray
    apparent_high_hz: FloatArray
    apparent_amplitude: FloatArray
    aliased: NDArray[np.bool_]
    in_band: NDArray[np.bool_]
    collisions: Collisions
    speed_tolerance_pct: float
    notes: tuple[str, ...]

    @property
    def nyquist_hz(self) -> float:
        return self.response.final_rate_hz / 2.0


def predict(
    tones: ToneSet,
    chain: Chain,
    band_hz: tuple[float, float] | None = None,
    lines: int | None = None,
    speed_tolerance_pct: float = 0.0,
    collision_bins: float = DEFAULT_COLLISION_BINS,
) -> Prediction:
    """Predict apparent frequency, zone, attenuation and level of every tone.

    Parameters
    ----------
    tones : ToneSet
        The tones at the sensor (true frequencies, Hz; amplitudes in any unit).
    chain : Chain
        The acquisition chain; validated here, its notes returned.
    band_hz : (float, float), optional
        Band of interest, Hz. Default DC to final rate / 2.56 (common practice).
    lines : int, optional
        Analysis lines over the span final rate / 2.56; default 3200. Sets the bin
        width ``rate / (2.56 * lines)``, Hz.
    speed_tolerance_pct : float
        Uncertainty of machine speed, percent (0–50). Speed-proportional parts of each
        tone become intervals, folded to apparent intervals.
    collision_bins : float
        Separation, in bins, below which an alias is reported as a masking risk.

    Returns
    -------
    Prediction
    """
    notes = tuple(chain.validate())
    n_lines = (
        DEFAULT_LINES
        if lines is None
        else check_int(
            lines,
            "lines",
            1,
            1_048_576,
            word="a whole number",
            integral_floats=True,
            one_message=True,
        )
    )
    tol = check_range(speed_tolerance_pct, "speed_tolerance_pct", 0, 50)
    if not np.isfinite(collision_bins) or collision_bins <= 0:
        raise InputError(
            f"collision_bins={collision_bins!r} must be > 0",
            field="collision_bins",
            code="not_positive",
            value=collision_bins,
        )
    response = chain.evaluate(tones.freq_hz)
    rate = response.final_rate_hz
    band = check_band_hz(band_hz, (0.0, rate / SPAN_DIVISOR))
    bin_width = rate / (SPAN_DIVISOR * n_lines)

    if tol > 0:
        spread = np.abs(tones.speed_hz) * (tol / 100.0)
        true_lo = np.maximum(tones.freq_hz - spread, 0.0)
        app_lo, app_hi = fold_intervals(true_lo, tones.freq_hz + spread, rate)
    else:
        app_lo = app_hi = response.apparent_hz
    aliased = response.zone > 1
    in_band = (app_hi >= band[0]) & (app_lo <= band[1])
    level = tones.amplitude * 10.0 ** (-response.attenuation_db / 20.0)
    bins = np.rint(response.apparent_hz / bin_width).astype(np.int64)
    collisions = _collisions(tones.freq_hz, app_lo, app_hi, aliased, collision_bins * bin_width)
    return Prediction(
        tones=tones,
        chain=chain,
        response=response,
        band_hz=band,
        lines=n_lines,
        bin_width_hz=bin_width,
        bin=bins,
        apparent_low_hz=app_lo,
        apparent_high_hz=app_hi,
        apparent_amplitude=level,
        aliased=aliased,
        in_band=in_band,
        collisions=collisions,
        speed_tolerance_pct=tol,
        notes=notes,
    )


def _collisions(
    true_hz: FloatArray,
    lo: FloatArray,
    hi: FloatArray,
    aliased: NDArray[np.bool_],
    tolerance_hz: float,
) -> Collisions:
    """Aliased tones whose apparent interval comes within ``tolerance_hz`` of another's."""
    empty_i = np.empty(0, dtype=np.int64)
    n = true_hz.size
    if n < 2 or not np.any(aliased):
        return Collisions(empty_i, empty_i, np.empty(0), tolerance_hz, 0)
    if n <= _ALL_PAIRS_MAX:
        i, j, sep = _pairs_all(true_hz, lo, hi, aliased, tolerance_hz)
    else:
        i, j, sep = _pairs_windowed(true_hz, lo, hi, aliased, tolerance_hz)
    total = int(i.size)
    # Closest first; ties in the order of the tones, so both searches list the same.
    first = np.lexsort((j, i, sep))[:MAX_COLLISIONS]
    return Collisions(i[first], j[first], sep[first], tolerance_hz, total)


def _pairs_all(
    true_hz: FloatArray,
    lo: FloatArray,
    hi: FloatArray,
    aliased: NDArray[np.bool_],
    tolerance_hz: float,
) -> tuple[IntArray, IntArray, FloatArray]:
    """Every pair at once as an n × n table: for a few dozen tones, fewer numpy calls
    than the window search. Row ``i``, column ``j``; the same tests as the window."""
    gap = np.maximum(lo[np.newaxis, :] - hi[:, np.newaxis], lo[:, np.newaxis] - hi[np.newaxis, :])
    np.maximum(gap, 0.0, out=gap)
    ok = gap <= tolerance_hz
    ok &= aliased[:, np.newaxis]
    # Same true frequency (which includes i == j): not a collision.
    ok &= np.abs(true_hz[:, np.newaxis] - true_hz[np.newaxis, :]) > tolerance_hz
    # Both directions appear when both are aliased; keep the one with j > i.
    idx = np.arange(true_hz.size)
    ok &= ~(aliased[np.newaxis, :] & (idx[np.newaxis, :] < idx[:, np.newaxis]))
    i, j = np.nonzero(ok)
    return i.astype(np.int64), j.astype(np.int64), gap[i, j]


def _pairs_windowed(
    true_hz: FloatArray,
    lo: FloatArray,
    hi: FloatArray,
    aliased: NDArray[np.bool_],
    tolerance_hz: float,
) -> tuple[IntArray, IntArray, FloatArray]:
    """Sorting by the interval's low end and searching a window ``max width + tolerance``
    wide keeps this O(n log n + pairs) without a loop over tones."""
    n = true_hz.size
    order = np.argsort(lo, kind="stable")
    s_lo, s_hi = lo[order], hi[order]
    reach = float(np.max(hi - lo)) + tolerance_hz
    start = np.searchsorted(s_lo, s_lo - reach, side="left")
    stop = np.searchsorted(s_lo, s_hi + reach, side="right")
    counts = stop - start
    # Bound the work: candidate pairs past a generous cap are not materialised.
    cap = 50 * MAX_COLLISIONS
    keep_rows = np.cumsum(counts) <= cap
    rows = np.repeat(np.arange(n)[keep_rows], counts[keep_rows])
    offs = np.arange(rows.size) - np.repeat(
        np.cumsum(counts[keep_rows]) - counts[keep_rows], counts[keep_rows]
    )
    cols = start[rows] + offs
    i, j = order[rows], order[cols]
    gap = np.maximum(np.maximum(lo[j] - hi[i], lo[i] - hi[j]), 0.0)
    ok = (i != j) & aliased[i] & (gap <= tolerance_hz)
    ok &= np.abs(true_hz[i] - true_hz[j]) > tolerance_hz
    # Both directions appear when both are aliased; keep one.
    ok &= ~(aliased[j] & (j < i))
    return i[ok], j[ok], gap[ok]
