"""Blind search for harmonic families whose folded members explain several peaks at once.

Without a list of sources, a row of peaks that are the folded images of ``k·f0`` for
one fundamental ``f0`` is strong evidence of a periodic source, and its members above
the Nyquist frequency are aliases. The search tries, as the fundamental, every true
frequency a peak could come from (``m·fs ± p``), folds its harmonics at the sample rate,
and keeps families that match more peaks than chance predicts.

References
----------
.. [1] A. V. Oppenheim and R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
   Pearson, 2010, sec. 4.2 (sampling, aliasing of a sinusoid).
.. [2] S. M. Kay, *Fundamentals of Statistical Signal Processing: Estimation Theory*,
   Prentice Hall, 1993, ch. 8 (least squares; variance of a fitted slope).
.. [3] W. Feller, *An Introduction to Probability Theory and Its Applications*, vol. 1,
   3rd ed., Wiley, 1968, ch. VI.5 (Poisson approximation to rare coincidences);
   the Poisson tail ``P(X >= x) = P(x, λ)`` is the regularised lower incomplete gamma
   function (Abramowitz and Stegun, *Handbook of Mathematical Functions*, 1964, 6.5.13
   and 26.4.21).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import scipy.special
from numpy.typing import ArrayLike, NDArray

from .checks import check_int, check_positive
from .errors import InputError
from .folding import fold_offset, fold_unchecked

__all__ = [
    "BLIND_MAX_P_VALUE",
    "Family",
    "FamilyMember",
    "check_peaks",
    "find_families",
    "format_db",
    "format_hz",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]

#: Largest chance probability (Poisson tail) for a family to be reported.
BLIND_MAX_P_VALUE = 1e-4
#: Assumed bound of a refined peak's frequency error, bins (covers noise and neighbours;
#: the refinement itself is far better for an isolated tone).
PEAK_ERROR_BINS = 0.1
#: A fundamental below this many bins explains almost anything: rejected.
MIN_FUNDAMENTAL_BINS = 3.0
#: First pass matches harmonics up to this number only, before the fundamental is refined.
FIRST_PASS_HARMONICS = 8
#: After refinement a harmonic k matches within ``peak error + k·this·σ(f0)``.
SIGMA_MULTIPLE = 3.0
#: A family whose members (beyond the fundamental) are at least this fraction multiples
#: of 2 (or 3) is a sub-multiple of a better family: rejected.
SUBMULTIPLE_FRACTION = 0.8
#: A member that would need a source this many dB above the strongest peak (seen level +
#: chain attenuation) is not accepted. Harmonics of a machine family fall with order, so
#: an aliased member far stronger at the sensor than every line in band is implausible
#: (a judgement of this project, not a published figure).
MAX_SOURCE_EXCESS_DB = 20.0
#: A candidate must cover this fraction of the best family's peaks to replace it.
SUPERSET_FRACTION = 0.9


# --------------------------------------------------------------------------- formatting


def format_hz(freq_hz: float, digits: int = 3, unit: str = "Hz") -> str:
    """A frequency for a sentence: ``'2.80 kHz'``, ``'914 Hz'``, ``'13.2 kHz'``.

    Parameters
    ----------
    freq_hz : float
        Frequency, Hz (or a rate in S/s with ``unit="S/s"``).
    digits : int
        Significant digits (trailing zeros kept).
    unit : str
        Unit after the prefix.
    """
    x = float(freq_hz)
    if not math.isfinite(x):
        return f"? {unit}"
    prefix = ""
    ax = abs(x)
    near = 1 - 0.5 * 10.0 ** (1 - digits)
    if ax >= 1e3 * near:
        for scale, p in ((1e9, "G"), (1e6, "M"), (1e3, "k")):
            if ax >= scale * near:
                x, prefix = x / scale, p
                break
    text = f"{x:#.{digits}g}"
    if "e" in text:  # very large values: plain notation
        text = f"{x:.0f}"
    return f"{text.rstrip('.')} {prefix}{unit}"


def format_db(value_db: float) -> str:
    """A level or attenuation in dB with one decimal and a true minus sign."""
    v = float(value_db)
    if not math.isfinite(v):
        return "? dB"
    text = f"{v:.1f}"
    if text in ("-0.0", "0.0"):
        text = "0.0"
    return text.replace("-", "\u2212") + " dB"


# --------------------------------------------------------------------------- results


@dataclass(frozen=True)
class FamilyMember:
    """One peak explained as harmonic ``harmonic`` of a blind family.

    Attributes
    ----------
    peak : int
        Index of the peak in the arrays given to :func:`find_families`.
    harmonic : int
        Harmonic number k (1 = the fundamental).
    apparent_hz : float
        The peak's frequency, Hz.
    true_hz : float
        True frequency consistent with the peak (the unfolding of the peak nearest
        ``k·fundamental``), Hz.
    zone : int
        Nyquist zone of ``true_hz`` at the sample rate (1 = not aliased).
    aliased : bool
        ``zone > 1``: the peak is an alias of this member.
    inverted : bool
        Even zone: the member lands mirrored.
    error_hz : float
        Folded ``k·fundamental`` minus the peak frequency, Hz.
    """

    peak: int
    harmonic: int
    apparent_hz: float
    true_hz: float
    zone: int
    aliased: bool
    inverted: bool
    error_hz: float


@dataclass(frozen=True)
class Family:
    """A harmonic family found without a list of sources.

    Attributes
    ----------
    fundamental_hz : float
        Least-squares estimate of the fundamental, Hz.
    uncertainty_hz : float
        Standard uncertainty of ``fundamental_hz``, Hz.
    members : tuple of FamilyMember
        Matched peaks, sorted by harmonic number.
    aliased_count : int
        Members above the Nyquist frequency (aliases).
    p_value : float
        Probability of matching at least as many peaks by chance (Poisson tail).
    expected_matches : float
        Number of peaks random harmonics would match by chance.
    harmonics_tried : int
        Harmonics ``k·f0 <= max_true_hz`` that were folded and matched.
    tolerance_hz : float
        Matching tolerance of the fundamental's peak, Hz (harmonic k gets
        ``tolerance_hz + k·3·uncertainty_hz``).
    """

    fundamental_hz: float
    uncertainty_hz: float
    members: tuple[FamilyMember, ...]
    aliased_count: int
    p_value: float
    expected_matches: float
    harmonics_tried: int
    tolerance_hz: float

    @property
    def label(self) -> str:
        """Source name for sentences, e.g. ``"harmonic family of 1.100 kHz (blind)"``."""
        return f"harmonic family of {format_hz(self.fundamental_hz, 4)} (blind)"

    @property
    def peaks(self) -> IntArray:
        """Indices of the member peaks."""
        return np.array([m.peak for m in self.members], dtype=np.int64)


# --------------------------------------------------------------------------- checks


def check_peaks(
    freq: ArrayLike, amp: ArrayLike, floor: ArrayLike, nyquist: float
) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Peak frequencies (Hz, 0 to Nyquist), amplitudes and floor as checked equal-length arrays."""
    f = np.atleast_1d(np.asarray(freq, dtype=np.float64))
    a = np.atleast_1d(np.asarray(amp, dtype=np.float64))
    if f.ndim != 1:
        raise InputError(
            f"peaks_freq_hz must be 1-D; got shape {f.shape}",
            field="peaks_freq_hz",
            code="bad_type",
        )
    if a.shape != f.shape:
        raise InputError(
            f"peaks_amplitude has {a.size} values but peaks_freq_hz has {f.size}",
            field="peaks_amplitude",
            code="mismatched_lengths",
        )
    fl = np.broadcast_to(np.asarray(floor, dtype=np.float64), f.shape).astype(np.float64)
    for name, arr in (("peaks_freq_hz", f), ("peaks_amplitude", a), ("floor", fl)):
        bad = ~np.isfinite(arr)
        if np.any(bad):
            i = int(np.argmax(bad))
            raise InputError(
                f"{name}[{i}]={float(arr[i])!r}; every value must be finite",
                field=f"{name}[{i}]",
                code="not_finite",
                value=float(arr[i]),
            )
    bad = (f < 0) | (f > nyquist * (1 + 1e-9))
    if np.any(bad):
        i = int(np.argmax(bad))
        raise InputError(
            f"peaks_freq_hz[{i}]={float(f[i])!r} must be between 0 and the Nyquist frequency "
            f"{nyquist:g} Hz",
            field=f"peaks_freq_hz[{i}]",
            code="out_of_range",
            value=float(f[i]),
        )
    if np.any(a <= 0):
        i = int(np.argmax(a <= 0))
        raise InputError(
            f"peaks_amplitude[{i}]={float(a[i])!r}; amplitudes must be > 0",
            field=f"peaks_amplitude[{i}]",
            code="not_positive",
            value=float(a[i]),
        )
    if np.any(fl <= 0):
        i = int(np.argmax(fl <= 0))
        raise InputError(
            f"floor[{i}]={float(fl[i])!r}; the floor must be > 0",
            field=f"floor[{i}]",
            code="not_positive",
            value=float(fl[i]),
        )
    return f, a, fl


