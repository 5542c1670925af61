"""Shaft speed and angle from a tacho channel or a recorded speed trace.

A tacho gives one or more pulses per revolution. Edges are found with hysteresis (a
Schmitt trigger whose thresholds sit at :data:`LOW_FRACTION` and :data:`HIGH_FRACTION`
of the span between the signal's two levels), timed to a fraction of a sample by linear
interpolation, and checked against the local median interval: an interval near an
integer multiple of it hides missing pulses, one far shorter than it holds an extra
pulse. Both are repaired and counted. The speed of each revolution (the time of the
last ``pulses_per_rev`` intervals) is placed at the middle of that revolution; the shaft
angle at every pulse is exact (``j / pulses_per_rev`` revolutions), which is what
computed order tracking needs.

Thresholds (each a documented choice, not a published value):

- levels: two-cluster means of the signal (k-means with two centres, i.e. the
  threshold that minimises the within-level variance [2]_);
- :data:`MIDDLE_FRACTION_MAX`: a tacho sits at its two levels except on edges; a
  vibration signal spends a large share of its time between them (a sine about 26 %
  in the middle 40 % of its span), so more than 10 % there means "not a tacho";
- :data:`MISSING_RATIO` and :data:`EXTRA_RATIO`: intervals of 1.7 or more times the
  local median of :data:`MEDIAN_SPAN` intervals (and within 0.3 of a whole multiple)
  are missing pulses; below 0.6 times it, extra ones. A run-up from rest changes the
  interval by far less than that from one pulse to the next, except in the first few
  revolutions.

References
----------
.. [1] K. R. Fyfe and E. D. S. Munck, "Analysis of computed order tracking",
   *Mechanical Systems and Signal Processing* 11(2), 1997 (shaft angle known at tacho
   pulses, interpolated between them; resampling at constant angle increments).
.. [2] N. Otsu, "A threshold selection method from gray-level histograms", *IEEE Trans.
   Systems, Man, and Cybernetics* 9(1), 1979 (two-class threshold minimising the
   within-class variance; equivalent to two-centre k-means on the levels).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.interpolate
import scipy.ndimage
from numpy.typing import ArrayLike, NDArray

from .errors import InputError

__all__ = [
    "EXTRA_RATIO",
    "HIGH_FRACTION",
    "LOW_FRACTION",
    "MEDIAN_SPAN",
    "MIDDLE_FRACTION_MAX",
    "MIN_REVOLUTIONS",
    "MIN_SWEEP_FRACTION",
    "MISSING_RATIO",
    "SPEED_WINDOW_SAMPLES",
    "SpeedTrace",
    "signal_levels",
    "speed_from_tacho",
    "speed_from_trace",
]

FloatArray = NDArray[np.float64]

#: Schmitt trigger thresholds as fractions of the span from the low to the high level.
LOW_FRACTION = 0.35
HIGH_FRACTION = 0.65
#: Above this share of samples in the middle 40 % of the span the channel is no tacho.
MIDDLE_FRACTION_MAX = 0.10
#: Number of intervals in the running median that defines the expected interval.
MEDIAN_SPAN = 9
#: An interval this many times the local median or more hides missing pulses.
MISSING_RATIO = 1.7
#: An interval below this fraction of the local median ends at an extra pulse.
EXTRA_RATIO = 0.6
#: Fewest whole revolutions a record must hold to give a speed.
MIN_REVOLUTIONS = 4
#: For a run-up the speed must change by at least this fraction of its maximum.
MIN_SWEEP_FRACTION = 0.05

#: Shortest span, samples, over which a speed is measured (see speed_from_tacho).
SPEED_WINDOW_SAMPLES = 1000

_BLOCK = 1 << 20  # samples per block: edge detection memory stays bounded


@dataclass(frozen=True, eq=False)
class SpeedTrace:
    """Shaft speed and angle against time.

    Attributes
    ----------
    time_s : ndarray
        Times of the speed values, s.
    rpm : ndarray
        Shaft speed at ``time_s``, rpm.
    angle_time_s, angle_rev : ndarray
        Knots of the shaft angle: time, s, and angle, revolutions (from the first
        knot). For a tacho the knots are the (repaired) pulses; for a trace they are the
        trace's samples with the angle integrated by the trapezoid rule.
    pulses_per_rev : int
        Pulses per revolution (0 for a speed trace).
    missing_repaired, extra_repaired : int
        How many missing pulses were inserted and extra pulses removed.
    source : str
        ``"tacho"`` or ``"trace"``.
    """

    time_s: FloatArray
    rpm: FloatArray
    angle_time_s: FloatArray
    angle_rev: FloatArray
    pulses_per_rev: int
    missing_repaired: int
    extra_repaired: int
    source: str

    def rpm_at(self, t_s: ArrayLike) -> FloatArray:
        """Speed, rpm, at times ``t_s`` (s), linear between values, held at the ends."""
        return np.interp(np.asarray(t_s, dtype=np.float64), self.time_s, self.rpm)

    def angle_at(self, t_s: ArrayLike) -> FloatArray:
        """Shaft angle, revolutions, at times ``t_s`` (s): monotone cubic through knots."""
        pchip = scipy.interpolate.PchipInterpolator(
            self.angle_time_s, self.angle_rev, extrapolate=True
        )
        return np.asarray(pchip(np.asarray(t_s, dtype=np.float64)), dtype=np.float64)

    @property
    def rpm_range(self) -> tuple[float, float]:
        """Lowest and highest speed, rpm."""
        return float(self.rpm.min()), float(self.rpm.max())


def signal_levels(x: NDArray[np.floating]) -> tuple[float, float, float]:
    """Low level, high level and the share of samples in the middle 40 % of the span.

    The levels are two-centre k-means of (at most 200,000 evenly spread) samples [2]_.
    A tacho's share is small (edges only); a vibration signal's is large.
    """
    step = max(1, x.size // 200_000)
    sub = np.asarray(x[::step], dtype=np.float64)
    lo, hi = float(sub.min()), float(sub.max())
    if not hi > lo:
        return lo, hi, 0.0
    thr = 0.5 * (lo + hi)
    for _ in range(20):  # two-centre k-means: converges in a few steps
        low, high = sub[sub <= thr], sub[sub > thr]
        if low.size == 0 or high.size == 0:
            break
        m0, m1 = float(low.mean()), float(high.mean())
        new = 0.5 * (m0 + m1)
        if new == thr:
            break
        thr, lo, hi = new, m0, m1
    span = hi - lo
    mid = np.count_nonzero(np.abs(sub - 0.5 * (lo + hi)) < 0.2 * span) / sub.size
    return lo, hi, float(mid)


def _rising_edges(x: NDArray[np.floating], low: float, high: float, fs: float) -> FloatArray:
    """Times, s, of rising edges with hysteresis, interpolated at the high threshold.

    The trigger only changes state at crossings, so it runs on the (sparse) list of
    upward crossings of ``high`` and downward crossings of ``low``: an upward crossing
    is an edge when the crossing before it was a downward one.
    """
    out: list[FloatArray] = []
    last = 1 if x[0] > high else -1  # +1: last event went high, -1: went low
    for a in range(0, x.size - 1, _BLOCK):
        seg = x[a : a + _BLOCK + 1]  # one sample of overlap: crossings at block starts
        above = seg > high
        below = seg < low
        up = np.flatnonzero(above[1:] & ~above[:-1]) + 1
        down = np.flatnonzero(below[1:] & ~below[:-1]) + 1
        if up.size == 0 and down.size == 0:
            continue
        pos = np.concatenate((up, down))
        lab = np.concatenate((np.ones(up.size, np.int8), -np.ones(down.size, np.int8)))
        order = np.argsort(pos, kind="stable")
        pos, lab = pos[order], lab[order]
        prev = np.concatenate(([last], lab[:-1]))
        i = pos[(lab == 1) & (prev == -1)] + a
        last = int(lab[-1])
        if i.size:
            x0 = np.asarray(x[i - 1], dtype=np.float64)
            x1 = np.asarray(x[i], dtype=np.float64)
            frac = np.clip((high - x0) / np.where(x1 > x0, x1 - x0, 1.0), 0.0, 1.0)
            out.append((i - 1 + frac) / fs)
    return np.concatenate(out) if out else np.empty(0)


def _repair(edges: FloatArray) -> tuple[FloatArray, int, int]:
    """Insert missing and remove extra pulses by their interval to the local median."""
    missing = extra = 0
    for _ in range(3):  # a repair changes the neighbourhood; two passes settle it
        d = np.diff(edges)
        if d.size < 3:
            break
        med = scipy.ndimage.median_filter(d, size=min(MEDIAN_SPAN, d.size), mode="nearest")
        ratio = d / med
        changed = False
        # Extra pulse: a short interval whose neighbour completes it to about one interval.
        short = np.flatnonzero(ratio < EXTRA_RATIO)
        drop: list[int] = []
        for i in short:
            if drop and drop[-1] >= i:
                continue
            pair = [j for j in (i - 1, i + 1) if 0 <= j < d.size]
            best = min(pair, key=lambda j: abs(d[i] + d[j] - med[i]) if pair else 0.0)
            if abs(d[i] + d[best] - med[i]) < 0.35 * med[i]:
                drop.append(int(i + 1 if best > i else i))
        if drop:
            edges = np.delete(edges, drop)
            extra += len(drop)
            changed = True
            d = np.diff(edges)
            med = scipy.ndimage.median_filter(d, size=min(MEDIAN_SPAN, d.size), mode="nearest")
            ratio = d / med
        n_miss = np.rint(ratio).astype(np.int64)
        gap = np.flatnonzero((ratio >= MISSING_RATIO) & (np.abs(ratio - n_miss) < 0.3))
        if gap.size:
            fill = [edges[i] + d[i] * np.arange(1, n_miss[i]) / n_miss[i] for i in gap]
            missing += int(np.sum(n_miss[gap] - 1))
            edges = np.sort(np.concatenate([edges, *fill]))
            changed = True
        if not changed:
            break
    return edges, missing, extra


def _check_rate(sample_rate_hz: float) -> float:
    fs = float(sample_rate_hz)
    if not np.isfinite(fs) or fs <= 0:
        raise InputError(
            f"sample_rate_hz={sample_rate_hz!r} must be a finite number > 0",
            field="sample_rate_hz", value=sample_rate_hz, limit=0, code="not_positive",
        )  # fmt: skip
    return fs


def _check_sweep(rpm: FloatArray, field: str) -> None:
    top = float(rpm.max())
    if top <= 0 or float(rpm.max() - rpm.min()) < MIN_SWEEP_FRACTION * top:
        raise InputError(
            f"the speed stays between {rpm.min():.0f} and {top:.0f} rpm; a run-up needs it "
            f"to change by at least {MIN_SWEEP_FRACTION:.0%} of its maximum",
            field=field, value=round(top, 1), limit=MIN_SWEEP_FRACTION,
            code="constant_speed",
            remedy="Upload a record taken while the speed sweeps, or use the spectrum "
            "diagnosis for a steady speed",
        )  # fmt: skip


def speed_from_tacho(
    tacho: ArrayLike,
    sample_rate_hz: float,
    pulses_per_rev: int = 1,
    *,
    require_sweep: bool = True,
) -> SpeedTrace:
    """Shaft speed and angle from a tacho channel.

    Parameters
    ----------
    tacho : array_like
        Tacho samples (any unit), 1-D.
    sample_rate_hz : float
        Sample rate of the channel, Hz.
    pulses_per_rev : int
        Tacho pulses per shaft revolution, 1 to 1024.
    require_sweep : bool
        Refuse a speed that changes by less than :data:`MIN_SWEEP_FRACTION` (a run-up).

    Returns
    -------
    SpeedTrace

    Raises
    ------
    InputError
        ``not_a_tacho`` (no two distinct levels: likely the vibration channel),
        ``no_pulses``, ``too_short`` (fewer than :data:`MIN_REVOLUTIONS` revolutions),
        ``constant_speed``.

    References
    ----------
    .. [1] Fyfe and Munck, MSSP 11(2), 1997.
    """
    fs = _check_rate(sample_rate_hz)
    ppr = int(pulses_per_rev)
    if ppr != pulses_per_rev or not 1 <= ppr <= 1024:
        raise InputError(
            f"pulses_per_rev={pulses_per_rev!r} must be a whole number from 1 to 1024",
            field="pulses_per_rev", value=pulses_per_rev, limit=1024, code="out_of_range",
        )  # fmt: skip
    x = np.asarray(tacho)
    if x.ndim != 1 or x.size < 16:
        raise InputError(
            f"the tacho channel has {x.size} samples; give a 1-D channel of at least 16",
            field="tacho", value=int(x.size), limit=16, code="too_short",
        )  # fmt: skip
    if not np.issubdtype(x.dtype, np.floating):
        x = x.astype(np.float64)
    lo, hi, mid = signal_levels(x)
    if not hi > lo:
        raise InputError(
            "the tacho channel is constant: it holds no pulses",
            field="tacho", value=lo, code="no_pulses",
            remedy="Check the tacho channel's wiring and the channel chosen",
        )  # fmt: skip
    if mid > MIDDLE_FRACTION_MAX:
        raise InputError(
            f"the tacho channel spends {mid:.0%} of its samples between its two levels "
            f"(a tacho stays under {MIDDLE_FRACTION_MAX:.0%}); it looks like a vibration "
            "signal",
            field="tacho", value=round(mid, 3), limit=MIDDLE_FRACTION_MAX,
            code="not_a_tacho",
            remedy="Check that the tacho and vibration channels are not swapped",
        )  # fmt: skip
    span = hi - lo
    edges = _rising_edges(x, lo + LOW_FRACTION * span, lo + HIGH_FRACTION * span, fs)
    if edges.size < 2:
        raise InputError(
            f"the tacho channel holds {edges.size} pulse(s); a speed needs pulses",
            field="tacho", value=int(edges.size), limit=2, code="no_pulses",
            remedy="Check the tacho channel and its pulses per revolution",
        )  # fmt: skip
    edges, missing, extra = _repair(edges)
    revs = (edges.size - 1) / ppr
    if revs < MIN_REVOLUTIONS:
        raise InputError(
            f"the record holds {revs:.1f} shaft revolutions; at least {MIN_REVOLUTIONS} "
            "are needed for a speed",
            field="tacho", value=round(revs, 2), limit=MIN_REVOLUTIONS, code="too_short",
            remedy="Upload a longer record",
        )  # fmt: skip
    rev_time = edges[ppr:] - edges[:-ppr]
    t_mid = 0.5 * (edges[ppr:] + edges[:-ppr])
    # A pulse is timed to within about a sample, which is 1.5 % of a revolution of 64
    # samples: the speed is the angle turned over at least SPEED_WINDOW_SAMPLES (and at
    # least one revolution), centred on each revolution, which keeps that error below
    # 2 / SPEED_WINDOW_SAMPLES.
    half = 0.5 * np.maximum(rev_time, SPEED_WINDOW_SAMPLES / fs)
    t_lo = np.maximum(t_mid - half, edges[0])
    t_hi = np.minimum(t_mid + half, edges[-1])
    rev_axis = np.arange(edges.size, dtype=np.float64) / ppr
    turned = np.interp(t_hi, edges, rev_axis) - np.interp(t_lo, edges, rev_axis)
    rpm = 60.0 * turned / (t_hi - t_lo)
    if require_sweep:
        _check_sweep(rpm, "tacho")
    return SpeedTrace(
        time_s=t_mid,
        rpm=rpm,
        angle_time_s=edges,
        angle_rev=rev_axis,
        pulses_per_rev=ppr,
        missing_repaired=missing,
        extra_repaired=extra,
        source="tacho",
    )


def speed_from_trace(
    time_s: ArrayLike, rpm: ArrayLike, *, require_sweep: bool = True
) -> SpeedTrace:
    """A speed trace (time, rpm) as a :class:`SpeedTrace`; the angle is integrated.

    Parameters
    ----------
    time_s : array_like
        Increasing times, s (at least 2).
    rpm : array_like
        Speed at each time, rpm, >= 0.
    require_sweep : bool
        Refuse a speed that changes by less than :data:`MIN_SWEEP_FRACTION`.

    Raises
    ------
    InputError
        ``too_short``, ``not_increasing``, ``not_finite``, ``negative``, ``constant_speed``.
    """
    t = np.asarray(time_s, dtype=np.float64).ravel()
    r = np.asarray(rpm, dtype=np.float64).ravel()
    if t.size != r.size or t.size < 2:
        raise InputError(
            f"the speed trace has {t.size} times and {r.size} speeds; give two or more "
            "pairs",
            field="speed_trace", value=int(min(t.size, r.size)), limit=2, code="too_short",
        )  # fmt: skip
    if not (np.all(np.isfinite(t)) and np.all(np.isfinite(r))):
        raise InputError(
            "the speed trace holds a value that is not a finite number",
            field="speed_trace", code="not_finite",
        )  # fmt: skip
    if np.any(np.diff(t) <= 0):
        i = int(np.flatnonzero(np.diff(t) <= 0)[0]) + 1
        raise InputError(
            f"speed_trace time[{i}]={t[i]} is not after time[{i - 1}]={t[i - 1]}; times "
            "must increase",
            field=f"speed_trace.time_s[{i}]", value=t[i], limit=t[i - 1],
            code="not_increasing",
        )  # fmt: skip
    if np.any(r < 0):
        i = int(np.flatnonzero(r < 0)[0])
        raise InputError(
            f"speed_trace rpm[{i}]={r[i]} is negative; give the speed as a magnitude",
            field=f"speed_trace.rpm[{i}]", value=r[i], limit=0, code="negative",
        )  # fmt: skip
    if require_sweep:
        _check_sweep(r, "speed_trace")
    rev = np.concatenate(([0.0], np.cumsum(0.5 * (r[1:] + r[:-1]) * np.diff(t)) / 60.0))
    return SpeedTrace(
        time_s=t, rpm=r, angle_time_s=t, angle_rev=rev, pulses_per_rev=0,
        missing_repaired=0, extra_repaired=0, source="trace",
    )  # fmt: skip
