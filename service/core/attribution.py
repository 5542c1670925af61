"""Which peaks of a measured spectrum are aliases, of what, and how sure we are.

Each peak gets ranked explanations, each with a confidence in [0, 1] and one plain
sentence: ``direct`` (an in-band tone), ``family`` (a harmonic of a known family, in
band), ``alias`` (a tone, or a member of a blind harmonic family, from a Nyquist zone
above the first), ``mirror`` (the image of energy just above the Nyquist frequency that
the anti-alias filtering let through) or, when nothing fits, ``unexplained``. The
results and constants live in :mod:`service.core.attribution_model` and the sentences in
:mod:`service.core.attribution_text` (both re-exported or used here).

Raw score = frequency score × level score, capped at :data:`MAX_CONFIDENCE`; the stated
confidence is that score calibrated on simulated acquisitions with known truth
(:mod:`service.core.calibration`), at most 0.97: no explanation is ever certain. An
alias verdict is a hypothesis about the measurement, not about the machine.

References
----------
.. [1] F. J. Harris, "On the use of windows for harmonic analysis with the discrete
   Fourier transform", *Proc. IEEE* 66(1), 1978 (main-lobe width of a window).
.. [2] A. V. Oppenheim and R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
   Pearson, 2010, sec. 4.2 (aliasing; the image of ``fs − f``).
.. [3] Common practice (no single source): the analysed span is fs/2.56.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from numpy.typing import ArrayLike, NDArray

from service.core.analysis_lines import SPAN_DIVISOR
from service.core.calibration import calibrate
from service.core.chain import Chain, ChainResponse
from service.core.checks import check_band_hz, check_one_of, check_positive, check_range
from service.core.errors import InputError
from service.core.folding import fold_intervals, fold_unchecked
from service.core.harmonics import (
    MAX_SOURCE_EXCESS_DB,
    SIGMA_MULTIPLE,
    Family,
    check_peaks,
    format_db,
    format_hz,
)
from service.core.sidebands import carrier_levels_db, prefer_strongest_carrier, pwm_carriers
from service.core.tones import ToneSet
from service.core.windows import WINDOWS, window_figures

from .attribution_model import (
    BELOW_FLOOR_DB,
    BELOW_FLOOR_FACTOR,
    FAMILY_FACTOR_LOW,
    FAMILY_FACTOR_PER_DECADE,
    KIND_ALIAS,
    KIND_DIRECT,
    KIND_FAMILY,
    KIND_MIRROR,
    KINDS,
    MAX_CONFIDENCE,
    MIN_CONFIDENCE,
    MIRROR_CONFIDENCE,
    REFINE_ERROR_BINS,
    REFINE_ERROR_UNKNOWN_BINS,
    SIGMA_FRACTION,
    UNKNOWN_LEVEL_SCORE,
    Attribution,
    Explanation,
)
from .attribution_text import SentenceContext, assemble, explanation_for

__all__ = [
    "attribute",
    "frequency_tolerance_hz",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]
ObjArray = NDArray[np.object_]


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
    A peak above the analysed span (final rate / 2.56 [3]_) may be the image of
    energy at ``fs − f`` just above the Nyquist frequency [2]_: a ``mirror`` whose
    confidence grows from 0.25 at the edge to 0.5 at fs/2, penalised like an unknown
    level when the chain's attenuation at ``fs − f`` would need an implausibly strong
    source. Raw score = frequency score × level score (× family factor), at most
    :data:`MAX_CONFIDENCE`; PWM sideband candidates of a carrier multiple the chain
    leaves more than 6 dB weaker than another consistent one are demoted
    (:func:`service.core.sidebands.prefer_strongest_carrier`). Ranking, the
    :data:`MIN_CONFIDENCE` gate and :data:`TIE_RATIO` use the raw score; the stated
    confidence is calibrated (:func:`service.core.calibration.calibrate`, at most 0.97)
    and sets the sentences' hedge. Everything is vectorised over peak × tone pairs found with
    sorted searches; only the kept explanations are turned into sentences.
    """
    rate = chain.final_rate_hz
    nyq = rate / 2.0
    freq, amp, fl = check_peaks(peaks_freq_hz, peaks_amplitude, floor, nyq)
    bw = check_positive(bin_width_hz, "bin_width_hz", unit=" Hz")
    window = check_one_of(window, "window", [*sorted(WINDOWS), "unknown"])
    lvl_tol = check_positive(level_tolerance_db, "level_tolerance_db", unit=" dB")
    n_alt = _check_max_alternatives(max_alternatives)
    _check_tones(tones)
    fams = _check_families(families, freq.size)
    speed_tol = check_range(speed_tolerance_pct, "speed_tolerance_pct", 0, 50)

    peaks = _Peaks(
        freq=freq,
        seen_db=_db(amp),
        floor_db=_db(fl),
        top_db=float(np.max(_db(amp))) if amp.size else 0.0,
        tol=frequency_tolerance_hz(bw, window),
        lvl_tol=lvl_tol,
    )
    edge = rate / SPAN_DIVISOR
    notes: tuple[str, ...] = tuple(chain.validate())
    band = check_band_hz(band_hz, (0.0, edge))

    rows = _Rows(*([] for _ in range(11)))
    if tones is not None and len(tones):
        _add_known_tones(rows, peaks, tones, chain, speed_tol)
    for fi, fam in enumerate(fams):  # a few families, each vectorised over its members
        _add_family(rows, peaks, fi, fam, chain)
    beyond_span = freq > edge
    _add_mirrors(rows, peaks, np.flatnonzero(beyond_span), chain, edge)

    kept, kept_rank, r_peak, r_kind, r_zone, r_conf = _rank(rows, freq.size, n_alt)
    stated = _calibrated(rows, kept, kept_rank, r_peak, r_kind, r_conf, freq.size, tones is None)
    ctx = SentenceContext(
        freq={int(i): format_hz(freq[i]) for i in np.unique(r_peak[kept])},
        seen_db={int(i): format_db(peaks.seen_db[i]) for i in np.unique(r_peak[kept])},
        floor_db=peaks.floor_db.tolist(),
        tones=tones, families=fams, edge=edge, nyq=nyq, rate=rate,
    )  # fmt: skip
    alternatives = _sentences(ctx, rows, kept, r_peak, r_kind, r_zone, r_conf, stated, freq.size)
    return assemble(freq, amp, alternatives, beyond_span, band, peaks.tol, edge, notes, ctx)


