"""Analysis windows: their samples, their figures of merit (ENBW, scalloping loss,
highest side lobe, main-lobe width) and the tables used to refine peak frequencies.

References
----------
.. [1] F. J. Harris, "On the use of windows for harmonic analysis with the discrete
   Fourier transform", *Proc. IEEE* 66(1), 1978, pp. 51-83.
.. [3] J. O. Smith, *Spectral Audio Signal Processing*, W3K Publishing, 2011,
   "Quadratic interpolation of spectral peaks".
.. [4] T. Grandke, "Interpolation algorithms for discrete Fourier transforms of weighted
   signals", *IEEE Trans. Instrum. Meas.* 32(2), 1983, pp. 350-355.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
import scipy.fft
import scipy.ndimage
import scipy.signal
from numpy.typing import NDArray

from service.core.checks import (
    check_int,
    check_one_of,
)
from service.core.errors import InputError

__all__ = [
    "SCIPY_NAME",
    "WINDOWS",
    "kernel_tables",
    "window_figures",
    "window_samples",
]

FloatArray = NDArray[np.float64]


#: Window names accepted everywhere in this module.
WINDOWS: frozenset[str] = frozenset({"hann", "flattop", "rectangular", "hamming", "blackmanharris"})


SCIPY_NAME = {
    "hann": "hann",
    "flattop": "flattop",
    "rectangular": "boxcar",
    "hamming": "hamming",
    "blackmanharris": "blackmanharris",
}


_TABLE_SIZE = 512  # window length used for the refinement tables


_TABLE_PAD = 512  # zero padding: table resolution 1/512 bin


def window_samples(name: str, n: int) -> FloatArray:
    """Periodic (DFT-even) window of length ``n`` as recommended by Harris [1]_."""
    w: FloatArray = np.asarray(
        scipy.signal.get_window(SCIPY_NAME[name], n, fftbins=True), dtype=np.float64
    )
    return w


def window_figures(name: str, n: int = 4096) -> dict[str, float]:
    """Figures of merit of a window, computed numerically from its samples.

    Parameters
    ----------
    name : str
        Window name, one of :data:`WINDOWS`.
    n : int
        Window length, samples (16 to 1,048,576).

    Returns
    -------
    dict
        ``coherent_gain`` (sum(w)/n, linear), ``enbw_bins`` (equivalent noise bandwidth,
        bins), ``scalloping_loss_db`` (loss for a tone half a bin off, dB, positive),
        ``highest_sidelobe_db`` (highest side lobe relative to the main-lobe peak, dB,
        negative) and ``mainlobe_half_width_bins`` (DC to the first null, bins).

    Notes
    -----
    ENBW = n·Σw² / (Σw)²; scalloping loss = −20·log10(|W(½ bin)| / |W(0)|) with
    W the window's DTFT, both as defined by Harris [1]_. The side-lobe level comes from
    a 16× zero-padded FFT: the main lobe ends at the first local minimum of |W| below
    −20 dB and the highest side lobe is the largest |W| beyond it.

    References
    ----------
    .. [1] Harris, *Proc. IEEE* 66(1), 1978, sec. IV and Table 1.
    """
    name = check_one_of(name, "name", sorted(WINDOWS))
    n = check_int(n, "n", 16, 2**20, type_text="a whole number", integral_floats=True)
    w = window_samples(name, n)
    s1 = float(np.sum(w))
    s2 = float(np.sum(w * w))
    pad = 16
    mag = np.abs(np.fft.rfft(w, n * pad))
    mag = mag / mag[0]
    rising = np.flatnonzero((np.diff(mag) > 0) & (mag[:-1] < 0.1))
    edge = int(rising[0]) if rising.size else mag.size - 1
    half_bin = np.abs(np.sum(w * np.exp(-1j * np.pi * np.arange(n) / n))) / s1
    return {
        "coherent_gain": s1 / n,
        "enbw_bins": n * s2 / s1**2,
        "scalloping_loss_db": float(-20.0 * np.log10(half_bin)),
        "highest_sidelobe_db": float(20.0 * np.log10(np.max(mag[edge:]))),
        "mainlobe_half_width_bins": edge / pad,
    }


@lru_cache(maxsize=8)
def kernel_tables(name: str) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Tables for peak refinement: offset grid, three-bin statistic, relative gain.

    For a tone at ``k + d`` bins (``|d| <= 0.5``) the bins ``k-1, k, k+1`` read
    ``A·g(1+d), A·g(d), A·g(1-d)`` with ``g = |W(ν)| / |W(0)|``; the statistic
    ``q = (c - a) / (a + b + c)`` is odd and increasing in ``d`` and is inverted by
    table look-up. The DTFT comes from a zero-padded FFT of the periodic window.
    """
    w = window_samples(name, _TABLE_SIZE)
    mag = np.abs(np.fft.fft(w, _TABLE_SIZE * _TABLE_PAD))
    mag = mag / mag[0]
    step = 1.0 / _TABLE_PAD
    d: FloatArray = np.arange(-_TABLE_PAD // 2, _TABLE_PAD // 2 + 1, dtype=np.float64) * step

    def g(nu: FloatArray) -> FloatArray:
        idx = np.rint(nu / step).astype(np.int64) % mag.size
        out: FloatArray = mag[idx]
        return out

    a, b, c = g(1.0 + d), g(d), g(1.0 - d)
    q = (c - a) / (a + b + c)
    if not np.all(np.diff(q) > 0):  # pragma: no cover - holds for every window in WINDOWS
        raise InputError(
            f"window={name!r}: three-bin statistic is not monotonic",
            field="window",
            code="invalid",
            value=name,
        )
    for arr in (d, q, b):
        arr.flags.writeable = False
    return d, q, b
