"""Two-rate test: the same signal captured at two sample rates.

A tone inside both first Nyquist zones reads the same frequency in both captures; an
alias reads ``fold(f, rate)``, which changes with the rate. So peaks that stay put are
real and peaks that move are aliases, and the true frequency of a moving peak must fold
to a peak in each capture. This is the usual way to confirm an alias verdict.

References
----------
.. [1] A. V. Oppenheim and R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
   Pearson, 2010, sec. 4.2 (aliasing of a sinusoid: ``fold(f, fs)``).
.. [2] R. G. Lyons, *Understanding Digital Signal Processing*, 3rd ed., 2011, sec. 2.3
   (Nyquist zones; an alias moves when the sample rate changes).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .checks import check_positive
from .errors import InputError
from .folding import fold_offset, fold_unchecked
from .harmonics import check_peaks, format_hz

__all__ = [
    "MATCH_BINS",
    "CaptureVerdicts",
    "RateComparison",
    "TrueCandidate",
    "compare_rates",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
ObjArray = NDArray[np.object_]

#: Frequency tolerance per capture, bins: two peaks are "the same" within
#: ``MATCH_BINS·(bin_a + bin_b)`` (refined peaks are far better, but machine speed
#: may drift a little between captures).
MATCH_BINS = 1.0
#: The frequency score is a Gaussian with σ = tolerance × this fraction.
SIGMA_FRACTION = 0.5
#: A verdict of "stays" or "moves" needs at least this score; below, "only_in_...".
MIN_SCORE = 0.2
#: No verdict is ever certain.
MAX_CONFIDENCE = 0.95
#: Confidence of a peak without counterpart (absence is weak evidence).
ONLY_CONFIDENCE = 0.5
#: A moving candidate whose partner already stays put with another peak is weaker.
CLAIMED_FACTOR = 0.5
#: A second candidate at least this fraction as good as the best is named too.
TIE_RATIO = 0.9
#: Candidates kept per peak.
MAX_CANDIDATES = 5


@dataclass(frozen=True)
class TrueCandidate:
    """A true frequency consistent with a peak in both captures.

    Attributes
    ----------
    true_hz : float
        True frequency, Hz (mean of the two captures' unfoldings).
    zone_a, zone_b : int
        Nyquist zone of ``true_hz`` at rate A and at rate B.
    partner : int
        Index of the matching peak in the other capture.
    freq_error_hz : float
        Folded frequency minus the partner's frequency, Hz.
    level_diff_db : float
        Partner level minus this peak's level, dB.
    score : float
        Frequency score × level score, 0..1.
    """

    true_hz: float
    zone_a: int
    zone_b: int
    partner: int
    freq_error_hz: float
    level_diff_db: float
    score: float


@dataclass(frozen=True, eq=False)
class CaptureVerdicts:
    """Per-peak results for one capture (arrays of that capture's peak count).

    Attributes
    ----------
    freq_hz, amplitude : ndarray
        The capture's peaks (Hz; linear amplitude).
    verdict : ndarray of str
        ``"stays"`` (real), ``"moves"`` (alias in at least one capture),
        ``"only_in_a"`` / ``"only_in_b"`` (no counterpart in the other capture).
    confidence : ndarray
        0 to :data:`MAX_CONFIDENCE`.
    partner : ndarray of int
        Index of the counterpart peak in the other capture; -1 if none.
    true_hz : ndarray
        Best true frequency, Hz (the peak's own frequency for "stays"); NaN if none.
    zone_a, zone_b : ndarray of int
        Nyquist zones of ``true_hz`` at rate A and rate B; 0 if none.
    sentence : ndarray of str
        One plain sentence per peak.
    candidates : list of list of TrueCandidate
        For moving peaks, the true frequencies consistent with both captures, best
        first (empty otherwise).
    """

    freq_hz: FloatArray
    amplitude: FloatArray
    verdict: ObjArray
    confidence: FloatArray
    partner: IntArray
    true_hz: FloatArray
    zone_a: IntArray
    zone_b: IntArray
    sentence: ObjArray
    candidates: list[list[TrueCandidate]]

    def __len__(self) -> int:
        return int(self.freq_hz.size)


@dataclass(frozen=True, eq=False)
class RateComparison:
    """Result of :func:`compare_rates`.

    Attributes
    ----------
    a, b : CaptureVerdicts
        Verdicts for the peaks of capture A and of capture B.
    rate_a_hz, rate_b_hz : float
        The two sample rates, Hz.
    tolerance_hz : float
        Frequency tolerance for "the same frequency", Hz.
    max_true_hz : float
        Highest true frequency considered, Hz.
    """

    a: CaptureVerdicts
    b: CaptureVerdicts
    rate_a_hz: float
    rate_b_hz: float
    tolerance_hz: float
    max_true_hz: float


#: Unfoldings searched per peak (2 per multiple of the lower rate) and in total.
MAX_UNFOLDINGS = 20_000
MAX_CANDIDATE_CELLS = 4_000_000


def _in_capture(exc: InputError, capture: str, freq_name: str, amp_name: str) -> InputError:
    """The error of one capture's peaks, re-worded and re-rooted at that capture's inputs."""
    field = exc.field or ""
    for old, new in (("peaks_freq_hz", freq_name), ("peaks_amplitude", amp_name)):
        if field.startswith(old):
            field = new + field[len(old) :]
    return InputError(
        f"capture {capture}: {exc}",
        field=field or None,
        value=exc.value,
        limit=exc.limit,
        code=exc.code,
    )


def _zone(f: FloatArray, rate: float) -> IntArray:
    out: IntArray = np.maximum(np.ceil(f / (rate / 2.0) - 1e-12), 1).astype(np.int64)
    return out


def _nearest(sorted_f: FloatArray, x: FloatArray) -> IntArray:
    """Index (into ``sorted_f``) of the nearest value to each ``x``."""
    n = sorted_f.size
    j = np.searchsorted(sorted_f, x)
    lo = np.clip(j - 1, 0, n - 1)
    hi = np.clip(j, 0, n - 1)
    out: IntArray = np.where(np.abs(sorted_f[lo] - x) <= np.abs(sorted_f[hi] - x), lo, hi)
    return out


def _gauss(x: FloatArray, sigma: float) -> FloatArray:
    # A sigma so small that x / sigma overflows gives weight 0, which exp(-inf) is.
    with np.errstate(over="ignore"):
        out: FloatArray = np.exp(-0.5 * (x / sigma) ** 2)
    return out


@dataclass(frozen=True)
class _Side:
    freq: FloatArray
    db: FloatArray
    rate: float
    order: IntArray  # argsort of freq
    name: str  # "a" or "b"


def _stays(x: _Side, y: _Side, tol: float, lvl: float) -> tuple[IntArray, FloatArray]:
    """Nearest peak of y at the same frequency as each peak of x, and its score."""
    if y.freq.size == 0 or x.freq.size == 0:
        return np.full(x.freq.size, -1, dtype=np.int64), np.zeros(x.freq.size)
    j = y.order[_nearest(y.freq[y.order], x.freq)]
    d = np.abs(y.freq[j] - x.freq)
    score = _gauss(d, SIGMA_FRACTION * tol) * _gauss(y.db[j] - x.db, lvl)
    ok = (d <= tol) & (x.freq <= y.rate / 2.0)
    return np.where(ok, j, -1).astype(np.int64), np.where(ok, score, 0.0)


def _moves(
    x: _Side, y: _Side, tol: float, lvl: float, max_true: float, claimed_y: IntArray
) -> list[list[TrueCandidate]]:
    """True-frequency candidates for every peak of x, vectorised over peak × unfolding."""
    n = x.freq.size
    out: list[list[TrueCandidate]] = [[] for _ in range(n)]
    if n == 0 or y.freq.size == 0:
        return out
    m = np.arange(0, int(max_true // x.rate) + 2, dtype=np.float64)
    up = m[None, :] * x.rate + x.freq[:, None]
    down = m[None, 1:] * x.rate - x.freq[:, None]
    true = np.concatenate([up, down], axis=1)  # n × C
    peak = np.broadcast_to(np.arange(n)[:, None], true.shape)
    valid = (true >= 0) & (true <= max_true)
    # f = p itself (m = 0) is the "stays" hypothesis unless p is above y's Nyquist.
    valid[:, 0] &= x.freq > y.rate / 2.0
    a_y = fold_unchecked(true, y.rate)
    j = y.order[_nearest(y.freq[y.order], a_y.ravel())].reshape(true.shape)
    err = a_y - y.freq[j]
    valid &= np.abs(err) <= tol
    rows, cols = np.nonzero(valid)
    if rows.size == 0:
        return out
    t = true[rows, cols]
    jj = j[rows, cols]
    e = err[rows, cols]
    r = fold_offset(t, y.rate)
    direction = np.where(r >= 0, 1.0, -1.0)
    t_est = t - 0.5 * direction * e  # mean of x's and y's unfoldings
    dlev = y.db[jj] - x.db[peak[rows, cols]]
    score = _gauss(e, SIGMA_FRACTION * tol) * _gauss(dlev, lvl)
    score = np.where(claimed_y[jj] >= 0, score * CLAIMED_FACTOR, score)
    zone_x, zone_y = _zone(t_est, x.rate), _zone(t_est, y.rate)
    za, zb = (zone_x, zone_y) if x.name == "a" else (zone_y, zone_x)
    order = np.lexsort((t_est, -score, rows))
    for i in order.tolist():  # only the matching candidates, typically a few per peak
        lst = out[int(rows[i])]
        if len(lst) < MAX_CANDIDATES:
            lst.append(
                TrueCandidate(
                    true_hz=float(t_est[i]),
                    zone_a=int(za[i]),
                    zone_b=int(zb[i]),
                    partner=int(jj[i]),
                    freq_error_hz=float(e[i]),
                    level_diff_db=float(dlev[i]),
                    score=float(score[i]),
                )
            )
    return out


def _rate(r: float) -> str:
    return format_hz(r, 3, "S/s")


def _verdicts(
    x: _Side,
    y: _Side,
    amp: FloatArray,
    stay_j: IntArray,
    stay_s: FloatArray,
    cands: list[list[TrueCandidate]],
    max_true: float,
) -> CaptureVerdicts:
    n = x.freq.size
    verdict = np.empty(n, dtype=object)
    sentence = np.empty(n, dtype=object)
    conf = np.zeros(n)
    partner = np.full(n, -1, dtype=np.int64)
    true = np.full(n, np.nan)
    zone_a = np.zeros(n, dtype=np.int64)
    zone_b = np.zeros(n, dtype=np.int64)
    rx, ry = _rate(x.rate), _rate(y.rate)
    other = "b" if x.name == "a" else "a"
    for i in range(n):  # one sentence per peak
        p = format_hz(x.freq[i])
        best = cands[i][0] if cands[i] else None
        move_s = best.score if best is not None else 0.0
        if stay_s[i] >= MIN_SCORE and stay_s[i] >= move_s:
            verdict[i] = "stays"
            conf[i] = min(stay_s[i], MAX_CONFIDENCE)
            partner[i] = stay_j[i]
            true[i] = x.freq[i]
            zone_a[i] = zone_b[i] = 1
            sentence[i] = (
                f"{p} reads the same at {rx} and {ry}: a real tone (in the first Nyquist "
                "zone of both captures)"
            )
            cands[i] = []
            continue
        if best is not None and move_s >= MIN_SCORE:
            verdict[i] = "moves"
            conf[i] = min(move_s, MAX_CONFIDENCE)
            partner[i] = best.partner
            true[i] = best.true_hz
            zone_a[i], zone_b[i] = best.zone_a, best.zone_b
            z_x, z_y = (best.zone_a, best.zone_b) if x.name == "a" else (best.zone_b, best.zone_a)
            where = format_hz(y.freq[best.partner])
            hedge = "probably" if move_s >= 0.7 else "perhaps"
            if z_x == 1:
                what = f"real in this capture but folded at {ry}"
            else:
                what = "an alias"
            text = (
                f"{p} at {rx} moves to {where} at {ry}: {what}; the true frequency is "
                f"{hedge} {format_hz(best.true_hz)} (zone {z_x} at {rx}, zone {z_y} at {ry})"
            )
            if len(cands[i]) > 1 and cands[i][1].score >= TIE_RATIO * move_s:
                text += f", or {format_hz(cands[i][1].true_hz)}"
            sentence[i] = text
            continue
        verdict[i] = f"only_in_{x.name}"
        conf[i] = ONLY_CONFIDENCE
        if x.freq[i] > y.rate / 2.0:
            sentence[i] = (
                f"{p} at {rx} is above the Nyquist frequency {format_hz(y.rate / 2.0)} of the "
                f"{ry} capture, and no true frequency up to {format_hz(max_true)} folds to a "
                f"matching peak there: seen only in capture {x.name.upper()}"
            )
        else:
            sentence[i] = (
                f"{p} at {rx} has no counterpart at {ry}, neither at the same frequency nor "
                f"at any fold of a true frequency up to {format_hz(max_true)}: it may be "
                f"below the floor or outside the band of capture {other.upper()}, or "
                "intermittent"
            )
    return CaptureVerdicts(
        freq_hz=x.freq,
        amplitude=amp,
        verdict=verdict,
        confidence=conf,
        partner=partner,
        true_hz=true,
        zone_a=zone_a,
        zone_b=zone_b,
        sentence=sentence,
        candidates=cands,
    )


def compare_rates(
    peaks_a_hz: ArrayLike,
    amp_a: ArrayLike,
    rate_a_hz: float,
    bin_a_hz: float,
    peaks_b_hz: ArrayLike,
    amp_b: ArrayLike,
    rate_b_hz: float,
    bin_b_hz: float,
    max_true_hz: float | None = None,
    level_tolerance_db: float = 6.0,
) -> RateComparison:
    """Tell real peaks from aliases with two captures at different sample rates.

    Parameters
    ----------
    peaks_a_hz, amp_a : array_like
        Peaks of capture A: frequencies, Hz, in ``[0, rate_a_hz/2]``; amplitudes,
        linear, > 0.
    rate_a_hz : float
        Sample rate of capture A (after any decimation), Hz.
    bin_a_hz : float
        Bin width of capture A's spectrum, Hz.
    peaks_b_hz, amp_b, rate_b_hz, bin_b_hz
        The same for capture B; the rates must differ.
    max_true_hz : float, optional
        Highest true frequency considered, Hz; default 10 × the higher rate.
    level_tolerance_db : float
        Spread of the level agreement between the captures, dB (> 0).

    Returns
    -------
    RateComparison

    Notes
    -----
    Same frequency: within ``tol = MATCH_BINS·(bin_a + bin_b)``. A peak of A "stays" if
    B has a peak there (and it is below B's Nyquist frequency). Otherwise every true
    frequency ``f = m·rate_a ± p`` up to ``max_true_hz`` (all fold to ``p`` at rate A
    [1]_) is folded at rate B and matched to B's nearest peak within ``tol``; candidates
    are scored by ``exp(−½(e/σ)²)·exp(−½(ΔL/level_tolerance)²)`` (σ = tol/2, ``ΔL`` the
    level difference in dB), halved when the partner already stays put with another
    peak, and ranked best first (lower frequency on ties). The reported true frequency
    is the mean of the two captures' unfoldings. Peaks of B are treated the same way
    against A. An alias keeps its level between the captures only if the chains
    attenuate it alike; with different anti-alias filters widen ``level_tolerance_db``.
    A machine whose speed changed between the captures moves its real tones too.
    """
    ra = check_positive(rate_a_hz, "rate_a_hz")
    rb = check_positive(rate_b_hz, "rate_b_hz")
    if math.isclose(ra, rb, rel_tol=1e-9):
        raise InputError(
            f"rate_b_hz={rate_b_hz!r} equals rate_a_hz={rate_a_hz!r}; the two-rate test "
            "needs two different sample rates",
            field="rate_b_hz",
            code="conflict",
            value=rate_b_hz,
        )
    ba = check_positive(bin_a_hz, "bin_a_hz")
    bb = check_positive(bin_b_hz, "bin_b_hz")
    lvl = check_positive(level_tolerance_db, "level_tolerance_db")
    max_true = (
        10.0 * max(ra, rb) if max_true_hz is None else check_positive(max_true_hz, "max_true_hz")
    )
    try:
        fa, aa, _ = check_peaks(peaks_a_hz, amp_a, 1.0, ra / 2.0)
    except InputError as exc:
        raise _in_capture(exc, "A", "peaks_a_hz", "amp_a") from None
    try:
        fb, ab, _ = check_peaks(peaks_b_hz, amp_b, 1.0, rb / 2.0)
    except InputError as exc:
        raise _in_capture(exc, "B", "peaks_b_hz", "amp_b") from None
    # Every peak is unfolded at every multiple of the lower rate up to max_true: bound the
    # work (peaks × unfoldings) so a careless request cannot occupy a worker for minutes.
    folds = 2.0 * max_true / min(ra, rb) + 3.0
    if folds > MAX_UNFOLDINGS:
        raise InputError(
            f"max_true_hz={max_true:g} is {max_true / min(ra, rb):.0f} times the lower sample "
            f"rate; at most {MAX_UNFOLDINGS // 2} times is searched (lower max_true_hz)",
            field="max_true_hz",
            code="above_limit",
        )
    if folds * max(fa.size, fb.size) > MAX_CANDIDATE_CELLS:
        raise InputError(
            f"{max(fa.size, fb.size)} peaks × {folds:.0f} unfoldings is more than the "
            f"{MAX_CANDIDATE_CELLS:,} candidates searched; lower max_true_hz or raise the "
            "peak threshold",
            field=None,
            code="above_limit",
        )
    tol = MATCH_BINS * (ba + bb)
    sa = _Side(fa, 20 * np.log10(aa), ra, np.argsort(fa, kind="stable").astype(np.int64), "a")
    sb = _Side(fb, 20 * np.log10(ab), rb, np.argsort(fb, kind="stable").astype(np.int64), "b")
    stay_a, score_a = _stays(sa, sb, tol, lvl)
    stay_b, score_b = _stays(sb, sa, tol, lvl)
    # A peak that stays put with a good score is "claimed" by its partner.
    claimed_b = np.full(fb.size, -1, dtype=np.int64)
    good_a = np.flatnonzero(score_a >= MIN_SCORE)
    claimed_b[stay_a[good_a]] = good_a
    claimed_a = np.full(fa.size, -1, dtype=np.int64)
    good_b = np.flatnonzero(score_b >= MIN_SCORE)
    claimed_a[stay_b[good_b]] = good_b
    cand_a = _moves(sa, sb, tol, lvl, max_true, claimed_b)
    cand_b = _moves(sb, sa, tol, lvl, max_true, claimed_a)
    return RateComparison(
        a=_verdicts(sa, sb, aa, stay_a, score_a, cand_a, max_true),
        b=_verdicts(sb, sa, ab, stay_b, score_b, cand_b, max_true),
        rate_a_hz=ra,
        rate_b_hz=rb,
        tolerance_hz=tol,
        max_true_hz=max_true,
    )
