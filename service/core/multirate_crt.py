"""Robust Chinese remainder theorem and the common resolution of a set of sample rates.

Part of the multi-rate test (:mod:`.multirate`): rates written as ``M·Γ_i``, the
unambiguous range ``lcm/2`` and the error bound ``M/4``, and the closed-form robust CRT
[1]_ generalised to non-coprime ``Γ_i`` [2]_. Also the argument checks the multi-rate
modules share.

References
----------
.. [1] Wang and Xia, IEEE Trans. Signal Processing 58(11), 2010 (full entry in
   :mod:`.multirate`).
.. [2] Li, Liang and Xia, IEEE Trans. Signal Processing 57(11), 2009.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from fractions import Fraction
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .errors import InputError

__all__ = ["Resolution", "common_resolution", "robust_crt"]

FloatArray = NDArray[np.float64]


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


def check_number(
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


def check_array(value: Any, name: str, n: int | None = None) -> FloatArray:
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
        v = check_number(r, f"rates_hz[{i}]")
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
