"""Run-up records, the lines: ridges of the map, tracks, folding hypotheses, verdicts.

In a map of apparent frequency against shaft speed ``r`` (Hz) a real order ``k`` is the
ray ``f = k·r``; its alias is the same ray folded at multiples of fs/2,
``fold(k·r + c, fs)`` (:func:`service.core.folding.fold`), rising in odd Nyquist zones
and falling in even ones; a fixed-frequency line (``k = 0``) folds to a horizontal line
and its sidebands ``c ± k·r`` fan out from it.

Method
------
1. *Ridges*: per speed slice, peaks standing :data:`PEAK_DB` above a running median
   floor (medians of blocks of :data:`FLOOR_BLOCK` bins), refined by a parabola through
   the log magnitudes.
2. *Tracks*: peaks are linked slice by slice to the nearest prediction within a gate
   (:data:`GATE_BINS` bins plus half a slice's travel); the prediction extrapolates the
   track's recent slope and reflects at 0 Hz and fs/2, so a track follows an order
   through its fold. Each track keeps its *unfolded* coordinate
   ``u = base + σ·f`` (σ flips and the base moves by fs at each reflection).
3. *Hypotheses*: the known lines given (order ``k``, fixed part ``c``), and blind ones
   from a Theil–Sen line through the unfolded points (``u = a + b·r``): an order through
   the origin (``c = 0``, allowed when the intercept is within :data:`ORIGIN_BINS` bins
   of a multiple of fs), a fixed line (``k = 0``), or a line with an offset. Each is
   refined by Gauss–Newton with Huber weights on ``f − fold(k·r + c, fs)`` (iteratively
   reweighted least squares [3]_) and scored by the share of points within tolerance
   (:data:`TOL_BINS` bins plus half a speed slice's travel). The best hypothesis with
   :data:`MIN_INLIERS` of the points explains the track; tracks with the same
   explanation are merged into one line.
4. *Verdict*: a real order (every point in zone 1), a folded order (the zones and the
   speed range of each; inverted in even zones), a fixed-frequency alias (a known fixed
   line above Nyquist), a sideband (``k ≠ 0``, ``c ≠ 0``), a resonance (a fixed line
   whose level rises and falls by :data:`RESONANCE_DB` inside the sweep), a fixed line
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
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import scipy.signal
import scipy.stats
from numpy.typing import NDArray

from .errors import InputError
from .folding import fold
from .runup_map import RunUpMap
from .tones import ToneSet

__all__ = [
    "FLOOR_BLOCK",
    "FULL_SWEEP",
    "GATE_BINS",
    "MAX_GAP",
    "MIN_INLIERS",
    "MIN_POINTS",
    "ORIGIN_BINS",
    "PEAK_DB",
    "RESONANCE_DB",
    "TOL_BINS",
    "KnownLine",
    "RunUpLine",
    "ZoneSpan",
    "find_lines",
    "known_lines_from_tones",
]

FloatArray = NDArray[np.float64]

#: Width, bins, of the blocks whose medians form the running noise floor.
FLOOR_BLOCK = 32
#: A ridge point stands at least this far, dB, above the floor.
PEAK_DB = 12.0
#: Gate of the track linker, bins (plus half the slice-to-slice travel).
GATE_BINS = 3.0
#: Tolerance of a fit, bins (plus half the travel of a line across one speed slice).
TOL_BINS = 1.5
#: An order passes through the origin when its unfolded intercept is this close, bins,
#: to a multiple of the sample rate.
ORIGIN_BINS = 6.0
#: Share of a track's points a hypothesis must explain.
MIN_INLIERS = 0.8
#: Fewest points (speed slices) in a track worth explaining.
MIN_POINTS = 10
#: Largest gap, slices, a track may bridge (crossing lines hide each other).
MAX_GAP = 4
#: A fixed line whose level peaks this many dB above both ends of its sweep is a
#: resonance (excited as the orders pass through it).
RESONANCE_DB = 10.0
#: Share of the record's speed range a line must cover for full confidence.
FULL_SWEEP = 0.25


def _ridge_points(m: RunUpMap) -> list[tuple[FloatArray, FloatArray]]:
    """Per speed slice: refined frequencies (Hz) and levels (dB) of the ridge peaks."""
    lvl = m.speed_level
    ns, nf = lvl.shape
    with np.errstate(divide="ignore", invalid="ignore"):
        db = 20 * np.log10(np.maximum(lvl.astype(np.float64), 1e-15))
    nb = -(-nf // FLOOR_BLOCK)
    pad = np.pad(db, ((0, 0), (0, nb * FLOOR_BLOCK - nf)), mode="edge")
    with np.errstate(invalid="ignore"):
        meds = np.median(pad.reshape(ns, nb, FLOOR_BLOCK), axis=2)
    centres = (np.arange(nb) + 0.5) * FLOOR_BLOCK
    out: list[tuple[FloatArray, FloatArray]] = []
    bins = np.arange(nf, dtype=np.float64)
    for s in range(ns):
        if m.speed_frames[s] == 0:
            out.append((np.empty(0), np.empty(0)))
            continue
        floor = np.interp(bins, centres, meds[s])
        row = db[s]
        pk, _ = scipy.signal.find_peaks(row, height=floor + PEAK_DB)
        pk = pk[(pk > 0) & (pk < nf - 1)]
        y0, y1, y2 = row[pk - 1], row[pk], row[pk + 1]
        den = y0 - 2 * y1 + y2
        delta = np.where(den < 0, 0.5 * (y0 - y2) / np.where(den < 0, den, -1.0), 0.0)
        delta = np.clip(delta, -0.5, 0.5)
        out.append(((pk + delta) * m.bin_hz, y1 - 0.25 * (y0 - y2) * delta))
    return out


@dataclass
class _Track:
    s: list[int] = field(default_factory=list)
    f: list[float] = field(default_factory=list)
    u: list[float] = field(default_factory=list)
    level: list[float] = field(default_factory=list)
    base: float = 0.0
    sigma: float = 1.0
    slope: float = 0.0
    slope_at: int = -1


def _slope(tr: _Track, r: FloatArray) -> float:
    """Recent slope of the unfolded coordinate, Hz per shaft Hz (cached per length)."""
    if tr.slope_at == len(tr.s):
        return tr.slope
    k = min(len(tr.s), 6)
    slope = 0.0
    if k >= 2:  # plain arithmetic: numpy's call overhead dominates for six points
        rs = [float(r[i]) for i in tr.s[-k:]]
        us = tr.u[-k:]
        rm, um = sum(rs) / k, sum(us) / k
        den = sum((a - rm) ** 2 for a in rs)
        num = sum((a - rm) * (b - um) for a, b in zip(rs, us, strict=True))
        slope = num / den if den > 0 else 0.0
    tr.slope, tr.slope_at = slope, len(tr.s)
    return slope


def _predict(tr: _Track, r_next: float, r: FloatArray, nyq: float) -> tuple[float, float, float]:
    """Predicted apparent frequency, and the base and sign in force there."""
    u = tr.u[-1] + _slope(tr, r) * (r_next - r[tr.s[-1]])
    base, sigma = tr.base, tr.sigma
    f = sigma * (u - base)
    for _ in range(8):  # reflect into [0, fs/2]; a few steps at most between slices
        if f > nyq:
            base, sigma = base + sigma * 2 * nyq, -sigma
        elif f < 0:
            sigma = -sigma
        else:
            break
        f = sigma * (u - base)
    return f, base, sigma


def _link(points: list[tuple[FloatArray, FloatArray]], m: RunUpMap) -> list[_Track]:
    r = m.speed_rpm / 60.0
    dr = float(np.median(np.diff(r))) if r.size > 1 else 1.0
    nyq = m.sample_rate_hz / 2
    active: list[_Track] = []
    done: list[_Track] = []
    for s, (fr, lv) in enumerate(points):
        if m.speed_frames[s] == 0:
            continue
        still: list[_Track] = []
        for tr in active:
            (done if s - tr.s[-1] > MAX_GAP else still).append(tr)
        active = still
        free = np.ones(fr.size, dtype=bool)
        if active and fr.size:
            preds = [_predict(tr, r[s], r, nyq) for tr in active]
            pf = np.array([p[0] for p in preds])
            gate = np.array(
                [GATE_BINS * m.bin_hz + 0.5 * abs(_slope(tr, r)) * dr * (s - tr.s[-1])
                 for tr in active]
            )  # fmt: skip
            cost = np.abs(pf[:, None] - fr[None, :])
            order = np.argsort(cost, axis=None)
            used_t = np.zeros(len(active), dtype=bool)
            for flat in order:
                i, j = divmod(int(flat), fr.size)
                if cost[i, j] > gate.max():
                    break
                if used_t[i] or not free[j] or cost[i, j] > gate[i]:
                    continue
                used_t[i], free[j] = True, False
                tr = active[i]
                _, tr.base, tr.sigma = preds[i]
                tr.s.append(s)
                tr.f.append(float(fr[j]))
                tr.u.append(tr.base + tr.sigma * float(fr[j]))
                tr.level.append(float(lv[j]))
        for j in np.flatnonzero(free).tolist():
            tr = _Track()
            tr.s.append(s)
            tr.f.append(float(fr[j]))
            tr.u.append(float(fr[j]))
            tr.level.append(float(lv[j]))
            active.append(tr)
    done.extend(active)
    return [tr for tr in done if len(tr.s) >= MIN_POINTS]


# --------------------------------------------------------------------- hypotheses


@dataclass(frozen=True)
class KnownLine:
    """A line the caller expects: true frequency ``fixed_hz + order · shaft speed``.

    ``order`` may be fractional or negative (a lower sideband ``c − k·r``).
    """

    label: str
    order: float
    fixed_hz: float = 0.0


def known_lines_from_tones(tones: ToneSet, nominal_rpm: float) -> tuple[KnownLine, ...]:
    """Known lines from a :class:`ToneSet` given at ``nominal_rpm`` (rpm).

    A tone's order is its speed-proportional part over the nominal shaft speed in Hz.
    """
    rpm = float(nominal_rpm)
    if not np.isfinite(rpm) or rpm <= 0:
        raise InputError(
            f"nominal_rpm={nominal_rpm!r} must be a finite number > 0",
            field="nominal_rpm", value=nominal_rpm, limit=0, code="not_positive",
        )  # fmt: skip
    shaft_hz = rpm / 60.0
    return tuple(
        KnownLine(f"{src}: {lab}" if src else str(lab), float(sp) / shaft_hz, float(fx))
        for lab, src, sp, fx in zip(
            tones.label, tones.source, tones.speed_hz, tones.fixed_hz, strict=True
        )
    )


@dataclass(frozen=True)
class ZoneSpan:
    """A stretch of a line in one Nyquist zone: zone, inverted, speed range (rpm)."""

    zone: int
    inverted: bool
    rpm_from: float
    rpm_to: float


@dataclass(frozen=True, eq=False)
class RunUpLine:
    """One line of the map and its verdict.

    Attributes
    ----------
    kind : str
        ``order``, ``folded_order``, ``fixed``, ``fixed_alias``, ``sideband``,
        ``resonance`` or ``unexplained``.
    order : float
        Speed-proportional part of the true frequency, per shaft revolution (the order;
        0 for a fixed line; negative for a lower sideband).
    fixed_hz : float
        Fixed part of the true frequency, Hz (a carrier; 0 for an order). For a fixed
        line found without sources this is its apparent frequency.
    label : str
        The known line matched, or a name such as ``"order 51.00"``.
    known : bool
        Whether a known line explains it.
    zones : tuple of ZoneSpan
        Where the line's true frequency lies, by speed.
    aliased : bool
        Whether any part lies above Nyquist (zone 2 or higher).
    rpm, freq_hz, level_db : ndarray
        The ridge points of the line: speed (rpm), apparent frequency (Hz), level (dB).
    residual_hz : float
        RMS of the inliers' frequency error, Hz.
    inliers : float
        Share of the points within tolerance.
    sweep : float
        Share of the record's speed range the line covers.
    confidence : float
        0 to 1 (see the module notes).
    sentence : str
        The verdict in one sentence.
    """

    kind: str
    order: float
    fixed_hz: float
    label: str
    known: bool
    zones: tuple[ZoneSpan, ...]
    aliased: bool
    rpm: FloatArray
    freq_hz: FloatArray
    level_db: FloatArray
    residual_hz: float
    inliers: float
    sweep: float
    confidence: float
    sentence: str


@dataclass(frozen=True)
class _Hyp:
    k: float
    c: float
    label: str
    known: bool
    free_c: bool
    free_k: bool = True


def _tol(k: float, bin_hz: float, dr: float) -> float:
    return TOL_BINS * bin_hz + 0.5 * abs(k) * dr


def _refine(h: _Hyp, r: FloatArray, f: FloatArray, fs: float, tol: float) -> _Hyp:
    """Gauss–Newton with Huber weights on f − fold(k·r + c) (blind hypotheses only)."""
    if h.known:
        return h
    k, c = h.k, h.c
    for _ in range(6):
        true = k * r + c
        if np.any(true < 0):
            break
        e = f - fold(true, fs)
        sgn = np.where(np.mod(np.floor(true / (fs / 2)), 2) == 0, 1.0, -1.0)
        w = np.minimum(1.0, tol / np.maximum(np.abs(e), 1e-12))
        w[np.abs(e) > 3 * tol] = 0.0  # points of another line: out
        if np.count_nonzero(w) < 3:
            break
        cols = ([sgn * r] if h.free_k else []) + ([sgn] if h.free_c else [])
        if not cols:
            break
        sw = np.sqrt(w)
        step, *_ = np.linalg.lstsq(np.column_stack(cols) * sw[:, None], e * sw, rcond=None)
        if h.free_k:
            k += float(step[0])
        if h.free_c:
            c += float(step[-1])
        if np.all(np.abs(step) < 1e-9):
            break
    return _Hyp(k, c, h.label, h.known, h.free_c, h.free_k)


def _score(h: _Hyp, r: FloatArray, f: FloatArray, fs: float, tol: float) -> tuple[float, float]:
    true = np.abs(h.k * r + h.c)
    e = np.abs(f - fold(true, fs))
    ok = e <= tol
    share = float(np.mean(ok))
    rms = float(np.sqrt(np.mean(e[ok] ** 2))) if np.any(ok) else float("inf")
    return share, rms


def _blind(tr_r: FloatArray, u: FloatArray, fs: float, bin_hz: float, dr: float) -> list[_Hyp]:
    """Blind hypotheses from the unfolded track ``u = a + b·r``."""
    hyps: list[_Hyp] = []
    if np.ptp(tr_r) <= 0:
        return hyps
    step = max(1, tr_r.size // 200)  # Theil–Sen is O(n²): 200 points are plenty
    b, a, *_ = scipy.stats.theilslopes(u[::step], tr_r[::step])
    span_hz = abs(b) * float(np.ptp(tr_r))
    f_med = float(np.median(fold(np.abs(u), fs)))
    if span_hz < 2 * bin_hz:
        hyps.append(_Hyp(0.0, f_med, f"fixed line at {f_med:.1f} Hz", False, True, False))
        return hyps
    sgn = 1.0 if b > 0 else -1.0
    k = abs(float(b))
    c_fold = sgn * float(a)  # true = sgn·u + n·fs: c = sgn·a + n·fs
    c0 = c_fold - fs * round(c_fold / fs)
    origin = abs(c0) <= ORIGIN_BINS * bin_hz + 0.5 * k * dr
    if origin:
        hyps.append(_Hyp(k, 0.0, f"order {k:.2f}", False, False))
    else:
        # With an offset the true frequency is unknown (any c + n·fs, either sign): take
        # the reading that starts in zone 1, c' = fold(c) and the slope it shows there.
        c1 = float(fold(abs(c0), fs))
        k1 = k if (c0 >= 0) == (abs(c0) <= fs / 2) else -k
        hyps.append(_Hyp(k1, c1, f"{c1:.0f} Hz {'+' if k1 > 0 else '−'} {k:.2f}·r", False, True))
    return hyps


def _zones(rpm: FloatArray, true_hz: FloatArray, fs: float) -> tuple[ZoneSpan, ...]:
    order = np.argsort(rpm)
    rpm, true_hz = rpm[order], true_hz[order]
    zone = np.maximum(np.ceil(true_hz / (fs / 2)), 1).astype(np.int64)
    cut = np.flatnonzero(np.diff(zone)) + 1
    spans = []
    for seg in np.split(np.arange(rpm.size), cut):
        z = int(zone[seg[0]])
        spans.append(ZoneSpan(z, z % 2 == 0, float(rpm[seg[0]]), float(rpm[seg[-1]])))
    return tuple(spans)


def _resonance(level: FloatArray, rpm: FloatArray) -> bool:
    if level.size < 3 * MIN_POINTS // 2:
        return False
    lv = level[np.argsort(rpm)]
    k = max(3, lv.size // 8)
    sm = np.convolve(lv, np.ones(k) / k, mode="valid")
    top = int(np.argmax(sm))
    return bool(
        0 < top < sm.size - 1
        and sm[top] - sm[0] >= RESONANCE_DB
        and sm[top] - sm[-1] >= RESONANCE_DB
    )


def _sentence(kind: str, h: _Hyp, zones: tuple[ZoneSpan, ...], fs: float) -> str:
    def where(z: ZoneSpan) -> str:
        inv = ", inverted" if z.inverted else ""
        return f"zone {z.zone}{inv} from {z.rpm_from:.0f} to {z.rpm_to:.0f} rpm"

    folded = [z for z in zones if z.zone >= 2]
    if kind == "order":
        return f"Order {h.k:.2f} ({h.label}): a real line below Nyquist over its sweep."
    if kind == "folded_order":
        return (
            f"Order {h.k:.2f} ({h.label}) folded back from above Nyquist "
            f"({fs / 2:.0f} Hz): " + "; ".join(where(z) for z in folded) + "."
        )
    if kind == "fixed_alias":
        return (
            f"Fixed line at {h.c:.0f} Hz ({h.label}) folded into the band at "
            f"{float(fold(h.c, fs)):.0f} Hz: " + where(zones[0]) + "."
        )
    if kind == "sideband":
        alias = (" folded back: " + "; ".join(where(z) for z in folded)) if folded else ""
        return f"Sideband {h.c:.0f} Hz {h.k:+.2f}·shaft speed ({h.label}){alias}."
    if kind == "resonance":
        return (
            f"Fixed frequency near {float(fold(h.c, fs)):.0f} Hz whose level rises and "
            "falls with speed: a resonance excited as lines pass through it."
        )
    if kind == "fixed":
        return (
            f"Fixed line at {h.c:.0f} Hz: real, or an alias of a fixed frequency above "
            "Nyquist; give the known sources (or a second sample rate) to tell."
        )
    return "A line that no order, fixed line or sideband explains within tolerance."


def _classify(h: _Hyp, zones: tuple[ZoneSpan, ...], level: FloatArray, rpm: FloatArray) -> str:
    aliased = any(z.zone >= 2 for z in zones)
    if h.k == 0.0:
        if h.known and aliased:
            return "fixed_alias"
        if _resonance(level, rpm):
            return "resonance"
        return "fixed" if not h.known or not aliased else "fixed_alias"
    if h.c == 0.0:
        return "folded_order" if aliased else "order"
    return "sideband"


def _piece(tr: _Track, mask: NDArray[np.bool_]) -> _Track:
    idx = np.flatnonzero(mask)
    out = _Track(base=tr.base, sigma=tr.sigma)
    out.s = [tr.s[i] for i in idx]
    out.f = [tr.f[i] for i in idx]
    out.u = [tr.u[i] for i in idx]
    out.level = [tr.level[i] for i in idx]
    return out


def _explain(
    tr: _Track, known_h: list[_Hyp], r_all: FloatArray, fs: float, bin_hz: float, dr: float
) -> list[tuple[_Track, _Hyp | None]]:
    """Explain a track; if no single hypothesis does, peel off the best one's inliers.

    The peeling is RANSAC-like [3]_: hypotheses come from the known lines and from
    Theil–Sen lines through short runs of the track, each is refined on the whole
    track, and the one with most inliers takes them; the rest is explained again.
    """
    out: list[tuple[_Track, _Hyp | None]] = []
    work = tr
    for _ in range(4):
        n = len(work.s)
        if n < MIN_POINTS:
            return out
        r, f, u = r_all[work.s], np.asarray(work.f), np.asarray(work.u)
        scored = []
        for h0 in known_h + _blind(r, u, fs, bin_hz, dr):
            tol = _tol(h0.k, bin_hz, dr)
            h = _refine(h0, r, f, fs, tol)
            scored.append((_score(h, r, f, fs, tol)[0], h))
        top = max((sc for sc, _ in scored), default=0.0)
        # Known lines come first, then the simpler blind readings: the first within 5 %
        # of the best share wins (an extra parameter always fits a little better).
        best = next((h for sc, h in scored if sc >= MIN_INLIERS and sc >= top - 0.05), None)
        if best is not None:
            mask = np.abs(f - fold(np.abs(best.k * r + best.c), fs)) <= _tol(best.k, bin_hz, dr)
            out.append((_piece(work, mask), best))
            # The rest may be another line this track ran into at a crossing.
            work = _piece(work, ~mask)
            continue
        w = max(MIN_POINTS, n // 8)
        cands = list(known_h)
        for a in range(0, n - w + 1, max(1, w // 2)):
            cands += _blind(r[a : a + w], u[a : a + w], fs, bin_hz, dr)
        best_n, best_h, best_mask = 0, None, np.zeros(n, dtype=bool)
        for h0 in cands:
            tol = _tol(h0.k, bin_hz, dr)
            h = _refine(h0, r, f, fs, tol)
            mask = np.abs(f - fold(np.abs(h.k * r + h.c), fs)) <= tol
            cnt = int(np.count_nonzero(mask))
            if cnt > 1.05 * best_n:
                best_n, best_h, best_mask = cnt, h, mask
        if best_h is None or best_n < MIN_POINTS:
            break
        out.append((_piece(work, best_mask), best_h))
        work = _piece(work, ~best_mask)
    if len(work.s) >= MIN_POINTS:
        out.append((work, None))
    return out


def find_lines(m: RunUpMap, known: Sequence[KnownLine] | None = None) -> tuple[RunUpLine, ...]:
    """Ridges of the speed map, linked into tracks, explained and classified.

    Parameters
    ----------
    m : RunUpMap
        The map (:func:`runup_map`).
    known : sequence of KnownLine, optional
        Lines expected (orders, carriers, sidebands); without them lines are named by
        the order found.

    Returns
    -------
    tuple of RunUpLine
        Strongest first.
    """
    fs = m.sample_rate_hz
    r_all = m.speed_rpm / 60.0
    dr = float(np.median(np.diff(r_all))) if r_all.size > 1 else 0.0
    r_span = float(np.ptp(r_all[m.speed_frames > 0])) or 1.0
    tracks = _link(_ridge_points(m), m)
    known_h = [
        _Hyp(kl.order, kl.fixed_hz, kl.label, True, kl.fixed_hz != 0.0) for kl in known or ()
    ]
    # Each track (or each part of a track that switched lines at a crossing) picks its
    # explanation; pieces sharing one are merged afterwards.
    groups: dict[tuple[object, ...], list[tuple[_Track, _Hyp]]] = {}
    for tr in tracks:
        for piece, h in _explain(tr, known_h, r_all, fs, m.bin_hz, dr):
            if h is None:
                gkey: tuple[object, ...] = ("none", id(piece))
                h = _Hyp(float("nan"), float("nan"), "unexplained", False, False)
            elif h.known:
                gkey = ("known", h.label)
            else:
                gkey = ("blind", round(h.k, 1), round(h.c / max(m.bin_hz, 1e-9) / 4))
            groups.setdefault(gkey, []).append((piece, h))
    merged: list[list[tuple[_Track, _Hyp]]] = []
    for members in sorted(groups.values(), key=lambda g: -sum(len(t.s) for t, _ in g)):
        r = np.concatenate([r_all[tr.s] for tr, _ in members])
        f = np.concatenate([np.asarray(tr.f) for tr, _ in members])
        for big in merged:
            h = big[0][1]
            if np.isfinite(h.k) and _score(h, r, f, fs, _tol(h.k, m.bin_hz, dr))[0] >= MIN_INLIERS:
                big.extend((tr, h) for tr, _ in members)
                break
        else:
            merged.append(list(members))
    lines: list[RunUpLine] = []
    for members in merged:
        r = np.concatenate([r_all[tr.s] for tr, _ in members])
        f = np.concatenate([np.asarray(tr.f) for tr, _ in members])
        lvl = np.concatenate([np.asarray(tr.level) for tr, _ in members])
        h = members[0][1]
        rpm = r * 60.0
        sweep = float(np.ptp(r)) / r_span
        if not np.isfinite(h.k):
            lines.append(RunUpLine(
                "unexplained", float("nan"), float("nan"), "unexplained", False, (), False,
                rpm, f, lvl, float("nan"), 0.0, sweep, 0.0,
                _sentence("unexplained", h, (), fs),
            ))  # fmt: skip
            continue
        tol = _tol(h.k, m.bin_hz, dr)
        h = _refine(h, r, f, fs, tol)
        share, rms = _score(h, r, f, fs, tol)
        true = np.abs(h.k * r + h.c)
        ok = np.abs(f - fold(true, fs)) <= tol
        zones = _zones(rpm[ok], true[ok], fs) if np.any(ok) else ()
        kind = _classify(h, zones, lvl, rpm)
        conf = share * float(np.exp(-0.5 * (rms / tol) ** 2)) * min(1.0, sweep / FULL_SWEEP)
        lines.append(RunUpLine(
            kind, h.k, h.c, h.label, h.known, zones, any(z.zone >= 2 for z in zones),
            rpm, f, lvl, rms, share, sweep, conf, _sentence(kind, h, zones, fs),
        ))  # fmt: skip
    lines.sort(key=lambda ln: -float(np.max(ln.level_db)))
    return tuple(lines)