def _check_max_alternatives(max_alternatives: int) -> int:
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
    return int(max_alternatives)


def _check_tones(tones: object) -> None:
    if tones is not None and not isinstance(tones, ToneSet):
        raise InputError(
            f"tones must be a ToneSet or None, got {type(tones).__name__}",
            field="tones",
            code="bad_type",
        )


def _check_families(families: Sequence[Family] | None, n_peaks: int) -> list[Family]:
    fams = list(families or [])
    for i, fam in enumerate(fams):
        if not isinstance(fam, Family):
            raise InputError(
                f"families[{i}] is a {type(fam).__name__}; expected a Family",
                field=f"families[{i}]",
                code="bad_type",
            )
        bad = [m.peak for m in fam.members if not 0 <= m.peak < n_peaks]
        if bad:
            raise InputError(
                f"families[{i}] refers to peak {bad[0]}; there are {n_peaks} peaks",
                field=f"families[{i}]",
                code="out_of_range",
            )
    return fams


@dataclass(frozen=True)
class _Peaks:
    """The checked peaks and the tolerances every candidate is scored with."""

    freq: FloatArray  # Hz
    seen_db: FloatArray  # dB re one unit
    floor_db: FloatArray  # dB re one unit
    top_db: float  # strongest peak, dB
    tol: float  # frequency tolerance, Hz
    lvl_tol: float  # level tolerance, dB


