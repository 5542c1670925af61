"""Averaged amplitude spectra, robust noise floor and peak finding.

The windows themselves live in :mod:`service.core.windows` (``WINDOWS`` and
:func:`window_figures` are re-exported here).

Everything here is vectorised: arrays in, arrays out, no Python loop over bins. The only
loop is over blocks of frames in :func:`amplitude_spectrum`, which bounds memory.

Conventions
-----------
* Amplitude spectra are one-sided and read the **peak** amplitude of a sine: a sine of
  amplitude ``A`` centred on a bin reads ``A`` there (coherent-gain correction). DC and
  the Nyquist bin read the value of a constant / alternating component.
* Analysis lines follow the common practice ``lines = nfft / 2.56``: the analysed
  span is ``sample_rate_hz / 2.56`` and ``bin width = span / lines = sample_rate_hz / nfft``.

References
----------
.. [1] F. J. Harris, "On the use of windows for harmonic analysis with the discrete
   Fourier transform", *Proc. IEEE* 66(1), 1978, pp. 51-83.
.. [2] P. D. Welch, "The use of fast Fourier transform for the estimation of power
   spectra", *IEEE Trans. Audio Electroacoust.* 15(2), 1967, pp. 70-73.
.. [3] J. O. Smith, *Spectral Audio Signal Processing*, W3K Publishing, 2011,
   "Quadratic interpolation of spectral peaks".
.. [4] T. Grandke, "Interpolation algorithms for discrete Fourier transforms of weighted
   signals", *IEEE Trans. Instrum. Meas.* 32(2), 1983, pp. 350-355.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.fft
import scipy.ndimage
import scipy.signal
from numpy.typing import ArrayLike, NDArray

from service.core.checks import (
    check_finite_array,
    check_int,
    check_one_of,
    check_positive,
    check_range,
    refuse_first,
)
from service.core.errors import InputError

from .analysis_lines import SPAN_DIVISOR
from .windows import WINDOWS, kernel_tables, window_samples

__all__ = [
    "USUAL_LINES",
    "Peaks",
    "Spectrum",
    "amplitude_spectrum",
    "bad_negative_cells",
    "detect_unit",
    "few_bad_cells",
    "find_peaks",
    "noise_floor",
    "to_linear",
]

FloatArray = NDArray[np.float64]
BoolArray = NDArray[np.bool_]


#: The usual numbers of analysis lines, 25·2**k; for these nfft = 2.56·lines exactly.
USUAL_LINES: tuple[int, ...] = tuple(25 * 2**k for k in range(19))  # 25 ... 6,553,600


_MAX_NFFT = 2**24


_DEFAULT_MIN_AVERAGES = 8


_CHUNK_SAMPLES = 2**21  # samples per block of frames handed to the FFT at once


def _tiny(amplitude: FloatArray) -> float:
    """Floor for zeros before taking logarithms: 240 dB below the largest value."""
    top = float(np.max(amplitude)) if amplitude.size else 0.0
    return max(top * 1e-12, float(np.finfo(np.float64).tiny))


def _db(amplitude: FloatArray, tiny: float) -> FloatArray:
    out: FloatArray = 20.0 * np.log10(np.maximum(amplitude, tiny))
    return out


@dataclass(frozen=True, eq=False)
class Spectrum:
    """An averaged one-sided amplitude spectrum.

    Attributes
    ----------
    freq_hz : ndarray
        Bin centre frequencies from 0 to sample_rate_hz/2, Hz (nfft/2 + 1 values).
    amplitude : ndarray
        Peak amplitude per bin, in the unit of the samples (a sine of amplitude A on a
        bin reads A).
    sample_rate_hz : float
        Sample rate, Hz.
    bin_width_hz : float
        sample_rate_hz / nfft, Hz.
    lines : int
        Analysis lines: floor(nfft / 2.56); equals the requested value for the usual
        values (25·2**k, e.g. 400, 800, 1600, 3200, 6400).
    span_hz : float
        Analysed span sample_rate_hz / 2.56, Hz; bins above it are returned too.
    window : str
        Window name.
    averages : int
        Number of blocks averaged (power averaging).
    nfft : int
        FFT block length, samples.
    overlap_pct : float
        Overlap between successive blocks, percent of nfft (as realised: integer samples).
    """

    freq_hz: FloatArray
    amplitude: FloatArray
    sample_rate_hz: float
    bin_width_hz: float
    lines: int
    span_hz: float
    window: str
    averages: int
    nfft: int
    overlap_pct: float


def _nfft_for_lines(lines: int) -> int:
    target = SPAN_DIVISOR * lines
    nfft = 1 << max(0, int(np.ceil(np.log2(target - 1e-9))))
    return nfft


def _count_blocks(n_samples: int, nfft: int, step: int) -> int:
    return 0 if n_samples < nfft else (n_samples - nfft) // step + 1


def _noverlap(nfft: int, overlap_pct: float) -> int:
    return min(round(nfft * overlap_pct / 100.0), nfft - 1)


def amplitude_spectrum(
    samples: ArrayLike,
    sample_rate_hz: float,
    lines: int | None = None,
    window: str = "hann",
    overlap_pct: float = 50.0,
    averages: int | None = None,
) -> Spectrum:
    """Averaged one-sided amplitude spectrum of a time record (Welch's method).

    Parameters
    ----------
    samples : array_like
        1-D time record, any unit (g, m/s², V, Pa...). float32 input is transformed in
        single precision (dynamic range about 140 dB), float64 in double precision.
    sample_rate_hz : float
        Sample rate, Hz, > 0.
    lines : int, optional
        Analysis lines (1 to 6,553,600). nfft = 2.56·lines when that is a power of two
        (the usual values 25·2**k: 100, 200, 400, 800, 1600, 3200, 6400, ...); otherwise
        nfft is the next power of two above 2.56·lines. ``None`` picks the largest usual
        value that gives at least ``averages`` blocks (8 when ``averages`` is None), or
        failing that the largest usual value whose block fits the record.
    window : str
        One of :data:`WINDOWS` (periodic windows, Harris [1]_).
    overlap_pct : float
        Overlap of successive blocks, percent of nfft, 0 to 95.
    averages : int, optional
        Number of blocks to average (the first ones). ``None`` uses every block that fits.

    Returns
    -------
    Spectrum
        Bins from 0 Hz to sample_rate_hz/2 with the reporting numbers.

    Notes
    -----
    The block spectra ``X_m[k]`` are power-averaged (linear RMS averaging) [2]_:
    ``amplitude[k] = c_k · sqrt(mean_m |X_m[k]|²) / Σw`` with ``c_k = 2`` except at DC
    and the Nyquist bin (``c_k = 1``). Dividing by ``Σw`` is the coherent-gain
    correction, so a bin-centred sine of amplitude A reads A [1]_. This equals
    ``sqrt(2·P)`` for ``P`` from ``scipy.signal.welch(..., scaling="spectrum",
    detrend=False)``. No detrending: a DC offset shows at 0 Hz. Frames are transformed
    in blocks of about 2**21 samples so memory stays a small multiple of the input.

    References
    ----------
    .. [1] Harris, *Proc. IEEE* 66(1), 1978.
    .. [2] Welch, *IEEE Trans. Audio Electroacoust.* 15(2), 1967.
    """
    x = np.asarray(samples)
    if x.ndim != 1:
        raise InputError(
            f"samples must be 1-D; got shape {x.shape}", field="samples", code="bad_type"
        )
    if x.dtype not in (np.float32, np.float64):
        x = x.astype(np.float64)
    fs = check_positive(sample_rate_hz, "sample_rate_hz", unit=" Hz")
    window = check_one_of(window, "window", sorted(WINDOWS))
    overlap_pct = check_range(overlap_pct, "overlap_pct", 0.0, 95.0, unit=" %")
    n = x.size
    if averages is not None:
        averages = check_int(
            averages, "averages", 1, 1_000_000, type_text="a whole number", integral_floats=True
        )
    want = averages if averages is not None else _DEFAULT_MIN_AVERAGES

    if lines is None:
        candidates = [(ln, SPAN_DIVISOR * ln) for ln in USUAL_LINES]
        fits = [
            (ln, int(nf))
            for ln, nf in candidates
            if nf <= min(n, _MAX_NFFT)
            and _count_blocks(n, int(nf), int(nf) - _noverlap(int(nf), overlap_pct)) >= 1
        ]
        if not fits:
            raise InputError(
                f"samples has {n} values; at least {int(SPAN_DIVISOR * USUAL_LINES[0])} "
                "are needed for the smallest block",
                field="samples",
                code="empty",
            )
        enough = [
            (ln, nf)
            for ln, nf in fits
            if _count_blocks(n, nf, nf - _noverlap(nf, overlap_pct)) >= want
        ]
        lines_req, nfft = (enough or fits)[-1]
    else:
        lines_req = check_int(
            lines, "lines", 1, USUAL_LINES[-1], type_text="a whole number", integral_floats=True
        )
        nfft = _nfft_for_lines(lines_req)
        if nfft > n:
            raise InputError(
                f"lines={lines_req} needs blocks of {nfft} samples; the record has only {n}",
                field="lines",
                code="invalid",
            )
    noverlap = _noverlap(nfft, overlap_pct)
    step = nfft - noverlap
    available = _count_blocks(n, nfft, step)
    if averages is not None and averages > available:
        raise InputError(
            f"averages={averages} needs {nfft + (averages - 1) * step} samples with "
            f"nfft={nfft} and {overlap_pct:g} % overlap; the record has {n} "
            f"(at most {available} averages)",
            field="averages",
            code="above_limit",
        )
    n_avg = averages if averages is not None else available
    x = x[: nfft + (n_avg - 1) * step]
    if not np.all(np.isfinite(x)):
        i = int(np.argmax(~np.isfinite(x)))
        raise InputError(
            f"samples[{i}]={float(x[i])!r}; every sample must be finite",
            field=f"samples[{i}]",
            code="not_finite",
            value=float(x[i]),
        )

    w64 = window_samples(window, nfft)
    w = w64.astype(x.dtype)
    frames = np.lib.stride_tricks.sliding_window_view(x, nfft)[::step]
    per_chunk = max(1, _CHUNK_SAMPLES // nfft)
    acc = np.zeros(nfft // 2 + 1, dtype=np.float64)
    for start in range(0, n_avg, per_chunk):  # loop over blocks of frames, not bins
        spec = scipy.fft.rfft(frames[start : start + per_chunk] * w, axis=1, workers=-1)
        acc += np.sum(spec.real * spec.real + spec.imag * spec.imag, axis=0, dtype=np.float64)
        del spec
    amp = np.sqrt(acc / n_avg) * (2.0 / float(np.sum(w64)))
    amp[0] *= 0.5
    if nfft % 2 == 0:
        amp[-1] *= 0.5
    freq = np.arange(nfft // 2 + 1, dtype=np.float64) * (fs / nfft)
    for arr in (freq, amp):
        arr.flags.writeable = False
    return Spectrum(
        freq_hz=freq,
        amplitude=amp,
        sample_rate_hz=fs,
        bin_width_hz=fs / nfft,
        lines=int(nfft / SPAN_DIVISOR),
        span_hz=fs / SPAN_DIVISOR,
        window=window,
        averages=int(n_avg),
        nfft=int(nfft),
        overlap_pct=100.0 * noverlap / nfft,
    )


def noise_floor(amplitude: ArrayLike, width_bins: int | None = None) -> FloatArray:
    """Robust noise floor of an amplitude spectrum: running median in the log domain.

    Parameters
    ----------
    amplitude : array_like
        Linear amplitude per bin (any unit), >= 0.
    width_bins : int, optional
        Width of the running window, bins (odd; an even value is rounded up), 3 to
        1,000,001. Default: len/64 clipped to 31...1025 bins (the whole spectrum when it
        is shorter than 31 bins). Choose it several times wider than a peak's main lobe
        and narrower than the scale over which the floor bends.

    Returns
    -------
    ndarray
        Floor per bin, linear amplitude in the unit of ``amplitude``.

    Notes
    -----
    The median of ``20·log10(amplitude)`` over the window; zeros are first raised to
    240 dB below the largest value. A median ignores tones as long as they fill less
    than half the window, which a mean would not. Edges are mirrored. For a noise-only
    power-averaged spectrum the median sits slightly below the mean level (by about
    1.6 dB for a single average, less with more averages: chi-square statistics).
    """
    amp = check_finite_array(amplitude, "amplitude")
    if np.any(amp < 0):
        i = int(np.argmax(amp < 0))
        raise InputError(
            f"amplitude[{i}]={float(amp[i])!r}; linear amplitudes must be >= 0",
            field=f"amplitude[{i}]",
            code="below_limit",
            value=float(amp[i]),
        )
    n = amp.size
    if width_bins is None:
        width = n if n < 31 else int(np.clip(n // 64, 31, 1025))
    else:
        width = check_int(
            width_bins, "width_bins", 3, 1_000_001, type_text="a whole number", integral_floats=True
        )
    width = min(width | 1, n | 1)
    tiny = _tiny(amp)
    db = _db(amp, tiny)
    if width >= n:
        floor_db = np.full(n, np.median(db))
    else:
        floor_db = scipy.ndimage.median_filter(db, size=width, mode="mirror")
    out: FloatArray = 10.0 ** (floor_db / 20.0)
    return out


@dataclass(frozen=True, eq=False)
class Peaks:
    """Peaks of an amplitude spectrum, sorted by frequency.

    Attributes
    ----------
    freq_hz : ndarray
        Refined peak frequencies, Hz.
    amplitude : ndarray
        Peak amplitudes corrected for scalloping (or the bin value for window="unknown"),
        unit of the spectrum.
    floor : ndarray
        Noise floor at the peak bin, unit of the spectrum.
    prominence_db : ndarray
        Prominence of the peak above the surrounding valleys (floor-relative dB curve), dB.
    bin : ndarray of int
        Index of the highest bin of the peak.
    snr_db : ndarray
        20·log10(amplitude / floor), dB.
    """

    freq_hz: FloatArray
    amplitude: FloatArray
    floor: FloatArray
    prominence_db: FloatArray
    bin: NDArray[np.int64]
    snr_db: FloatArray

    def __len__(self) -> int:
        return int(self.freq_hz.size)


def find_peaks(
    freq_hz: ArrayLike,
    amplitude: ArrayLike,
    floor: ArrayLike | None = None,
    threshold_db: float = 10.0,
    window: str = "hann",
    max_peaks: int = 2000,
    prominence_db: float = 6.0,
) -> Peaks:
    """Peaks standing above the noise floor, refined between bins.

    Parameters
    ----------
    freq_hz : array_like
        Bin frequencies, Hz, strictly increasing (at least 3 bins).
    amplitude : array_like
        Linear amplitude per bin, >= 0 (convert dB first with :func:`to_linear`).
    floor : array_like or float, optional
        Noise floor per bin (or one value for all bins), linear amplitude, > 0; default
        :func:`noise_floor` of ``amplitude``.
    threshold_db : float
        A peak's highest bin must stand at least this far above the floor, dB (0 to 200).
    window : str
        Window the spectrum was computed with (one of :data:`WINDOWS`), or ``"unknown"``.
        For a spectrum of unknown origin keep the default ``"hann"`` or say ``"unknown"``.
    max_peaks : int
        Keep at most this many peaks, the highest above the floor (1 to 1,000,000).
    prominence_db : float
        Minimum prominence of a peak over its neighbouring valleys, dB (0 to 200).

    Returns
    -------
    Peaks
        Sorted by frequency.

    Notes
    -----
    Candidates are the local maxima of ``D = 20·log10(amplitude / floor)`` with
    ``D >= threshold_db`` and prominence (``scipy.signal.peak_prominences`` on ``D``)
    of at least ``prominence_db``. The first and last bins are never peaks.

    Refinement for a known window: with ``a, b, c`` the magnitudes of bins k-1, k, k+1,
    the statistic ``q = (c - a) / (a + b + c)`` is an increasing function of the tone's
    offset ``d`` from bin k, computed from the window's DTFT and inverted by table
    look-up; the amplitude is ``b / g(d)`` with ``g`` the window's normalised DTFT
    magnitude, which undoes the scalloping loss. This generalises the ratio
    interpolation of Grandke [2]_ (closed form for Hann: ``d = (2r - 1)/(1 + r)``) to
    any window and is exact for an isolated tone; the residual bias comes from the
    tone's negative-frequency image and neighbouring tones (below 0.001 bin for Hann at
    more than 10 bins from DC, from numerical tests).

    For ``window="unknown"`` the offset comes from a parabola through the three log
    magnitudes, ``d = ½(α − γ)/(α − 2β + γ)`` [1]_, and the amplitude is the bin value
    (no scalloping correction). Its bias depends on the window: worst case about
    0.016 bin for Hann and 0.08 bin for a rectangular window [1]_.

    Bins need not be evenly spaced: the offset is scaled by the spacing on the side of
    the neighbour it points to.

    References
    ----------
    .. [1] Smith, *Spectral Audio Signal Processing*, "Quadratic interpolation of
       spectral peaks".
    .. [2] Grandke, *IEEE Trans. Instrum. Meas.* 32(2), 1983.
    """
    f = check_finite_array(freq_hz, "freq_hz", min_len=3)
    amp = check_finite_array(amplitude, "amplitude", min_len=3)
    if amp.size != f.size:
        raise InputError(
            f"amplitude has {amp.size} values but freq_hz has {f.size}",
            field="amplitude",
            code="mismatched_lengths",
        )
    if np.any(amp < 0):
        i = int(np.argmax(amp < 0))
        raise InputError(
            f"amplitude[{i}]={float(amp[i])!r}; linear amplitudes must be >= 0",
            field=f"amplitude[{i}]",
            code="below_limit",
            value=float(amp[i]),
        )
    steps = np.diff(f)
    if np.any(steps <= 0):
        i = int(np.argmax(steps <= 0)) + 1
        raise InputError(
            f"freq_hz[{i}]={float(f[i])!r} does not exceed freq_hz[{i - 1}]={float(f[i - 1])!r}; "
            "frequencies must increase",
            field=f"freq_hz[{i}]",
            code="above_limit",
            value=float(f[i]),
        )
    threshold_db = check_range(threshold_db, "threshold_db", 0.0, 200.0, unit=" dB")
    prominence_db = check_range(prominence_db, "prominence_db", 0.0, 200.0, unit=" dB")
    window = check_one_of(window, "window", [*sorted(WINDOWS), "unknown"])
    max_peaks = check_int(
        max_peaks, "max_peaks", 1, 1_000_000, type_text="a whole number", integral_floats=True
    )
    if floor is None:
        fl = noise_floor(amp)
    else:
        fl = check_finite_array(
            np.broadcast_to(np.asarray(floor, float), amp.shape) if np.ndim(floor) == 0 else floor,
            "floor",
        )
        if fl.size != amp.size:
            raise InputError(
                f"floor has {fl.size} values but amplitude has {amp.size}",
                field="floor",
                code="mismatched_lengths",
            )
        if np.any(fl <= 0):
            i = int(np.argmax(fl <= 0))
            raise InputError(
                f"floor[{i}]={float(fl[i])!r}; the floor must be > 0",
                field=f"floor[{i}]",
                code="not_positive",
                value=float(fl[i]),
            )

    tiny = _tiny(amp)
    db = _db(amp, tiny)
    rel = db - _db(fl, tiny)
    idx, props = scipy.signal.find_peaks(rel, height=threshold_db, prominence=prominence_db)
    if idx.size > max_peaks:
        keep = np.sort(np.argsort(props["peak_heights"], kind="stable")[-max_peaks:])
        idx = idx[keep]
        prom = props["prominences"][keep]
    else:
        prom = props["prominences"]

    a, b, c = amp[idx - 1], amp[idx], amp[idx + 1]
    if window == "unknown":
        al, be, ga = db[idx - 1], db[idx], db[idx + 1]
        den = al - 2.0 * be + ga
        safe = np.where(den < 0, den, -1.0)
        d = np.where(den < 0, 0.5 * (al - ga) / safe, 0.0)
        d = np.clip(d, -0.5, 0.5)
        peak_amp = b.copy()
    else:
        grid, q_table, gain = kernel_tables(window)
        total = a + b + c
        q = np.where(total > 0, (c - a) / np.where(total > 0, total, 1.0), 0.0)
        d = np.interp(q, q_table, grid)
        peak_amp = b / np.interp(d, grid, gain)
    spacing = np.where(d >= 0, f[np.minimum(idx + 1, f.size - 1)] - f[idx], f[idx] - f[idx - 1])
    freq = f[idx] + d * spacing
    floor_at = fl[idx]
    snr = 20.0 * np.log10(np.maximum(peak_amp, tiny) / floor_at)
    return Peaks(
        freq_hz=freq.astype(np.float64),
        amplitude=peak_amp.astype(np.float64),
        floor=floor_at.astype(np.float64),
        prominence_db=np.asarray(prom, dtype=np.float64),
        bin=idx.astype(np.int64),
        snr_db=snr.astype(np.float64),
    )


def few_bad_cells(count: int, n: int) -> bool:
    """Whether ``count`` negative cells among ``n`` are a handful: at most 3, or 1 % of
    the rows, and fewer than half."""
    return count <= max(3, 0.01 * n) and 2 * count < n


def detect_unit(amplitude: ArrayLike, field: str = "amplitude") -> tuple[str, str]:
    """Decide from the values alone whether spectrum values are linear or decibels.

    The one rule for every spectrum (a JSON array or a column of a file): the readers
    call it when neither the request nor a header names the scale.

    Parameters
    ----------
    amplitude : array_like
        Spectrum values as given (unit unknown), finite.
    field : str
        The input named in an error.

    Returns
    -------
    unit : str
        ``"db"`` or ``"linear"``.
    reason : str
        One sentence a person can check.

    Raises
    ------
    InputError
        Code ``ambiguous_scale`` when the values leave it open.

    Notes
    -----
    A linear amplitude cannot be negative. None negative is linear (a dB scale whose
    reference keeps every value positive, dB SPL re 20 µPa or dBµV, must be named by the
    caller). A handful of negative values (:func:`few_bad_cells`) in a table whose peaks
    stand at least 10 times above its median, as linear spectra do (dB values above 0
    span a factor of a few), is bad data in a linear column, not a dB scale: the caller
    drops those cells (:func:`bad_negative_cells`). At least a fifth negative is dB.
    Anything between is refused rather than guessed.
    """
    a = check_finite_array(amplitude, "amplitude")
    n = int(a.size)
    count = int(np.count_nonzero(a < 0))
    if count == 0:
        return (
            "linear",
            f"all {n} values are >= 0, so they are read as linear amplitudes (say dB "
            "explicitly for a dB scale whose values are all positive)",
        )
    positive = a[a > 0]
    if few_bad_cells(count, n) and positive.size and np.max(positive) >= 10 * np.median(positive):
        return (
            "linear",
            f"{count} of {n} values are negative, too few for a dB scale, so the values "
            "are read as linear amplitudes",
        )
    if 5 * count >= n:
        return (
            "db",
            f"{count} of {n} values are negative; amplitudes cannot be negative, so the "
            "values are read as dB",
        )
    raise InputError(
        f"{count} of {n} values are negative: too many for bad cells in a linear column, "
        "too few to be sure of a dB scale",
        field=field,
        value=count,
        code="ambiguous_scale",
        remedy="Say which with unit='db' or unit='linear', or name dB in the column header",
    )


def bad_negative_cells(amplitude: ArrayLike, reason: str, field: str = "amplitude") -> BoolArray:
    """The negative cells of a linear spectrum, to be dropped as bad data.

    Parameters
    ----------
    amplitude : array_like
        Values read as linear amplitudes.
    reason : str
        Why they are read as linear (quoted in the error).
    field : str
        The input named in an error.

    Returns
    -------
    ndarray of bool
        True where a value is negative; all False for a clean spectrum.

    Raises
    ------
    InputError
        Code ``negative_amplitude`` when more than a handful (:func:`few_bad_cells`) are
        negative: then the values are probably dB, and the caller must say so.
    """
    a = np.asarray(amplitude, dtype=np.float64)
    negative: BoolArray = a < 0
    count = int(np.count_nonzero(negative))
    if count and not few_bad_cells(count, int(a.size)):
        raise InputError(
            f"{count} of {a.size} amplitudes are negative but the values are read as "
            f"linear ({reason})",
            field=field,
            value=count,
            code="negative_amplitude",
            remedy="If the values are dB, pass unit='db'; else correct the data",
        )
    return negative


#: Largest magnitude of a level in dB that a spectrum may hold.
MAX_ABS_DB = 1000.0


def to_linear(values: ArrayLike, unit: str) -> FloatArray:
    """Convert spectrum values to linear amplitude.

    Parameters
    ----------
    values : array_like
        Spectrum values in ``unit``.
    unit : str
        ``"linear"`` (returned as float64, must be >= 0) or ``"db"`` (20·log10 of an
        amplitude ratio to any reference: the result is in units of that reference,
        ``10**(values/20)``).

    Returns
    -------
    ndarray
        Linear amplitudes.
    """
    v = check_finite_array(values, "values")
    u = unit.lower() if isinstance(unit, str) else unit
    if u == "db":
        # 10**(v/20) overflows a double above ~6165 dB and underflows to 0 below about
        # -6465 dB; no measurement spans more than a few hundred dB.
        refuse_first(
            np.abs(v) > MAX_ABS_DB,
            v,
            "values",
            f"dB is outside ±{MAX_ABS_DB:g} dB; are the values linear amplitudes rather than dB?",
            "above_limit",
            limit=MAX_ABS_DB,
        )
        out: FloatArray = 10.0 ** (v / 20.0)
        return out
    if u == "linear":
        refuse_first(
            v < 0,
            v,
            "values",
            "is negative; a linear amplitude must be >= 0 (are the values in dB?)",
            "below_limit",
        )
        return v.copy()
    raise InputError(
        f"unit={unit!r} must be 'linear' or 'db'", field="unit", code="invalid", value=unit
    )
