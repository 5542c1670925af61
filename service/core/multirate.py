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

Where it lives: :mod:`.multirate_model` (inputs, results, limits), :mod:`.multirate_crt`
(step 1 and the robust CRT), :mod:`.multirate_match` (steps 2-3),
:mod:`.multirate_evidence` (steps 4-7), :mod:`.multirate_settle` (the settle rate);
this module ties them together.

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

import math
from collections.abc import Sequence

import numpy as np

from .errors import InputError
from .multirate_crt import check_number, common_resolution
from .multirate_evidence import CompareOptions, judge_group, judge_real_line
from .multirate_match import alias_groups, real_groups
from .multirate_model import (
    MAX_FOLDS,
    MAX_MATCH_CELLS,
    Capture,
    MultiRateResult,
    check_captures,
)

__all__ = ["compare_captures"]


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
    caps = check_captures(captures)
    rates = [c.rate for c in caps]
    max_true = (
        10.0 * max(rates) if max_true_hz is None else check_number(max_true_hz, "max_true_hz")
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
    drift_ = check_number(drift, "drift", inclusive=True, high=0.2)
    band: tuple[float, float] | None = None
    if band_hz is not None:
        lo = check_number(band_hz[0], "band_hz[0]", inclusive=True)
        hi = check_number(band_hz[1], "band_hz[1]")
        if hi <= lo:
            raise InputError(
                f"band_hz=({lo:g}, {hi:g}) must have low < high", field="band_hz",
                value=[lo, hi], code="empty_band",
            )  # fmt: skip
        band = (lo, hi)
    opts = CompareOptions(
        lvl=check_number(level_tolerance_db, "level_tolerance_db"),
        drift=drift_,
        max_true=max_true,
        full_scale=None
        if full_scale_db is None
        else check_number(full_scale_db, "full_scale_db", low=-math.inf),
        headroom=check_number(headroom_db, "headroom_db", inclusive=True),
        prior=check_number(prior_weight, "prior_weight", inclusive=True),
        band=band,
        settle_rates=settle_rates_hz,
        lines=int(check_number(settle_lines, "settle_lines", low=1, inclusive=True)),
    )
    real, free = real_groups(caps, opts.lvl, drift_)
    aliases = alias_groups(caps, free, opts.lvl, drift_, max_true)
    out = [judge_real_line(caps, m, opts) for m in real]
    out.sort(key=lambda g: np.nanmin(g.freq_hz))
    rest = [judge_group(caps, g, opts, free) for g in aliases]
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
