"""Multi-rate test: settle aliases with two to six captures of the same signal.

A tone below every capture's Nyquist frequency reads the same frequency in every capture
("stays put": real); an alias reads ``fold(f, rate)``, which moves with the rate. The
true frequency of a moving peak satisfies, in each capture ``i``, ``f ≡ ±a_i (mod
fs_i)`` (``a_i`` its apparent frequency: a real signal folds from both signs), so it is
the solution of a Chinese-remainder problem with erroneous remainders (bin width,
interpolation error and machine-speed drift between the captures).

How it works
------------
1. Common resolution: the rates are written as ``fs_i = M·Γ_i`` with ``M`` the greatest
   common divisor of the rates (rational rates are brought to a common resolution
   first). The set of rates repeats itself every ``lcm = M·lcm(Γ_i)``, and for real
   signals ``fold(f) = fold(lcm − f)`` in every capture, so true frequencies are
   distinguishable only in ``[0, lcm/2]`` (the *unambiguous range*). The answer is also
   unique only while every remainder error is below ``M/4`` [1]_ [2]_; with drift the
   error grows as ``τ(f) = δ + drift·f/2``, which caps the range further. Inside the
   range there are blind spots: a frequency within about ``τ`` of a multiple of ``M/2``
   has a mixed-sign image (``f' ≡ f`` modulo some rates, ``f' ≡ −f`` modulo the others;
   e.g. 11.2 and 27.2 kHz both read 1.6 kHz at 12.8 kS/s and 4.8 kHz at 16 kS/s),
   found as a second sign combination and reported as a tie. They cover about ``4τ/M``
   of the range for two rates.
2. Lines that stay put first: peaks at the same frequency in every capture, below
   every Nyquist frequency and level-consistent through the chains, are matched
   capture by capture as an optimal assignment
   (:func:`scipy.optimize.linear_sum_assignment`); they are then out of the pool, so
   no such line is used again as an alias's partner. They are judged like any group
   below: the line itself is a candidate, but so are its images ``k·lcm ± f``, which
   fold alike; the verdict is ``"real"`` when the line alone stands (``max_true_hz``
   inside the range, the chains' levels or the prior rule the images out).
3. Aliases: the remaining peaks are matched capture by capture, again as assignments.
   Each group keeps the true frequencies (unfoldings of its first peak up to
   ``max_true_hz``) still consistent with all of its peaks; the cost of adding a peak is
   the best candidate's squared frequency and level errors in standard units.
4. Candidates of each group: the closed-form robust CRT [1]_ for every sign combination
   of the ± ambiguity (non-coprime ``Γ_i`` via the generalised CRT [2]_), repeated with
   period ``lcm`` up to ``max_true_hz``, plus the group's surviving unfoldings (so a tone
   whose errors exceed the bound is still among the candidates); each is verified by
   folding it through every capture.
5. Evidence (log10 units; 0 is perfect, ``-1`` means ten times less likely):

   * frequency: ``-½ Σ_i (e_i / σ_i)² / ln 10``, ``e_i`` = folded candidate minus
     peak, ``σ_i = (δ_i + drift·f) / 2`` (the tolerance is two σ);
   * level: each capture implies a level before its chain, ``L_i + A_i(f)``; the spread
     of these about their mean scores ``-½ Σ_i (d_i / level_tolerance_db)² / ln 10``
     (for two captures: the measured level difference must equal the difference of the
     two chains' attenuations at ``f``);
   * plausibility (only with ``full_scale_db``): a level before the chain above full
     scale + ``headroom_db`` scores ``-½ (excess / level_tolerance_db)² / ln 10``
     (80 dB of attenuation on a peak 20 dB below full scale is implausible);
   * prior (only with ``prior_weight > 0``): ``-prior_weight · f / U``, i.e.
     ``prior_weight`` log10 units per unambiguous range ``U``. Off by default: it is a
     belief about the machine, not evidence from the captures, and a verdict that
     only the prior decides says so (``decided_by_prior``).

   Candidates within :data:`TIE_LOG10` of the best are a tie, listed by ascending
   frequency; a tie is never broken by rounding.
6. Candidates closer than ``τ`` are one candidate (the better one is kept). Verdict
   per group: ``"real"`` or ``"alias"`` with ``top`` when one candidate stands alone,
   or the tied candidates span at most ``2τ`` (readings of one tone from both sides of
   0 Hz or of Nyquist; ``top`` is the best-scored one if it leads by more than
   :data:`CLUSTER_LEAD_LOG10`, else the one nearest the middle of the span), and it lies
   inside the unambiguous range; ``"ambiguous"`` otherwise, with the period with which
   candidates repeat and the converter rate that would best settle it; ``"unmatched"``
   for a peak seen in one capture only, or whose partners admit no common true
   frequency.

7. Could the pairing be chance? A group that would be a unique ``"alias"`` is tested
   against the null hypothesis that one of its peaks is unrelated to the others (noise
   or another tone), with the pairing's own cost ``z`` (step 3) as the statistic. For
   each member peak ``q`` of capture ``k``, the other members allow candidates ``c``
   (the unfoldings of one of them up to ``max_true_hz`` that fold onto the rest, minus
   those the plausibility term rules out), and ``q`` fits them with cost ``z_obs``. An
   unrelated peak ``i`` of capture ``k`` with level term ``ℓ_i(c)`` fits candidate
   ``c`` at least as well when its frequency error is within
   ``±(gate_c/2)·sqrt(z_obs − ℓ_i(c))``, ``gate_c = δ + δ_k + drift·c``; with peaks
   spread evenly over the Nyquist band that happens with probability
   ``width / (fs_k/2)``. Summed over the candidates and over the other still-unpaired
   peaks of capture ``k`` (their levels stand for the levels an unrelated peak has,
   leave-one-out) this is the expected number of chance fits ``λ_k``; the chance
   probability is ``1 − exp(−Σ_k λ_k)`` (Poisson; the sum over members is the union
   bound over which member is the odd one). It is a significance test of the observed
   fit [4]_: chance pairs of noise peaks fit loosely, at levels shared by many other
   noise peaks, so they score high; a tone whose level and frequency fit tightly,
   with no other peak of its level about, scores low. At or above
   :data:`MAX_CHANCE_PROBABILITY` (1 %), or with a peak less than
   :data:`MIN_ALIAS_SNR_DB` above its floor, the verdict is ``"ambiguous"`` with
   ``could_be_chance``, and the settle rate separates the top candidate from the other
   true frequencies of the first peak: a further capture confirms the pairing only if
   its peak lands where the top candidate says.

An alias verdict is a hypothesis about the measurement, not about the machine.

References
----------
.. [1] W. Wang and X.-G. Xia, "A closed-form robust Chinese remainder theorem and its
   performance analysis", *IEEE Trans. Signal Processing*, 58(11), 5655-5666, 2010.
.. [2] X. Li, H. Liang and X.-G. Xia, "A robust Chinese remainder theorem with its
   applications in frequency estimation from undersampled waveforms", *IEEE Trans.
   Signal Processing*, 57(11), 4314-4322, 2009.
.. [3] A. V. Oppenheim and R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
   2010, sec. 4.2 (``fold(f, fs)``).
.. [4] S. M. Kay, *Fundamentals of Statistical Signal Processing, Vol. II: Detection
   Theory*, 1998, ch. 3 (Neyman-Pearson tests at a stated false-alarm probability).
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from fractions import Fraction
from typing import Any, TypeAlias

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.optimize import linear_sum_assignment

from .errors import InputError
from .folding import fold

__all__ = [
    "CLUSTER_LEAD_LOG10",
    "DEFAULT_SETTLE_RATES_HZ",
    "MATCH_REJECT",
    "MAX_CHANCE_PROBABILITY",
    "MIN_ALIAS_SNR_DB",
    "TIE_LOG10",
    "Attenuation",
    "Candidate",
    "Capture",
    "MultiRateResult",
    "PeakGroup",
    "Resolution",
    "common_resolution",
    "compare_captures",
    "robust_crt",
    "settle_rate",
]

FloatArray = NDArray[np.float64]

#: An anti-alias chain's attenuation, dB, at true frequencies (Hz): a vectorised callable
#: (``lambda f: chain.evaluate(f).attenuation_db``), a table ``(freq_hz, atten_db)``
#: interpolated linearly (held flat beyond its ends), or None for no attenuation.
Attenuation: TypeAlias = Callable[[FloatArray], ArrayLike] | tuple[ArrayLike, ArrayLike] | None

#: Evidence gap, log10 units, below which two candidates are a tie (a likelihood ratio
#: under 10 does not decide between two true frequencies).
TIE_LOG10 = 1.0
#: Inside one answer's spread (readings within 2τ), the best-scored reading is the top
#: only when it leads by more than this, log10 units; otherwise the middle reading is.
CLUSTER_LEAD_LOG10 = 0.1
#: Cost of leaving a group or a peak without partner in an assignment step (squared
#: standard units): a pair is matched when its cost is below ``2·MATCH_REJECT``, e.g. a
#: frequency error at the tolerance (4) and a level error of 3.5 σ (12).
MATCH_REJECT = 8.0
#: A unique "alias" verdict needs the pairing's chance probability below this: the
#: probability that a peak unrelated to the others (noise or another tone) of the same
#: capture, at a comparable level, lands inside the tolerance window of one of the
#: candidates the other peaks allow (module notes, step 7). At 1 % about one
#: pairing in a hundred made only of unrelated peaks could still pass, and it must also
#: clear :data:`MIN_ALIAS_SNR_DB`.
MAX_CHANCE_PROBABILITY = 0.01
#: ... and every peak of the group at least this far above its noise floor, dB (when the
#: captures carry ``snr_db``). Noise amplitude in a bin is Rayleigh distributed, so it
#: exceeds k times its median with probability ``2**(-k²)``: 1e-3 per bin at 10 dB
#: (k = 3.16, a few noise peaks per 4,096 lines at the default threshold) but 3e-10 at
#: 15 dB (k = 5.62), so a 15 dB peak is a tone, not a noise bin.
MIN_ALIAS_SNR_DB = 15.0
#: Converter rates offered when the caller gives none, S/s (binary DAQ series and the
#: audio rates).
DEFAULT_SETTLE_RATES_HZ: tuple[float, ...] = (
    2048.0, 2560.0, 4096.0, 5120.0, 8000.0, 8192.0, 10240.0, 12800.0, 16000.0, 16384.0,
    20480.0, 25600.0, 32000.0, 32768.0, 40960.0, 44100.0, 48000.0, 51200.0, 65536.0,
    96000.0, 102400.0, 131072.0, 192000.0, 204800.0,
)  # fmt: skip
#: Limits that keep one request bounded.
MAX_CAPTURES = 6
MIN_CAPTURES = 2
MAX_PEAKS = 500
MAX_FOLDS = 1000
#: Bound on the matching work: (peaks per capture)² × unfoldings per peak.
MAX_MATCH_CELLS = 50_000_000
_BIG = 1e12
_LN10 = math.log(10.0)


# --------------------------------------------------------------------------- inputs


@dataclass(frozen=True, eq=False)
class Capture:
    """One capture of the signal: its final sample rate, peaks and chain.

    Attributes
    ----------
    rate_hz : float
        Final sample rate (after any decimation), Hz.
    freq_hz : array_like
        Peak frequencies, Hz, in ``[0, rate_hz/2]``.
    level_db : array_like
        Peak levels, dB (any reference common to all captures; dB re full scale when
        ``full_scale_db`` is used).
    uncertainty_hz : float or array_like
        Frequency uncertainty of each peak, Hz, > 0 (e.g. half a bin width for refined
        peaks, one bin for raw bins).
    attenuation : Attenuation
        This capture's chain attenuation, dB, at any true frequency.
    label : str
        A name for messages.
    snr_db : float or array_like, optional
        Each peak's height above its noise floor, dB (None: unknown). A group with a
        peak below :data:`MIN_ALIAS_SNR_DB` is never a unique alias.
    """

    rate_hz: float
    freq_hz: ArrayLike
    level_db: ArrayLike
    uncertainty_hz: float | ArrayLike
    attenuation: Attenuation = None
    label: str = ""
    snr_db: float | ArrayLike | None = None


@dataclass(frozen=True)
class Resolution:
    """Rates written on a common resolution: ``rate_i = resolution_hz · factors[i]``.

    Attributes
    ----------
    resolution_hz : float
        ``M``, the greatest common divisor of the rates, Hz.
    factors : tuple of int
        ``Γ_i``.
    lcm_hz : float
        Least common multiple of the rates, Hz: the period of the folding pattern.
    unambiguous_hz : float
        ``lcm_hz / 2``: real true frequencies are distinguishable only below it.
    error_bound_hz : float
        ``M / 4``: remainder errors below it give a unique answer [1]_.
    """

    resolution_hz: float
    factors: tuple[int, ...]
    lcm_hz: float
    unambiguous_hz: float
    error_bound_hz: float


@dataclass(frozen=True)
class Candidate:
    """A true frequency and its evidence (per-capture tuples in capture order).

    Attributes
    ----------
    true_hz : float
        Candidate true frequency, Hz.
    apparent_hz : tuple of float
        ``fold(true_hz, rate)`` in each capture, Hz.
    zone : tuple of int
        Nyquist zone of ``true_hz`` in each capture (1 = not aliased).
    freq_error_hz : tuple of float
        Folded candidate minus the group's peak, Hz; NaN where the group has no peak.
    level_error_db : tuple of float
        Level before the chain implied by this capture minus the mean over the group's
        captures, dB; NaN where the group has no peak.
    attenuation_db : tuple of float
        Each chain's attenuation at ``true_hz``, dB.
    in_range : bool
        Inside the group's unambiguous range (and error bound).
    from_crt : bool
        Produced by the closed-form robust CRT (else by the unfolding scan).
    score : float
        Evidence, log10 units (0 best); see the module notes.
    """

    true_hz: float
    apparent_hz: tuple[float, ...]
    zone: tuple[int, ...]
    freq_error_hz: tuple[float, ...]
    level_error_db: tuple[float, ...]
    attenuation_db: tuple[float, ...]
    in_range: bool
    from_crt: bool
    score: float


@dataclass(frozen=True)
class PeakGroup:
    """Peaks matched across the captures as one tone, and the verdict.

    Attributes
    ----------
    peak : tuple of int
        Index of the group's peak in each capture, -1 where none.
    freq_hz, level_db : tuple of float
        Those peaks' frequency (Hz) and level (dB), NaN where none.
    verdict : str
        ``"real"``, ``"alias"``, ``"ambiguous"`` or ``"unmatched"``.
    candidates : tuple of Candidate
        Best first: the tied set by ascending frequency, then the rest by evidence.
    top : Candidate or None
        The answer, only when it is unique (``"real"`` or ``"alias"``).
    tied : int
        Number of candidates tied for best.
    decided_by_prior : bool
        The lower-frequency prior, not the captures, separated the top candidate.
    unambiguous_hz : float
        Upper end of the range in which the group's rates give a unique answer, Hz (the
        smaller of ``lcm/2`` and the frequency where drift reaches the error bound).
    period_hz : float
        Period with which candidates repeat (the group's ``lcm``), Hz; NaN if < 2 peaks.
    error_bound_hz : float
        Remainder-error bound ``M/4`` of the group's rates, Hz.
    in_band : bool
        One of the group's peaks lies in the band of interest.
    settle_rate_hz : float
        For ``"ambiguous"``: the additional sample rate that best separates the tied
        candidates, S/s; NaN otherwise.
    settle_separation_bins : float
        Smallest distance between those candidates' apparent frequencies at that rate,
        in its bins; NaN otherwise.
    chance_probability : float
        For a group that moves: the probability that its pairing is chance (module
        notes, step 7); NaN when not weighed.
    could_be_chance : bool
        The evidence pointed to one true frequency, but the pairing could be chance
        (``chance_probability`` >= :data:`MAX_CHANCE_PROBABILITY`) or a peak is within
        :data:`MIN_ALIAS_SNR_DB` of its floor: the verdict is ``"ambiguous"``, and
        ``settle_rate_hz`` proposes the capture that would confirm or refute the pairing.
    """

    peak: tuple[int, ...]
    freq_hz: tuple[float, ...]
    level_db: tuple[float, ...]
    verdict: str
    candidates: tuple[Candidate, ...]
    top: Candidate | None
    tied: int
    decided_by_prior: bool
    unambiguous_hz: float
    period_hz: float
    error_bound_hz: float
    in_band: bool
    settle_rate_hz: float
    settle_separation_bins: float
    chance_probability: float = math.nan
    could_be_chance: bool = False


@dataclass(frozen=True)
class MultiRateResult:
    """Result of :func:`compare_captures`.

    Attributes
    ----------
    groups : tuple of PeakGroup
        Real lines first, then the others by their first peak's frequency.
    rates_hz : tuple of float
        The captures' rates, S/s.
    resolution : Resolution
        Common resolution, unambiguous range and error bound of all the rates.
    unambiguous_hz : float
        Unique-answer range of all captures together, Hz (``lcm/2``, capped where
        the drift reaches the error bound).
    max_true_hz : float
        Highest true frequency considered, Hz.
    drift : float
        Relative speed drift allowed between captures.
    """

    groups: tuple[PeakGroup, ...]
    rates_hz: tuple[float, ...]
    resolution: Resolution
    unambiguous_hz: float
    max_true_hz: float
    drift: float


# --------------------------------------------------------------------------- checks


def _check_number(
    value: Any, name: str, *, low: float = 0.0, inclusive: bool = False, high: float = math.inf
) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name}={value!r} must be a number", field=name, value=value) from None
    if not math.isfinite(v):
        raise InputError(f"{name}={value!r} must be finite", field=name, value=value)
    if v < low or (v == low and not inclusive):
        op = ">=" if inclusive else ">"
        raise InputError(
            f"{name}={v:g} must be {op} {low:g}",
            field=name,
            value=v,
            limit=low,
            code="below_limit" if inclusive or low != 0 else "not_positive",
        )
    if v > high:
        raise InputError(
            f"{name}={v:g} must be <= {high:g}", field=name, value=v, limit=high, code="above_limit"
        )
    return v


def _check_array(value: Any, name: str, n: int | None = None) -> FloatArray:
    try:
        a = np.atleast_1d(np.asarray(value, dtype=np.float64))
    except (TypeError, ValueError):
        raise InputError(f"{name} must be a list of numbers", field=name) from None
    if a.ndim != 1:
        raise InputError(f"{name} must be 1-D, got shape {a.shape}", field=name)
    if n is not None and a.size != n:
        raise InputError(
            f"{name} has {a.size} values for {n} peaks", field=name, value=a.size, limit=n,
            code="length_mismatch",
        )  # fmt: skip
    bad = ~np.isfinite(a)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise InputError(
            f"{name}[{i}]={a[i]!r} must be finite", field=f"{name}[{i}]", value=float(a[i])
        )
    return a


def _attenuation_fn(att: Attenuation, name: str) -> Callable[[FloatArray], FloatArray]:
    if att is None:
        return lambda f: np.zeros_like(f)
    if isinstance(att, tuple):
        if len(att) != 2:
            raise InputError(f"{name} table must be (freq_hz, atten_db)", field=name)
        fx = _check_array(att[0], f"{name}.freq_hz")
        ay = _check_array(att[1], f"{name}.atten_db", fx.size)
        if fx.size < 1 or np.any(np.diff(fx) <= 0):
            raise InputError(f"{name}.freq_hz must be strictly increasing", field=name)
        return lambda f: np.interp(f, fx, ay)
    if not callable(att):
        raise InputError(
            f"{name} must be a callable, a (freq_hz, atten_db) table or None", field=name
        )

    def call(f: FloatArray) -> FloatArray:
        out = np.asarray(att(f), dtype=np.float64)
        out = np.broadcast_to(out, f.shape).astype(np.float64)
        if not np.all(np.isfinite(out)):
            raise InputError(f"{name} returned a non-finite attenuation", field=name)
        return out

    return call


@dataclass(frozen=True)
class _Cap:
    rate: float
    freq: FloatArray
    level: FloatArray
    unc: FloatArray
    att: Callable[[FloatArray], FloatArray]
    snr: FloatArray  # NaN where unknown


def _check_captures(captures: Sequence[Capture]) -> list[_Cap]:
    if not isinstance(captures, Sequence) or not (MIN_CAPTURES <= len(captures) <= MAX_CAPTURES):
        n = len(captures) if isinstance(captures, Sequence) else captures
        raise InputError(
            f"captures: give {MIN_CAPTURES} to {MAX_CAPTURES} captures, got {n}",
            field="captures", value=n, limit=MAX_CAPTURES, code="count",
        )  # fmt: skip
    out: list[_Cap] = []
    for k, cap in enumerate(captures):
        try:
            rate = _check_number(cap.rate_hz, "rate_hz")
            f = _check_array(cap.freq_hz, "freq_hz")
            if f.size > MAX_PEAKS:
                raise InputError(
                    f"freq_hz has {f.size} peaks; at most {MAX_PEAKS} per capture",
                    field="freq_hz", value=f.size, limit=MAX_PEAKS, code="above_limit",
                )  # fmt: skip
            lo = np.flatnonzero((f < 0) | (f > rate / 2 * (1 + 1e-9)))
            if lo.size:
                i = int(lo[0])
                raise InputError(
                    f"freq_hz[{i}]={f[i]:g} Hz lies outside 0 to the Nyquist frequency "
                    f"{rate / 2:g} Hz of rate_hz={rate:g}",
                    field=f"freq_hz[{i}]", value=float(f[i]), limit=rate / 2,
                    code="above_limit",
                )  # fmt: skip
            lev = _check_array(cap.level_db, "level_db", f.size)
            try:
                unc_in = np.broadcast_to(np.asarray(cap.uncertainty_hz, dtype=float), f.shape)
            except ValueError:
                raise InputError(
                    f"uncertainty_hz must be one number or one per peak ({f.size})",
                    field="uncertainty_hz", code="length_mismatch",
                ) from None  # fmt: skip
            unc = _check_array(unc_in, "uncertainty_hz")
            if np.any(unc <= 0):
                i = int(np.flatnonzero(unc <= 0)[0])
                raise InputError(
                    f"uncertainty_hz[{i}]={unc[i]:g} must be > 0",
                    field=f"uncertainty_hz[{i}]", value=float(unc[i]), limit=0,
                    code="not_positive",
                )  # fmt: skip
            att = _attenuation_fn(cap.attenuation, "attenuation")
            snr = np.full(f.shape, np.nan)
            if cap.snr_db is not None:
                try:
                    snr_in = np.broadcast_to(np.asarray(cap.snr_db, dtype=float), f.shape)
                except ValueError:
                    raise InputError(
                        f"snr_db must be one number or one per peak ({f.size})",
                        field="snr_db", code="length_mismatch",
                    ) from None  # fmt: skip
                snr = _check_array(snr_in, "snr_db")
        except InputError as exc:
            raise exc.under(f"captures[{k}]") from None
        out.append(_Cap(rate, f, lev, unc, att, snr))
    rates = [c.rate for c in out]
    for i, j in itertools.combinations(range(len(rates)), 2):
        if math.isclose(rates[i], rates[j], rel_tol=1e-9):
            raise InputError(
                f"captures[{j}].rate_hz={rates[j]:g} equals captures[{i}].rate_hz; each "
                "capture needs its own sample rate",
                field=f"captures[{j}].rate_hz", value=rates[j], code="duplicate",
            )  # fmt: skip
    return out


# --------------------------------------------------------------------------- CRT


def common_resolution(rates_hz: Sequence[float], max_denominator: int = 1000) -> Resolution:
    """Write sample rates on a common resolution ``M``: ``rate_i = M · Γ_i``.

    Parameters
    ----------
    rates_hz : sequence of float
        Sample rates, Hz, > 0; non-integer rates are read as fractions with a
        denominator up to ``max_denominator`` (1 mHz for the default).
    max_denominator : int
        Finest fraction of a hertz considered.

    Returns
    -------
    Resolution

    Notes
    -----
    Rates that share no useful common divisor (e.g. 12,800 and 12,345.6 S/s) give a
    tiny ``M``: a huge unambiguous range but an error bound ``M/4`` so small that no
    measured remainder meets it, so every alias is reported ambiguous [1]_.
    """
    fr = []
    for i, r in enumerate(rates_hz):
        v = _check_number(r, f"rates_hz[{i}]")
        fr.append(Fraction(v).limit_denominator(max_denominator))
    den = math.lcm(*(f.denominator for f in fr))
    ints = [int(f * den) for f in fr]
    g = math.gcd(*ints)
    factors = tuple(n // g for n in ints)
    m = g / den
    lcm = m * math.lcm(*factors)
    return Resolution(
        resolution_hz=m,
        factors=factors,
        lcm_hz=lcm,
        unambiguous_hz=lcm / 2.0,
        error_bound_hz=m / 4.0,
    )


def _merge(a: int, m: int, b: int, n: int) -> tuple[int, int] | None:
    """Solve x ≡ a (mod m), x ≡ b (mod n); None when the two disagree."""
    g = math.gcd(m, n)
    if (b - a) % g:
        return None
    mg, ng = m // g, n // g
    k = ((b - a) // g * pow(mg, -1, ng)) % ng if ng > 1 else 0
    lcm = mg * n
    return (a + m * k) % lcm, lcm


def _crt(r: Sequence[float], m: float, gam: Sequence[int]) -> float | None:
    """Closed-form robust CRT [1]_ (generalised to non-coprime Γ_i [2]_)."""
    moduli = [m * g for g in gam]
    rr = [x % mod for x, mod in zip(r, moduli, strict=True)]
    g1 = gam[0]
    x, mod = 0, 1
    q: list[int] = [0]
    for ri, gi in zip(rr[1:], gam[1:], strict=True):
        qi = round((ri - rr[0]) / m)
        q.append(qi)
        d = math.gcd(g1, gi)
        if qi % d:
            return None  # remainders inconsistent beyond the error bound
        mi = gi // d
        xi = (qi // d) * pow(g1 // d, -1, mi) % mi if mi > 1 else 0
        merged = _merge(x, mod, xi, mi)
        if merged is None:
            return None
        x, mod = merged
    n1_est = x * moduli[0] + rr[0]
    # Every capture's own reconstruction n_i·M_i + r_i, written relative to the first.
    est = [n1_est + (ri - rr[0] - qi * m) for ri, qi in zip(rr, q, strict=True)]
    lcm = m * math.lcm(*gam)
    return float(np.mean(est)) % lcm


def robust_crt(remainders: Sequence[float], moduli: Sequence[float]) -> float:
    """Closed-form robust Chinese remainder theorem.

    Parameters
    ----------
    remainders : sequence of float
        Erroneous remainders ``r_i ≈ N mod moduli[i]`` (Hz or integers).
    moduli : sequence of float
        Moduli (sample rates, Hz), at least 2, > 0.

    Returns
    -------
    float
        ``N̂`` in ``[0, lcm)``; NaN when the remainders admit no common solution (their
        errors exceed the bound).

    Notes
    -----
    With ``moduli_i = M·Γ_i``: ``q̂_i = round((r_i − r_1)/M)``, ``n_1`` from
    ``n_1·Γ_1 ≡ q̂_i (mod Γ_i)`` for all ``i`` (the generalised CRT when the ``Γ_i``
    share factors [2]_), ``n_i = (n_1·Γ_1 − q̂_i)/Γ_i`` and
    ``N̂ = mean_i(n_i·moduli_i + r_i)``. If every remainder error is at most
    ``τ < M/4`` then ``|N̂ − N| ≤ τ`` (modulo ``lcm``) [1]_.

    References
    ----------
    .. [1] Wang and Xia, IEEE Trans. Signal Processing 58(11), 2010.
    .. [2] Li, Liang and Xia, IEEE Trans. Signal Processing 57(11), 2009.
    """
    if len(remainders) != len(moduli) or len(moduli) < 2:
        raise InputError(
            "robust_crt needs at least 2 moduli and one remainder per modulus",
            field="moduli", value=len(moduli),
        )  # fmt: skip
    res = common_resolution(moduli)
    r = [float(x) for x in remainders]
    out = _crt(r, res.resolution_hz, res.factors)
    return math.nan if out is None else out


# --------------------------------------------------------------------------- settle


def settle_rate(
    candidates_hz: ArrayLike,
    rates_hz: Sequence[float] | None = None,
    exclude_hz: Sequence[float] = (),
    lines: int = 3200,
) -> tuple[float, float]:
    """The additional sample rate that best tells candidate true frequencies apart.

    Parameters
    ----------
    candidates_hz : array_like
        Candidate true frequencies, Hz (at least 2).
    rates_hz : sequence of float, optional
        The converter's available rates, S/s; default :data:`DEFAULT_SETTLE_RATES_HZ`.
    exclude_hz : sequence of float
        Rates already used, S/s.
    lines : int
        Analysis lines of the new capture: bin width = ``rate / 2.56 / lines``.

    Returns
    -------
    (rate_hz, separation_bins)
        The rate whose folded apparent frequencies of the candidates lie farthest apart
        (the largest smallest pairwise distance, in that capture's bins; lower rate on a
        tie); ``(nan, nan)`` when fewer than two candidates or no rate is left.
    """
    c = np.unique(_check_array(candidates_hz, "candidates_hz"))
    lines_ = int(_check_number(lines, "lines"))
    pool = DEFAULT_SETTLE_RATES_HZ if rates_hz is None else tuple(rates_hz)
    pool = tuple(
        r
        for r in (_check_number(x, "rates_hz") for x in pool)
        if not any(math.isclose(r, e, rel_tol=1e-9) for e in exclude_hz)
    )
    if c.size < 2 or not pool:
        return math.nan, math.nan
    best_rate, best_sep = math.nan, -1.0
    iu = np.triu_indices(c.size, 1)
    for r in sorted(pool):  # a few dozen rates
        a = fold(c, r)
        sep = float(np.min(np.abs(a[iu[0]] - a[iu[1]]))) / (r / 2.56 / lines_)
        if sep > best_sep * (1 + 1e-9) + 1e-12:
            best_rate, best_sep = r, sep
    return best_rate, best_sep


# --------------------------------------------------------------------------- matching


def _assign(cost: FloatArray) -> list[tuple[int, int]]:
    """Optimal one-to-one pairs of rows and columns, each side free to stay unpaired."""
    g, q = cost.shape
    if g == 0 or q == 0:
        return []
    full = np.full((g + q, q + g), _BIG)
    full[:g, :q] = cost
    full[:g, q:][np.diag_indices(g)] = MATCH_REJECT
    full[g:, :q][np.diag_indices(q)] = MATCH_REJECT
    full[g:, q:] = 0.0
    rows, cols = linear_sum_assignment(full)
    return [
        (int(i), int(j))
        for i, j in zip(rows, cols, strict=True)
        if i < g and j < q and cost[i, j] < 2 * MATCH_REJECT
    ]


def _unfoldings(a: float, rate: float, max_true: float) -> FloatArray:
    m = np.arange(0, int(max_true // rate) + 2, dtype=np.float64)
    c = np.concatenate([m * rate + a, m[1:] * rate - a])
    c = c[(c >= 0) & (c <= max_true)]
    return np.unique(c)


@dataclass
class _Group:
    members: dict[int, int]  # capture -> peak
    cand: FloatArray  # true frequencies still consistent with every member


def _pair_cost(
    caps: list[_Cap], g: _Group, j: int, lvl: float, drift: float
) -> tuple[FloatArray, NDArray[np.bool_]]:
    """Cost of adding each peak of capture j to group g, and the candidates' gate."""
    r, p = next(iter(g.members.items()))
    cap_r, cap_j = caps[r], caps[j]
    c = g.cand
    e = fold(c, cap_j.rate)[:, None] - cap_j.freq[None, :]
    gate = cap_r.unc[p] + cap_j.unc[None, :] + drift * c[:, None]
    ok = np.abs(e) <= gate
    s_r = cap_r.level[p] + cap_r.att(c)
    s_j = cap_j.level[None, :] + cap_j.att(c)[:, None]
    z = (2 * e / gate) ** 2 + ((s_j - s_r[:, None]) / (lvl * math.sqrt(2))) ** 2
    z = np.where(ok, z, _BIG)
    cost = z.min(axis=0) if c.size else np.full(cap_j.freq.size, _BIG)
    return cost, ok


def _real_groups(
    caps: list[_Cap], lvl: float, drift: float
) -> tuple[list[dict[int, int]], list[NDArray[np.bool_]]]:
    """Lines that stay put in every capture (below every Nyquist frequency)."""
    nyq = min(c.rate for c in caps) / 2.0
    free = [np.ones(c.freq.size, dtype=bool) for c in caps]
    c0 = caps[0]
    groups = [{0: int(p)} for p in np.flatnonzero(c0.freq <= nyq)]
    for j in range(1, len(caps)):
        cj = caps[j]
        cost = np.full((len(groups), cj.freq.size), _BIG)
        for gi, g in enumerate(groups):
            p = g[0]
            f = np.array([c0.freq[p]])
            e = cj.freq - f[0]
            gate = c0.unc[p] + cj.unc + drift * f[0]
            z = (2 * e / gate) ** 2 + (
                ((cj.level + cj.att(f)[0]) - (c0.level[p] + c0.att(f)[0])) / (lvl * math.sqrt(2))
            ) ** 2
            cost[gi] = np.where(np.abs(e) <= gate, z, _BIG)
        pairs = _assign(cost)
        kept = []
        for gi, q in pairs:
            groups[gi][j] = q
            kept.append(groups[gi])
        groups = kept
    for g in groups:
        for k, p in g.items():
            free[k][p] = False
    return groups, free


def _alias_groups(
    caps: list[_Cap], free: list[NDArray[np.bool_]], lvl: float, drift: float, max_true: float
) -> list[_Group]:
    groups: list[_Group] = []
    for j, cj in enumerate(caps):
        peaks = np.flatnonzero(free[j])
        active = [g for g in groups if g.cand.size]
        if active and peaks.size:
            cost = np.empty((len(active), peaks.size))
            gates = []
            for gi, g in enumerate(active):
                cst, ok = _pair_cost(caps, g, j, lvl, drift)
                cost[gi] = cst[peaks]
                gates.append(ok)
            taken = set()
            for gi, qi in _assign(cost):
                g, q = active[gi], int(peaks[qi])
                g.members[j] = q
                g.cand = g.cand[gates[gi][:, q]]
                taken.add(q)
            peaks = np.array([p for p in peaks if int(p) not in taken], dtype=np.int64)
        for p in peaks:  # peaks without partner start groups of their own
            groups.append(_Group({j: int(p)}, _unfoldings(float(cj.freq[p]), cj.rate, max_true)))
    return groups


# --------------------------------------------------------------------------- evidence


@dataclass(frozen=True)
class _Opts:
    lvl: float
    drift: float
    max_true: float
    full_scale: float | None
    headroom: float
    prior: float
    band: tuple[float, float] | None
    settle_rates: Sequence[float] | None
    lines: int


def _group_range(
    caps: list[_Cap], members: dict[int, int], drift: float
) -> tuple[Resolution, float]:
    res = common_resolution([caps[k].rate for k in members])
    worst = max(float(caps[k].unc[p]) for k, p in members.items())
    room = res.error_bound_hz - worst
    if room <= 0:
        cap_err = 0.0
    elif drift > 0:
        cap_err = room / (drift / 2.0)
    else:
        cap_err = math.inf
    return res, min(res.unambiguous_hz, cap_err)


def _candidates(
    caps: list[_Cap], g: _Group, res: Resolution, opts: _Opts
) -> tuple[FloatArray, NDArray[np.bool_]]:
    """CRT candidates for every sign combination, repeated, plus refined unfoldings."""
    ks = sorted(g.members)
    a = [float(caps[k].freq[g.members[k]]) for k in ks]
    found: list[float] = []
    for signs in itertools.product((1.0, -1.0), repeat=len(ks) - 1):
        r = [a[0]] + [s * x for s, x in zip(signs, a[1:], strict=True)]
        n = _crt(r, res.resolution_hz, res.factors)
        if n is None:
            continue
        reps = np.arange(0, int(opts.max_true // res.lcm_hz) + 2)
        for base in (n, res.lcm_hz - n):
            found.extend((base + reps * res.lcm_hz).tolist())
    crt = np.array([x for x in found if 0 <= x <= opts.max_true * (1 + 1e-12)])
    # The scan's survivors, refined to the mean of the members' unfoldings near them:
    # every branch (k·rate ± a for the multiples on either side) inside the tolerance
    # counts, so a peak near 0 Hz or near Nyquist yields both readings, not the nearest.
    scan = g.cand
    if scan.size:
        row = np.arange(scan.size)
        acc = np.zeros(scan.size)
        for k, x in zip(ks, a, strict=True):
            rate = caps[k].rate
            lo = rate * np.floor(scan[row] / rate)
            opts_k = np.stack([lo + x, lo - x, lo + rate + x, lo + rate - x], axis=1)
            gate = caps[k].unc[g.members[k]] + caps[ks[0]].unc[g.members[ks[0]]]
            ok = np.abs(opts_k - scan[row][:, None]) <= gate + opts.drift * scan[row][:, None]
            r_i, o_i = np.nonzero(ok)
            row, acc = row[r_i], acc[r_i] + opts_k[r_i, o_i]
        scan = np.maximum(acc / len(ks), 0.0)
    allc = np.concatenate([crt, scan])
    from_crt = np.concatenate([np.ones(crt.size, bool), np.zeros(scan.size, bool)])
    return allc, from_crt


def _evaluate(caps: list[_Cap], g: _Group, c: FloatArray, opts: _Opts) -> dict[str, Any]:
    ks = sorted(g.members)
    app = np.stack([fold(c, cap.rate) for cap in caps], axis=1)  # K × n_cap
    att = np.stack([cap.att(c) for cap in caps], axis=1)
    ferr = np.full(app.shape, np.nan)
    lerr = np.full(app.shape, np.nan)
    tol = np.full(app.shape, np.nan)
    for k in ks:
        p = g.members[k]
        ferr[:, k] = app[:, k] - caps[k].freq[p]
        tol[:, k] = caps[k].unc[p] + opts.drift * c
    src = np.full(app.shape, np.nan)
    for k in ks:
        src[:, k] = caps[k].level[g.members[k]] + att[:, k]
    mean_src = np.nanmean(src[:, ks], axis=1)
    lerr[:, ks] = src[:, ks] - mean_src[:, None]
    ok = np.all(np.abs(ferr[:, ks]) <= tol[:, ks], axis=1)
    nat = -0.5 * np.sum((2 * ferr[:, ks] / tol[:, ks]) ** 2, axis=1)
    nat -= 0.5 * np.sum((lerr[:, ks] / opts.lvl) ** 2, axis=1)
    if opts.full_scale is not None:
        excess = np.maximum(np.max(src[:, ks], axis=1) - (opts.full_scale + opts.headroom), 0)
        nat -= 0.5 * (excess / opts.lvl) ** 2
    zone = np.stack(
        [np.maximum(np.ceil(c / (cap.rate / 2) - 1e-12), 1) for cap in caps], axis=1
    ).astype(np.int64)
    return {"app": app, "att": att, "ferr": ferr, "lerr": lerr, "ok": ok,
            "evidence": nat / _LN10, "zone": zone}  # fmt: skip


def _dedupe(c: FloatArray, score: FloatArray, width: FloatArray) -> NDArray[np.intp]:
    """Indices of candidates to keep: the best of each cluster closer than ``width``."""
    order = np.lexsort((c, -score))
    kept: list[int] = []
    for i in order.tolist():  # a few dozen candidates per group
        if all(abs(c[i] - c[j]) > max(width[i], width[j]) for j in kept):
            kept.append(i)
    return np.array(kept, dtype=np.intp)


def _finish(
    caps: list[_Cap], members: dict[int, int], verdict: str, cands: list[Candidate],
    top: Candidate | None, tied: int, by_prior: bool, res: Resolution | None, unamb: float,
    opts: _Opts, chance: float = math.nan, settle_pool: list[float] | None = None,
) -> PeakGroup:  # fmt: skip
    n = len(caps)
    peak = tuple(members.get(k, -1) for k in range(n))
    fr = tuple(float(caps[k].freq[p]) if p >= 0 else math.nan for k, p in enumerate(peak))
    lv = tuple(float(caps[k].level[p]) if p >= 0 else math.nan for k, p in enumerate(peak))
    in_band = False
    if opts.band is not None:
        lo, hi = opts.band
        in_band = any(lo <= f <= hi for f in fr if not math.isnan(f))
    s_rate, s_sep = math.nan, math.nan
    if verdict == "ambiguous":
        pool = settle_pool or [x.true_hz for x in cands[: max(tied, 2)]]
        s_rate, s_sep = settle_rate(
            pool, opts.settle_rates, [c.rate for c in caps], lines=opts.lines
        )
    return PeakGroup(
        peak=peak, freq_hz=fr, level_db=lv, verdict=verdict, candidates=tuple(cands),
        top=top, tied=tied, decided_by_prior=by_prior, unambiguous_hz=unamb,
        period_hz=res.lcm_hz if res is not None else math.nan,
        error_bound_hz=res.error_bound_hz if res is not None else math.nan,
        in_band=in_band, settle_rate_hz=s_rate, settle_separation_bins=s_sep,
        chance_probability=chance, could_be_chance=settle_pool is not None,
    )  # fmt: skip


def _to_candidates(
    ev: dict[str, Any], c: FloatArray, idx: Sequence[int], in_range: NDArray[np.bool_],
    from_crt: NDArray[np.bool_], score: FloatArray,
) -> list[Candidate]:  # fmt: skip
    return [
        Candidate(
            true_hz=float(c[i]),
            apparent_hz=tuple(float(x) for x in ev["app"][i]),
            zone=tuple(int(x) for x in ev["zone"][i]),
            freq_error_hz=tuple(float(x) for x in ev["ferr"][i]),
            level_error_db=tuple(float(x) for x in ev["lerr"][i]),
            attenuation_db=tuple(float(x) for x in ev["att"][i]),
            in_range=bool(in_range[i]),
            from_crt=bool(from_crt[i]),
            score=float(score[i]),
        )
        for i in idx
    ]


def _chance_probability(
    caps: list[_Cap], members: dict[int, int], pool: list[NDArray[np.bool_]], opts: _Opts
) -> float:
    """Probability that the group's pairing is chance (module notes, step 7)."""
    lam = 0.0
    for k, q in members.items():
        ck = caps[k]
        others = pool[k].copy()
        others[q] = False
        idx = np.flatnonzero(others)
        if idx.size == 0:
            continue
        # Candidates allowed by the other members alone.
        rest = [(j, p) for j, p in members.items() if j != k]
        j0, p0 = rest[0]
        c = _unfoldings(float(caps[j0].freq[p0]), caps[j0].rate, opts.max_true)
        for j, p in rest[1:]:
            gate = caps[j0].unc[p0] + caps[j].unc[p] + opts.drift * c
            c = c[np.abs(fold(c, caps[j].rate) - caps[j].freq[p]) <= gate]
        if c.size == 0:
            continue
        gate = caps[j0].unc[p0] + ck.unc[q] + opts.drift * c
        src = np.mean([caps[j].level[p] + caps[j].att(c) for j, p in rest], axis=0)
        if opts.full_scale is not None:  # implausible candidates invite no chance fit
            keep = src <= opts.full_scale + opts.headroom
            c, gate, src = c[keep], gate[keep], src[keep]
        # The observed fit (the pairing's cost, as in the matching) ...
        e = fold(c, ck.rate) - ck.freq[q]
        d = ck.level[q] + ck.att(c) - src
        z = (2 * e / gate) ** 2 + (d / (opts.lvl * math.sqrt(2))) ** 2
        z_obs = float(np.min(np.where(np.abs(e) <= gate, z, np.inf)))
        if not math.isfinite(z_obs):
            continue
        # ... and how much of the band an unrelated peak of each other level may fall
        # in to fit at least as well: |2e/gate|² <= z_obs − (its level term), |e| <= gate.
        d_i = ck.level[idx][None, :] + ck.att(c)[:, None] - src[:, None]
        room = z_obs - (d_i / (opts.lvl * math.sqrt(2))) ** 2
        half = gate[:, None] / 2 * np.sqrt(np.clip(room, 0.0, 4.0))
        lam += float(np.sum(np.minimum(2 * half / (ck.rate / 2.0), 1.0)))
    return -math.expm1(-lam)


def _judge(
    caps: list[_Cap], g: _Group, opts: _Opts, pool: list[NDArray[np.bool_]] | None = None
) -> PeakGroup:
    if len(g.members) < 2:
        return _finish(caps, g.members, "unmatched", [], None, 0, False, None, math.nan, opts)
    res, unamb = _group_range(caps, g.members, opts.drift)
    c, from_crt = _candidates(caps, g, res, opts)
    ev = _evaluate(caps, g, c, opts)
    keep = np.flatnonzero(ev["ok"])
    if keep.size == 0:
        return _finish(caps, g.members, "unmatched", [], None, 0, False, res, unamb, opts)
    c, from_crt = c[keep], from_crt[keep]
    ev = {k: (v[keep] if isinstance(v, np.ndarray) else v) for k, v in ev.items()}
    evidence = ev["evidence"]
    # The prior's unit length: the group's unambiguous range (lcm/2 of its rates).
    score = evidence - opts.prior * c / res.unambiguous_hz
    # Two candidates closer than the remainder-error bound τ = δ + drift·f/2 are one
    # answer (the CRT's estimate is within τ of the truth [1]_): keep the better.
    tau = np.max([caps[k].unc[p] for k, p in g.members.items()]) + opts.drift * c / 2
    width = tau
    idx = _dedupe(c, score, width)
    c, from_crt, score, evidence = c[idx], from_crt[idx], score[idx], evidence[idx]
    ev = {k: (v[idx] if isinstance(v, np.ndarray) else v) for k, v in ev.items()}
    best = float(score.max())
    tied_mask = score >= best - TIE_LOG10
    tied_ev = evidence >= float(evidence.max()) - TIE_LOG10
    order = np.concatenate([
        np.flatnonzero(tied_mask)[np.argsort(c[tied_mask], kind="stable")],
        np.flatnonzero(~tied_mask)[np.lexsort((c[~tied_mask], -score[~tied_mask]))],
    ])  # fmt: skip
    in_range = c <= unamb * (1 + 1e-12)
    cands = _to_candidates(ev, c, order.tolist(), in_range, from_crt, score)
    tied = int(tied_mask.sum())
    top: Candidate | None = cands[0]
    if tied > 1:
        # Readings of one tone from different branches (a peak near 0 Hz or near
        # Nyquist reads both ways) spread over at most 2τ: one answer within the error
        # bound, given as the reading nearest the middle of their span (lower first).
        ct = np.array([x.true_hz for x in cands[:tied]])
        t_max = float(np.max([caps[k].unc[p] for k, p in g.members.items()]))
        t_max += opts.drift * float(ct.max()) / 2
        if ct.max() - ct.min() <= 2 * t_max:
            st = np.array([x.score for x in cands[:tied]])
            lead = np.sort(st)[-1] - np.sort(st)[-2]
            if lead > CLUSTER_LEAD_LOG10:
                top = cands[int(np.argmax(st))]
            else:
                mid = 0.5 * (ct.max() + ct.min())
                top = cands[int(np.argmin(np.abs(ct - mid)))]
        else:
            top = None
    if top is not None and top.in_range:
        # Without the prior, would a reading outside the top's 2τ cluster have tied?
        t_top = opts.drift * top.true_hz / 2 + float(
            np.max([caps[k].unc[p] for k, p in g.members.items()])
        )
        by_prior = opts.prior > 0 and bool(np.any(tied_ev & (np.abs(c - top.true_hz) > 2 * t_top)))
        zone1 = all(top.zone[k] == 1 for k in g.members)
        verdict = "real" if zone1 else "alias"
        if verdict == "alias" and pool is not None:
            p_chance = _chance_probability(caps, g.members, pool, opts)
            snr = np.array([caps[k].snr[p] for k, p in g.members.items()])
            weak = bool(np.any(snr < MIN_ALIAS_SNR_DB))  # NaN (unknown) is not weak
            if p_chance >= MAX_CHANCE_PROBABILITY or weak:
                # The pairing itself may be chance: the top candidate and the other true
                # frequencies of its first peak are what a further capture must separate.
                k0, p0 = min(g.members.items())
                alt = _unfoldings(float(caps[k0].freq[p0]), caps[k0].rate, opts.max_true)
                alt = alt[np.argsort(np.abs(alt - top.true_hz), kind="stable")][:6]
                return _finish(
                    caps, g.members, "ambiguous", cands, None, tied, False, res, unamb, opts,
                    chance=p_chance, settle_pool=[top.true_hz, *alt[1:].tolist()],
                )  # fmt: skip
            return _finish(
                caps, g.members, verdict, cands, top, tied, by_prior, res, unamb, opts,
                chance=p_chance,
            )  # fmt: skip
        return _finish(caps, g.members, verdict, cands, top, tied, by_prior, res, unamb, opts)
    return _finish(caps, g.members, "ambiguous", cands, None, tied, False, res, unamb, opts)


def _judge_real(caps: list[_Cap], members: dict[int, int], opts: _Opts) -> PeakGroup:
    # The line itself is the first candidate; the CRT adds its images k·lcm ± f, which
    # fold alike, so a line is "real" only when the evidence (or the prior) rules them out.
    f = np.array([float(np.mean([caps[k].freq[p] for k, p in members.items()]))])
    return _judge(caps, _Group(dict(members), f), opts)


# --------------------------------------------------------------------------- entry


def compare_captures(
    captures: Sequence[Capture],
    *,
    max_true_hz: float | None = None,
    drift: float = 0.005,
    band_hz: tuple[float, float] | None = None,
    level_tolerance_db: float = 3.0,
    full_scale_db: float | None = None,
    headroom_db: float = 20.0,
    prior_weight: float = 0.0,
    settle_rates_hz: Sequence[float] | None = None,
    settle_lines: int = 3200,
) -> MultiRateResult:
    """Tell real peaks from aliases, and name true frequencies, from 2-6 captures.

    Parameters
    ----------
    captures : sequence of Capture
        Two to six captures of the same signal at different final sample rates.
    max_true_hz : float, optional
        Highest true frequency considered, Hz; default 10 × the highest rate.
    drift : float
        Relative machine-speed drift allowed between captures (0.005 = 0.5 %), >= 0.
    band_hz : (low, high), optional
        Band of interest in the captured spectra, Hz; groups with a peak in it are
        flagged ``in_band``.
    level_tolerance_db : float
        Standard deviation of a measured peak level, dB, > 0.
    full_scale_db : float, optional
        Converter full scale on the levels' scale, dB; enables the plausibility term.
    headroom_db : float
        How far above full scale a level before the chain may plausibly be, dB.
    prior_weight : float
        Lower-frequency prior, log10 units per unambiguous range, >= 0 (0: off).
    settle_rates_hz : sequence of float, optional
        The converter's available rates for the "which rate would settle it" proposal,
        S/s; default :data:`DEFAULT_SETTLE_RATES_HZ`.
    settle_lines : int
        Analysis lines of that proposed capture (its bin width is
        ``rate / 2.56 / lines``).

    Returns
    -------
    MultiRateResult

    Notes
    -----
    The method and the evidence weights are in the module notes. Beyond the unambiguous
    range (``max_true_hz`` above it) a tone's true frequency and its images
    ``k·lcm ± f`` fold alike in every capture: unless the chains' attenuation or the
    plausibility term tells them apart, the verdict is ``"ambiguous"`` with
    ``period_hz = lcm``, never one confident number. A machine whose speed changed by
    more than ``drift`` between captures moves its real lines too.

    References
    ----------
    .. [1] Wang and Xia, IEEE Trans. Signal Processing 58(11), 2010.
    .. [2] Li, Liang and Xia, IEEE Trans. Signal Processing 57(11), 2009.
    """
    caps = _check_captures(captures)
    rates = [c.rate for c in caps]
    max_true = (
        10.0 * max(rates) if max_true_hz is None else _check_number(max_true_hz, "max_true_hz")
    )
    if max_true / min(rates) > MAX_FOLDS:
        raise InputError(
            f"max_true_hz={max_true:g} is {max_true / min(rates):.0f} times the lowest rate; "
            f"at most {MAX_FOLDS} times is searched",
            field="max_true_hz", value=max_true, limit=MAX_FOLDS * min(rates),
            code="above_limit",
        )  # fmt: skip
    n_peaks = max(c.freq.size for c in caps)
    cells = n_peaks**2 * (2 * max_true / min(rates) + 2)
    if cells > MAX_MATCH_CELLS:
        raise InputError(
            f"{n_peaks} peaks per capture with max_true_hz={max_true:g} means "
            f"{cells:.3g} pairings to weigh, more than {MAX_MATCH_CELLS:.3g}; lower "
            "max_true_hz or raise the peak threshold",
            field="max_true_hz", value=max_true, code="too_much_work",
        )  # fmt: skip
    drift_ = _check_number(drift, "drift", inclusive=True, high=0.2)
    band: tuple[float, float] | None = None
    if band_hz is not None:
        lo = _check_number(band_hz[0], "band_hz[0]", inclusive=True)
        hi = _check_number(band_hz[1], "band_hz[1]")
        if hi <= lo:
            raise InputError(
                f"band_hz=({lo:g}, {hi:g}) must have low < high", field="band_hz",
                value=[lo, hi], code="empty_band",
            )  # fmt: skip
        band = (lo, hi)
    opts = _Opts(
        lvl=_check_number(level_tolerance_db, "level_tolerance_db"),
        drift=drift_,
        max_true=max_true,
        full_scale=None
        if full_scale_db is None
        else _check_number(full_scale_db, "full_scale_db", low=-math.inf),
        headroom=_check_number(headroom_db, "headroom_db", inclusive=True),
        prior=_check_number(prior_weight, "prior_weight", inclusive=True),
        band=band,
        settle_rates=settle_rates_hz,
        lines=int(_check_number(settle_lines, "settle_lines", low=1, inclusive=True)),
    )
    real, free = _real_groups(caps, opts.lvl, drift_)
    aliases = _alias_groups(caps, free, opts.lvl, drift_, max_true)
    out = [_judge_real(caps, m, opts) for m in real]
    out.sort(key=lambda g: np.nanmin(g.freq_hz))
    rest = [_judge(caps, g, opts, free) for g in aliases]
    rest.sort(key=lambda g: float(np.nanmin(g.freq_hz)))
    all_res = common_resolution(rates)
    worst = max(float(c.unc.max()) if c.unc.size else 0.0 for c in caps)
    room = all_res.error_bound_hz - worst
    cap_err = math.inf if drift_ == 0 and room > 0 else max(room, 0) / max(drift_ / 2, 1e-300)
    return MultiRateResult(
        groups=tuple(out + rest),
        rates_hz=tuple(rates),
        resolution=all_res,
        unambiguous_hz=min(all_res.unambiguous_hz, cap_err),
        max_true_hz=max_true,
        drift=drift_,
    )
