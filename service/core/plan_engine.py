"""The plan search's vectorised engine: every (sample rate, filter) pair evaluated on a
speed grid, plus each tone's exact critical frequency.

An alias is a true frequency above fs/2 folded by ``|f - fs·round(f/fs)|`` [1]_ that
lands in the band of interest.

References
----------
.. [1] A. V. Oppenheim and R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
   Pearson, 2010, sec. 4.2 (aliasing of a sampled sinusoid).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from service.core import filters as _flt
from service.core.stages import SensorResonance
from service.core.tones import ToneSet

from .analysis_lines import SPAN_DIVISOR
from .checks import check_finite, check_int, check_positive
from .errors import InputError
from .filter_catalogue import FilterOption
from .folding import fold_unchecked
from .plan_common import MAX_SPEEDS, check_band, check_speed_range, check_tones, fmt_hz, true_freq
from .plan_model import (
    ALIAS_ABOVE_LIMIT,
    BAND_LOSS_TOO_HIGH,
    PASSES,
    REJECTION_CODES,
    RESOLUTION_NOT_MET,
    SPAN_TOO_SHORT,
    PlanRequest,
)

__all__ = [
    "ALIAS",
    "BAND_LOSS",
    "BAND_LOSS_POINTS",
    "EXCESS_TOL_DB",
    "PASS",
    "RESOLUTION",
    "SPAN",
    "SearchOutcome",
    "SearchProblem",
    "critical_freqs",
    "evaluate_setups",
    "freq_range",
    "lines_for",
    "prepare_problem",
    "speed_at",
    "speed_of_alias",
]

FloatArray = NDArray[np.float64]

#: Integers of the rejection codes in the search grid (see ``REJECTION_CODES``).
PASS = REJECTION_CODES.index(PASSES)
SPAN = REJECTION_CODES.index(SPAN_TOO_SHORT)
RESOLUTION = REJECTION_CODES.index(RESOLUTION_NOT_MET)
BAND_LOSS = REJECTION_CODES.index(BAND_LOSS_TOO_HIGH)
ALIAS = REJECTION_CODES.index(ALIAS_ABOVE_LIMIT)
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]


BAND_LOSS_POINTS = 65


EXCESS_TOL_DB = 1e-9


@dataclass
class SearchProblem:
    """Prepared arrays shared by every candidate."""

    tones: ToneSet
    band: tuple[float, float]
    factors: FloatArray  # (S,)
    f_grid: FloatArray  # (S*T,) true frequencies, speed-major
    fmin: FloatArray  # (T,)
    fmax: FloatArray  # (T,)
    amp_db: FloatArray  # (T,)
    assumed: BoolArray  # (T,)
    limit_db: float
    reference_db: float | None
    sensor: SensorResonance | None
    sensor_grid: FloatArray | None = None
    n_speeds: int = 0
    n_tones: int = 0
    reference_tone: int = -1  # tone that set reference_db (-1: floor mode)
    reference_assumed: bool = False  # its amplitude was unknown and assumed
    weakest_known_db: float = 0.0  # what an unknown reference tone is taken as


@dataclass
class SearchOutcome:
    """Evaluation of rates x filters: codes and the worst alias of each pair."""

    rates: FloatArray
    filters: tuple[FilterOption, ...]
    cutoffs: list[list[float | None]]
    code: NDArray[np.int8]  # (R, K) index into REJECTION_CODES
    excess: FloatArray  # (R, K) worst level minus limit, dB (-inf: no alias in band)
    tone: IntArray  # (R, K) tone of the worst alias (-1 none)
    true_hz: FloatArray  # (R, K)
    band_loss: FloatArray  # (R, K)
    lines: IntArray  # (R,) lines meeting the resolution (0 none)
    evaluated: BoolArray  # (R,)


def freq_range(tones: ToneSet, lo: float, hi: float) -> tuple[FloatArray, FloatArray]:
    """Lowest and highest true frequency, Hz, of each tone over the speed range."""
    g1 = tones.fixed_hz + lo * tones.speed_hz
    g2 = tones.fixed_hz + hi * tones.speed_hz
    fmax = np.maximum(np.abs(g1), np.abs(g2))
    fmin = np.where(g1 * g2 < 0, 0.0, np.minimum(np.abs(g1), np.abs(g2)))
    return fmin, fmax


def prepare_problem(req: PlanRequest) -> tuple[SearchProblem, dict[str, object]]:
    """Checked request turned into the arrays every candidate setup is evaluated on."""
    tones = check_tones(req.tones)
    band = check_band(req.band_hz)
    s_lo, s_hi = check_speed_range(req.speed_range)
    n_speeds = check_int(req.n_speeds, "n_speeds", 2, MAX_SPEEDS, word="a whole number")
    if (req.rejection_db is None) == (req.floor is None):
        raise InputError(
            "give exactly one of rejection_db (dB below the strongest in-band "
            "tone) and floor (absolute level in the amplitude unit)",
            field="rejection_db",
            code="conflict",
        )
    factors = np.linspace(s_lo, s_hi, n_speeds) if s_hi > s_lo else np.array([s_lo])
    f = true_freq(tones, factors)
    fmin, fmax = freq_range(tones, s_lo, s_hi)

    amp = tones.amplitude
    known = np.isfinite(amp)
    assumed = ~known
    if req.floor is not None:
        floor = check_positive(req.floor, "floor", separate=True)
        if not known.any():
            raise InputError(
                "floor needs tone amplitudes: no tone has one; give amplitudes or use "
                "rejection_db instead",
                field="floor",
                code="missing",
            )
        limit_db = 20.0 * math.log10(floor)
        reference_db = None
    else:
        rej = check_finite(req.rejection_db, "rejection_db")
        if not 0 <= rej <= 300:
            raise InputError(
                f"rejection_db={req.rejection_db!r} must be between 0 and 300 dB",
                field="rejection_db",
                code="out_of_range",
                value=req.rejection_db,
            )
        in_band = (fmax >= band[0]) & (fmin <= band[1])
        if not in_band.any():
            raise InputError(
                f"no tone lies in the band {fmt_hz(band[0])} to {fmt_hz(band[1])} over the speed "
                "range, so rejection_db has no reference; give an absolute floor instead",
                field="rejection_db",
                code="no_reference",
            )
        reference_db = 0.0  # all amplitudes unknown: every tone at one common level
    # An unknown amplitude plays two roles; each takes its cautious side. As a tone whose
    # alias may reach the band it is as strong as the strongest known tone; as the in-band
    # tone that sets the allowed alias level (rejection mode) it is as weak as the weakest
    # known one, so an unknown in-band tone never loosens the limit.
    known_db = 20.0 * np.log10(np.where(known, amp, 1.0))
    strongest_db = float(np.max(known_db[known])) if known.any() else 0.0
    weakest_db = float(np.min(known_db[known])) if known.any() else 0.0
    amp_db = np.where(known, known_db, strongest_db)
    ref_tone = -1
    if req.floor is None:
        ref_levels = np.where(in_band, np.where(known, known_db, weakest_db), -np.inf)
        ref_tone = int(np.argmax(ref_levels))
        reference_db = float(ref_levels[ref_tone])
        limit_db = reference_db - rej
    prob = SearchProblem(
        tones=tones,
        band=band,
        factors=factors,
        f_grid=f.ravel(),
        fmin=fmin,
        fmax=fmax,
        amp_db=amp_db,
        assumed=assumed,
        limit_db=limit_db,
        reference_db=reference_db,
        sensor=req.sensor,
        n_speeds=factors.size,
        n_tones=len(tones),
        reference_tone=ref_tone,
        reference_assumed=bool(ref_tone >= 0 and assumed[ref_tone] and known.any()),
        weakest_known_db=weakest_db,
    )
    if req.sensor is not None:
        if not isinstance(req.sensor, SensorResonance):
            raise InputError(
                f"sensor={req.sensor!r} must be a SensorResonance or None",
                field="sensor",
                code="bad_type",
                value=req.sensor,
            )
        prob.sensor_grid = _flt.sensor_unchecked(prob.f_grid, req.sensor.natural_hz, req.sensor.q)
    return prob, {"speed_range": (s_lo, s_hi)}


def critical_freqs(prob: SearchProblem, rates: FloatArray) -> FloatArray:
    """Lowest true frequency of each tone whose alias lands in the band, per rate.

    For a low-pass anti-alias filter whose loss grows with frequency, the strongest
    in-band alias of a tone comes from the lowest frequency in its range that folds
    into the band: either the bottom of the range or the first start of an interval
    ``[k·fs - high, k·fs - low]`` or ``[k·fs + low, k·fs + high]`` above it [1]_.
    Returns NaN where no alias reaches the band. Shape (R, T).
    """
    lo, hi = prob.band
    fs = rates[:, None]
    fmin = prob.fmin[None, :]
    fmax = prob.fmax[None, :]
    app = fold_unchecked(fmin, fs)
    inside = (fmin > fs / 2) & (app >= lo) & (app <= hi)
    k_a = np.maximum(np.ceil((fmin + hi) / fs), 1.0)
    k_b = np.maximum(np.ceil((fmin - lo) / fs), 1.0)
    start = np.minimum(k_a * fs - hi, k_b * fs + lo)
    crit = np.where(inside, fmin, start)
    out: FloatArray = np.where(crit <= fmax, crit, np.nan)
    return out


def speed_at(tones: ToneSet, f: FloatArray, s_lo: float, s_hi: float) -> FloatArray:
    """Speed factor at which each tone (last axis) has true frequency ``|f|``; NaN if fixed."""
    v = tones.speed_hz
    with np.errstate(divide="ignore", invalid="ignore"):
        a = (f - tones.fixed_hz) / v
        b = (-f - tones.fixed_hz) / v
    tol = 1e-9 * max(1.0, abs(s_hi))
    ok_a = (a >= s_lo - tol) & (a <= s_hi + tol)
    s = np.where(ok_a, a, b)
    s = np.clip(s, s_lo, s_hi)
    out: FloatArray = np.where(v == 0, np.nan, s)
    return out


def speed_of_alias(prob: SearchProblem, i: int, f: float, s_lo: float, s_hi: float) -> float:
    """Scalar :func:`speed_at` for tone ``i`` (used per sentence, so kept cheap)."""
    v = float(prob.tones.speed_hz[i])
    if v == 0:
        return math.nan
    fixed = float(prob.tones.fixed_hz[i])
    a = (f - fixed) / v
    tol = 1e-9 * max(1.0, abs(s_hi))
    s = a if s_lo - tol <= a <= s_hi + tol else (-f - fixed) / v
    return min(max(s, s_lo), s_hi)


def lines_for(fs: float, required_bin: float | None, options: Sequence[int]) -> int:
    """Fewest offered lines whose bin width (Hz) meets ``required_bin``; 0 when none does."""
    opts = sorted(options)
    if required_bin is None:
        return 3200 if 3200 in opts else opts[0]
    for n in opts:
        if fs / (SPAN_DIVISOR * n) <= required_bin * (1 + 1e-12):
            return n
    return 0


def evaluate_setups(
    prob: SearchProblem,
    rates: FloatArray,
    filters: tuple[FilterOption, ...],
    required_bin: float | None,
    lines_options: Sequence[int],
    max_band_loss_db: float,
    stop_at_first: bool,
) -> SearchOutcome:
    """Evaluate every (rate, filter) pair in cost order; optionally stop at a pass."""
    lo, hi = prob.band
    r_n, k_n, t_n = rates.size, len(filters), prob.n_tones
    crit = critical_freqs(prob, rates)  # (R, T)
    crit_f = np.nan_to_num(crit, nan=0.0)
    band_pts = np.linspace(lo, hi, BAND_LOSS_POINTS)

    # Attenuation: one call per filter on the whole grid plus every rate's critical
    # row; a filter whose cutoff follows the rate is evaluated on normalised
    # frequencies f / cutoff for all rates at once.
    grid = prob.f_grid
    att_grid: list[FloatArray | None] = []
    att_crit = np.empty((k_n, r_n, t_n))
    loss = np.empty((r_n, k_n))
    cutoffs: list[list[float | None]] = [[None] * k_n for _ in range(r_n)]
    for k, opt in enumerate(filters):
        for r in range(r_n):
            cutoffs[r][k] = opt.cutoff_for(float(rates[r]), prob.band)
        if opt.follows_rate:
            att_grid.append(None)
            c = opt.cutoff_fraction * rates  # type: ignore[operator]
            both = np.concatenate(
                [(crit_f / c[:, None]).ravel(), (band_pts[None, :] / c[:, None]).ravel()]
            )
            att = opt.attenuation_db(both, 1.0)
            att_crit[k] = att[: r_n * t_n].reshape(r_n, t_n)
            loss[:, k] = att[r_n * t_n :].reshape(r_n, -1).max(axis=1)
        else:
            cut = opt.cutoff_for(float(rates[0]), prob.band) or 1.0
            both = np.concatenate([grid, crit_f.ravel(), band_pts])
            att = opt.attenuation_db(both, cut)
            att_grid.append(att[: grid.size])
            att_crit[k] = att[grid.size : grid.size + r_n * t_n].reshape(r_n, t_n)
            loss[:, k] = att[grid.size + r_n * t_n :].max()
    if prob.sensor is not None:
        s = prob.sensor
        att_crit += _flt.sensor_unchecked(crit_f, s.natural_hz, s.q)[None]
        loss += float(np.max(_flt.sensor_unchecked(band_pts, s.natural_hz, s.q)))

    code = np.full((r_n, k_n), PASS, dtype=np.int8)
    excess = np.full((r_n, k_n), -np.inf)
    tone = np.full((r_n, k_n), -1, dtype=np.int64)
    true_hz = np.full((r_n, k_n), np.nan)
    lines = np.zeros(r_n, dtype=np.int64)
    evaluated = np.zeros(r_n, dtype=bool)
    tone_of = np.tile(np.arange(t_n), prob.n_speeds)
    for r in np.argsort(rates, kind="stable"):
        fs = float(rates[r])
        evaluated[r] = True
        if fs / SPAN_DIVISOR < hi * (1 - 1e-12):
            code[r] = SPAN
            continue
        lines[r] = lines_for(fs, required_bin, lines_options)
        if lines[r] == 0:
            code[r] = RESOLUTION
            continue
        # Grid points whose alias lands in the band at this rate.
        app = fold_unchecked(grid, fs)
        idx = np.flatnonzero((grid > fs / 2) & (app >= lo) & (app <= hi))
        t_idx = tone_of[idx]
        base = prob.amp_db[t_idx]
        if prob.sensor_grid is not None:
            base = base - prob.sensor_grid[idx]
        c_t = np.flatnonzero(np.isfinite(crit[r]))
        for k, opt in enumerate(filters):
            g_att = att_grid[k]
            if g_att is None:  # cutoff follows the rate: only the in-band aliases
                cut = float(opt.cutoff_fraction * fs)  # type: ignore[operator]
                lev = base - opt.attenuation_db(grid[idx], cut)
            else:
                lev = base - g_att[idx]
            c_lev = prob.amp_db[c_t] - att_crit[k, r, c_t]
            best = -np.inf
            if lev.size:
                j = int(np.argmax(lev))
                best = float(lev[j])
                tone[r, k] = t_idx[j]
                true_hz[r, k] = grid[idx[j]]
            if c_lev.size:
                j = int(np.argmax(c_lev))
                if c_lev[j] >= best:
                    best = float(c_lev[j])
                    tone[r, k] = c_t[j]
                    true_hz[r, k] = crit[r, c_t[j]]
            excess[r, k] = best - prob.limit_db
            if loss[r, k] > max_band_loss_db:
                code[r, k] = BAND_LOSS
            elif excess[r, k] > EXCESS_TOL_DB:
                code[r, k] = ALIAS
        if stop_at_first and np.any(code[r] == PASS):
            break
    return SearchOutcome(
        rates=rates,
        filters=filters,
        cutoffs=cutoffs,
        code=code,
        excess=excess,
        tone=tone,
        true_hz=true_hz,
        band_loss=loss,
        lines=lines,
        evaluated=evaluated,
    )
