"""Candidates, evidence, the chance test and the verdict of one matched group
(:mod:`.multirate`, steps 4-7).

References
----------
.. [1] Wang and Xia, IEEE Trans. Signal Processing 58(11), 2010 (full entry in
   :mod:`.multirate`).
.. [2] Li, Liang and Xia, IEEE Trans. Signal Processing 57(11), 2009.
.. [4] S. M. Kay, *Fundamentals of Statistical Signal Processing, Vol. II*, 1998, ch. 3.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .folding import fold
from .multirate_crt import Resolution, _crt, common_resolution
from .multirate_match import MatchGroup, unfoldings
from .multirate_model import Candidate, CheckedCapture, PeakGroup
from .multirate_settle import settle_rate

__all__ = [
    "CLUSTER_LEAD_LOG10",
    "MAX_CHANCE_PROBABILITY",
    "MIN_ALIAS_SNR_DB",
    "TIE_LOG10",
    "CompareOptions",
    "judge_group",
    "judge_real_line",
]

FloatArray = NDArray[np.float64]

#: Evidence gap, log10 units, below which two candidates are a tie (a likelihood ratio
#: under 10 does not decide between two true frequencies).
TIE_LOG10 = 1.0
#: Inside one answer's spread (readings within 2τ), the best-scored reading is the top
#: only when it leads by more than this, log10 units; otherwise the middle reading is.
CLUSTER_LEAD_LOG10 = 0.1
#: A unique "alias" verdict needs the pairing's chance probability below this: the
#: probability that a peak of the same capture unrelated to the others (noise or another
#: tone) would fit one of the candidates the other peaks allow at least as well (step 7
#: of the notes in :mod:`.multirate`). It is the false-alarm probability of that test:
#: about one pairing of unrelated peaks in a hundred may still pass it, and must then
#: also clear :data:`MIN_ALIAS_SNR_DB`.
MAX_CHANCE_PROBABILITY = 0.01
#: ... and every peak of the group at least this far above its noise floor, dB (when the
#: captures carry ``snr_db``). Noise amplitude in a bin is Rayleigh distributed, so it
#: exceeds k times its median with probability ``2**(-k²)``: 1e-3 per bin at 10 dB
#: (k = 3.16, a few noise peaks per 4,096 lines at the default threshold) but 3e-10 at
#: 15 dB (k = 5.62), so a 15 dB peak is a tone, not a noise bin.
MIN_ALIAS_SNR_DB = 15.0
_LN10 = math.log(10.0)


@dataclass(frozen=True)
class CompareOptions:
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
    caps: list[CheckedCapture], members: dict[int, int], drift: float
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
    caps: list[CheckedCapture], g: MatchGroup, res: Resolution, opts: CompareOptions
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


def _evaluate(
    caps: list[CheckedCapture], g: MatchGroup, c: FloatArray, opts: CompareOptions
) -> dict[str, Any]:
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
    caps: list[CheckedCapture], members: dict[int, int], verdict: str, cands: list[Candidate],
    top: Candidate | None, tied: int, by_prior: bool, res: Resolution | None, unamb: float,
    opts: CompareOptions, chance: float = math.nan, settle_pool: list[float] | None = None,
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
    caps: list[CheckedCapture],
    members: dict[int, int],
    pool: list[NDArray[np.bool_]],
    opts: CompareOptions,
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
        c = unfoldings(float(caps[j0].freq[p0]), caps[j0].rate, opts.max_true)
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


def judge_group(
    caps: list[CheckedCapture],
    g: MatchGroup,
    opts: CompareOptions,
    pool: list[NDArray[np.bool_]] | None = None,
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
                alt = unfoldings(float(caps[k0].freq[p0]), caps[k0].rate, opts.max_true)
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


def judge_real_line(
    caps: list[CheckedCapture], members: dict[int, int], opts: CompareOptions
) -> PeakGroup:
    # The line itself is the first candidate; the CRT adds its images k·lcm ± f, which
    # fold alike, so a line is "real" only when the evidence (or the prior) rules them out.
    f = np.array([float(np.mean([caps[k].freq[p] for k, p in members.items()]))])
    return judge_group(caps, MatchGroup(dict(members), f), opts)
