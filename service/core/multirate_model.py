"""Inputs, results and limits of the multi-rate test (:mod:`.multirate`)."""

from __future__ import annotations

import itertools
import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import TypeAlias

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .errors import InputError
from .multirate_crt import Resolution, check_array, check_number

__all__ = [
    "MAX_CAPTURES",
    "MAX_FOLDS",
    "MAX_MATCH_CELLS",
    "MAX_PEAKS",
    "MIN_CAPTURES",
    "Attenuation",
    "Candidate",
    "Capture",
    "CheckedCapture",
    "MultiRateResult",
    "PeakGroup",
    "check_captures",
]

FloatArray = NDArray[np.float64]

#: An anti-alias chain's attenuation, dB, at true frequencies (Hz): a vectorised callable
#: (``lambda f: chain.evaluate(f).attenuation_db``), a table ``(freq_hz, atten_db)``
#: interpolated linearly (held flat beyond its ends), or None for no attenuation.
Attenuation: TypeAlias = Callable[[FloatArray], ArrayLike] | tuple[ArrayLike, ArrayLike] | None

#: Limits that keep one request bounded.
MAX_CAPTURES = 6
MIN_CAPTURES = 2
MAX_PEAKS = 500
MAX_FOLDS = 1000
#: Bound on the matching work: (peaks per capture)² × unfoldings per peak.
MAX_MATCH_CELLS = 50_000_000


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


def _attenuation_fn(att: Attenuation, name: str) -> Callable[[FloatArray], FloatArray]:
    if att is None:
        return lambda f: np.zeros_like(f)
    if isinstance(att, tuple):
        if len(att) != 2:
            raise InputError(f"{name} table must be (freq_hz, atten_db)", field=name)
        fx = check_array(att[0], f"{name}.freq_hz")
        ay = check_array(att[1], f"{name}.atten_db", fx.size)
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
class CheckedCapture:
    rate: float
    freq: FloatArray
    level: FloatArray
    unc: FloatArray
    att: Callable[[FloatArray], FloatArray]
    snr: FloatArray  # NaN where unknown


def _per_peak(value: float | ArrayLike, n: int, name: str) -> FloatArray:
    """One number for every peak, or one per peak."""
    try:
        v = np.broadcast_to(np.asarray(value, dtype=float), (n,))
    except ValueError:
        raise InputError(
            f"{name} must be one number or one per peak ({n})", field=name,
            code="length_mismatch",
        ) from None  # fmt: skip
    return check_array(v, name)


def check_captures(captures: Sequence[Capture]) -> list[CheckedCapture]:
    if not isinstance(captures, Sequence) or not (MIN_CAPTURES <= len(captures) <= MAX_CAPTURES):
        n = len(captures) if isinstance(captures, Sequence) else captures
        raise InputError(
            f"captures: give {MIN_CAPTURES} to {MAX_CAPTURES} captures, got {n}",
            field="captures", value=n, limit=MAX_CAPTURES, code="count",
        )  # fmt: skip
    out: list[CheckedCapture] = []
    for k, cap in enumerate(captures):
        try:
            rate = check_number(cap.rate_hz, "rate_hz")
            f = check_array(cap.freq_hz, "freq_hz")
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
            lev = check_array(cap.level_db, "level_db", f.size)
            unc = _per_peak(cap.uncertainty_hz, f.size, "uncertainty_hz")
            if np.any(unc <= 0):
                i = int(np.flatnonzero(unc <= 0)[0])
                raise InputError(
                    f"uncertainty_hz[{i}]={unc[i]:g} must be > 0",
                    field=f"uncertainty_hz[{i}]", value=float(unc[i]), limit=0,
                    code="not_positive",
                )  # fmt: skip
            att = _attenuation_fn(cap.attenuation, "attenuation")
            snr = (
                np.full(f.shape, np.nan)
                if cap.snr_db is None
                else _per_peak(cap.snr_db, f.size, "snr_db")
            )
        except InputError as exc:
            raise exc.under(f"captures[{k}]") from None
        out.append(CheckedCapture(rate, f, lev, unc, att, snr))
    rates = [c.rate for c in out]
    for i, j in itertools.combinations(range(len(rates)), 2):
        if math.isclose(rates[i], rates[j], rel_tol=1e-9):
            raise InputError(
                f"captures[{j}].rate_hz={rates[j]:g} equals captures[{i}].rate_hz; each "
                "capture needs its own sample rate",
                field=f"captures[{j}].rate_hz", value=rates[j], code="duplicate",
            )  # fmt: skip
    return out