# --------------------------------------------------------------------------- search


@dataclass
class _Match:
    """Harmonics of C candidate fundamentals matched to peaks (all arrays C × K)."""

    peak: IntArray  # index into the sorted available peaks
    hit: BoolArray  # matched, first occurrence of that peak in the row
    true: FloatArray  # unfolded true frequency of the matched peak
    err: FloatArray  # folded harmonic minus peak, Hz
    tried: BoolArray  # harmonic within max_true_hz and the pass's harmonic limit
    tol: FloatArray  # tolerance used, Hz


def _match(
    f0: FloatArray,
    tol_base: float,
    k_err: FloatArray,
    kmax: int,
    ctx: _Context,
) -> _Match:
    """Fold ``k·f0`` and match each to the nearest available peak within tolerance.

    ``tol = tol_base + k·k_err`` (``k_err`` per candidate: the uncertainty of f0).
    """
    k = np.arange(1, kmax + 1, dtype=np.float64)
    x = f0[:, None] * k[None, :]
    tried = (x <= ctx.max_true) & (x > 0)
    tol = tol_base + k[None, :] * k_err[:, None]
    a = fold_unchecked(x, ctx.fs)
    p = ctx.freq
    n = p.size
    j = np.searchsorted(p, a)
    lo = np.clip(j - 1, 0, n - 1)
    hi = np.clip(j, 0, n - 1)
    pick = np.where(np.abs(p[lo] - a) <= np.abs(p[hi] - a), lo, hi)
    err = a - p[pick]
    hit = tried & (np.abs(err) <= tol)
    # Unfold the matched peak next to k·f0: move x by the apparent error, in the
    # direction the fold runs there (rising in odd zones, falling in even zones).
    r = fold_offset(x, ctx.fs)
    direction = np.where(r >= 0, 1.0, -1.0)
    true = x - direction * err
    if ctx.attenuation is not None and np.any(hit):
        rows, cols = np.nonzero(hit)
        att = np.asarray(ctx.attenuation(true[rows, cols]), dtype=np.float64)
        need = ctx.amp_db[pick[rows, cols]] + att - ctx.top_db
        hit[rows[need > MAX_SOURCE_EXCESS_DB], cols[need > MAX_SOURCE_EXCESS_DB]] = False
    hit = _first_occurrence(pick, hit, n)
    return _Match(peak=pick, hit=hit, true=true, err=err, tried=tried, tol=tol)


