"""Which peaks of a measured spectrum are aliases, of what, and how sure we are.

Each peak gets ranked explanations, each with a confidence in [0, 1] and one plain
sentence: ``direct`` (an in-band tone), ``family`` (a harmonic of a known family, in
band), ``alias`` (a tone, or a member of a blind harmonic family, from a Nyquist zone
above the first), ``mirror`` (the image of energy just above the Nyquist frequency that
the anti-alias filtering let through) or, when nothing fits, ``unexplained``.

Confidence = frequency score × level score, capped at :data:`MAX_CONFIDENCE`: no
explanation is ever certain. An alias verdict is a hypothesis about the measurement,
not about the machine.

References
----------
.. [1] F. J. Harris, "On the use of windows for harmonic analysis with the discrete
   Fourier transform", *Proc. IEEE* 66(1), 1978 (main-lobe width of a window).
.. [2] A. V. Oppenheim and R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
   Pearson, 2010, sec. 4.2 (aliasing; the image of ``fs − f``).
.. [3] Common practice (no single source): the alias-protected span is fs/2.56.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .chain import Chain, ChainResponse
from .checks import check_one_of, check_positive, check_range
from .errors import InputError
from .folding import fold_intervals, fold_unchecked
from .harmonics import (
    MAX_SOURCE_EXCESS_DB,
    SIGMA_MULTIPLE,
    Family,
    _check_peaks,
    format_db,
    format_hz,
)
from .prediction import SPAN_DIVISOR
from .spectrum import WINDOWS, window_figures
from .tones import ToneSet

__all__ = [
    "BELOW_FLOOR_DB",
    "KINDS",
    "MAX_CONFIDENCE",
    "MIN_CONFIDENCE",
    "TIE_RATIO",
    "Attribution",
    "Explanation",
    "attribute",
    "frequency_tolerance_hz",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]
ObjArray = NDArray[np.object_]

#: Explanation kinds, in the order preferred when confidences are equal.
KINDS: tuple[str, ...] = ("direct", "family", "alias", "mirror", "unexplained")
#: A peak's verdict is its best explanation's kind only from this confidence up.
MIN_CONFIDENCE = 0.3
#: No explanation is ever certain.
MAX_CONFIDENCE = 0.95
#: A second explanation at least this fraction as confident as the best is named too.
TIE_RATIO = 0.9
#: Level score when the tone's amplitude is unknown (a level that cannot be checked is
#: weaker evidence than one that agrees).
UNKNOWN_LEVEL_SCORE = 0.8
#: An explanation predicted more than this far below the floor is implausible, dB.
BELOW_FLOOR_DB = 6.0
#: ... and its level score is multiplied by this factor.
BELOW_FLOOR_FACTOR = 0.02
#: Assumed error of the refined peak frequency, bins, for a known window and for
#: ``window="unknown"`` (parabolic interpolation is worse).
REFINE_ERROR_BINS = 0.05
REFINE_ERROR_UNKNOWN_BINS = 0.1
#: The frequency score is a Gaussian of the distance outside the tone's apparent
#: interval with σ = tolerance × this fraction (so it is ~0.01 at the tolerance).
SIGMA_FRACTION = 1.0 / 3.0
#: Mirror confidence rises linearly from the protected band edge to fs/2.
MIRROR_CONFIDENCE = (0.25, 0.5)
#: Blind family member confidence factor: from this value at the reporting threshold ...
FAMILY_FACTOR_LOW = 0.5
#: ... plus this much per decade of chance probability below 1e-4.
FAMILY_FACTOR_PER_DECADE = 0.05

_KIND_CODE = {k: i for i, k in enumerate(KINDS)}
_DIRECT, _FAMILY, _ALIAS, _MIRROR = (_KIND_CODE[k] for k in ("direct", "family", "alias", "mirror"))


# --------------------------------------------------------------------------- results


@dataclass(frozen=True)
class Explanation:
    """One way to explain a peak.

    Attributes
    ----------
    kind : str
        ``"direct"``, ``"family"``, ``"alias"`` or ``"mirror"``.
    confidence : float
        0 to :data:`MAX_CONFIDENCE`.
    tone_index : int
        Index of the tone in the ToneSet; -1 for a blind family member or a mirror.
    label : str or None
        Tone label (``"carrier 1×"``), ``"7×"`` for a blind family member, None for a
        mirror.
    source : str or None
        Source label (``"inverter"``) or the blind family's label; None for a mirror.
    true_hz : float
        True frequency of the explaining tone (the image ``fs − f`` for a mirror), Hz.
    zone : int
        Nyquist zone of ``true_hz`` at the final rate (1 = in band).
    inverted : bool
        The tone lands mirrored (even zone).
    attenuation_db : float
        The chain's attenuation at ``true_hz``, dB.
    predicted_amplitude : float
        Tone amplitude × chain gain, unit of the spectrum; NaN where unknown.
    sentence : str
        One plain sentence.
    freq_error_hz : float
        Distance of the peak outside the tone's apparent interval, Hz.
    harmonic : float
        Harmonic number within the tone's family; NaN if none.
    family_index : int
        Index of the blind family (in the list given), -1 otherwise.
    """

    kind: str
    confidence: float
    tone_index: int
    label: str | None
    source: str | None
    true_hz: float
    zone: int
    inverted: bool
    attenuation_db: float
    predicted_amplitude: float
    sentence: str
    freq_error_hz: float = 0.0
    harmonic: float = float("nan")
    family_index: int = -1


@dataclass(frozen=True, eq=False)
class Attribution:
    """Verdicts for every peak (arrays of the peaks' length) and ranked alternatives.

    Attributes
    ----------
    freq_hz, amplitude : ndarray
        The peaks as given (Hz; linear amplitude).
    verdict : ndarray of str
        Kind of the best explanation if its confidence >= :data:`MIN_CONFIDENCE`, else
        ``"unexplained"``.
    confidence : ndarray
        Confidence of the best explanation (below :data:`MIN_CONFIDENCE` for an
        ``"unexplained"`` peak; 0 if there is no candidate at all).
    source, tone_label : ndarray of str or None
        Of the verdict's explanation; None for ``"unexplained"`` and ``"mirror"``.
    true_hz : ndarray
        True frequency of the verdict's explanation, Hz; NaN if none.
    zone : ndarray of int
        Its Nyquist zone; 0 if none.
    inverted : ndarray of bool
    explanation : ndarray of str
        One sentence per peak (naming a second explanation when it is about as good).
    unprotected : ndarray of bool
        The peak lies above the alias-protected band edge (final rate / 2.56).
    in_band : ndarray of bool
        The peak lies inside the band of interest.
    alternatives : list of list of Explanation
        Per peak, up to ``max_alternatives`` explanations, best first.
    tolerance_hz : float
        Frequency tolerance used (window main-lobe half-width + refinement error), Hz.
    protected_edge_hz : float
        Upper edge of the alias-protected band, Hz.
    band_hz : (float, float)
        Band of interest, Hz.
    notes : tuple of str
        The chain's warnings.
    """

    freq_hz: FloatArray
    amplitude: FloatArray
    verdict: ObjArray
    confidence: FloatArray
    source: ObjArray
    tone_label: ObjArray
    true_hz: FloatArray
    zone: IntArray
    inverted: BoolArray
    explanation: ObjArray
    unprotected: BoolArray
    in_band: BoolArray
    alternatives: list[list[Explanation]]
    tolerance_hz: float
    protected_edge_hz: float
    band_hz: tuple[float, float]
    notes: tuple[str, ...]

    def __len__(self) -> int:
        return int(self.freq_hz.size)


# --------------------------------------------------------------------------- checks


@lru_cache(maxsize=8)
def _half_width_bins(window: str) -> float:
    # An unknown window is taken as Hann, the usual default of analysers.
    name = "hann" if window == "unknown" else window
    return float(window_figures(name, 1024)["mainlobe_half_width_bins"])


def frequency_tolerance_hz(bin_width_hz: float, window: str = "hann") -> float:
    """How far a peak may sit from a tone and still be that tone, Hz.

    Parameters
    ----------
    bin_width_hz : float
        Bin width of the spectrum, Hz.
    window : str
        Window of the spectrum (one of :data:`service.core.spectrum.WINDOWS`) or
        ``"unknown"``.

    Returns
    -------
    float
        ``bin_width × (main-lobe half-width in bins + refinement error in bins)``: two
        tones closer than the main-lobe half-width merge into one peak [1]_, and the
        refined frequency carries a small error on top.
    """
    bw = check_positive(bin_width_hz, "bin_width_hz", unit=" Hz")
    w = check_one_of(window, "window", [*sorted(WINDOWS), "unknown"])
    refine = REFINE_ERROR_UNKNOWN_BINS if w == "unknown" else REFINE_ERROR_BINS
    return bw * (_half_width_bins(w) + refine)


def _check_band(band_hz: tuple[float, float] | None, edge: float) -> tuple[float, float]:
    if band_hz is None:
        return (0.0, edge)
    try:
        lo, hi = (float(v) for v in band_hz)
    except (TypeError, ValueError):
        raise InputError(
            f"band_hz={band_hz!r} must be two numbers (low, high) in Hz",
            field="band_hz",
            code="bad_type",
            value=band_hz,
        ) from None
    if not (np.isfinite(lo) and np.isfinite(hi)) or lo < 0 or hi <= lo:
        raise InputError(
            f"band_hz={[lo, hi]!r} must be two finite numbers with 0 <= low < high",
            field="band_hz",
            code="bad_type",
            value=[lo, hi],
        )
    return (lo, hi)


def _tone_intervals(
    tones: ToneSet, chain: Chain, speed_tolerance_pct: float
) -> tuple[ChainResponse, FloatArray, FloatArray, FloatArray]:
    """Chain response, folded apparent interval and predicted level of every tone.

    The same quantities as :func:`service.core.prediction.predict`
    (``apparent_low_hz``, ``apparent_high_hz``, ``apparent_amplitude``) without its
    collision search, which diagnosis does not need.
    """
    resp = chain.evaluate(tones.freq_hz)
    if speed_tolerance_pct > 0:
        spread = np.abs(tones.speed_hz) * (speed_tolerance_pct / 100.0)
        true_lo = np.maximum(tones.freq_hz - spread, 0.0)
        lo, hi = fold_intervals(true_lo, tones.freq_hz + spread, resp.final_rate_hz)
    else:
        lo = hi = resp.apparent_hz
    level: FloatArray = tones.amplitude * 10.0 ** (-resp.attenuation_db / 20.0)
    return resp, lo, hi, level


# --------------------------------------------------------------------------- scores


def _db(x: FloatArray) -> FloatArray:
    out: FloatArray = 20.0 * np.log10(np.maximum(x, 1e-300))
    return out


def _freq_score(distance_hz: FloatArray, tol_hz: FloatArray | float) -> FloatArray:
    sigma = np.asarray(tol_hz) * SIGMA_FRACTION
    out: FloatArray = np.exp(-0.5 * (distance_hz / sigma) ** 2)
    return out


def _level_score(
    seen_db: FloatArray,
    predicted: FloatArray,
    floor_db: FloatArray,
    attenuation_db: FloatArray,
    top_db: float,
    level_tol_db: float,
) -> FloatArray:
    """Level plausibility of an explanation, 0..1.

    Known amplitude: Gaussian of (seen − predicted) dB with σ = ``level_tol_db``, times
    :data:`BELOW_FLOOR_FACTOR` when the prediction is more than :data:`BELOW_FLOOR_DB`
    below the floor. Unknown amplitude: :data:`UNKNOWN_LEVEL_SCORE`, reduced when the
    source would have to be more than 40 dB above the strongest peak
    (seen + attenuation − strongest).
    """
    known = np.isfinite(predicted)
    pred_db = _db(np.where(known, predicted, 1.0))
    diff = seen_db - pred_db
    score_known = np.exp(-0.5 * (diff / level_tol_db) ** 2)
    score_known = np.where(
        pred_db < floor_db - BELOW_FLOOR_DB, score_known * BELOW_FLOOR_FACTOR, score_known
    )
    score_unknown = UNKNOWN_LEVEL_SCORE * _excess_penalty(
        seen_db, attenuation_db, top_db, level_tol_db
    )
    out: FloatArray = np.where(known, score_known, score_unknown)
    return out


def _excess_penalty(
    seen_db: FloatArray, attenuation_db: FloatArray, top_db: float, level_tol_db: float
) -> FloatArray:
    excess = np.maximum(seen_db + attenuation_db - top_db - MAX_SOURCE_EXCESS_DB, 0.0)
    out: FloatArray = np.exp(-0.5 * (excess / level_tol_db) ** 2)
    return out


def _family_factor(p_value: float) -> float:
    decades = -np.log10(max(p_value, 1e-300)) - 4.0
    return float(np.clip(FAMILY_FACTOR_LOW + FAMILY_FACTOR_PER_DECADE * decades, 0.3, 1.0))


# --------------------------------------------------------------------------- matching


def _interval_pairs(
    peaks: FloatArray, lo: FloatArray, hi: FloatArray, tol: float
) -> tuple[IntArray, IntArray]:
    """All (peak, tone) pairs whose distance outside [lo, hi] is at most ``tol``.

    Tones are grouped by interval width (powers of two of the tolerance) so that a few
    wide intervals do not widen the search window of every peak; inside a group the
    tones are sorted by ``lo`` and each peak's candidates found with searchsorted.
    """
    width = hi - lo
    group = np.floor(np.log2(width / tol + 1.0)).astype(np.int64)
    out_p: list[IntArray] = []
    out_t: list[IntArray] = []
    for g in np.unique(group):  # a handful of width groups, not a loop over tones
        members = np.flatnonzero(group == g)
        order = members[np.argsort(lo[members], kind="stable")]
        s_lo = lo[order]
        reach = float(np.max(width[members]))
        start = np.searchsorted(s_lo, peaks - tol - reach, side="left")
        stop = np.searchsorted(s_lo, peaks + tol, side="right")
        counts = stop - start
        total = int(np.sum(counts))
        if total == 0:
            continue
        rows = np.repeat(np.arange(peaks.size), counts)
        offs = np.arange(total) - np.repeat(np.cumsum(counts) - counts, counts)
        tones = order[start[rows] + offs]
        keep = hi[tones] >= peaks[rows] - tol
        out_p.append(rows[keep])
        out_t.append(tones[keep])
    if not out_p:
        e = np.empty(0, dtype=np.int64)
        return e, e
    return np.concatenate(out_p).astype(np.int64), np.concatenate(out_t).astype(np.int64)


@dataclass
class _Rows:
    """Candidate explanations as parallel arrays (one row per peak × explanation)."""

    peak: list[IntArray]
    kind: list[IntArray]
    tone: list[IntArray]
    family: list[IntArray]
    harmonic: list[FloatArray]
    true_hz: list[FloatArray]
    zone: list[IntArray]
    atten: list[FloatArray]
    predicted: list[FloatArray]
    error: list[FloatArray]
    conf: list[FloatArray]

    def add(self, **cols: ArrayLike) -> None:
        n = np.asarray(cols["peak"]).size
        for name, value in cols.items():
            arr = np.asarray(value)
            getattr(self, name).append(np.broadcast_to(arr, (n,)) if arr.ndim == 0 else arr)

    def cat(self, name: str, dtype: type) -> NDArray[np.generic]:
        parts = getattr(self, name)
        if not parts:
            return np.empty(0, dtype=dtype)
        return np.concatenate(parts).astype(dtype)


# --------------------------------------------------------------------------- main


def attribute(
    peaks_freq_hz: ArrayLike,
    peaks_amplitude: ArrayLike,
    floor: ArrayLike,
    chain: Chain,
    tones: ToneSet | None,
    bin_width_hz: float,
    window: str = "hann",
    speed_tolerance_pct: float = 0.0,
    band_hz: tuple[float, float] | None = None,
    level_tolerance_db: float = 10.0,
    max_alternatives: int = 4,
    families: Sequence[Family] | None = None,
) -> Attribution:
    """Explain each peak as a direct tone, an alias, a family member, a mirror or nothing.

    Parameters
    ----------
    peaks_freq_hz : array_like
        Peak frequencies, Hz, between 0 and the chain's final Nyquist frequency.
    peaks_amplitude : array_like
        Peak amplitudes, linear (> 0), in the unit of the tones' amplitudes.
    floor : array_like or float
        Noise floor at each peak, linear amplitude, > 0.
    chain : Chain
        The acquisition chain the spectrum came through.
    tones : ToneSet or None
        Known tones (with amplitudes where known); None in blind mode.
    bin_width_hz : float
        Bin width of the spectrum, Hz.
    window : str
        Window of the spectrum (:data:`service.core.spectrum.WINDOWS`) or
        ``"unknown"``; sets the frequency tolerance (:func:`frequency_tolerance_hz`).
    speed_tolerance_pct : float
        Uncertainty of machine speed, percent (0-50); speed-proportional tones become
        intervals, folded to apparent intervals, and a peak inside one matches exactly.
    band_hz : (float, float), optional
        Band of interest, Hz; default DC to final rate / 2.56.
    level_tolerance_db : float
        Spread of the level check, dB (> 0): a peak this far from the predicted level
        keeps 61 % of the level score.
    max_alternatives : int
        Explanations kept per peak (1 to 20).
    families : sequence of Family, optional
        Families from :func:`service.core.harmonics.find_families` on the same peaks;
        their members become ``family`` or ``alias`` explanations.

    Returns
    -------
    Attribution

    Notes
    -----
    Frequency score: ``exp(−½·(d/σ)²)`` with ``d`` the distance of the peak outside the
    tone's folded apparent interval and ``σ = tol/3``; candidates with ``d > tol`` are
    dropped. Level score with a known tone amplitude: ``exp(−½·(ΔL/level_tolerance)²)``
    with ``ΔL`` = seen − predicted level in dB (predicted = amplitude × chain gain),
    times :data:`BELOW_FLOOR_FACTOR` when the prediction is more than
    :data:`BELOW_FLOOR_DB` below the floor; with an unknown amplitude
    :data:`UNKNOWN_LEVEL_SCORE`, times ``exp(−½·(x/level_tolerance)²)`` where ``x`` is
    how far the source would have to exceed the strongest peak by more than 40 dB
    (seen level + the chain's attenuation). Blind family members are scored
    against ``tol + 3·k·σ(f0)``, times a factor growing with the family's significance.
    A peak above the protected band edge (final rate / 2.56 [3]_) may be the image of
    energy at ``fs − f`` just above the Nyquist frequency [2]_: a ``mirror`` whose
    confidence grows from 0.25 at the edge to 0.5 at fs/2, penalised like an unknown
    level when the chain's attenuation at ``fs − f`` would need an implausibly strong
    source. Confidence = frequency score × level score (× family factor), at most
    :data:`MAX_CONFIDENCE`. Everything is vectorised over peak × tone pairs found with
    sorted searches; only the kept explanations are turned into sentences.
    """
    rate = chain.final_rate_hz
    nyq = rate / 2.0
    freq, amp, fl = _check_peaks(peaks_freq_hz, peaks_amplitude, floor, nyq)
    bw = check_positive(bin_width_hz, "bin_width_hz", unit=" Hz")
    window = check_one_of(window, "window", [*sorted(WINDOWS), "unknown"])
    lvl_tol = check_positive(level_tolerance_db, "level_tolerance_db", unit=" dB")
    if (
        isinstance(max_alternatives, bool)
        or int(max_alternatives) != max_alternatives
        or not (1 <= int(max_alternatives) <= 20)
    ):
        raise InputError(
            f"max_alternatives={max_alternatives!r} must be between 1 and 20",
            field="max_alternatives",
            code="out_of_range",
            value=max_alternatives,
        )
    n_alt = int(max_alternatives)
    if tones is not None and not isinstance(tones, ToneSet):
        raise InputError(
            f"tones must be a ToneSet or None, got {type(tones).__name__}",
            field="tones",
            code="bad_type",
        )
    fams = list(families or [])
    for i, fam in enumerate(fams):
        if not isinstance(fam, Family):
            raise InputError(
                f"families[{i}] is a {type(fam).__name__}; expected a Family",
                field=f"families[{i}]",
                code="bad_type",
            )
        bad = [m.peak for m in fam.members if not 0 <= m.peak < freq.size]
        if bad:
            raise InputError(
                f"families[{i}] refers to peak {bad[0]}; there are {freq.size} peaks",
                field=f"families[{i}]",
                code="out_of_range",
            )

    speed_tol = check_range(speed_tolerance_pct, "speed_tolerance_pct", 0, 50)
    tol = frequency_tolerance_hz(bw, window)
    edge = rate / SPAN_DIVISOR
    seen_db = _db(amp)
    floor_db = _db(fl)
    top_db = float(np.max(seen_db)) if amp.size else 0.0
    rows = _Rows(*([] for _ in range(11)))
    notes: tuple[str, ...] = tuple(chain.validate())
    band = _check_band(band_hz, edge)

    # ---- known tones: pairs within tolerance of each tone's folded interval
    if tones is not None and len(tones):
        resp, lo, hi, level = _tone_intervals(tones, chain, speed_tol)
        pk, tn = _interval_pairs(freq, lo, hi, tol)
        dist = np.maximum(np.maximum(lo[tn] - freq[pk], freq[pk] - hi[tn]), 0.0)
        zone = resp.zone[tn]
        harm = tones.harmonic[tn]
        has_family = (tones.family[tn] != "") & np.isfinite(harm)
        kind = np.where(zone > 1, _ALIAS, np.where(has_family & (harm != 1.0), _FAMILY, _DIRECT))
        atten = resp.attenuation_db[tn]
        predicted = level[tn]
        conf = _freq_score(dist, tol) * _level_score(
            seen_db[pk], predicted, floor_db[pk], atten, top_db, lvl_tol
        )
        rows.add(
            peak=pk, kind=kind, tone=tn, family=np.int64(-1), harmonic=harm,
            true_hz=resp.freq_hz[tn], zone=zone, atten=atten, predicted=predicted,
            error=dist, conf=conf,
        )  # fmt: skip

    # ---- blind families: each member is a candidate explanation of its peak
    for fi, fam in enumerate(fams):  # a few families, each vectorised over its members
        if not fam.members:
            continue
        pk = np.array([m.peak for m in fam.members], dtype=np.int64)
        k = np.array([m.harmonic for m in fam.members], dtype=np.float64)
        true = np.array([m.true_hz for m in fam.members], dtype=np.float64)
        folded = fold_unchecked(k * fam.fundamental_hz, rate)
        dist = np.abs(folded - freq[pk])
        tol_k = tol + SIGMA_MULTIPLE * k * fam.uncertainty_hz
        resp_f = chain.evaluate(true)
        zone = resp_f.zone
        kind = np.where(zone > 1, _ALIAS, _FAMILY)
        atten = resp_f.attenuation_db
        level = UNKNOWN_LEVEL_SCORE * _excess_penalty(seen_db[pk], atten, top_db, lvl_tol)
        conf = _freq_score(dist, tol_k) * level * _family_factor(fam.p_value)
        conf = np.where(dist <= tol_k, conf, 0.0)
        rows.add(
            peak=pk, kind=kind, tone=np.int64(-1), family=np.int64(fi), harmonic=k,
            true_hz=true, zone=zone, atten=atten, predicted=np.float64(np.nan),
            error=dist, conf=conf,
        )  # fmt: skip

    # ---- transition-band mirror for peaks above the protected edge
    unprotected = freq > edge
    up = np.flatnonzero(unprotected)
    if up.size:
        image = rate - freq[up]
        resp_m = chain.evaluate(image)
        position = (freq[up] - edge) / max(nyq - edge, 1e-300)
        low, high = MIRROR_CONFIDENCE
        conf = (low + (high - low) * np.clip(position, 0.0, 1.0)) * _excess_penalty(
            seen_db[up], resp_m.attenuation_db, top_db, lvl_tol
        )
        rows.add(
            peak=up, kind=np.int64(_MIRROR), tone=np.int64(-1), family=np.int64(-1),
            harmonic=np.float64(np.nan), true_hz=image, zone=resp_m.zone,
            atten=resp_m.attenuation_db, predicted=np.float64(np.nan),
            error=np.zeros(up.size), conf=conf,
        )  # fmt: skip

    r_peak = rows.cat("peak", np.int64)
    r_kind = rows.cat("kind", np.int64)
    r_zone = rows.cat("zone", np.int64)
    r_conf = np.minimum(rows.cat("conf", np.float64), MAX_CONFIDENCE)
    # Best first per peak; on equal confidence prefer the simpler kind, then lower zone.
    order = np.lexsort((r_zone, r_kind, -r_conf, r_peak))
    s_peak = r_peak[order]
    starts = np.searchsorted(s_peak, np.arange(freq.size), side="left")
    rank = np.arange(order.size) - starts[s_peak] if order.size else np.empty(0, np.int64)
    kept = order[rank < n_alt]

    table = {
        name: rows.cat(name, dt)
        for name, dt in (
            ("tone", np.int64), ("family", np.int64), ("harmonic", np.float64),
            ("true_hz", np.float64), ("atten", np.float64), ("predicted", np.float64),
            ("error", np.float64),
        )
    }  # fmt: skip
    peaks_with_rows = np.unique(r_peak[kept])
    p_text = {int(i): format_hz(freq[i]) for i in peaks_with_rows}
    seen_text = {int(i): format_db(seen_db[i]) for i in peaks_with_rows}
    ctx = _SentenceContext(
        freq=p_text, seen_db=seen_text, floor_db=floor_db.tolist(),
        tones=tones, families=fams, edge=edge, nyq=nyq, rate=rate,
    )  # fmt: skip
    alternatives: list[list[Explanation]] = [[] for _ in range(freq.size)]
    cols = [
        r_peak[kept].tolist(), r_kind[kept].tolist(), r_conf[kept].tolist(),
        *(table[name][kept].tolist() for name in (
            "tone", "family", "harmonic", "true_hz")),
        r_zone[kept].tolist(),
        *(table[name][kept].tolist() for name in ("atten", "predicted", "error")),
    ]  # fmt: skip
    for args in zip(*cols, strict=True):  # only the kept explanations, as Python scalars
        alternatives[args[0]].append(_explanation(ctx, *args))
    return _assemble(freq, amp, alternatives, unprotected, band, tol, edge, notes, ctx)


# --------------------------------------------------------------------------- sentences


@dataclass(frozen=True)
class _SentenceContext:
    freq: dict[int, str]  # formatted peak frequency
    seen_db: dict[int, str]  # formatted peak level
    floor_db: list[float]
    tones: ToneSet | None
    families: list[Family]
    edge: float
    nyq: float
    rate: float


def _hedge(conf: float) -> str:
    if conf >= 0.7:
        return "is probably"
    if conf >= MIN_CONFIDENCE:
        return "may be"
    return "is unlikely to be"


def _explanation(
    ctx: _SentenceContext,
    peak: int,
    kind: int,
    conf: float,
    tone: int,
    family: int,
    harmonic: float,
    true_hz: float,
    zone: int,
    atten: float,
    predicted: float,
    error: float,
) -> Explanation:
    label: str | None
    source: str | None
    if tone >= 0:
        assert ctx.tones is not None
        label, source = str(ctx.tones.label[tone]), str(ctx.tones.source[tone])
        what = f"{label} of '{source}'"
    elif family >= 0:
        fam = ctx.families[family]
        label, source = f"{int(harmonic)}×", fam.label
        what = (
            f"harmonic {int(harmonic)}× of a {format_hz(fam.fundamental_hz, 4)} harmonic "
            "family found without sources"
        )
    else:
        label = source = None
        what = ""
    inverted = zone % 2 == 0
    p = ctx.freq[peak]
    hedge = _hedge(conf)
    seen = ctx.seen_db[peak]
    if math.isfinite(predicted):
        pred_db = 20.0 * math.log10(max(predicted, 1e-300))
        level = f"; expected {format_db(pred_db)}, seen {seen}"
        if pred_db < ctx.floor_db[peak] - BELOW_FLOOR_DB:
            level += f", but that is far below the floor ({format_db(ctx.floor_db[peak])})"
    else:
        level = f"; seen {seen}" if tone < 0 else f"; its level is not given, seen {seen}"
    kind_name = KINDS[kind]
    if kind == _MIRROR:
        sentence = (
            f"{p} lies in the unprotected band above {format_hz(ctx.edge)} and {hedge} the "
            f"image of energy at {format_hz(true_hz)}, just above the Nyquist frequency "
            f"{format_hz(ctx.nyq)}, that the filter's transition band let through; the "
            f"chain takes {format_db(atten)} off {format_hz(true_hz)}"
        )
    elif kind == _ALIAS:
        flip = " (inverted)" if inverted else ""
        sentence = (
            f"{p} {hedge} {'the ' if tone >= 0 else ''}{what} at {format_hz(true_hz, 4)} "
            f"folded from zone {zone}"
            f"{flip}; the chain takes {format_db(atten)} off it{level}"
        )
    elif kind == _FAMILY and tone >= 0:
        assert ctx.tones is not None
        fam_name = str(ctx.tones.family[tone])
        sentence = (
            f"{p} {hedge} harmonic {_fmt_harmonic(harmonic)}× of {fam_name} ({label}, "
            f"at {format_hz(true_hz, 4)}, in band){level}"
        )
    elif kind == _FAMILY:
        sentence = f"{p} {hedge} {what} (at {format_hz(true_hz, 4)}, in band){level}"
    else:
        sentence = f"{p} {hedge} {what} (at {format_hz(true_hz, 4)}, in band){level}"
    return Explanation(
        kind=kind_name,
        confidence=conf,
        tone_index=tone,
        label=label,
        source=source,
        true_hz=true_hz,
        zone=zone,
        inverted=bool(inverted),
        attenuation_db=atten,
        predicted_amplitude=predicted,
        sentence=sentence,
        freq_error_hz=error,
        harmonic=harmonic,
        family_index=family,
    )


def _fmt_harmonic(h: float) -> str:
    return f"{int(h)}" if float(h).is_integer() else f"{h:g}"


def _short(e: Explanation) -> str:
    """A short phrase naming an alternative explanation."""
    if e.kind == "mirror":
        return f"the image of energy at {format_hz(e.true_hz)} (mirror)"
    if e.tone_index >= 0:
        what = f"the {e.label} of '{e.source}'"
    else:
        what = f"harmonic {e.label} of the {e.source}"
    if e.kind == "alias":
        return f"{what} folded from zone {e.zone} (true {format_hz(e.true_hz, 4)})"
    return f"{what} (in band)"


def _assemble(
    freq: FloatArray,
    amp: FloatArray,
    alternatives: list[list[Explanation]],
    unprotected: BoolArray,
    band: tuple[float, float],
    tol: float,
    edge: float,
    notes: tuple[str, ...],
    ctx: _SentenceContext,
) -> Attribution:
    n = freq.size
    verdict = np.empty(n, dtype=object)
    source = np.empty(n, dtype=object)
    label = np.empty(n, dtype=object)
    sentence = np.empty(n, dtype=object)
    conf = np.zeros(n)
    true = np.full(n, np.nan)
    zone = np.zeros(n, dtype=np.int64)
    inverted = np.zeros(n, dtype=bool)
    for i, alts in enumerate(alternatives):  # one sentence per peak
        best = alts[0] if alts else None
        if best is None or best.confidence < MIN_CONFIDENCE:
            verdict[i] = "unexplained"
            conf[i] = best.confidence if best is not None else 0.0
            text = f"no known tone, family or mirror convincingly explains {format_hz(freq[i])}"
            if best is not None:
                text += f"; the closest is {_short(best)}, confidence {best.confidence:.2f}"
            if unprotected[i]:
                text += f"; it lies in the unprotected band above {format_hz(edge)}"
            # Say what would settle it: the engineer's next step, not only the verdict.
            text += (
                "; to settle it, name the machine's sources or capture again at a second "
                "sample rate"
            )
            sentence[i] = text
            continue
        verdict[i] = best.kind
        conf[i] = best.confidence
        if best.kind != "mirror":
            source[i], label[i] = best.source, best.label
        true[i], zone[i], inverted[i] = best.true_hz, best.zone, best.inverted
        text = best.sentence
        if len(alts) > 1 and alts[1].confidence >= TIE_RATIO * best.confidence:
            text += f"; or, about as likely, {_short(alts[1])}"
        sentence[i] = text
    in_band = (freq >= band[0]) & (freq <= band[1])
    return Attribution(
        freq_hz=freq,
        amplitude=amp,
        verdict=verdict,
        confidence=conf,
        source=source,
        tone_label=label,
        true_hz=true,
        zone=zone,
        inverted=inverted,
        explanation=sentence,
        unprotected=unprotected,
        in_band=in_band,
        alternatives=alternatives,
        tolerance_hz=tol,
        protected_edge_hz=edge,
        band_hz=band,
        notes=notes,
    )
