"""Run-up prediction: every tone through a chain along a speed grid.

:func:`run_up` finds the fold lines (speeds where a tone crosses a multiple of fs/2) and
the speeds where an aliased line crosses a line of interest. In the frequency × speed
map a real order is a ray through the origin and its alias the same ray folded at
multiples of fs/2 [1]_.

References
----------
.. [1] A. V. Oppenheim and R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
   Pearson, 2010, sec. 4.2 (aliasing of a sampled sinusoid).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from service.core.chain import Chain
from service.core.tones import ToneSet

from .analysis_lines import SPAN_DIVISOR
from .checks import check_int, check_positive
from .errors import InputError
from .plan_common import (
    CHUNK_ELEMENTS,
    MAX_SPEEDS,
    check_band,
    check_tones,
    find_tone,
    fmt_num,
    true_freq,
)

__all__ = [
    "Crossings",
    "FoldLines",
    "RunUp",
    "run_up",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]


_MAX_CROSSINGS = 20_000


@dataclass(frozen=True)
class FoldLines:
    """Speeds at which a tone's true frequency crosses a multiple of fs/2.

    Attributes
    ----------
    tone_index : ndarray of int
        Line (index into the run-up's lines) that crosses.
    speed_factor : ndarray
        Speed, factor of nominal.
    rpm : ndarray, optional
        Speed in rpm when the nominal rpm is known.
    true_hz : ndarray
        The multiple crossed, ``multiple · fs/2``, Hz.
    multiple : ndarray of int
        k: the tone crosses k·fs/2 (odd k: apparent frequency fs/2, even k: 0 Hz).
    total : int
        Number of fold lines (only the first 200,000 are listed).
    """

    tone_index: IntArray
    speed_factor: FloatArray
    rpm: FloatArray | None
    true_hz: FloatArray
    multiple: IntArray
    total: int


@dataclass(frozen=True)
class Crossings:
    """Speeds where an aliased line meets a direct line of interest (within one bin).

    Attributes
    ----------
    speed_factor : ndarray
        Speed of the crossing, factor of nominal (linear interpolation between grid
        points).
    rpm : ndarray, optional
        Same in rpm when the nominal rpm is known.
    apparent_hz : ndarray
        Apparent frequency there, Hz.
    alias_index, crossed_index : ndarray of int
        The aliased line and the direct line it meets (indices into the run-up's lines).
    alias_level, crossed_level : ndarray
        Their levels after the chain, amplitude unit (NaN where unknown).
    touching : ndarray of bool
        False: the lines cross (the difference changes sign); True: they approach
        within the tolerance without crossing.
    total : int
        Number found (only the first 20,000, by speed, are listed).
    """

    speed_factor: FloatArray
    rpm: FloatArray | None
    apparent_hz: FloatArray
    alias_index: IntArray
    crossed_index: IntArray
    alias_level: FloatArray
    crossed_level: FloatArray
    touching: BoolArray
    total: int


@dataclass(frozen=True)
class RunUp:
    """Every line through a chain along a speed grid.

    Attributes
    ----------
    speed_factor : ndarray, shape (S,)
        Speed grid, factors of nominal.
    rpm : ndarray, optional
        The grid in rpm when the nominal rpm is known.
    label, source : tuple of str
        Each line: the tones first, then any numeric orders of interest
        (source ``"orders of interest"``).
    true_hz, apparent_hz : ndarray, shape (S, L)
        True and apparent frequency, Hz.
    zone : ndarray of int, shape (S, L)
        Nyquist zone at the final rate.
    attenuation_db : ndarray, shape (S, L)
        Total attenuation of the chain, dB.
    level : ndarray, shape (S, L)
        Level after the chain, amplitude unit (NaN where the amplitude is unknown).
    in_band : ndarray of bool, shape (S, L)
        Apparent frequency inside the band.
    interest : ndarray of int
        Lines of interest (the crossed side of the crossings).
    band_hz : (float, float)
        Band, Hz.
    final_rate_hz : float
        Rate after the chain, Hz.
    tolerance_hz : float
        Crossing tolerance, Hz (default one bin).
    fold_lines : FoldLines
    crossings : Crossings
    """

    speed_factor: FloatArray
    rpm: FloatArray | None
    label: tuple[str, ...]
    source: tuple[str, ...]
    true_hz: FloatArray
    apparent_hz: FloatArray
    zone: IntArray
    attenuation_db: FloatArray
    level: FloatArray
    in_band: BoolArray
    interest: IntArray
    band_hz: tuple[float, float]
    final_rate_hz: float
    tolerance_hz: float
    fold_lines: FoldLines
    crossings: Crossings


_MAX_FOLD_LINES = 200_000


def _fold_lines(
    tones: ToneSet, s_lo: float, s_hi: float, fs: float, rpm: float | None
) -> FoldLines:
    """Analytic: ``fixed + s·speed = ±k·fs/2`` for s inside the speed interval."""
    half = fs / 2.0
    g1 = tones.fixed_hz + s_lo * tones.speed_hz
    g2 = tones.fixed_hz + s_hi * tones.speed_hz
    a, b = np.minimum(g1, g2), np.maximum(g1, g2)
    moving = tones.speed_hz != 0
    m_lo = np.where(moving, np.floor(a / half) + 1, 0).astype(np.int64)  # strictly inside
    m_hi = np.where(moving, np.ceil(b / half) - 1, -1).astype(np.int64)
    count = np.maximum(m_hi - m_lo + 1, 0)
    total = int(count.sum())
    tone = np.repeat(np.arange(len(tones)), count)
    start = np.repeat(m_lo, count)
    offs = np.arange(total) - np.repeat(np.cumsum(count) - count, count)
    m = start + offs
    keep = m != 0  # a sideband passing 0 Hz is not a fold at fs/2
    tone, m = tone[keep][:_MAX_FOLD_LINES], m[keep][:_MAX_FOLD_LINES]
    speed = (m * half - tones.fixed_hz[tone]) / tones.speed_hz[tone]
    order = np.lexsort((tone, speed))
    tone, m, speed = tone[order], m[order], speed[order]
    return FoldLines(
        tone_index=tone,
        speed_factor=speed,
        rpm=None if rpm is None else speed * rpm,
        true_hz=np.abs(m) * half,
        multiple=np.abs(m),
        total=int(keep.sum()),
    )


def _crossings(
    s: FloatArray,
    app: FloatArray,
    aliased: BoolArray,
    true_hz: FloatArray,
    level: FloatArray,
    alias_idx: IntArray,
    target_idx: IntArray,
    band: tuple[float, float],
    tol: float,
) -> tuple[FloatArray, FloatArray, IntArray, IntArray, FloatArray, FloatArray, BoolArray]:
    """Sign changes (and near misses) of alias minus target along the speed grid."""
    n_s = s.size
    d_n = target_idx.size
    out: list[tuple[NDArray[np.generic], ...]] = []
    chunk = max(1, CHUNK_ELEMENTS // max(1, n_s * d_n))
    direct_t = ~aliased[:, target_idx]  # (S, D)
    app_t = app[:, target_idx]
    true_t = true_hz[:, target_idx]
    for c0 in range(0, alias_idx.size, chunk):
        a_idx = alias_idx[c0 : c0 + chunk]
        diff = app[:, a_idx, None] - app_t[:, None, :]  # (S, A, D)
        valid = aliased[:, a_idx, None] & direct_t[:, None, :]
        valid &= np.abs(true_hz[:, a_idx, None] - true_t[:, None, :]) > tol
        valid &= a_idx[None, :, None] != target_idx[None, None, :]
        both = valid[:-1] & valid[1:]
        d0, d1 = diff[:-1], diff[1:]
        cross = both & (((d0 < 0) & (d1 > 0)) | ((d0 > 0) & (d1 < 0)) | (d0 == 0))
        absd = np.abs(diff)
        # Near misses: a local minimum of |difference| within tolerance, no sign change
        # in the neighbouring intervals.
        near = valid & (absd <= tol) & (diff != 0)
        prev_ok = np.ones_like(near)
        next_ok = np.ones_like(near)
        prev_ok[1:] = absd[1:] <= absd[:-1]
        next_ok[:-1] = absd[:-1] < absd[1:]
        near &= prev_ok & next_ok
        adj = np.zeros_like(near)
        adj[:-1] |= cross
        adj[1:] |= cross
        near &= ~adj
        for mask, touching in ((cross, False), (near, True)):
            i, a, d = np.nonzero(mask)
            if i.size == 0:
                continue
            if touching:
                frac = np.zeros(i.size)
                i1 = i
            else:
                v0, v1 = d0[i, a, d], d1[i, a, d]
                with np.errstate(divide="ignore", invalid="ignore"):
                    frac = np.where(v0 == 0, 0.0, v0 / (v0 - v1))
                i1 = i + 1
            ai, ti = a_idx[a], target_idx[d]
            sp = s[i] + frac * (s[i1] - s[i])
            ap = app[i, ai] + frac * (app[i1, ai] - app[i, ai])
            la = level[i, ai] + frac * (level[i1, ai] - level[i, ai])
            lt = level[i, ti] + frac * (level[i1, ti] - level[i, ti])
            inb = (ap >= band[0]) & (ap <= band[1])
            out.append(
                (
                    sp[inb],
                    ap[inb],
                    ai[inb],
                    ti[inb],
                    la[inb],
                    lt[inb],
                    np.full(int(inb.sum()), touching),
                )
            )
    if not out:
        e = np.empty(0)
        ei = np.empty(0, dtype=np.int64)
        return e, e, ei, ei, e, e, np.empty(0, dtype=bool)
    cols = [np.concatenate([o[j] for o in out]) for j in range(7)]
    order = np.lexsort((cols[3], cols[2], cols[0]))
    return tuple(c[order] for c in cols)  # type: ignore[return-value]


def run_up(
    tones: ToneSet,
    chain: Chain,
    speed_factors: ArrayLike | None = None,
    *,
    rpm: ArrayLike | None = None,
    nominal_rpm: float | None = None,
    band_hz: tuple[float, float] | None = None,
    orders_of_interest: Sequence[str | float] | None = None,
    lines: int = 3200,
    tolerance_hz: float | None = None,
) -> RunUp:
    """Apparent frequency of every tone against speed, fold lines and alias crossings.

    Parameters
    ----------
    tones : ToneSet
        Tones at nominal speed.
    chain : Chain
        Acquisition chain.
    speed_factors : array_like, optional
        Speed grid, factors of nominal (>= 0, increasing, 2 to 20,000 points). Give
        this or ``rpm``.
    rpm : array_like, optional
        Speed grid in rpm; needs ``nominal_rpm``.
    nominal_rpm : float, optional
        Nominal speed, rpm (the speed at which ``tones`` are given); numeric orders of
        interest are multiples of it.
    band_hz : (float, float), optional
        Band, Hz; crossings outside it are dropped. Default DC to final rate / 2.56.
    orders_of_interest : sequence of str or float, optional
        Lines an alias must not hide: tone labels (``label`` or ``"source: label"``) or
        numeric orders of the nominal shaft speed (need ``nominal_rpm``). Default: every
        tone while it is direct.
    lines : int
        Analysis lines over final rate / 2.56, for the default tolerance of one bin.
    tolerance_hz : float, optional
        How close, Hz, two lines must come to count as meeting; default one bin.

    Returns
    -------
    RunUp

    Notes
    -----
    Apparent frequency ``|f - fs·round(f/fs)|`` at the chain's final rate [1]_ is
    continuous and piecewise linear in speed, so the difference between an aliased
    line and a direct one changes sign exactly where they cross; the crossing speed
    is refined by linear interpolation between the grid points. Fold lines solve
    ``fixed + s·speed = k·fs/2`` exactly.

    References
    ----------
    .. [1] Oppenheim and Schafer, *Discrete-Time Signal Processing*, sec. 4.2.
    """
    tones = check_tones(tones)
    if not isinstance(chain, Chain):
        raise InputError(
            f"chain must be a Chain, got {type(chain).__name__}", field="chain", code="bad_type"
        )
    n_rpm = (
        None
        if nominal_rpm is None
        else check_positive(nominal_rpm, "nominal_rpm", unit=" rpm", separate=True)
    )
    grid = _speed_grid(speed_factors, rpm, n_rpm)
    fs = chain.final_rate_hz
    band = (0.0, fs / SPAN_DIVISOR) if band_hz is None else check_band(band_hz)
    n_lines = check_int(lines, "lines", 1, 1_048_576, word="a whole number")
    tol = (
        fs / (SPAN_DIVISOR * n_lines)
        if tolerance_hz is None
        else check_positive(tolerance_hz, "tolerance_hz", unit=" Hz", separate=True)
    )
    all_lines, interest = _lines_of_interest(tones, orders_of_interest, n_rpm)
    n_t = len(tones)

    f = true_freq(all_lines, grid)  # (S, L)
    resp = chain.evaluate(f.ravel())
    app = resp.apparent_hz.reshape(f.shape)
    zone = resp.zone.reshape(f.shape)
    att = resp.attenuation_db.reshape(f.shape)
    level = all_lines.amplitude[None, :] * 10.0 ** (-att / 20.0)
    aliased = zone > 1

    alias_idx = np.flatnonzero(aliased[:, :n_t].any(axis=0))
    target = np.unique(np.asarray(interest, dtype=np.int64)) if interest else np.arange(n_t)
    target = target[(~aliased[:, target]).any(axis=0)]
    found = _crossings(grid, app, aliased, f, level, alias_idx, target, band, tol)
    return RunUp(
        speed_factor=grid,
        rpm=None if n_rpm is None else grid * n_rpm,
        label=tuple(str(x) for x in all_lines.label),
        source=tuple(str(x) for x in all_lines.source),
        true_hz=f,
        apparent_hz=app,
        zone=zone,
        attenuation_db=att,
        level=level,
        in_band=(app >= band[0]) & (app <= band[1]),
        interest=target if interest else np.arange(n_t),
        band_hz=band,
        final_rate_hz=fs,
        tolerance_hz=tol,
        fold_lines=_fold_lines(all_lines, float(grid[0]), float(grid[-1]), fs, n_rpm),
        crossings=_keep_crossings(found, n_rpm),
    )


def _speed_grid(
    speed_factors: ArrayLike | None, rpm: ArrayLike | None, n_rpm: float | None
) -> FloatArray:
    """The checked speed grid as factors of nominal speed (from factors or rpm)."""
    if (speed_factors is None) == (rpm is None):
        raise InputError("give exactly one of speed_factors and rpm", field="rpm", code="conflict")
    if rpm is not None:
        if n_rpm is None:
            raise InputError(
                "an rpm grid needs nominal_rpm (the speed the tones are given at)",
                field="nominal_rpm",
                code="missing",
            )
        grid = np.asarray(rpm, dtype=np.float64).ravel() / n_rpm
        gname = "rpm"
    else:
        grid = np.asarray(speed_factors, dtype=np.float64).ravel()
        gname = "speed_factors"
    if not 2 <= grid.size <= MAX_SPEEDS:
        raise InputError(
            f"{gname} has {grid.size} points; give 2 to {MAX_SPEEDS}",
            field=gname,
            code="out_of_range",
        )
    if not np.all(np.isfinite(grid)) or np.any(grid < 0):
        raise InputError(f"{gname} must be finite and >= 0", field=gname, code="not_finite")
    if np.any(np.diff(grid) <= 0):
        i = int(np.flatnonzero(np.diff(grid) <= 0)[0]) + 1
        raise InputError(
            f"{gname}[{i}] is not above {gname}[{i - 1}]; the grid must increase",
            field=f"{gname}[{i}]",
            code="not_increasing",
        )
    return grid


def _lines_of_interest(
    tones: ToneSet, orders_of_interest: Sequence[str | float] | None, n_rpm: float | None
) -> tuple[ToneSet, list[int]]:
    """The tones plus any numeric orders of interest, and the indices of interest."""
    n_t = len(tones)
    interest: list[int] = []
    extra: list[float] = []
    for j, item in enumerate(orders_of_interest or ()):
        if isinstance(item, str):
            interest.append(find_tone(tones, item, f"orders_of_interest[{j}]"))
        else:
            order = check_positive(item, f"orders_of_interest[{j}]", separate=True)
            if n_rpm is None:
                raise InputError(
                    f"orders_of_interest[{j}]={item!r} is a numeric order; it needs nominal_rpm",
                    field=f"orders_of_interest[{j}]",
                    code="missing",
                    value=item,
                )
            interest.append(n_t + len(extra))
            extra.append(order)
    if not extra:
        return tones, interest
    assert n_rpm is not None
    o = np.asarray(extra)
    orders = ToneSet(
        label=np.array([f"order {fmt_num(x, 6)}" for x in extra], dtype=object),
        source=np.array(["orders of interest"] * o.size, dtype=object),
        kind=np.array(["shaft"] * o.size, dtype=object),
        fixed_hz=np.zeros(o.size),
        speed_hz=o * n_rpm / 60.0,
        amplitude=np.full(o.size, np.nan),
    )
    return ToneSet.concat([tones, orders]), interest


def _keep_crossings(
    found: tuple[FloatArray, FloatArray, IntArray, IntArray, FloatArray, FloatArray, BoolArray],
    n_rpm: float | None,
) -> Crossings:
    """The first ``_MAX_CROSSINGS`` crossings, with the total found."""
    sp, ap, ai, ti, la, lt, touch = found
    keep = slice(0, _MAX_CROSSINGS)
    return Crossings(
        speed_factor=sp[keep],
        rpm=None if n_rpm is None else sp[keep] * n_rpm,
        apparent_hz=ap[keep],
        alias_index=ai[keep],
        crossed_index=ti[keep],
        alias_level=la[keep],
        crossed_level=lt[keep],
        touching=touch[keep],
        total=int(sp.size),
    )
