"""Analysis lines, bin width and record length, and the resolution rule.

An analyser shows DC to fs/2.56 as its analysed span; ``lines`` bins cover it,
so the bin width is ``span / lines`` and the record holds ``2.56·lines`` samples [1]_.
Two tones are resolved when they are at least one main-lobe width apart [2]_.

References
----------
.. [1] Common practice (no single source): the analysed span is fs/2.56, the
   record holds N = 2.56·lines samples, bin width = span / lines = fs / N.
.. [2] J. O. Smith III, *Spectral Audio Signal Processing*, W3K Publishing, 2011,
   "Resolving sinusoids" (an L-term cosine window's main lobe is 2L bins wide).
.. [3] F. J. Harris, "On the use of windows for harmonic analysis with the discrete
   Fourier transform", *Proc. IEEE* 66(1), 1978, pp. 51-83 (main-lobe widths).
.. [4] P. D. Welch, "The use of fast Fourier transform for the estimation of power
   spectra", *IEEE Trans. Audio Electroacoust.* 15(2), 1967, pp. 70-73 (averaging
   overlapped segments).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from .checks import check_finite, check_int, check_positive
from .errors import InputError

__all__ = [
    "MAINLOBE_BINS",
    "SPAN_DIVISOR",
    "STANDARD_LINES",
    "RecordLength",
    "check_analysis_window",
    "record_length",
    "resolution_bins",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]


#: Common practice: an analyser shows DC to fs/2.56 as its analysed span [5]_.
SPAN_DIVISOR = 2.56


#: Standard analysis lines, 100·2**n from 100 to 102,400 (the 400·2**n series of many
#: analysers, 400 ... 51,200, is contained in it). With these, N = 2.56·lines = 2**(8+n).
STANDARD_LINES: tuple[int, ...] = tuple(100 * 2**n for n in range(11))


#: Main-lobe width, null to null, in bins [2]_, [3]_: an L-term cosine window has 2L
#: (rectangular 2, Hann and Hamming 4, 4-term Blackman-Harris 8); the 5-term flat top
#: (scipy.signal's ``flattop``) has 10.
MAINLOBE_BINS: dict[str, float] = {
    "rectangular": 2.0,
    "hann": 4.0,
    "hamming": 4.0,
    "blackmanharris": 8.0,
    "flattop": 10.0,
}


def check_analysis_window(window: object) -> str:
    """The window name, lower-cased, when :data:`MAINLOBE_BINS` knows it (code ``not_allowed``)."""
    if not isinstance(window, str) or window.lower() not in MAINLOBE_BINS:
        raise InputError(
            f"window={window!r} must be one of {', '.join(MAINLOBE_BINS)}",
            field="window",
            code="not_allowed",
            value=window,
        )
    return window.lower()


def resolution_bins(window: str) -> float:
    """Main-lobe width of a window, null to null, in bins.

    Two tones closer than this in frequency merge into one peak or pull each other's
    peaks off their frequencies; at or beyond it they are cleanly resolved [2]_, [3]_.

    Parameters
    ----------
    window : str
        ``"rectangular"`` (2 bins), ``"hann"`` (4), ``"hamming"`` (4),
        ``"blackmanharris"`` (4-term, 8) or ``"flattop"`` (5-term, 10).

    Returns
    -------
    float
        Width, bins.

    References
    ----------
    .. [2] Smith, *Spectral Audio Signal Processing*, "Resolving sinusoids".
    .. [3] Harris, *Proc. IEEE* 66(1), 1978.
    """
    return MAINLOBE_BINS[check_analysis_window(window)]


@dataclass(frozen=True)
class RecordLength:
    """Analysis arithmetic for one sample rate and number of lines.

    Attributes
    ----------
    sample_rate_hz : float
        Sample rate, Hz.
    lines : int
        Analysis lines.
    span_hz : float
        Analysed span fs/2.56, Hz.
    bin_width_hz : float
        span / lines = fs / N, Hz.
    samples : int
        Samples per record, N = 2.56·lines (rounded).
    record_s : float
        Record length N / fs = 1 / bin width, s.
    averages : int
        Records averaged.
    overlap_pct : float
        Overlap between records, percent.
    total_s : float
        Acquisition time for all averages, s.
    """

    sample_rate_hz: float
    lines: int
    span_hz: float
    bin_width_hz: float
    samples: int
    record_s: float
    averages: int
    overlap_pct: float
    total_s: float


def record_length(
    sample_rate_hz: float, lines: int, averages: int = 1, overlap_pct: float = 0.0
) -> RecordLength:
    """Span, bin width, record length and total time for averaged, overlapped records.

    Parameters
    ----------
    sample_rate_hz : float
        Sample rate, Hz, > 0.
    lines : int
        Analysis lines, 1 to 1,048,576.
    averages : int
        Number of records averaged, 1 to 100,000.
    overlap_pct : float
        Overlap of consecutive records, percent, 0 <= overlap < 100.

    Returns
    -------
    RecordLength

    Notes
    -----
    Span ``fs/2.56``, ``N = 2.56·lines`` samples, bin width ``span/lines = fs/N``, record
    ``T = N/fs`` [5]_; ``n`` records overlapped by ``r`` (the overlap rounded to whole
    samples, as in the averaged spectrum) need ``N + (n - 1)·(N - round(r·N))`` samples
    [4]_.

    References
    ----------
    .. [4] Welch, *IEEE Trans. Audio Electroacoust.* 15(2), 1967.
    .. [5] Common practice.
    """
    fs = check_positive(sample_rate_hz, "sample_rate_hz", unit=" Hz", separate=True)
    n_lines = check_int(lines, "lines", 1, 1_048_576, word="a whole number")
    n_avg = check_int(averages, "averages", 1, 100_000, word="a whole number")
    ov = check_finite(overlap_pct, "overlap_pct")
    if not 0 <= ov < 100:
        raise InputError(
            f"overlap_pct={overlap_pct!r} must be >= 0 and < 100",
            field="overlap_pct",
            code="below_limit",
            value=overlap_pct,
        )
    samples = round(SPAN_DIVISOR * n_lines)
    step = samples - min(round(samples * ov / 100.0), samples - 1)
    total = samples + (n_avg - 1) * step
    return RecordLength(
        sample_rate_hz=fs,
        lines=n_lines,
        span_hz=fs / SPAN_DIVISOR,
        bin_width_hz=fs / samples,
        samples=samples,
        record_s=samples / fs,
        averages=n_avg,
        overlap_pct=ov,
        total_s=total / fs,
    )
