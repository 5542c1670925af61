"""Run-up records: the frequency × speed map, its lines, their folding verdicts, orders.

In a map of apparent frequency against shaft speed ``r`` (Hz) a real order ``k`` is the
ray ``f = k·r``; its alias is the same ray folded at multiples of fs/2,
``fold(k·r + c, fs)`` (:func:`service.core.folding.fold`), rising in odd Nyquist zones
and falling in even ones; a fixed-frequency line (``k = 0``) folds to a horizontal line
and its sidebands ``c ± k·r`` fan out from it.

Method
------
1. *Map* (:func:`service.core.runup_map.runup_map`): short-time spectra
   (``scipy.signal.ShortTimeFFT``, Hann, amplitude-scaled) computed a block of frames
   at a time; each block's magnitude (float32) is reduced at once to a bounded number
   of speed slices (the maximum per speed bin) and time slices (the maximum per group
   of frames), so memory never holds the whole complex transform of a long record.
2. *Ridges*: per speed slice, peaks standing ``PEAK_DB`` above a running median
   floor (medians of blocks of ``FLOOR_BLOCK`` bins), refined by a parabola through
   the log magnitudes.
3. *Tracks*: peaks are linked slice by slice to the nearest prediction within a gate
   (``GATE_BINS`` bins plus half a slice's travel); the prediction extrapolates the
   track's recent slope and reflects at 0 Hz and fs/2, so a track follows an order
   through its fold. Each track keeps its *unfolded* coordinate
   ``u = base + σ·f`` (σ flips and the base moves by fs at each reflection).
4. *Hypotheses*: the known lines given (order ``k``, fixed part ``c``), and blind ones
   from a Theil–Sen line through the unfolded points (``u = a + b·r``): an order through
   the origin (``c = 0``, allowed when the intercept is within ``ORIGIN_BINS`` bins
   of a multiple of fs), a fixed line (``k = 0``), or a line with an offset. Each is
   refined by Gauss–Newton with Huber weights on ``f − fold(k·r + c, fs)`` (iteratively
   reweighted least squares [3]_) and scored by the share of points within tolerance
   (``TOL_BINS`` bins plus half a speed slice's travel). The best hypothesis with
   ``MIN_INLIERS`` of the points explains the track; tracks with the same
   explanation are merged into one line.
5. *Verdict*: a real order (every point in zone 1), a folded order (the zones and the
   speed range of each; inverted in even zones), a fixed-frequency alias (a known fixed
   line above Nyquist), a sideband (``k ≠ 0``, ``c ≠ 0``), a resonance (a fixed line
   whose level rises and falls by ``RESONANCE_DB`` inside the sweep), a fixed line
   (true frequency unknown without sources), or unexplained. Confidence is the share of
   inliers times ``exp(−½(rms/tol)²)`` times ``min(1, sweep / FULL_SWEEP)``.

References
----------
.. [1] A. V. Oppenheim and R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
   2010, sec. 4.2 (aliasing; the fold formula).
.. [2] K. R. Fyfe and E. D. S. Munck, "Analysis of computed order tracking",
   *Mechanical Systems and Signal Processing* 11(2), 1997 (resampling at constant
   shaft-angle increments; the order spectrum).
.. [3] P. J. Huber, *Robust Statistics*, Wiley, 1981 (Huber weights, IRLS); H. Theil,
   1950, and P. K. Sen, 1968 (median of pairwise slopes; ``scipy.stats.theilslopes``).
.. [4] J. O. Smith, *Spectral Audio Signal Processing*, "Quadratic interpolation of
   spectral peaks" (parabolic refinement on log magnitude).

The steps live in :mod:`service.core.runup_map` (1), :mod:`service.core.runup_lines`
(2 to 5) and :mod:`service.core.order_tracking` (the order view); this module runs them.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from .errors import InputError
from .runup_lines import KnownLine, RunUpLine, find_lines
from .runup_map import RunUpMap, check_channel, runup_map
from .tacho import (
    MIDDLE_FRACTION_MAX,
    SpeedTrace,
    signal_levels,
    speed_from_tacho,
    speed_from_trace,
)

__all__ = ["RunUpResult", "analyse_run_up"]


@dataclass(frozen=True, eq=False)
class RunUpResult:
    """Everything read from a run-up record.

    Attributes
    ----------
    speed : SpeedTrace
    map : RunUpMap
    lines : tuple of RunUpLine
    sample_rate_hz : float
    """

    speed: SpeedTrace
    map: RunUpMap
    lines: tuple[RunUpLine, ...]
    sample_rate_hz: float

    @property
    def aliased(self) -> tuple[RunUpLine, ...]:
        """Lines with a part above Nyquist (folded orders, fixed aliases, sidebands)."""
        return tuple(ln for ln in self.lines if ln.aliased)


def analyse_run_up(
    vibration: ArrayLike,
    sample_rate_hz: float,
    *,
    tacho: ArrayLike | None = None,
    pulses_per_rev: int = 1,
    speed_time_s: ArrayLike | None = None,
    speed_rpm: ArrayLike | None = None,
    known: Sequence[KnownLine] | None = None,
    nperseg: int = 1024,
    overlap: float = 0.75,
    speed_slices: int = 800,
    time_slices: int = 600,
    progress: Callable[[float], None] | None = None,
) -> RunUpResult:
    """Speed, map and classified lines of a run-up record.

    Give either ``tacho`` (same rate as the vibration) with ``pulses_per_rev`` or a
    speed trace (``speed_time_s``, ``speed_rpm``). Other parameters as in
    :func:`runup_map` and :func:`find_lines`.

    Raises
    ------
    InputError
        ``no_speed`` when neither is given (or both), and those of the steps.
    """
    fs = float(sample_rate_hz)
    if not np.isfinite(fs) or fs <= 0:
        raise InputError(
            f"sample_rate_hz={sample_rate_hz!r} must be a finite number > 0",
            field="sample_rate_hz", value=sample_rate_hz, limit=0, code="not_positive",
        )  # fmt: skip
    has_trace = speed_time_s is not None or speed_rpm is not None
    if (tacho is None) == (not has_trace):
        raise InputError(
            "give exactly one source of speed: a tacho channel or a speed trace",
            field="tacho", code="no_speed",
            remedy="Add the tacho channel (and its pulses per revolution) or the "
            "controller's speed trace (time, rpm)",
        )  # fmt: skip
    sig = check_channel(vibration, "vibration")
    if tacho is not None:
        tach = np.asarray(tacho)
        if tach.shape != sig.shape:
            raise InputError(
                f"the tacho has {tach.size} samples and the vibration {sig.size}; they "
                "must be channels of one record",
                field="tacho", value=int(tach.size), limit=int(sig.size),
                code="length_mismatch",
            )  # fmt: skip
        speed = speed_from_tacho(tach, fs, pulses_per_rev)
        lo, hi, mid = signal_levels(sig)
        if hi > lo and mid < MIDDLE_FRACTION_MAX:
            raise InputError(
                f"the vibration channel spends only {mid:.0%} of its samples between its "
                "two levels, like a pulse train; it looks like a second tacho",
                field="vibration", value=round(mid, 3), limit=MIDDLE_FRACTION_MAX,
                code="not_a_vibration",
                remedy="Check that the tacho and vibration channels are not swapped",
            )  # fmt: skip
    else:
        if speed_time_s is None or speed_rpm is None:
            raise InputError(
                "a speed trace needs both speed_time_s and speed_rpm",
                field="speed_trace", code="no_speed",
            )  # fmt: skip
        speed = speed_from_trace(speed_time_s, speed_rpm)
    m = runup_map(
        sig, fs, speed, nperseg=nperseg, overlap=overlap,
        speed_slices=speed_slices, time_slices=time_slices, progress=progress,
    )  # fmt: skip
    return RunUpResult(speed=speed, map=m, lines=find_lines(m, known), sample_rate_hz=fs)