def _add_known_tones(
    rows: _Rows, peaks: _Peaks, tones: ToneSet, chain: Chain, speed_tol: float
) -> None:
    """Candidates from known tones: pairs within tolerance of each folded interval."""
    freq = peaks.freq
    resp, lo, hi, level = _tone_intervals(tones, chain, speed_tol)
    pk, tn = _interval_pairs(freq, lo, hi, peaks.tol)
    dist = np.maximum(np.maximum(lo[tn] - freq[pk], freq[pk] - hi[tn]), 0.0)
    zone = resp.zone[tn]
    harm = tones.harmonic[tn]
    has_family = (tones.family[tn] != "") & np.isfinite(harm)
    kind = np.where(
        zone > 1, KIND_ALIAS, np.where(has_family & (harm != 1.0), KIND_FAMILY, KIND_DIRECT)
    )
    atten = resp.attenuation_db[tn]
    predicted = level[tn]
    conf = _freq_score(dist, peaks.tol) * _level_score(
        peaks.seen_db[pk], predicted, peaks.floor_db[pk], atten, peaks.top_db, peaks.lvl_tol
    )
    _prefer_strongest_carrier(conf, pk, tn, dist, tones, chain, peaks.tol)
    rows.add(
        peak=pk, kind=kind, tone=tn, family=np.int64(-1), harmonic=harm,
        true_hz=resp.freq_hz[tn], zone=zone, atten=atten, predicted=predicted,
        error=dist, conf=conf,
    )  # fmt: skip


def _prefer_strongest_carrier(
    conf: FloatArray,
    pk: IntArray,
    tn: IntArray,
    dist: FloatArray,
    tones: ToneSet,
    chain: Chain,
    tol: float,
) -> None:
    """Demote, in place, PWM sideband candidates of a carrier multiple the chain leaves
    far weaker than another multiple whose sidebands fold onto the same peak
    (:func:`service.core.sidebands.prefer_strongest_carrier`)."""
    c_hz, c_amp = pwm_carriers(tones)
    sb = np.isfinite(c_hz[tn])
    if not np.any(sb):
        return
    lvl = carrier_levels_db(chain.evaluate(c_hz[tn][sb]).attenuation_db, c_amp[tn][sb])
    conf[sb] *= prefer_strongest_carrier(pk[sb], dist[sb], tol, lvl).weight


def _add_family(rows: _Rows, peaks: _Peaks, fi: int, fam: Family, chain: Chain) -> None:
    """Candidates from one blind family: each member explains its own peak."""
    if not fam.members:
        return
    pk = np.array([m.peak for m in fam.members], dtype=np.int64)
    k = np.array([m.harmonic for m in fam.members], dtype=np.float64)
    true = np.array([m.true_hz for m in fam.members], dtype=np.float64)
    folded = fold_unchecked(k * fam.fundamental_hz, chain.final_rate_hz)
    dist = np.abs(folded - peaks.freq[pk])
    tol_k = peaks.tol + SIGMA_MULTIPLE * k * fam.uncertainty_hz
    resp_f = chain.evaluate(true)
    zone = resp_f.zone
    kind = np.where(zone > 1, KIND_ALIAS, KIND_FAMILY)
    atten = resp_f.attenuation_db
    level = UNKNOWN_LEVEL_SCORE * _excess_penalty(
        peaks.seen_db[pk], atten, peaks.top_db, peaks.lvl_tol
    )
    conf = _freq_score(dist, tol_k) * level * _family_factor(fam.p_value)
    conf = np.where(dist <= tol_k, conf, 0.0)
    rows.add(
        peak=pk, kind=kind, tone=np.int64(-1), family=np.int64(fi), harmonic=k,
        true_hz=true, zone=zone, atten=atten, predicted=np.float64(np.nan),
        error=dist, conf=conf,
    )  # fmt: skip


def _add_mirrors(rows: _Rows, peaks: _Peaks, up: IntArray, chain: Chain, edge: float) -> None:
    """Transition-band mirror candidates for the peaks above the analysed span."""
    if not up.size:
        return
    rate = chain.final_rate_hz
    nyq = rate / 2.0
    image = rate - peaks.freq[up]
    resp_m = chain.evaluate(image)
    position = (peaks.freq[up] - edge) / max(nyq - edge, 1e-300)
    low, high = MIRROR_CONFIDENCE
    conf = (low + (high - low) * np.clip(position, 0.0, 1.0)) * _excess_penalty(
        peaks.seen_db[up], resp_m.attenuation_db, peaks.top_db, peaks.lvl_tol
    )
    rows.add(
        peak=up, kind=np.int64(KIND_MIRROR), tone=np.int64(-1), family=np.int64(-1),
        harmonic=np.float64(np.nan), true_hz=image, zone=resp_m.zone,
        atten=resp_m.attenuation_db, predicted=np.float64(np.nan),
        error=np.zeros(up.size), conf=conf,
    )  # fmt: skip