def _first_occurrence(pick: IntArray, hit: BoolArray, n: int) -> BoolArray:
    """Keep, per row, only the lowest harmonic that matched each peak."""
    c, kk = pick.shape
    if c == 0:
        return hit
    key = np.where(hit, pick, n + np.arange(kk)[None, :])  # misses never collide
    order = np.argsort(key * (kk + 1) + np.arange(kk)[None, :], axis=1, kind="stable")
    skey = np.take_along_axis(key, order, axis=1)
    first = np.ones_like(hit)
    first[:, 1:] = skey[:, 1:] != skey[:, :-1]
    out = np.zeros_like(hit)
    np.put_along_axis(out, order, first, axis=1)
    result: BoolArray = out & hit
    return result


def _refine(f0: FloatArray, m: _Match, ctx: _Context) -> tuple[FloatArray, FloatArray]:
    """Least-squares fundamental through the origin and its standard uncertainty.

    Model ``true_k = k·f0 + e``: ``f0 = Σ k·t_k / Σ k²``, ``σ(f0) = σ / sqrt(Σ k²)`` with
    σ the residual spread, floored at the assumed peak error [2]_.
    """
    k = np.arange(1, m.hit.shape[1] + 1, dtype=np.float64)[None, :]
    w = m.hit.astype(np.float64)
    skk = np.sum(w * k * k, axis=1)
    safe = np.where(skk > 0, skk, 1.0)
    est = np.where(skk > 0, np.sum(w * k * m.true, axis=1) / safe, f0)
    res = (m.true - k * est[:, None]) * w
    count = np.sum(w, axis=1)
    dof = np.maximum(count - 1, 1)
    sigma = np.sqrt(np.sum(res * res, axis=1) / dof)
    sigma = np.maximum(sigma, ctx.peak_err / np.sqrt(3.0))
    return est, sigma / np.sqrt(safe)


