"""Which carrier a sideband peak belongs to, when several carriers' sidebands fold onto it.

After folding, a sideband of one carrier harmonic (an inverter's ``m·fc ± n·f1``) can
land on the same apparent frequency as a sideband of another harmonic. Frequency alone
cannot tell them apart; the chain can: a sideband is never much stronger than its
carrier, and a carrier the chain attenuates by 54 dB leaves sidebands far weaker than one
it attenuates by 16 dB. This module ranks such candidates by the level their carrier
reaches after the chain and demotes the weaker ones.

References
----------
.. [1] D. G. Holmes and T. A. Lipo, *Pulse Width Modulation for Power Converters*,
   Wiley-IEEE Press, 2003, ch. 3 (harmonic groups around each carrier multiple; the
   sidebands of a group fall off with their order ``n`` from the group's main line).
.. [2] A. V. Oppenheim and R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
   Pearson, 2010, sec. 4.2 (aliasing: two true frequencies folding to one apparent one).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .errors import InputError
from .tones import ToneSet

__all__ = [
    "FLOOR_WEIGHT",
    "MARGIN_DB",
    "CarrierChoice",
    "carrier_levels_db",
    "prefer_strongest_carrier",
    "pwm_carriers",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]

#: Carriers within this many dB of the strongest consistent one stay equally preferred:
#: the chain's attenuation and the carriers' own levels are not known better than that.
MARGIN_DB = 6.0
#: A demoted candidate keeps at least this fraction of its confidence, so it stays
#: listed as an alternative instead of vanishing.
FLOOR_WEIGHT = 0.05


@dataclass(frozen=True, eq=False)
class CarrierChoice:
    """Per candidate row: is its carrier the strongest consistent one for its peak?

    Attributes
    ----------
    consistent : ndarray of bool
        The candidate's frequency error is within the tolerance.
    preferred : ndarray of bool
        Consistent and its carrier within :data:`MARGIN_DB` of the strongest consistent
        carrier of the same peak.
    deficit_db : ndarray
        How far its carrier's level after the chain lies below the strongest consistent
        carrier of the same peak, dB (0 for the strongest; NaN when not consistent).
    weight : ndarray
        Factor for the candidate's confidence: 1 when preferred or not consistent
        (frequency scoring already handles those); else
        ``max(10**(−(deficit − MARGIN_DB)/20), FLOOR_WEIGHT)``.
    best_row : ndarray of int
        For each row, the row index of its peak's strongest consistent candidate (−1
        when the peak has none).
    """

    consistent: BoolArray
    preferred: BoolArray
    deficit_db: FloatArray
    weight: FloatArray
    best_row: IntArray


def _rows(values: ArrayLike, name: str, n: int | None, dtype: type = np.float64) -> NDArray:
    a: NDArray[Any] = np.atleast_1d(np.asarray(values, dtype=dtype))
    if a.ndim != 1 or (n is not None and a.size != n):
        raise InputError(
            f"{name} must be a 1-D array of {n} values (one per candidate row)",
            field=name,
            code="length_mismatch",
        )
    return a


def prefer_strongest_carrier(
    peak: ArrayLike,
    freq_error_hz: ArrayLike,
    tolerance_hz: float | ArrayLike,
    carrier_level_db: ArrayLike,
    margin_db: float = MARGIN_DB,
) -> CarrierChoice:
    """Among the sideband explanations of each peak, prefer the strongest carrier.

    Parameters
    ----------
    peak : array_like of int
        Per candidate row (a carrier line or a sideband, each tagged with its group's
        carrier), the index of the peak it explains (rows of one peak need not
        be adjacent), >= 0.
    freq_error_hz : array_like
        Per row, the distance of the peak from the candidate's folded interval, Hz (>= 0).
    tolerance_hz : float or array_like
        Match tolerance, Hz (> 0), one value or one per row.
    carrier_level_db : array_like
        Per row, the level of the candidate's carrier after the chain, dB
        (:func:`carrier_levels_db`); −inf allowed for a carrier the chain removes.
    margin_db : float
        Carriers this close to the strongest stay preferred, dB (>= 0); default
        :data:`MARGIN_DB`.

    Returns
    -------
    CarrierChoice

    Notes
    -----
    A sideband of a carrier harmonic lies below that harmonic's main line [1]_, and the
    chain scales both alike (they are close in frequency), so of several candidate
    carriers whose sidebands fold onto one peak [2]_ the one reaching the record
    strongest is the likeliest parent. The weight falls 20 dB per 20 dB of deficit beyond
    the margin: a 3× carrier attenuated 38 dB more than the 1× keeps
    ``FLOOR_WEIGHT`` (5 %) of its confidence.
    """
    pk = _rows(peak, "peak", None, np.float64)
    n = pk.size
    if np.any(~np.isfinite(pk) | (pk < 0) | (pk != np.round(pk))):
        raise InputError("peak must hold whole peak indices >= 0", field="peak", code="invalid")
    pk_i = pk.astype(np.int64)
    err = _rows(freq_error_hz, "freq_error_hz", n)
    if np.any(~np.isfinite(err) | (err < 0)):
        raise InputError(
            "freq_error_hz must be finite and >= 0", field="freq_error_hz", code="invalid"
        )
    tol = np.broadcast_to(np.asarray(tolerance_hz, dtype=np.float64), (n,))
    if np.any(~np.isfinite(tol) | (tol <= 0)):
        raise InputError(
            "tolerance_hz must be finite and > 0", field="tolerance_hz", code="not_positive"
        )
    level = _rows(carrier_level_db, "carrier_level_db", n)
    if np.any(np.isnan(level) | (level == np.inf)):
        raise InputError(
            "carrier_level_db must be a level in dB (−inf allowed, not NaN or +inf)",
            field="carrier_level_db",
            code="invalid",
        )
    margin = float(margin_db)
    if not np.isfinite(margin) or margin < 0:
        raise InputError(
            f"margin_db={margin_db!r} must be a finite number >= 0",
            field="margin_db",
            code="negative",
        )
    consistent = err <= tol
    if n == 0:
        e = np.empty(0)
        return CarrierChoice(e.astype(bool), e.astype(bool), e, e, e.astype(np.int64))
    size = int(pk_i.max()) + 1
    best = np.full(size, -np.inf)
    np.maximum.at(best, pk_i[consistent], level[consistent])
    # The row holding each peak's maximum (first such row).
    is_best = consistent & (level == best[pk_i]) & np.isfinite(best[pk_i])
    best_row_of_peak = np.full(size, -1, dtype=np.int64)
    rows_best = np.flatnonzero(is_best)
    best_row_of_peak[pk_i[rows_best[::-1]]] = rows_best[::-1]  # first row wins
    with np.errstate(invalid="ignore"):
        deficit = np.where(consistent, best[pk_i] - level, np.nan)
    # A peak whose every consistent carrier is −inf: none is weaker than another.
    deficit = np.where(consistent & ~np.isfinite(best[pk_i]), 0.0, deficit)
    preferred = consistent & (deficit <= margin)
    with np.errstate(over="ignore"):
        demote = np.maximum(10.0 ** (-(np.nan_to_num(deficit, nan=0.0) - margin) / 20.0),
                            FLOOR_WEIGHT)  # fmt: skip
    weight = np.where(consistent & ~preferred, np.minimum(demote, 1.0), 1.0)
    return CarrierChoice(
        consistent=consistent,
        preferred=preferred,
        deficit_db=deficit.astype(np.float64),
        weight=weight.astype(np.float64),
        best_row=best_row_of_peak[pk_i],
    )


def carrier_levels_db(
    attenuation_db: ArrayLike, carrier_amplitude: ArrayLike | None = None
) -> FloatArray:
    """Level of each candidate's carrier after the chain, dB re the amplitude unit.

    Parameters
    ----------
    attenuation_db : array_like
        The chain's attenuation at each carrier's true frequency, dB
        (``chain.evaluate(carrier_hz).attenuation_db``).
    carrier_amplitude : array_like, optional
        The carriers' amplitudes at the sensor; NaN where unknown. An unknown carrier is
        taken as strong as the strongest known one (none known: 1): higher carrier
        multiples are usually weaker, so this errs towards keeping a more attenuated
        carrier's candidates alive rather than dismissing them on an assumption.

    Returns
    -------
    ndarray
        ``20·log10(amplitude) − attenuation_db``, dB.
    """
    att = np.atleast_1d(np.asarray(attenuation_db, dtype=np.float64))
    if np.any(np.isnan(att)):
        raise InputError("attenuation_db must not hold NaN", field="attenuation_db", code="invalid")
    if carrier_amplitude is None:
        amp = np.full(att.shape, np.nan)
    else:
        amp = np.broadcast_to(np.asarray(carrier_amplitude, dtype=np.float64), att.shape)
    if np.any(amp < 0):
        raise InputError(
            "carrier_amplitude must be >= 0 (NaN where unknown)",
            field="carrier_amplitude",
            code="invalid",
        )
    known = np.isfinite(amp)
    assumed = float(np.max(amp[known])) if np.any(known) else 1.0
    a = np.where(known, amp, assumed)
    out: FloatArray = 20.0 * np.log10(np.maximum(a, 1e-300)) - att
    return out


def pwm_carriers(tones: ToneSet) -> tuple[FloatArray, FloatArray]:
    """For every tone, the carrier multiple whose group it belongs to, and its amplitude.

    Parameters
    ----------
    tones : ToneSet
        Tones from :class:`service.core.sources.PwmCarrier` (and any others).

    Returns
    -------
    carrier_hz : ndarray
        ``m·fc`` (the tone's fixed part) for every PWM tone — the carrier line itself
        and its sidebands ``m·fc ± n·f1`` — and NaN for every other tone.
    carrier_amplitude : ndarray
        Amplitude of the carrier line ``m·fc`` of the same source when that line is in
        the set with a known amplitude; NaN otherwise (for even ``m`` there is no carrier
        line in a sine-triangle phase leg [1]_, and usually only the first group's
        amplitude is given).
    """
    if not isinstance(tones, ToneSet):
        raise InputError(
            f"tones must be a ToneSet, got {type(tones).__name__}", field="tones", code="invalid"
        )
    is_pwm = tones.kind == "pwm"
    carrier_hz = np.where(is_pwm, tones.fixed_hz, np.nan)
    amp = np.full(len(tones), np.nan)
    lines = np.flatnonzero(is_pwm & (tones.speed_hz == 0.0) & np.isfinite(tones.amplitude))
    if lines.size:
        table = {
            (str(tones.source[i]), float(tones.fixed_hz[i])): float(tones.amplitude[i])
            for i in lines.tolist()
        }  # a few carrier lines
        members = np.flatnonzero(is_pwm)
        amp[members] = [
            table.get((str(s), float(f)), np.nan)
            for s, f in zip(
                tones.source[members].tolist(), tones.fixed_hz[members].tolist(), strict=True
            )
        ]
    return carrier_hz, amp