def _rank(
    rows: _Rows, n_peaks: int, n_alt: int
) -> tuple[IntArray, IntArray, IntArray, IntArray, IntArray, FloatArray]:
    """Rows kept (best ``n_alt`` per peak), their rank within their peak (0 = best), and
    the peak, kind, zone and raw confidence columns.

    Best first per peak; on equal confidence the simpler kind, then the lower zone.
    """
    r_peak: IntArray = rows.cat("peak", np.int64).astype(np.int64)
    r_kind: IntArray = rows.cat("kind", np.int64).astype(np.int64)
    r_zone: IntArray = rows.cat("zone", np.int64).astype(np.int64)
    r_conf: FloatArray = np.minimum(rows.cat("conf", np.float64).astype(np.float64), MAX_CONFIDENCE)
    order = np.lexsort((r_zone, r_kind, -r_conf, r_peak))
    s_peak = r_peak[order]
    starts = np.searchsorted(s_peak, np.arange(n_peaks), side="left")
    rank = np.arange(order.size) - starts[s_peak] if order.size else np.empty(0, np.int64)
    kept: IntArray = order[rank < n_alt].astype(np.int64)
    kept_rank: IntArray = rank[rank < n_alt].astype(np.int64)
    return kept, kept_rank, r_peak, r_kind, r_zone, r_conf


def _calibrated(
    rows: _Rows,
    kept: IntArray,
    kept_rank: IntArray,
    r_peak: IntArray,
    r_kind: IntArray,
    r_conf: FloatArray,
    n_peaks: int,
    no_sources: bool,
) -> FloatArray:
    """Calibrated confidence of every row (NaN for rows not kept).

    Ranking, the :data:`MIN_CONFIDENCE` gate and :data:`TIE_RATIO` stay on the raw
    scores; only what is stated is calibrated (:func:`service.core.calibration.calibrate`):
    a peak's best explanation through the verdicts' tables when it passes the gate, every
    other kept explanation (ranked below, or of a peak left unexplained) through the
    alternatives' tables. ``blind``: a member of a blind family, or a mirror found
    without sources.
    """
    out: FloatArray = np.full(r_conf.size, np.nan)
    if not kept.size:
        return out
    best = np.zeros(n_peaks)
    top = kept[kept_rank == 0]
    best[r_peak[top]] = r_conf[top]
    chosen = (kept_rank == 0) & (best[r_peak[kept]] >= MIN_CONFIDENCE)
    fam: IntArray = rows.cat("family", np.int64).astype(np.int64)[kept]
    kinds = np.asarray(KINDS, dtype=object)[r_kind[kept]]
    out[kept] = calibrate(kinds, r_conf[kept], no_sources | (fam >= 0), alternative=~chosen)
    return out


def _sentences(
    ctx: SentenceContext,
    rows: _Rows,
    kept: IntArray,
    r_peak: IntArray,
    r_kind: IntArray,
    r_zone: IntArray,
    r_conf: FloatArray,
    stated: FloatArray,
    n_peaks: int,
) -> list[list[Explanation]]:
    """Only the kept rows become explanations with sentences, as Python scalars."""
    table = {
        name: rows.cat(name, dt)
        for name, dt in (
            ("tone", np.int64), ("family", np.int64), ("harmonic", np.float64),
            ("true_hz", np.float64), ("atten", np.float64), ("predicted", np.float64),
            ("error", np.float64),
        )
    }  # fmt: skip
    alternatives: list[list[Explanation]] = [[] for _ in range(n_peaks)]
    cols = [
        r_peak[kept].tolist(), r_kind[kept].tolist(), stated[kept].tolist(),
        r_conf[kept].tolist(),
        *(table[name][kept].tolist() for name in (
            "tone", "family", "harmonic", "true_hz")),
        r_zone[kept].tolist(),
        *(table[name][kept].tolist() for name in ("atten", "predicted", "error")),
    ]  # fmt: skip
    for args in zip(*cols, strict=True):
        alternatives[args[0]].append(explanation_for(ctx, *args))
    return alternatives
