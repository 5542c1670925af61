"""Computed order tracking: the record resampled at constant shaft-angle steps, its orders.

A line folded in time (above fs/2) appears in the order spectrum at the speed-dependent,
in general non-integer order :func:`apparent_order`.

References
----------
.. [2] K. R. Fyfe and E. D. S. Munck, "Analysis of computed order tracking",
   *Mechanical Systems and Signal Processing* 11(2), 1997 (resampling at constant
   shaft-angle increments; the order spectrum).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.interpolate
import scipy.signal
from numpy.typing import ArrayLike, NDArray

from .errors import InputError
from .folding import fold
from .runup_map import check_channel
from .tacho import SpeedTrace

__all__ = ["OrderSpectrum", "apparent_order", "order_spectrum"]

FloatArray = NDArray[np.float64]

_UP_HALF = 32  # half-length, input samples, of the upsampling filter
_UP_PAD = 64  # samples either side of a block for the upsampling filter to settle


# ------------------------------------------------------------------ order tracking


@dataclass(frozen=True, eq=False)
class OrderSpectrum:
    """Amplitude against order from computed order tracking.

    Attributes
    ----------
    order : ndarray
        Orders (per shaft revolution).
    amplitude : ndarray
        RMS-averaged amplitude over the segments (a constant-order sine of amplitude A
        reads A).
    samples_per_rev : int
        Angular sampling, samples per revolution.
    revs_per_segment : int
        Revolutions per transformed segment (order resolution = 1 / this).
    segments : int
        Segments averaged.
    rpm_range : (float, float)
        Speed range analysed, rpm.
    """

    order: FloatArray
    amplitude: FloatArray
    samples_per_rev: int
    revs_per_segment: int
    segments: int
    rpm_range: tuple[float, float]


def apparent_order(order: ArrayLike, rpm: ArrayLike, sample_rate_hz: float) -> FloatArray:
    """Where order ``order`` appears in the order spectrum at speed ``rpm``.

    A folded order sits at ``fold(order·r, fs) / r`` (r = rpm/60): speed-dependent and in
    general not a whole number.
    """
    r = np.asarray(rpm, dtype=np.float64) / 60.0
    k = np.asarray(order, dtype=np.float64)
    return np.asarray(fold(np.abs(k * r), sample_rate_hz) / r, dtype=np.float64)


def order_spectrum(
    x: ArrayLike,
    sample_rate_hz: float,
    speed: SpeedTrace,
    *,
    max_order: float = 64.0,
    revs_per_segment: int = 32,
    rpm_range: tuple[float, float] | None = None,
    block_segments: int = 64,
    upsample: int = 4,
) -> OrderSpectrum:
    """Computed order tracking: resample at constant shaft-angle steps, then transform.

    Parameters
    ----------
    x : array_like
        Vibration samples, 1-D.
    sample_rate_hz : float
        Sample rate, Hz.
    speed : SpeedTrace
        Shaft speed and angle.
    max_order : float
        Highest order of interest; the angular rate is the power of two at or above
        2.56 × max_order samples per revolution.
    revs_per_segment : int
        Revolutions per segment (order resolution 1 / revs_per_segment).
    rpm_range : (float, float), optional
        Analyse only where the speed lies in this range, rpm.
    block_segments : int
        Segments resampled per step (memory bound).
    upsample : int
        Band-limited upsampling factor ahead of the linear interpolation (1 to 16);
        Fyfe and Munck [2]_ found interpolation error the main error of the method and
        upsampling first the cure.

    Notes
    -----
    The shaft angle is a monotone cubic through the tacho pulses (angle known exactly at
    each pulse [2]_), tabulated at 16 points per revolution; time at each equal angle
    step comes from that table and the signal there from linear interpolation of the
    record upsampled ``upsample`` times (scipy.signal.resample_poly). Content above
    ``samples_per_rev / 2`` orders folds in the order domain, and a line folded in time
    (above fs/2) appears at the non-integer order :func:`apparent_order`.

    References
    ----------
    .. [2] Fyfe and Munck, MSSP 11(2), 1997.
    """
    fs = float(sample_rate_hz)
    sig = check_channel(x, "vibration")
    if not 0 < max_order <= 4096:
        raise InputError(
            f"max_order={max_order} must be > 0 and at most 4096",
            field="max_order", value=max_order, limit=4096, code="out_of_range",
        )  # fmt: skip
    rps = int(revs_per_segment)
    if not 2 <= rps <= 4096:
        raise InputError(
            f"revs_per_segment={revs_per_segment} must be from 2 to 4096",
            field="revs_per_segment", value=revs_per_segment, limit=4096,
            code="out_of_range",
        )  # fmt: skip
    upsample = int(upsample)
    if not 1 <= upsample <= 16:
        raise InputError(
            f"upsample={upsample} must be from 1 to 16",
            field="upsample", value=upsample, limit=16, code="out_of_range",
        )  # fmt: skip
    spr = int(2 ** np.ceil(np.log2(2.56 * max_order)))
    t_k, th_k = speed.angle_time_s, speed.angle_rev
    keep = np.concatenate(([True], np.diff(th_k) > 0))
    t_k, th_k = t_k[keep], th_k[keep]
    t_end = (sig.size - 1) / fs
    th_lo = float(np.interp(max(t_k[0], 0.0), t_k, th_k))
    th_hi = float(np.interp(min(t_k[-1], t_end), t_k, th_k))
    if rpm_range is not None:
        t_rng = speed.time_s[(speed.rpm >= rpm_range[0]) & (speed.rpm <= rpm_range[1])]
        if t_rng.size == 0:
            raise InputError(
                f"the speed never lies in rpm_range={rpm_range}",
                field="rpm_range", value=list(rpm_range), code="outside_record",
            )  # fmt: skip
        th_lo = max(th_lo, float(np.interp(t_rng[0], t_k, th_k)))
        th_hi = min(th_hi, float(np.interp(t_rng[-1], t_k, th_k)))
    n_seg = int((th_hi - th_lo) // rps)
    if n_seg < 1:
        raise InputError(
            f"the record covers {th_hi - th_lo:.1f} revolutions in the chosen range; one "
            f"segment needs {rps}",
            field="vibration", value=round(th_hi - th_lo, 2), limit=rps, code="too_short",
            remedy="Use fewer revolutions per segment or a longer record",
        )  # fmt: skip
    # Time as a function of angle: monotone cubic, tabulated at 16 points per rev.
    pchip = scipy.interpolate.PchipInterpolator(th_k, t_k)
    th_tab = np.linspace(th_lo, th_hi, int((th_hi - th_lo) * 16) + 2)
    t_tab = pchip(th_tab)
    seg_len = rps * spr
    win = scipy.signal.windows.hann(seg_len, sym=False)
    # Anti-imaging filter of the upsampling: Kaiser β = 8 (about 80 dB), 2·_UP_HALF
    # input samples long, cut at the record's Nyquist frequency.
    taps = scipy.signal.firwin(
        2 * _UP_HALF * upsample + 1, 1.0 / upsample, window=("kaiser", 8.0)
    )  # resample_poly scales the taps by the upsampling factor itself
    power = np.zeros(seg_len // 2 + 1)
    for a in range(0, n_seg, block_segments):
        b = min(n_seg, a + block_segments)
        th = th_lo + (a * seg_len + np.arange((b - a) * seg_len)) / spr
        pos = np.interp(th, th_tab, t_tab) * fs
        # Band-limited interpolation: upsample the stretch of samples needed (polyphase
        # FIR), then interpolate linearly on the finer grid. Linear interpolation on the
        # raw samples would pass the image above fs/2 and rebuild an aliased line at
        # its true order instead of where the samples put it.
        a0 = max(0, int(np.floor(pos.min())) - _UP_PAD)
        a1 = min(sig.size, int(np.ceil(pos.max())) + _UP_PAD + 1)
        up = scipy.signal.resample_poly(
            np.asarray(sig[a0:a1], dtype=np.float64), upsample, 1, window=taps
        )
        pu = (pos - a0) * upsample
        i0 = np.clip(np.floor(pu).astype(np.int64), 0, up.size - 2)
        frac = pu - i0
        y = up[i0] * (1 - frac) + up[i0 + 1] * frac
        spec = np.fft.rfft(y.reshape(b - a, seg_len) * win, axis=1)
        power += np.sum(np.abs(spec) ** 2, axis=0)
    amp = np.sqrt(power / n_seg) * 2 / win.sum()
    t_lo_hi = np.interp([th_lo, th_hi], th_k, t_k)
    rr = speed.rpm_at(t_lo_hi)
    return OrderSpectrum(
        order=np.asarray(np.fft.rfftfreq(seg_len, d=1.0 / spr), dtype=np.float64),
        amplitude=amp,
        samples_per_rev=spr,
        revs_per_segment=rps,
        segments=n_seg,
        rpm_range=(float(rr.min()), float(rr.max())),
    )


# ------------------------------------------------------------------------ analysis
