"""Clipping in a time record.

A converter or an amplifier driven past its range holds the output at its limit for as
long as the input stays beyond it: the record shows runs of consecutive samples at one
value at the top and/or bottom of its range. :func:`detect_clipping` finds those runs
and says whether the record is clipped; which spectrum peaks the clipping then explains
(harmonics and intermodulation products, folded) is :mod:`.clipping_products`.

Everything is vectorised over samples.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .errors import InputError

__all__ = [
    "BAND_FRACTION",
    "CLIPPED_FRACTION",
    "MIN_RUN",
    "PILEUP_CLIPPED",
    "PILEUP_SUSPECTED",
    "SUSPECTED_FRACTION",
    "SYMMETRY_TOLERANCE",
    "ClippingReport",
    "detect_clipping",
]

FloatArray = NDArray[np.float64]
BoolArray = NDArray[np.bool_]

#: A clip is a run of at least this many consecutive samples at a clip level: a single
#: sample at the extreme is what every unclipped record has.
MIN_RUN = 2
#: Fraction of all samples (in runs) from which the record is called ``"clipped"``
#: (0.1 %): at that share the clipping products of a strong tone reach roughly
#: −40 dB re the tone (computed with :func:`clipped_sine_harmonics`), i.e. visible peaks.
CLIPPED_FRACTION = 1e-3
#: ... and from which it is ``"suspected"`` (0.01 %): a few short clips, products near
#: −60 dB re the tone, only visible in a clean spectrum.
SUSPECTED_FRACTION = 1e-4
#: Width of the band just inside a clip level, as a fraction of the record's
#: peak-to-peak range (1 %), with which the pile-up at the level is compared.
BAND_FRACTION = 0.01
#: Pile-up ratio (samples on the level ÷ samples in the band just inside it) from which a
#: level counts as a clip for ``"clipped"``. An unclipped sine, even finely quantised and
#: heavily oversampled so that a few samples share its top code, has a ratio of a few
#: hundredths (its samples near the crest spread over the band); a sine clipped 1 % below
#: its crest already has a ratio above 1 (the flattened tops all sit on one value).
PILEUP_CLIPPED = 1.0
#: ... and for ``"suspected"``.
PILEUP_SUSPECTED = 0.25
#: The clipping counts as symmetric when both polarities clip, the two levels are this
#: close to symmetric about the record's mean (fraction of the peak-to-peak range) and
#: the two clipped fractions are within a factor of 2 of each other.
SYMMETRY_TOLERANCE = 0.05
#: Default relative tolerance on a clip level: samples within this fraction of the
#: record's peak-to-peak range of the level count as on it (round-off after scaling;
#: below one code of a 24-bit converter is 6e-8 of full range, so this is about 16 codes
#: at 24 bits and far less than a code at 16 bits).
DEFAULT_RELATIVE_TOLERANCE = 1e-6


# --------------------------------------------------------------------------- checks


def _check_samples(samples: ArrayLike) -> FloatArray:
    x = np.asarray(samples)
    if x.dtype.kind not in "biuf":
        raise InputError(
            f"samples must be numbers, got dtype {x.dtype}", field="samples", code="not_numeric"
        )
    x = x.astype(np.float64, copy=False)
    if x.ndim != 1:
        raise InputError(
            f"samples must be a 1-D record; got shape {x.shape}",
            field="samples",
            value=list(x.shape),
            code="bad_shape",
        )
    if x.size < 3:
        raise InputError(
            f"samples has {x.size} values; at least 3 are needed",
            field="samples",
            value=x.size,
            limit=3,
            code="too_short",
        )
    if not np.all(np.isfinite(x)):
        i = int(np.flatnonzero(~np.isfinite(x))[0])
        raise InputError(
            f"samples[{i}]={x[i]!r} is not finite; drop or repair it first",
            field=f"samples[{i}]",
            value=str(x[i]),
            code="not_finite",
        )
    return x


def _check_positive(value: float, name: str, unit: str = "") -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name}={value!r} must be a number", field=name, code="invalid") from None
    if not np.isfinite(v) or v <= 0:
        raise InputError(
            f"{name}={value!r} must be a finite number > 0{unit}",
            field=name,
            value=v,
            limit=0,
            code="not_positive",
        )
    return v


def _check_int(value: int, name: str, low: int, high: int) -> int:
    if isinstance(value, bool) or int(value) != value or not low <= int(value) <= high:
        raise InputError(
            f"{name}={value!r} must be a whole number from {low} to {high}",
            field=name,
            value=value,
            limit=[low, high],
            code="out_of_range",
        )
    return int(value)


def _check_freqs(values: ArrayLike, name: str) -> FloatArray:
    f = np.atleast_1d(np.asarray(values, dtype=np.float64))
    if f.ndim != 1:
        raise InputError(f"{name} must be a 1-D list of frequencies", field=name, code="bad_shape")
    bad = ~np.isfinite(f) | (f < 0)
    if np.any(bad):
        i = int(np.flatnonzero(bad)[0])
        raise InputError(
            f"{name}[{i}]={f[i]!r} must be a finite frequency >= 0 Hz",
            field=f"{name}[{i}]",
            value=float(f[i]) if np.isfinite(f[i]) else str(f[i]),
            code="invalid_frequency",
        )
    return f


# --------------------------------------------------------------------------- detection


@dataclass(frozen=True)
class ClippingReport:
    """What :func:`detect_clipping` found.

    Attributes
    ----------
    verdict : str
        ``"none"``, ``"suspected"`` or ``"clipped"``.
    fraction : float
        Fraction of all samples that sit in clip runs (0 to 1).
    clipped_samples : int
        Number of samples in clip runs (both polarities).
    runs : int
        Number of clip runs (both polarities).
    longest_run : int
        Longest clip run, samples.
    high_level, low_level : float
        The clip levels examined (record maximum/minimum, or the stated full scale),
        unit of the samples.
    high_fraction, low_fraction : float
        Fraction of all samples in runs at each level.
    high_pileup, low_pileup : float
        Samples on each level ÷ samples in the band of :data:`BAND_FRACTION` of the range
        just inside it (``inf`` when the band is empty and the level is not).
    high_clipped, low_clipped : bool
        That polarity's runs pass the thresholds of the verdict.
    symmetric : bool
        Both polarities clip about equally (see :data:`SYMMETRY_TOLERANCE`): expect odd
        harmonics only; otherwise even harmonics appear too.
    levels_from : str
        ``"record"`` (extremes of the record) or ``"full_scale"``.
    sentence : str
        One plain sentence for the summary.
    """

    verdict: str
    fraction: float
    clipped_samples: int
    runs: int
    longest_run: int
    high_level: float
    low_level: float
    high_fraction: float
    low_fraction: float
    high_pileup: float
    low_pileup: float
    high_clipped: bool
    low_clipped: bool
    symmetric: bool
    levels_from: str
    sentence: str


def _runs(mask: BoolArray, min_run: int) -> tuple[int, int, int]:
    """(samples in runs ≥ min_run, number of such runs, longest run) of True in mask."""
    padded = np.concatenate(([False], mask, [False])).astype(np.int8)
    edges = np.diff(padded)
    starts = np.flatnonzero(edges == 1)
    ends = np.flatnonzero(edges == -1)
    lengths = ends - starts
    long_ = lengths[lengths >= min_run]
    return int(long_.sum()), int(long_.size), int(lengths.max()) if lengths.size else 0


def detect_clipping(
    samples: ArrayLike,
    full_scale: float | tuple[float, float] | None = None,
    tolerance: float | None = None,
    min_run: int = MIN_RUN,
) -> ClippingReport:
    """Detect clipping: runs of consecutive samples held at a clip level, both polarities.

    Parameters
    ----------
    samples : array_like
        1-D time record, any unit (counts, V, g ...), at least 3 finite values.
    full_scale : float or (float, float), optional
        The converter's or amplifier's limits in the unit of the samples: one positive
        value ``F`` for ``±F``, or ``(low, high)``. Samples at or beyond a limit (within
        ``tolerance``) count as on it. Default: the record's own minimum and maximum.
    tolerance : float, optional
        How close to a level a sample must be to count as on it, unit of the samples
        (>= 0). Default :data:`DEFAULT_RELATIVE_TOLERANCE` × peak-to-peak range.
    min_run : int
        Shortest run counted as a clip, samples (1 to 1000); default :data:`MIN_RUN`.
        A strong tone within a factor 3 of the Nyquist frequency has only a few samples
        per cycle, so its clipped crests are often single samples: give 1 for such a
        record (the pile-up test then carries the decision alone).

    Returns
    -------
    ClippingReport

    Notes
    -----
    A level counts as clipped when the samples in runs of ``>= min_run`` on it reach
    :data:`SUSPECTED_FRACTION` (0.01 %) of the record and they pile up on it: the
    samples on the level outnumber those in the band of :data:`BAND_FRACTION` (1 %) of
    the range (at least two codes of a quantised record) just inside it by the ratio
    :data:`PILEUP_SUSPECTED` (0.25). The record is
    ``"clipped"`` when the clipped fraction (both levels) reaches
    :data:`CLIPPED_FRACTION` (0.1 %) and a level's pile-up ratio reaches
    :data:`PILEUP_CLIPPED` (1); ``"suspected"`` when a level passes the lower pair of
    thresholds; otherwise ``"none"``. The pile-up test keeps an unclipped, finely
    quantised, heavily oversampled sine (a few samples share its top code) from being
    flagged: near the crest its samples spread over the band below the top.

    Clipping after which the record was filtered (a digital decimation filter after a
    saturated modulator) no longer shows flat runs and is not detected here.
    """
    x = _check_samples(samples)
    run = _check_int(min_run, "min_run", 1, 1000)
    lo_rec, hi_rec = float(x.min()), float(x.max())
    span = hi_rec - lo_rec
    if tolerance is None:
        tol = DEFAULT_RELATIVE_TOLERANCE * span
    else:
        tol = float(tolerance)
        if not np.isfinite(tol) or tol < 0:
            raise InputError(
                f"tolerance={tolerance!r} must be a finite number >= 0",
                field="tolerance",
                value=tol if np.isfinite(tol) else str(tol),
                limit=0,
                code="negative",
            )
    if full_scale is None:
        low, high, levels_from = lo_rec, hi_rec, "record"
    else:
        if np.ndim(full_scale) == 0:
            f = _check_positive(float(full_scale), "full_scale")  # type: ignore[arg-type]
            low, high = -f, f
        else:
            try:
                low, high = (float(v) for v in full_scale)  # type: ignore[union-attr]
            except (TypeError, ValueError):
                raise InputError(
                    f"full_scale={full_scale!r} must be one number F (for ±F) or two (low, high)",
                    field="full_scale",
                    code="invalid",
                ) from None
            if not (np.isfinite(low) and np.isfinite(high)) or high <= low:
                raise InputError(
                    f"full_scale={[low, high]!r} must be two finite numbers with low < high",
                    field="full_scale",
                    value=[low, high],
                    code="invalid",
                )
        levels_from = "full_scale"
        span = max(span, high - low)

    n = x.size
    if span == 0.0:
        text = "the record is constant: no signal, nothing to clip"
        return _report("none", 0, 0, 0, n, high, low, (0.0, 0.0), (0.0, 0.0), (False, False),
                       False, levels_from, text)  # fmt: skip
    # The band must be wider than a code of a quantised record, or it would be empty.
    code = _code_step(x, low, high, span)
    band = max(BAND_FRACTION * span, 2.0 * code)
    on_high = x >= high - tol
    on_low = x <= low + tol
    in_high_band = (x < high - tol) & (x >= high - tol - band)
    in_low_band = (x > low + tol) & (x <= low + tol + band)
    hi_n, hi_runs, hi_long = _runs(on_high, run)
    lo_n, lo_runs, lo_long = _runs(on_low, run)
    pile = (_pileup(hi_n, int(in_high_band.sum())), _pileup(lo_n, int(in_low_band.sum())))
    frac = (hi_n / n, lo_n / n)
    suspect = tuple(
        fr >= SUSPECTED_FRACTION and pl >= PILEUP_SUSPECTED
        for fr, pl in zip(frac, pile, strict=True)
    )
    total = hi_n + lo_n
    fraction = total / n
    strong = any(s and pl >= PILEUP_CLIPPED for s, pl in zip(suspect, pile, strict=True))
    if fraction >= CLIPPED_FRACTION and strong:
        verdict = "clipped"
    elif any(suspect):
        verdict = "suspected"
    else:
        verdict = "none"
    mean = float(np.mean(x))
    symmetric = bool(
        all(suspect)
        and abs((high - mean) + (low - mean)) <= SYMMETRY_TOLERANCE * span
        and max(frac) <= 2.0 * min(frac)
    )
    where = "full scale" if levels_from == "full_scale" else "the record's extremes"
    if verdict == "none":
        sentence = f"no clipping found: no runs of {run} or more samples pile up at {where}"
    else:
        sides = " and ".join(name for name, s in zip(("top", "bottom"), suspect, strict=True) if s)
        sentence = (
            f"{'clipping' if verdict == 'clipped' else 'possible clipping'}: "
            f"{100 * fraction:.2g} % of the samples sit in {hi_runs + lo_runs} runs at "
            f"{where} ({sides}); harmonics and intermodulation products of the strong "
            "tones are expected in the spectrum"
            + ("" if not symmetric else " (symmetric clipping: mainly odd harmonics)")
        )
    return _report(verdict, total, hi_runs + lo_runs, max(hi_long, lo_long) if total else 0, n,
                   high, low, frac, pile, suspect, symmetric, levels_from, sentence)  # fmt: skip


def _code_step(x: FloatArray, low: float, high: float, span: float) -> float:
    """The smallest step between distinct sample values near the clip levels: the
    quantiser's code. Sorting only the samples within a tenth of the span of either
    level keeps a 10^7-sample record cheap; with fewer than 8 distinct values there
    (no sample near a full scale, or a very coarse quantiser) the record's own extremes,
    then up to 2**20 evenly spaced samples of it, decide."""
    edge = 0.1 * span
    values = np.unique(x[(x >= high - edge) | (x <= low + edge)])
    if values.size < 8:
        lo, hi = float(x.min()), float(x.max())
        edge = 0.1 * (hi - lo)
        values = np.unique(x[(x >= hi - edge) | (x <= lo + edge)])
    if values.size < 8:
        values = np.unique(x[:: max(1, x.size >> 20)])
    steps = np.diff(values)
    return float(steps.min()) if steps.size else 0.0


def _pileup(on_level: int, in_band: int) -> float:
    if on_level == 0:
        return 0.0
    return float("inf") if in_band == 0 else on_level / in_band


def _report(
    verdict: str,
    total: int,
    runs: int,
    longest: int,
    n: int,
    high: float,
    low: float,
    frac: tuple[float, float],
    pile: tuple[float, float],
    suspect: tuple[bool, ...],
    symmetric: bool,
    levels_from: str,
    sentence: str,
) -> ClippingReport:
    return ClippingReport(
        verdict=verdict,
        fraction=total / n,
        clipped_samples=total,
        runs=runs,
        longest_run=longest,
        high_level=high,
        low_level=low,
        high_fraction=frac[0],
        low_fraction=frac[1],
        high_pileup=pile[0],
        low_pileup=pile[1],
        high_clipped=bool(suspect[0]),
        low_clipped=bool(suspect[1]),
        symmetric=symmetric,
        levels_from=levels_from,
        sentence=sentence,
    )


# --------------------------------------------------------------------------- levels
