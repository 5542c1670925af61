"""Run-up records: the frequency × speed map, its lines, their folding verdicts, orders.

A real order is a ray through the origin of the frequency × speed map, its alias the same
ray folded at multiples of fs/2 (:mod:`service.core.runup_lines` says how lines are told
apart).

Steps
-----
1. *Map* (:mod:`service.core.runup_map`): short-time spectra computed a block of frames
   at a time and reduced at once by speed slice and by time slice, so memory stays
   bounded for long records.
2. *Lines* (:mod:`service.core.runup_lines`): ridges of the speed map, linked into
   tracks that follow a line through its folds, fitted to the folding hypotheses
   ``fold(k·r + c, fs)`` with a robust fit, and classified (real order, folded order,
   fixed-frequency alias, sideband, resonance, fixed line, unexplained) with a
   confidence from the fit residual and the sweep covered.
3. *Order view* (:mod:`service.core.order_tracking`, called by the caller when wanted):
   computed order tracking [2]_.

References
----------
.. [1] A. V. Oppenheim and R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
   2010, sec. 4.2 (aliasing; the fold formula).
.. [2] K. R. Fyfe and E. D. S. Munck, "Analysis of computed order tracking",
   *Mechanical Systems and Signal Processing* 11(2), 1997 (resampling at constant
   shaft-angle increments; the order spectrum).

This module runs steps 1 and 2 on a record with its speed.
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
