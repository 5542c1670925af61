"""The machine's actual running speed, estimated from the measured peaks themselves.

Machines rarely run at their nameplate speed: an induction motor slips below
synchronous speed by a few percent depending on load, speed controllers regulate to
within a band, and a tacho reading or a request value drifts. With the speed off by
0.7 %, the 30th order of a 25 Hz shaft is off by 5 Hz — many bins — and every
speed-proportional tone goes unexplained. This module searches a speed ratio within a
range for the one whose tones (folded at the sample rate) explain the most peaks, refines
it by least squares, and says whether the estimate can be trusted.

A tone's true frequency is ``fixed_hz + r · speed_hz`` for the speed ratio ``r``
(actual / nominal speed), as in :class:`service.core.tones.ToneSet`. In an even Nyquist
zone its apparent frequency falls when ``r`` rises; the search folds every candidate and
the refinement uses the local slope of the fold, so aliased tones count with their true
sign.

References
----------
.. [1] A. V. Oppenheim and R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
   Pearson, 2010, sec. 4.2 (aliasing; the fold formula of
   :func:`service.core.folding.fold`).
.. [2] R. G. Lyons, *Understanding Digital Signal Processing*, 3rd ed., 2011, sec. 2.3
   (spectral inversion in even Nyquist zones).
.. [3] Common practice (no single source): synchronous speed ``n_sync = 120·f / p`` rpm
   for line frequency ``f`` Hz and ``p`` poles; slip ``s = (n_sync − n) / n_sync``, a
   few percent at rated load (about 1–5 % for general-purpose induction motors).
.. [4] S. M. Kay, *Fundamentals of Statistical Signal Processing: Estimation Theory*,
   Prentice Hall, 1993, ch. 8 (linear least squares; variance of a fitted parameter).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .errors import InputError
from .folding import fold
from .tones import ToneSet

__all__ = [
    "AMBIGUITY_RATIO",
    "DEFAULT_SEARCH_PCT",
    "MAX_LEVEL_WEIGHT",
    "MIN_MATCHES",
    "SpeedEstimate",
    "estimate_speed",
    "estimate_speed_for_tones",
    "slip",
    "synchronous_speed_rpm",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]

#: Default half-width of the search, percent of the nominal speed. Induction motors run
#: a few percent below synchronous speed at rated load (slip, [3]_), and the nameplate
#: speed is the rated-load speed, so light load runs up to a few percent faster and
#: overload slower; speed controllers and tachometers add a band of their own. ±4 %
#: covers these without reaching the next order's spacing for low orders (a 4 % shift
#: moves order k by 0.04·k orders, so orders up to 12 stay closer to their own line
#: than to the neighbour's).
DEFAULT_SEARCH_PCT = 4.0
#: Fewest peaks explained by speed-proportional tones for a trustworthy estimate: with
#: one or two, a coincidence is too easy (each peak can be hit by some ratio).
MIN_MATCHES = 3
#: A second, separate maximum of the score scoring at least this fraction of the best
#: makes the estimate ambiguous.
AMBIGUITY_RATIO = 0.8
#: A peak's weight is 1 plus one per 20 dB above the weakest peak, at most this much:
#: strong peaks are less likely to be noise, but one strong peak must not outvote several.
MAX_LEVEL_WEIGHT = 4.0
#: Most candidate ratios tried in the grid search.
MAX_GRID = 20_001


def synchronous_speed_rpm(line_hz: float, poles: int) -> float:
    """Synchronous speed of an AC machine, rpm: ``120 · line_hz / poles`` [3]_.

    Parameters
    ----------
    line_hz : float
        Supply (or inverter output) frequency, Hz (> 0).
    poles : int
        Number of poles (not pole pairs), even, 2 to 200.
    """
    f = _check_positive(line_hz, "line_hz", " Hz")
    if isinstance(poles, bool) or int(poles) != poles or not 2 <= poles <= 200 or poles % 2:
        raise InputError(
            f"poles={poles!r} must be an even whole number from 2 to 200 (poles, not pairs)",
            field="poles",
            value=poles,
            code="invalid",
        )
    return 120.0 * f / int(poles)


def slip(speed_rpm: ArrayLike, line_hz: float, poles: int) -> FloatArray:
    """Slip of an induction motor, as a fraction: ``(n_sync − n) / n_sync`` [3]_.

    Parameters
    ----------
    speed_rpm : array_like
        Shaft speed(s), rpm (>= 0).
    line_hz : float
        Supply frequency, Hz.
    poles : int
        Number of poles.

    Returns
    -------
    ndarray
        Slip, fraction (0.01 = 1 %); negative when running above synchronous speed
        (generating).
    """
    n_sync = synchronous_speed_rpm(line_hz, poles)
    n = np.asarray(speed_rpm, dtype=np.float64)
    if np.any(~np.isfinite(n) | (n < 0)):
        raise InputError("speed_rpm must be finite and >= 0", field="speed_rpm", code="invalid")
    out: FloatArray = (n_sync - n) / n_sync
    return out


# --------------------------------------------------------------------------- checks


def _check_positive(value: float, name: str, unit: str = "") -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name}={value!r} must be a number", field=name, code="invalid") from None
    if not np.isfinite(v) or v <= 0:
        raise InputError(
            f"{name}={value!r} must be a finite number > 0{unit}",
            field=name,
            value=v if np.isfinite(v) else str(v),
            limit=0,
            code="not_positive",
        )
    return v


def _check_array(values: ArrayLike, name: str, nonneg: bool = True) -> FloatArray:
    a = np.atleast_1d(np.asarray(values, dtype=np.float64))
    if a.ndim != 1:
        raise InputError(f"{name} must be a 1-D list", field=name, code="bad_shape")
    bad = ~np.isfinite(a) | ((a < 0) if nonneg else False)
    if np.any(bad):
        i = int(np.flatnonzero(bad)[0])
        limit = "finite and >= 0" if nonneg else "finite"
        raise InputError(
            f"{name}[{i}]={a[i]!r} must be {limit}",
            field=f"{name}[{i}]",
            value=float(a[i]) if np.isfinite(a[i]) else str(a[i]),
            code="invalid",
        )
    return a


# --------------------------------------------------------------------------- result


@dataclass(frozen=True, eq=False)
class SpeedEstimate:
    """The speed ratio that best explains the peaks, and whether to use it.

    Attributes
    ----------
    ratio : float
        Speed ratio to use (actual / nominal): the refined estimate when trustworthy,
        else 1.0 (the nominal speed is kept).
    estimated_ratio : float
        The refined estimate whether or not it is trusted; NaN when nothing matched.
    ratio_uncertainty : float
        Standard uncertainty of ``estimated_ratio`` (1 σ), fraction; NaN if unknown.
    speed_hz : float
        Speed used (``ratio × nominal``) in the unit of ``nominal_speed`` (NaN when no
        nominal speed was given).
    speed_uncertainty : float
        ``ratio_uncertainty × nominal`` in that unit; NaN if unknown.
    offset_pct : float
        How far the speed used is from the nominal one, percent.
    explained_at_estimate, explained_at_nominal : int
        Peaks matched by any tone (fixed or speed-proportional) at the estimated and at
        the nominal speed.
    matched_at_estimate, matched_at_nominal : int
        Peaks matched by speed-proportional tones only (what the estimate rests on).
    trustworthy : bool
        A clear unique maximum with at least :data:`MIN_MATCHES` matched peaks.
    reason : str
        One sentence: what was found and why it is (not) used.
    search_range : (float, float)
        Ratios searched.
    grid_ratio, grid_score : ndarray
        The searched ratios and their level-weighted match scores (for a plot).
    """

    ratio: float
    estimated_ratio: float
    ratio_uncertainty: float
    speed_hz: float
    speed_uncertainty: float
    offset_pct: float
    explained_at_estimate: int
    explained_at_nominal: int
    matched_at_estimate: int
    matched_at_nominal: int
    trustworthy: bool
    reason: str
    search_range: tuple[float, float]
    grid_ratio: FloatArray
    grid_score: FloatArray


# --------------------------------------------------------------------------- search


def _level_weights(amplitude: FloatArray | None, n: int) -> FloatArray:
    if amplitude is None:
        return np.ones(n)
    level = 20.0 * np.log10(np.maximum(amplitude, 1e-300))
    out: FloatArray = np.clip(1.0 + (level - level.min()) / 20.0, 1.0, MAX_LEVEL_WEIGHT)
    return out


def _matches(
    ratios: FloatArray,
    fixed: FloatArray,
    speed: FloatArray,
    peaks_sorted: FloatArray,
    tol_sorted: FloatArray,
    fs: float,
) -> BoolArray:
    """(ratios × peaks) bool: the peak lies within its tolerance of some folded tone."""
    hit = np.zeros((ratios.size, peaks_sorted.size), dtype=bool)
    if fixed.size == 0 or peaks_sorted.size == 0:
        return hit
    chunk = max(1, 4_000_000 // max(fixed.size, 1))
    for start in range(0, ratios.size, chunk):  # memory bound: chunks of the grid
        r = ratios[start : start + chunk]
        app = fold(fixed[None, :] + r[:, None] * speed[None, :], fs)  # (R, T)
        pos = np.searchsorted(peaks_sorted, app)
        left = np.clip(pos - 1, 0, peaks_sorted.size - 1)
        right = np.clip(pos, 0, peaks_sorted.size - 1)
        d_left = np.abs(app - peaks_sorted[left])
        d_right = np.abs(app - peaks_sorted[right])
        pick = np.where(d_left <= d_right, left, right)
        dist = np.minimum(d_left, d_right)
        ok = dist <= tol_sorted[pick]
        rows = np.broadcast_to(np.arange(r.size)[:, None], app.shape)
        hit[start + rows[ok], pick[ok]] = True
    return hit


def _refine(
    r0: float,
    fixed: FloatArray,
    speed: FloatArray,
    peaks: FloatArray,
    tol: FloatArray,
    weight: FloatArray,
    fs: float,
) -> tuple[float, float, int]:
    """Weighted least squares for the ratio near ``r0``: (ratio, σ, pairs used).

    Near a match the fold is linear in ``r``: ``apparent = s·(fixed + r·speed) − k·fs``
    with ``s = +1`` in odd zones and ``−1`` in even zones [2]_, so the slope of each
    pair is ``s·speed`` and one Gauss–Newton step per iteration converges at once.
    """
    r = r0
    for _ in range(3):
        true = fixed + r * speed
        app = fold(true, fs)
        d = np.abs(app[:, None] - peaks[None, :])  # (T, P), T informative tones
        j = np.argmin(d, axis=1)
        ok = d[np.arange(fixed.size), j] <= tol[j]
        if not np.any(ok):
            return r0, float("nan"), 0
        # Slope sign: +1 where the apparent frequency rises with the true one.
        s = np.where(np.rint(true / fs) * fs <= true, 1.0, -1.0)
        slope = s[ok] * speed[ok]
        res = peaks[j[ok]] - app[ok]
        w = weight[j[ok]]
        denom = float(np.sum(w * slope**2))
        if denom <= 0:
            return r0, float("nan"), 0
        step = float(np.sum(w * slope * res)) / denom
        r += step
        if abs(step) < 1e-12:
            break
    # Frequency error per pair: the rms residual, but never below a third of the
    # tolerance (the refined peak frequencies carry that much error anyway).
    true = fixed + r * speed
    app = fold(true, fs)
    d = np.abs(app[:, None] - peaks[None, :])
    j = np.argmin(d, axis=1)
    ok = d[np.arange(fixed.size), j] <= tol[j]
    n_ok = int(np.sum(ok))
    if n_ok == 0:
        return r, float("nan"), 0
    res = peaks[j[ok]] - app[ok]
    sigma_f = max(float(np.sqrt(np.mean(res**2))), float(np.mean(tol[j[ok]])) / 3.0)
    sigma_r = sigma_f / float(np.sqrt(np.sum(speed[ok] ** 2)))
    return r, sigma_r, n_ok


def estimate_speed(
    fixed_hz: ArrayLike,
    speed_hz: ArrayLike,
    peaks_hz: ArrayLike,
    sample_rate_hz: float,
    tolerance_hz: float | ArrayLike,
    peaks_amplitude: ArrayLike | None = None,
    search_pct: float = DEFAULT_SEARCH_PCT,
    nominal_speed: float | None = None,
) -> SpeedEstimate:
    """Estimate the speed ratio (actual / nominal) that best explains the peaks.

    Parameters
    ----------
    fixed_hz, speed_hz : array_like
        Per tone, the speed-independent part of the true frequency and the
        speed-proportional part at the nominal speed, Hz (as in
        :class:`service.core.tones.ToneSet`); ``speed_hz`` may be negative (a lower
        sideband), every ``fixed_hz + speed_hz`` must be >= 0.
    peaks_hz : array_like
        Measured (apparent) peak frequencies, Hz.
    sample_rate_hz : float
        Final sample rate of the record, Hz (> 0).
    tolerance_hz : float or array_like
        How far a peak may lie from a folded tone and still match it, Hz (> 0), one
        value or one per peak; use the diagnosis tolerance
        (:func:`service.core.attribution.frequency_tolerance_hz`).
    peaks_amplitude : array_like, optional
        Linear peak amplitudes; matches are weighted by level (1 + one per 20 dB above
        the weakest peak, at most :data:`MAX_LEVEL_WEIGHT`). Default: every peak counts 1.
    search_pct : float
        Half-width of the search, percent of nominal (0.1 to 20); default
        :data:`DEFAULT_SEARCH_PCT` (±4 %: slip and controller drift, see there).
    nominal_speed : float, optional
        The nominal speed in any unit (rpm, Hz), only to report ``speed_hz`` and its
        uncertainty in that unit.

    Returns
    -------
    SpeedEstimate

    Notes
    -----
    Grid search: ratios from ``1 − search_pct/100`` to ``1 + search_pct/100`` in steps
    that move the fastest speed-proportional tone by a quarter of the smallest tolerance
    (at most :data:`MAX_GRID` steps). For each ratio every speed-proportional tone is
    folded at the sample rate [1]_ and each peak within its tolerance of a folded tone
    scores its weight (once per peak). The best ratio is the centre of the highest
    plateau of that score; a least-squares fit over the matched pairs, with each pair's
    slope signed by its zone (even zones invert [2]_), refines it below the grid and the
    frequency resolution, and gives its uncertainty [4]_.

    The estimate is trusted when at least :data:`MIN_MATCHES` peaks match
    speed-proportional tones and no separate maximum scores :data:`AMBIGUITY_RATIO` of
    the best or more; otherwise ``ratio`` is 1 (the nominal speed is kept) and
    ``reason`` says why. Fixed tones do not move with speed and do not inform the
    search; they count in ``explained_at_*`` only.
    """
    fixed = _check_array(fixed_hz, "fixed_hz", nonneg=False)
    speed = _check_array(speed_hz, "speed_hz", nonneg=False)
    if fixed.shape != speed.shape:
        raise InputError(
            f"fixed_hz has {fixed.size} tones and speed_hz {speed.size}; give one of each per tone",
            field="speed_hz",
            code="length_mismatch",
        )
    if np.any(fixed + speed < 0):
        i = int(np.flatnonzero(fixed + speed < 0)[0])
        raise InputError(
            f"tone {i} has frequency {fixed[i] + speed[i]!r} Hz; it must be >= 0",
            field=f"fixed_hz[{i}]",
            code="invalid",
        )
    peaks = _check_array(peaks_hz, "peaks_hz")
    fs = _check_positive(sample_rate_hz, "sample_rate_hz", " Hz")
    tol = np.broadcast_to(np.asarray(tolerance_hz, dtype=np.float64), peaks.shape).copy()
    if np.any(~np.isfinite(tol) | (tol <= 0)):
        raise InputError(
            "tolerance_hz must be finite and > 0 (one value or one per peak)",
            field="tolerance_hz",
            code="not_positive",
        )
    amp = None
    if peaks_amplitude is not None:
        amp = _check_array(peaks_amplitude, "peaks_amplitude")
        if amp.shape != peaks.shape:
            raise InputError(
                f"peaks_amplitude has {amp.size} values for {peaks.size} peaks",
                field="peaks_amplitude",
                code="length_mismatch",
            )
    pct = float(search_pct)
    if not np.isfinite(pct) or not 0.1 <= pct <= 20.0:
        raise InputError(
            f"search_pct={search_pct!r} must be between 0.1 and 20 (percent)",
            field="search_pct",
            value=pct if np.isfinite(pct) else str(pct),
            limit=[0.1, 20],
            code="out_of_range",
        )
    nominal = None if nominal_speed is None else _check_positive(nominal_speed, "nominal_speed")

    order = np.argsort(peaks, kind="stable")
    p_sorted, t_sorted = peaks[order], tol[order]
    weight = _level_weights(None if amp is None else amp[order], peaks.size)
    moving = speed != 0.0
    f_mov, s_mov = fixed[moving], speed[moving]
    lo, hi = 1.0 - pct / 100.0, 1.0 + pct / 100.0
    search_range = (lo, hi)

    def explained(r: float) -> tuple[int, int]:
        all_hit = _matches(np.array([r]), fixed, speed, p_sorted, t_sorted, fs)[0]
        mov_hit = _matches(np.array([r]), f_mov, s_mov, p_sorted, t_sorted, fs)[0]
        return int(all_hit.sum()), int(mov_hit.sum())

    nom_all, nom_mov = explained(1.0)

    def keep_nominal(reason: str, est: float = float("nan"), sig: float = float("nan"),
                     grid: FloatArray | None = None,
                     score: FloatArray | None = None) -> SpeedEstimate:  # fmt: skip
        return SpeedEstimate(
            ratio=1.0,
            estimated_ratio=est,
            ratio_uncertainty=sig,
            speed_hz=float("nan") if nominal is None else nominal,
            speed_uncertainty=float("nan"),
            offset_pct=0.0,
            explained_at_estimate=nom_all,
            explained_at_nominal=nom_all,
            matched_at_estimate=nom_mov,
            matched_at_nominal=nom_mov,
            trustworthy=False,
            reason=reason,
            search_range=search_range,
            grid_ratio=np.empty(0) if grid is None else grid,
            grid_score=np.empty(0) if score is None else score,
        )

    if f_mov.size == 0:
        return keep_nominal("no tone moves with speed, so the peaks cannot tell the speed")
    if peaks.size == 0:
        return keep_nominal("no peaks to estimate the speed from")

    step = 0.25 * float(t_sorted.min()) / float(np.max(np.abs(s_mov)))
    n_grid = int(min(MAX_GRID, max(3, np.ceil((hi - lo) / step) + 1)))
    grid = np.linspace(lo, hi, n_grid)
    hits = _matches(grid, f_mov, s_mov, p_sorted, t_sorted, fs)
    score = hits.astype(np.float64) @ weight
    best = float(score.max())
    if best <= 0:
        return keep_nominal(
            f"no speed within ±{pct:g} % makes a speed-proportional tone match a peak",
            grid=grid,
            score=score,
        )
    # The highest plateau: contiguous run of the maximum containing the first argmax;
    # its centre is the grid estimate.
    top = score >= best - 1e-9
    i0 = int(np.argmax(top))
    i1 = i0
    while i1 + 1 < n_grid and top[i1 + 1]:  # walk one plateau (a few grid points)
        i1 += 1
    r_grid = float(0.5 * (grid[i0] + grid[i1]))
    # A separate maximum: anything outside the region where the score stays high around
    # the best plateau that scores AMBIGUITY_RATIO of the best.
    high = score >= AMBIGUITY_RATIO * best
    a, b = i0, i1
    while a - 1 >= 0 and high[a - 1]:
        a -= 1
    while b + 1 < n_grid and high[b + 1]:
        b += 1
    outside = np.ones(n_grid, dtype=bool)
    outside[a : b + 1] = False
    rival = float(score[outside].max()) if np.any(outside) else 0.0

    w_peak = weight  # sorted order
    est, sigma, _ = _refine(r_grid, f_mov, s_mov, p_sorted, t_sorted, w_peak, fs)
    if not lo - 1e-12 <= est <= hi + 1e-12:
        est = r_grid
    est_all, est_mov = explained(est)
    n_matched = int(hits[i0].sum())
    if n_matched < MIN_MATCHES:
        return keep_nominal(
            f"only {n_matched} peak(s) match speed-proportional tones at the best speed "
            f"(ratio {est:.4f}); at least {MIN_MATCHES} are needed to trust an estimate, "
            "so the nominal speed is kept",
            est,
            sigma,
            grid,
            score,
        )
    if rival >= AMBIGUITY_RATIO * best:
        r_rival = float(grid[outside][np.argmax(score[outside])])
        return keep_nominal(
            f"two speeds explain the peaks about equally well (ratios {est:.4f} and "
            f"{r_rival:.4f}); the nominal speed is kept — give a tighter speed or a tacho "
            "reading",
            est,
            sigma,
            grid,
            score,
        )
    offset = (est - 1.0) * 100.0
    if nominal is not None:
        where = f"{est * nominal:.5g} ({offset:+.2f} % from the nominal {nominal:.5g})"
    else:
        where = f"ratio {est:.5f} ({offset:+.2f} % from nominal)"
    reason = (
        f"the peaks fit a running speed of {where}: {est_all} peaks explained against "
        f"{nom_all} at the nominal speed"
    )
    return SpeedEstimate(
        ratio=est,
        estimated_ratio=est,
        ratio_uncertainty=sigma,
        speed_hz=float("nan") if nominal is None else est * nominal,
        speed_uncertainty=float("nan") if nominal is None else sigma * nominal,
        offset_pct=offset,
        explained_at_estimate=est_all,
        explained_at_nominal=nom_all,
        matched_at_estimate=est_mov,
        matched_at_nominal=nom_mov,
        trustworthy=True,
        reason=reason,
        search_range=search_range,
        grid_ratio=grid,
        grid_score=score,
    )


def estimate_speed_for_tones(
    tones: ToneSet,
    peaks_hz: ArrayLike,
    sample_rate_hz: float,
    tolerance_hz: float | ArrayLike,
    peaks_amplitude: ArrayLike | None = None,
    search_pct: float = DEFAULT_SEARCH_PCT,
    nominal_speed: float | None = None,
) -> SpeedEstimate:
    """:func:`estimate_speed` for a :class:`~service.core.tones.ToneSet`.

    Use the result as ``tones.at_speed(result.ratio)`` or scale the sources' speed by
    ``result.ratio`` before expanding them.
    """
    if not isinstance(tones, ToneSet):
        raise InputError(
            f"tones must be a ToneSet, got {type(tones).__name__}", field="tones", code="invalid"
        )
    return estimate_speed(
        tones.fixed_hz,
        tones.speed_hz,
        peaks_hz,
        sample_rate_hz,
        tolerance_hz,
        peaks_amplitude=peaks_amplitude,
        search_pct=search_pct,
        nominal_speed=nominal_speed,
    )