def _log_tail(x: FloatArray, lam: FloatArray) -> FloatArray:
    """log P(Poisson(λ) >= x), accurate deep in the tail [3]_."""
    x = np.asarray(x, dtype=np.float64)
    lam = np.maximum(np.asarray(lam, dtype=np.float64), 1e-300)
    with np.errstate(divide="ignore"):
        direct = np.log(scipy.special.gammainc(np.maximum(x, 1.0), lam))
    # Leading term of the tail when the incomplete gamma underflows.
    approx = x * np.log(lam) - lam - scipy.special.gammaln(x + 1.0)
    out: FloatArray = np.where(x <= 0, 0.0, np.where(np.isfinite(direct), direct, approx))
    return out


@dataclass(frozen=True)
class _Context:
    freq: FloatArray  # available peaks, sorted
    amp_db: FloatArray
    fs: float
    max_true: float
    peak_err: float
    top_db: float
    attenuation: Callable[[FloatArray], ArrayLike] | None


#: Share of the harmonics up to a blind family's highest member that must be present.
MIN_LADDER_FILL = 0.4


def _prefixes(kmax: int) -> IntArray:
    """Harmonic counts at which the chance probability is evaluated: 4, 8, 16, ... kmax."""
    out = [k for k in (4, 8, 16, 32, 64, 128) if k < kmax] + [kmax]
    return np.asarray(out, dtype=np.int64)


