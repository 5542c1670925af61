"""Run-up records, the map: short-time spectra reduced by speed and by time.

Short-time spectra (``scipy.signal.ShortTimeFFT``, Hann, amplitude-scaled) are computed
:data:`BLOCK_FRAMES` frames at a time; each block's magnitude (float32) is reduced at once
to a bounded number of speed slices (the maximum per speed bin) and time slices (the
maximum per group of frames), so memory never holds the whole complex transform of a long
record. :func:`display_map` reduces the speed map further for a page.

The lines of the map are found in :mod:`service.core.runup_lines`; the order view is
:mod:`service.core.order_tracking`; :func:`service.core.runup_record.analyse_run_up`
runs the steps in order.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import scipy.signal
from numpy.typing import ArrayLike, NDArray

from .errors import InputError
from .tacho import SpeedTrace

__all__ = [
    "BLOCK_FRAMES",
    "RunUpMap",
    "check_channel",
    "display_map",
    "runup_map",
]

FloatArray = NDArray[np.float64]

#: Short-time frames transformed per step: bounds the complex block in memory, and a
#: block that stays in the processor's cache (64 × 2049 complex bins is 2 MB) is faster
#: than larger ones.
BLOCK_FRAMES = 64

# --------------------------------------------------------------------------- the map


@dataclass(frozen=True, eq=False)
class RunUpMap:
    """Amplitude against frequency, by speed slice and by time slice.

    Attributes
    ----------
    freq_hz : ndarray
        Frequencies of the bins, Hz (0 to fs/2).
    bin_hz : float
        Bin spacing, Hz.
    sample_rate_hz : float
        Sample rate of the record, Hz.
    speed_rpm : ndarray
        Centre of each speed slice, rpm.
    speed_level : ndarray (speed slices × bins), float32
        Largest amplitude seen in each speed slice (NaN where no frame fell in it), in
        the record's unit (a sine of amplitude A reads A).
    speed_frames : ndarray of int
        Frames that fell in each speed slice.
    time_s : ndarray
        Middle of each time slice, s.
    time_rpm : ndarray
        Mean speed in each time slice, rpm.
    time_level : ndarray (time slices × bins), float32
        Largest amplitude in each time slice.
    nperseg, hop : int
        Frame length and hop, samples.
    frames : int
        Frames transformed.
    """

    freq_hz: FloatArray
    bin_hz: float
    sample_rate_hz: float
    speed_rpm: FloatArray
    speed_level: NDArray[np.float32]
    speed_frames: NDArray[np.int64]
    time_s: FloatArray
    time_rpm: FloatArray
    time_level: NDArray[np.float32]
    nperseg: int
    hop: int
    frames: int


def check_channel(x: ArrayLike, name: str) -> NDArray[np.floating]:
    arr = np.asarray(x)
    if arr.ndim != 1:
        raise InputError(
            f"{name} must be one channel (1-D); got shape {arr.shape}",
            field=name, value=list(arr.shape), code="not_one_channel",
        )  # fmt: skip
    if not np.issubdtype(arr.dtype, np.floating):
        arr = arr.astype(np.float64)
    return arr


def runup_map(
    x: ArrayLike,
    sample_rate_hz: float,
    speed: SpeedTrace,
    *,
    nperseg: int = 1024,
    overlap: float = 0.75,
    speed_slices: int = 800,
    time_slices: int = 600,
    progress: Callable[[float], None] | None = None,
) -> RunUpMap:
    """Short-time amplitude spectra of a record, reduced by speed and by time.

    Parameters
    ----------
    x : array_like
        Vibration samples, 1-D.
    sample_rate_hz : float
        Sample rate, Hz.
    speed : SpeedTrace
        Shaft speed against time (:func:`service.core.tacho.speed_from_tacho`).
    nperseg : int
        Frame length, samples (bin width = fs / nperseg), 64 to 65,536.
    overlap : float
        Overlap of consecutive frames, 0 to 0.95.
    speed_slices, time_slices : int
        Number of speed and time slices kept (2 to 4096 each; no more speed slices
        than frames).
    progress : callable, optional
        Called after each block of frames with the share done (0 to 1), e.g. for a
        command line's progress bar.

    Returns
    -------
    RunUpMap

    Raises
    ------
    InputError
        ``too_short`` when the record holds fewer than 8 frames.
    """
    fs = float(sample_rate_hz)
    sig = check_channel(x, "vibration")
    n = int(nperseg)
    if not 64 <= n <= 65_536:
        raise InputError(
            f"nperseg={nperseg} must be from 64 to 65536 samples",
            field="nperseg", value=nperseg, limit=65_536, code="out_of_range",
        )  # fmt: skip
    if not 0 <= overlap <= 0.95:
        raise InputError(
            f"overlap={overlap} must be from 0 to 0.95",
            field="overlap", value=overlap, limit=0.95, code="out_of_range",
        )  # fmt: skip
    for name, val in (("speed_slices", speed_slices), ("time_slices", time_slices)):
        if not 2 <= int(val) <= 4096:
            raise InputError(
                f"{name}={val} must be from 2 to 4096",
                field=name, value=val, limit=4096, code="out_of_range",
            )  # fmt: skip
    hop = max(1, round(n * (1 - overlap)))
    sft = scipy.signal.ShortTimeFFT(
        scipy.signal.windows.hann(n, sym=False), hop, fs,
        fft_mode="onesided2X", scale_to="magnitude",
    )  # fmt: skip
    p0 = sft.lower_border_end[1]
    p1 = sft.upper_border_begin(sig.size)[1]
    frames = p1 - p0
    if frames < 8:
        need = (8 * hop + n) / fs
        raise InputError(
            f"the record ({sig.size / fs:.3g} s) holds {max(frames, 0)} whole frames of "
            f"{n} samples; at least 8 are needed, i.e. {need:.3g} s",
            field="vibration", value=round(sig.size / fs, 4), limit=round(need, 4),
            code="too_short",
            remedy="Upload a longer record or choose a coarser resolution (fewer lines)",
        )  # fmt: skip
    t_frames = sft.t(sig.size, p0, p1)
    rpm_frames = speed.rpm_at(t_frames)
    lo, hi = float(rpm_frames.min()), float(rpm_frames.max())
    # No more speed slices than frames: empty slices would break tracks into pieces.
    ns, nt, nf = min(int(speed_slices), frames), min(int(time_slices), frames), sft.f.size
    width = (hi - lo) / ns if hi > lo else 1.0
    s_idx = np.clip(((rpm_frames - lo) / width).astype(np.int64), 0, ns - 1)
    t_idx = (np.arange(frames) * nt) // frames
    # Frequency-major while reducing: the transform's blocks are (bins × frames), so
    # reducing along frames runs over contiguous memory.
    speed_t = np.zeros((nf, ns), dtype=np.float32)
    time_t = np.zeros((nf, nt), dtype=np.float32)
    for a in range(0, frames, BLOCK_FRAMES):
        b = min(frames, a + BLOCK_FRAMES)
        mag = np.abs(sft.stft(sig, p0 + a, p0 + b))
        si, ti = s_idx[a:b], t_idx[a:b]
        # One pass over the block: the maximum over runs where neither the speed slice
        # nor the time slice changes; then each map takes the maximum of those few.
        cut = np.concatenate(([True], (si[1:] != si[:-1]) | (ti[1:] != ti[:-1])))
        start = np.flatnonzero(cut)
        red = np.maximum.reduceat(mag, start, axis=1)
        _max_cols(speed_t, si[start], red)
        _max_cols(time_t, ti[start], red)
        if progress is not None:
            progress(b / frames)
    speed_level = np.ascontiguousarray(speed_t.T)
    time_level = np.ascontiguousarray(time_t.T)
    del speed_t, time_t
    counts = np.bincount(s_idx, minlength=ns)
    speed_level[counts == 0] = np.nan
    t_counts = np.bincount(t_idx, minlength=nt)
    return RunUpMap(
        freq_hz=np.asarray(sft.f, dtype=np.float64),
        bin_hz=fs / n,
        sample_rate_hz=fs,
        speed_rpm=np.asarray(lo + (np.arange(ns) + 0.5) * width, dtype=np.float64),
        speed_level=speed_level,
        speed_frames=counts.astype(np.int64),
        time_s=np.bincount(t_idx, t_frames, minlength=nt) / t_counts,
        time_rpm=np.bincount(t_idx, rpm_frames, minlength=nt) / t_counts,
        time_level=time_level,
        nperseg=n,
        hop=hop,
        frames=frames,
    )


def _max_cols(out: NDArray[np.float32], idx: NDArray[np.int64], cols: FloatArray) -> None:
    """``out[:, idx[i]] = max(out[:, idx[i]], cols[:, i])`` for every ``i``."""
    if idx.size == 0:
        return
    # Sort the (few) columns by destination, reduce each destination's run, assign once:
    # ufunc.at is far slower, and the speed does come back to a slice within a block
    # (the measured speed jitters across slice edges).
    order = np.argsort(idx, kind="stable")
    dest = idx[order]
    start = np.flatnonzero(np.concatenate(([True], dest[1:] != dest[:-1])))
    red = np.maximum.reduceat(cols[:, order], start, axis=1)
    dest = dest[start]
    out[:, dest] = np.maximum(out[:, dest], red)


def display_map(
    m: RunUpMap, *, max_speeds: int = 200, max_freqs: int = 600
) -> tuple[FloatArray, FloatArray, NDArray[np.float32]]:
    """The speed map reduced for display: the maximum per block of bins, in dB.

    Returns speed (rpm), frequency (Hz, block centres) and level (dB re 1 unit,
    float32, NaN where no frame fell). ``max_speeds × max_freqs`` cells bound the
    payload (200 × 600 values at about 6 characters each is about 0.7 MB of JSON), and
    the maximum per block keeps every line visible.
    """
    lvl = m.speed_level
    ns, nf = lvl.shape
    fs_step = max(1, -(-ns // max_speeds))
    ff_step = max(1, -(-nf // max_freqs))
    ns2, nf2 = -(-ns // fs_step), -(-nf // ff_step)
    pad = np.full((ns2 * fs_step, nf2 * ff_step), np.nan, dtype=np.float32)
    pad[:ns, :nf] = lvl
    with np.errstate(invalid="ignore"):
        blocks = pad.reshape(ns2, fs_step, nf2, ff_step)
        red = np.where(
            np.all(np.isnan(blocks), axis=(1, 3)),
            np.nan,
            np.nanmax(np.where(np.isnan(blocks), -np.inf, blocks), axis=(1, 3)),
        )
    with np.errstate(divide="ignore"):
        db = (20 * np.log10(np.maximum(red, 1e-12))).astype(np.float32)
    speeds = np.nanmean(np.pad(m.speed_rpm, (0, ns2 * fs_step - ns), constant_values=np.nan)
                        .reshape(ns2, fs_step), axis=1)  # fmt: skip
    freqs = np.nanmean(np.pad(m.freq_hz, (0, nf2 * ff_step - nf), constant_values=np.nan)
                       .reshape(nf2, ff_step), axis=1)  # fmt: skip
    return speeds, freqs, db


# ------------------------------------------------------------------------- ridges
