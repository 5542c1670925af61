"""Matching peaks across captures (:mod:`.multirate`, steps 2-3): lines that stay put,
then aliases, each step an optimal assignment (:func:`scipy.optimize.linear_sum_assignment`)
in which a peak has at most one partner per capture."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy.optimize import linear_sum_assignment

from .folding import fold
from .multirate_model import CheckedCapture

__all__ = ["MATCH_REJECT", "MatchGroup", "alias_groups", "real_groups", "unfoldings"]

FloatArray = NDArray[np.float64]

#: Cost of leaving a group or a peak without partner in an assignment step (squared
#: standard units): a pair is matched when its cost is below ``2·MATCH_REJECT``, e.g. a
#: frequency error at the tolerance (4) and a level error of 3.5 σ (12).
MATCH_REJECT = 8.0
_BIG = 1e12


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


def unfoldings(a: float, rate: float, max_true: float) -> FloatArray:
    m = np.arange(0, int(max_true // rate) + 2, dtype=np.float64)
    c = np.concatenate([m * rate + a, m[1:] * rate - a])
    c = c[(c >= 0) & (c <= max_true)]
    return np.unique(c)


@dataclass
class MatchGroup:
    members: dict[int, int]  # capture -> peak
    cand: FloatArray  # true frequencies still consistent with every member


def _pair_cost(
    caps: list[CheckedCapture], g: MatchGroup, j: int, lvl: float, drift: float
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


def real_groups(
    caps: list[CheckedCapture], lvl: float, drift: float
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


def alias_groups(
    caps: list[CheckedCapture],
    free: list[NDArray[np.bool_]],
    lvl: float,
    drift: float,
    max_true: float,
) -> list[MatchGroup]:
    groups: list[MatchGroup] = []
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
            groups.append(MatchGroup({j: int(p)}, unfoldings(float(cj.freq[p]), cj.rate, max_true)))
    return groups