def _score(
    m: _Match, ctx: _Context, n_tests: int
) -> tuple[IntArray, FloatArray, FloatArray, BoolArray]:
    """Distinct matches, chance expectation, log chance probability, sub-multiple flag.

    The chance probability is the smallest Poisson tail over the harmonic prefixes of
    :func:`_prefixes` (a short family is not diluted by the empty harmonics above it),
    multiplied by the number of prefixes and by ``n_tests`` (Bonferroni: every
    candidate fundamental is a test).
    """
    n = ctx.freq.size
    nyq = ctx.fs / 2.0
    kk = m.hit.shape[1]
    k = np.arange(1, kk + 1)[None, :]
    beyond = m.hit & (k >= 2)
    extra = np.sum(beyond, axis=1)
    # Chance of at least one of the other n-1 peaks within ± tol of a random point.
    q = -np.expm1(-2.0 * np.minimum(m.tol, nyq) * max(n - 1, 0) / nyq)
    q = np.where(m.tried & (k >= 2), q, 0.0)
    cols = _prefixes(kk) - 1
    x_cum = np.cumsum(beyond, axis=1)[:, cols].astype(np.float64)
    lam_cum = np.cumsum(q, axis=1)[:, cols]
    log_tails = _log_tail(x_cum, lam_cum)
    at = np.argmin(log_tails, axis=1)
    rows = np.arange(at.size)
    log_p = log_tails[rows, at] + np.log(float(cols.size) * max(n_tests, 1))
    lam = lam_cum[:, -1]
    count = np.maximum(extra, 1)
    sub = np.zeros(extra.shape, dtype=bool)
    for d in (2, 3):
        frac = np.sum(beyond & (k % d == 0), axis=1) / count
        sub |= (extra >= 2) & (frac >= SUBMULTIPLE_FRACTION)
    total = extra + m.hit[:, 0]
    return total.astype(np.int64), lam, np.minimum(log_p, 0.0), sub


def _candidates(ctx: _Context, min_f0: float) -> tuple[FloatArray, IntArray]:
    """Every true frequency each peak could come from: ``m·fs ± p`` up to max_true."""
    p = ctx.freq
    m_max = int(np.floor(ctx.max_true / ctx.fs)) + 1
    m = np.arange(0, m_max + 1, dtype=np.float64)
    up = m[None, :] * ctx.fs + p[:, None]
    down = m[None, 1:] * ctx.fs - p[:, None]
    f0 = np.concatenate([up, down], axis=1)
    seed = np.broadcast_to(np.arange(p.size)[:, None], f0.shape)
    ok = (f0 >= min_f0) & (f0 <= ctx.max_true)
    return f0[ok], seed[ok].astype(np.int64)


def _search_one(
    ctx: _Context, max_harmonic: int, min_members: int, max_log_p: float, min_f0: float
) -> tuple[float, float, _Match, int, float, float] | None:
    """The best family among the available peaks, or None."""
    f0, _seed = _candidates(ctx, min_f0)
    n_tests = int(f0.size)
    if n_tests == 0:
        return None
    e = ctx.peak_err
    # Pass 1: low harmonics only, tolerance growing with k from the seed's own error.
    k1 = min(FIRST_PASS_HARMONICS, max_harmonic)
    m1 = _match(f0, e, np.full(f0.size, e), k1, ctx)
    keep = np.sum(m1.hit, axis=1) >= 2
    if not np.any(keep):
        return None
    f0 = f0[keep]
    m1 = _sub(m1, keep)
    est, sig = _refine(f0, m1, ctx)
    # Pass 2 and 3: every harmonic, tolerance from the refined fundamental's uncertainty.
    for _ in range(2):
        m2 = _match(est, e, SIGMA_MULTIPLE * sig, max_harmonic, ctx)
        est, sig = _refine(est, m2, ctx)
    m2 = _match(est, e, SIGMA_MULTIPLE * sig, max_harmonic, ctx)
    total, lam, log_p, sub = _score(m2, ctx, n_tests)
    # A family claimed without sources must fill most of its harmonic ladder up to its
    # highest member: sparse members (say 1×, 10×, 25×, 35×) are far likelier to be a
    # near-commensurate fundamental and rate than a real family.
    k = np.arange(1, m2.hit.shape[1] + 1)[None, :]
    top = np.max(np.where(m2.hit, k, 0), axis=1)
    ladder = np.sum(m2.tried & (k <= top[:, None]), axis=1)
    dense = total >= MIN_LADDER_FILL * np.maximum(ladder, 1)
    good = (total >= min_members) & (log_p <= max_log_p) & ~sub & (est >= min_f0) & dense
    if not np.any(good):
        return None
    idx = np.flatnonzero(good)
    best = idx[np.argmin(log_p[idx])]
    # Prefer a family that explains the same peaks and more; among equals, the lowest
    # fundamental (fs ± f0 and its relatives fold their harmonics to the same places).
    in_best = np.zeros(ctx.freq.size, dtype=bool)
    in_best[m2.peak[best][m2.hit[best]]] = True
    overlap = np.sum(m2.hit[idx] & in_best[m2.peak[idx]], axis=1)
    cover = (overlap >= SUPERSET_FRACTION * total[best]) & (total[idx] >= total[best])
    pool = idx[cover]
    order = np.lexsort((est[pool], -total[pool]))
    choice = int(pool[order[0]])
    return (
        float(est[choice]),
        float(sig[choice]),
        _sub(m2, np.array([choice])),
        int(np.sum(m2.tried[choice])),
        float(lam[choice]),
        float(np.exp(log_p[choice])),
    )


def _sub(m: _Match, rows: NDArray[np.bool_] | IntArray) -> _Match:
    return _Match(
        peak=m.peak[rows],
        hit=m.hit[rows],
        true=m.true[rows],
        err=m.err[rows],
        tried=m.tried[rows],
        tol=m.tol[rows],
    )


def find_families(
    peaks_freq_hz: ArrayLike,
    peaks_amplitude: ArrayLike,
    floor: ArrayLike,
    sample_rate_hz: float,
    bin_width_hz: float,
    max_harmonic: int = 40,
    max_true_hz: float | None = None,
    min_members: int = 3,
    max_families: int = 5,
    attenuation: Callable[[FloatArray], ArrayLike] | None = None,
    max_p_value: float = BLIND_MAX_P_VALUE,
) -> list[Family]:
    """Harmonic families whose folded members explain several peaks (no sources needed).

    Parameters
    ----------
    peaks_freq_hz : array_like
        Peak frequencies, Hz, in ``[0, sample_rate_hz/2]``.
    peaks_amplitude : array_like
        Peak amplitudes, linear, > 0 (any unit).
    floor : array_like or float
        Noise floor at each peak, linear amplitude in the unit of the peaks, > 0.
    sample_rate_hz : float
        Sample rate of the record (after any decimation), Hz.
    bin_width_hz : float
        Bin width of the spectrum, Hz; sets the matching tolerance
        (:data:`PEAK_ERROR_BINS`) and the lowest fundamental tried
        (:data:`MIN_FUNDAMENTAL_BINS`).
    max_harmonic : int
        Harmonics k = 1..max_harmonic are folded and matched (2 to 200).
    max_true_hz : float, optional
        Highest true frequency considered, Hz; default 10 × sample_rate_hz.
    min_members : int
        Fewest matched peaks (fundamental included) for a family (2 to 100).
    max_families : int
        At most this many families are returned (1 to 50).
    attenuation : callable, optional
        ``attenuation(true_hz) -> dB`` of the acquisition chain; a member that would
        need a source more than :data:`MAX_SOURCE_EXCESS_DB` above the strongest peak
        is not accepted.
    max_p_value : float
        Largest chance probability for a family to be reported (0 < p < 1).

    Returns
    -------
    list of Family
        Most significant first; each peak belongs to at most one family.

    Notes
    -----
    Candidates for the fundamental are every unfolding ``m·fs ± p`` of every peak
    (``m·fs + p`` and ``m·fs − p`` both fold to ``p`` [1]_) between
    :data:`MIN_FUNDAMENTAL_BINS` bins and ``max_true_hz``. Each candidate's harmonics
    ``k·f0`` are folded at fs and matched to the nearest peak within
    ``e·(1 + k)`` (first pass, k <= 8; ``e`` = :data:`PEAK_ERROR_BINS` bins), then the
    fundamental is refined by least squares through the origin over the matched
    members' unfolded true frequencies [2]_ and all harmonics are matched again within
    ``e + 3·k·σ(f0)``.

    Significance: a random point has a peak within ``± tol`` with probability
    ``q = 1 − exp(−2·tol·(n−1)/(fs/2))``; the expected number of chance matches is
    ``λ = Σ_k q_k`` over the harmonics tried (k >= 2), and the family's matches beyond
    its fundamental, ``x``, must have ``P(Poisson(λ) >= x) <= max_p_value`` [3]_.

    Trivial answers are avoided: a fundamental of ``f0/2`` (or ``f0/3``) explains every
    peak ``f0`` does, so a candidate whose members are mostly (>= 80 %) multiples of 2
    or 3 is rejected; and because ``fs ± f0`` folds every harmonic to the same place as
    ``f0``, among candidates covering the best one's peaks the one explaining the most
    peaks, then the lowest fundamental, is kept. The search is greedy: the best family's
    peaks are removed and the search repeats.
    """
    fs = check_positive(sample_rate_hz, "sample_rate_hz")
    bw = check_positive(bin_width_hz, "bin_width_hz")
    f, a, _fl = check_peaks(peaks_freq_hz, peaks_amplitude, floor, fs / 2.0)
    kmax = check_int(
        max_harmonic,
        "max_harmonic",
        2,
        200,
        word="a whole number",
        integral_floats=True,
        one_message=True,
    )
    min_members = check_int(
        min_members,
        "min_members",
        2,
        100,
        word="a whole number",
        integral_floats=True,
        one_message=True,
    )
    max_families = check_int(
        max_families,
        "max_families",
        1,
        50,
        word="a whole number",
        integral_floats=True,
        one_message=True,
    )
    max_true = 10.0 * fs if max_true_hz is None else check_positive(max_true_hz, "max_true_hz")
    pv = float(max_p_value)
    if not np.isfinite(pv) or not 0 < pv < 1:
        raise InputError(
            f"max_p_value={max_p_value!r} must be between 0 and 1 (exclusive)",
            field="max_p_value",
            code="out_of_range",
            value=max_p_value,
        )
    if attenuation is not None and not callable(attenuation):
        raise InputError(
            f"attenuation={attenuation!r} must be a callable or None",
            field="attenuation",
            code="bad_type",
            value=attenuation,
        )

    order = np.argsort(f, kind="stable")
    amp_db = 20.0 * np.log10(a)
    top_db = float(np.max(amp_db)) if a.size else 0.0
    available = np.ones(f.size, dtype=bool)
    families: list[Family] = []
    min_f0 = MIN_FUNDAMENTAL_BINS * bw
    while len(families) < max_families:
        idx = order[available[order]]
        if idx.size < min_members:
            break
        ctx = _Context(
            freq=f[idx],
            amp_db=amp_db[idx],
            fs=fs,
            max_true=max_true,
            peak_err=PEAK_ERROR_BINS * bw,
            top_db=top_db,
            attenuation=attenuation,
        )
        found = _search_one(ctx, kmax, min_members, float(np.log(pv)), min_f0)
        if found is None:
            break
        f0, sig, m, tried, lam, p_value = found
        ks = np.flatnonzero(m.hit[0])
        members = []
        for c in ks.tolist():
            peak = int(idx[m.peak[0, c]])
            true = float(m.true[0, c])
            zone = max(int(np.ceil(true / (fs / 2.0) - 1e-12)), 1)
            members.append(
                FamilyMember(
                    peak=peak,
                    harmonic=c + 1,
                    apparent_hz=float(f[peak]),
                    true_hz=true,
                    zone=zone,
                    aliased=zone > 1,
                    inverted=zone % 2 == 0,
                    error_hz=float(m.err[0, c]),
                )
            )
        available[[mb.peak for mb in members]] = False
        families.append(
            Family(
                fundamental_hz=f0,
                uncertainty_hz=sig,
                members=tuple(members),
                aliased_count=sum(mb.aliased for mb in members),
                p_value=p_value,
                expected_matches=lam,
                harmonics_tried=tried,
                tolerance_hz=PEAK_ERROR_BINS * bw,
            )
        )
    return families
