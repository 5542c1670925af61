"""Does a channel carry a signal, or only the converter's own noise?

A recorder writes every configured channel, connected or not; an engineer who picks the
wrong one gets a spectrum with no peaks and no hint why. This module looks at a record
(and, optionally, the converter's full scale and resolution) and says, per channel,
whether it holds a measured signal or only noise, so the caller can say "channel 0 holds
only noise; channels 1, 2 carry signal".

Criteria (each documented where its constant is defined):

- *tones*: a peak standing :data:`PEAK_DB` or more above the robust noise floor
  (:func:`service.core.spectrum.noise_floor`) is a signal, whatever its level;
- *shape*: converter noise is white over the analysed span, so its spectral flatness
  (geometric ÷ arithmetic mean of the power spectrum [1]_) is near 1; a broadband
  measured signal (a structure's response, shaped by resonances) is far less flat;
- *level*: when the converter's resolution is known, an RMS within
  :data:`NOISE_RMS_FACTOR` of the quantisation noise ``q/√12`` [2]_ (or of a stated
  noise level) is noise, and far above it is signal.

References
----------
.. [1] N. S. Jayant and P. Noll, *Digital Coding of Waveforms*, Prentice Hall, 1984,
   ch. 2 (spectral flatness measure: geometric over arithmetic mean of the power
   spectrum, 1 for white noise; chapter quoted from memory).
.. [2] B. Widrow and I. Kollár, *Quantization Noise*, Cambridge University Press, 2008
   (uniform quantisation noise of step q has variance q²/12).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .errors import InputError
from .spectrum import amplitude_spectrum, find_peaks, noise_floor

__all__ = [
    "FLATNESS_NOISE",
    "LOUD_FACTOR",
    "NOISE_RMS_FACTOR",
    "PEAK_DB",
    "ChannelActivity",
    "channel_activity",
    "channels_sentence",
    "classify_channels",
]

FloatArray = NDArray[np.float64]

#: A peak this far above the robust floor is a tone, dB. For white noise in a spectrum
#: of 8 power averages the highest of a few thousand bins stands about 4 dB above the
#: median (chi-square statistics with 16 degrees of freedom); even a single average
#: reaches only about 11 dB; 15 dB leaves a margin above both.
PEAK_DB = 15.0
#: Spectral flatness (0..1) from which a tone-free spectrum counts as white noise. White
#: noise averaged over 8 blocks gives about 0.94 (the log of a chi-square mean is biased
#: low by about 1/(2·averages)); a broadband response shaped by a few resonances, or
#: noise behind a low-pass filter inside the span, is well below 0.5.
FLATNESS_NOISE = 0.5
#: RMS within this factor of the expected converter noise (q/√12 or the stated level)
#: is consistent with converter noise alone (about 10 dB: dither, a noisier front end).
NOISE_RMS_FACTOR = 3.0
#: RMS this many times above the expected converter noise is signal even without tones
#: or spectral shape (20 dB).
LOUD_FACTOR = 10.0


@dataclass(frozen=True)
class ChannelActivity:
    """What one channel holds.

    Attributes
    ----------
    verdict : str
        ``"signal"``, ``"noise"`` or ``"constant"`` (every sample equal: a dead input).
    rms : float
        RMS of the record (mean removed), unit of the samples.
    expected_noise_rms : float
        Converter noise RMS used for the level test (``q/√12`` or stated); NaN if none.
    max_peak_db : float
        Highest peak above the floor, dB; 0 if none found.
    flatness : float
        Spectral flatness of the power spectrum over the analysed span (0..1).
    reasons : tuple of str
        Which criteria decided, in words.
    """

    verdict: str
    rms: float
    expected_noise_rms: float
    max_peak_db: float
    flatness: float
    reasons: tuple[str, ...]


def _check_rate(value: float) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        v = float("nan")
    if not np.isfinite(v) or v <= 0:
        raise InputError(
            f"sample_rate_hz={value!r} must be a finite number > 0 Hz",
            field="sample_rate_hz",
            code="not_positive",
        )
    return v


def _expected_noise(full_scale: float | None, bits: int | None, noise_rms: float | None) -> float:
    if noise_rms is not None:
        v = float(noise_rms)
        if not np.isfinite(v) or v <= 0:
            raise InputError(
                f"noise_rms={noise_rms!r} must be a finite number > 0",
                field="noise_rms",
                code="not_positive",
            )
        return v
    if full_scale is None and bits is None:
        return float("nan")
    if full_scale is None or bits is None:
        raise InputError(
            "give both full_scale and bits (or neither) to compare with quantisation noise",
            field="bits" if bits is None else "full_scale",
            code="missing",
        )
    fsv = float(full_scale)
    if not np.isfinite(fsv) or fsv <= 0:
        raise InputError(
            f"full_scale={full_scale!r} must be a finite number > 0 (the peak value ±F)",
            field="full_scale",
            code="not_positive",
        )
    if isinstance(bits, bool) or int(bits) != bits or not 4 <= int(bits) <= 32:
        raise InputError(
            f"bits={bits!r} must be a whole number from 4 to 32",
            field="bits",
            value=bits,
            limit=[4, 32],
            code="out_of_range",
        )
    q = 2.0 * fsv / 2.0 ** int(bits)
    return q / np.sqrt(12.0)


def channel_activity(
    samples: ArrayLike,
    sample_rate_hz: float,
    full_scale: float | None = None,
    bits: int | None = None,
    noise_rms: float | None = None,
) -> ChannelActivity:
    """Decide whether one channel's record carries a signal or only converter noise.

    Parameters
    ----------
    samples : array_like
        1-D time record of the channel, at least 256 finite samples, any unit.
    sample_rate_hz : float
        Sample rate, Hz (> 0).
    full_scale, bits : float and int, optional
        The converter's range ``±full_scale`` (unit of the samples) and resolution
        (4 to 32 bits): the quantisation noise ``q/√12`` with ``q = 2·full_scale/2**bits``
        [2]_ is the level test's reference. Give both or neither.
    noise_rms : float, optional
        The converter's stated noise RMS (unit of the samples); overrides
        ``full_scale``/``bits`` as the reference.

    Returns
    -------
    ChannelActivity

    Notes
    -----
    The verdict is ``"signal"`` if any of: a peak at least :data:`PEAK_DB` above the
    floor; spectral flatness below :data:`FLATNESS_NOISE`; RMS above
    :data:`LOUD_FACTOR` × the expected converter noise. Otherwise ``"noise"``; and when a
    reference is known but the RMS exceeds :data:`NOISE_RMS_FACTOR` × it (between the two
    factors) the reason says the level is above converter noise but shows no structure.
    The spectrum is the averaged amplitude spectrum of
    :func:`service.core.spectrum.amplitude_spectrum` (Hann, default lines, at least 8
    averages where the record allows); flatness uses bins 2 .. span (fs/2.56), away
    from DC and the anti-alias roll-off.
    """
    x = np.asarray(samples)
    if x.dtype.kind not in "biuf" or x.ndim != 1:
        raise InputError(
            "samples must be a 1-D record of numbers", field="samples", code="bad_shape"
        )
    x = x.astype(np.float64, copy=False)
    if x.size < 256:
        raise InputError(
            f"samples has {x.size} values; at least 256 are needed to judge a channel",
            field="samples",
            value=x.size,
            limit=256,
            code="too_short",
        )
    if not np.all(np.isfinite(x)):
        raise InputError(
            "samples contains NaN or infinity; drop or repair them first",
            field="samples",
            code="not_finite",
        )
    fs = _check_rate(sample_rate_hz)
    ref = _expected_noise(full_scale, bits, noise_rms)
    centred = x - np.mean(x)
    rms = float(np.sqrt(np.mean(centred**2)))
    if rms == 0.0:
        dead = ("every sample has the same value: the input looks dead",)
        return ChannelActivity("constant", 0.0, ref, 0.0, 1.0, dead)

    spec = amplitude_spectrum(centred, fs)
    amp = spec.amplitude
    floor = noise_floor(amp)
    peaks = find_peaks(spec.freq_hz, amp, floor=floor, threshold_db=PEAK_DB)
    max_peak = float(np.max(peaks.snr_db)) if len(peaks) else 0.0
    top = max(int(np.searchsorted(spec.freq_hz, spec.span_hz, side="right")), 4)
    power = np.maximum(amp[2:top] ** 2, np.finfo(np.float64).tiny)
    flatness = float(np.exp(np.mean(np.log(power))) / np.mean(power))

    reasons: list[str] = []
    if len(peaks):
        reasons.append(f"{len(peaks)} peak(s) up to {max_peak:.0f} dB above the floor")
    if flatness < FLATNESS_NOISE:
        reasons.append(f"a shaped spectrum (flatness {flatness:.2f}, white noise ≈ 1)")
    if np.isfinite(ref) and rms > LOUD_FACTOR * ref:
        reasons.append(f"RMS {rms / ref:.0f}× the converter noise")
    if reasons:
        return ChannelActivity("signal", rms, ref, max_peak, flatness, tuple(reasons))
    why = [f"no peak {PEAK_DB:.0f} dB above the floor", f"a flat spectrum ({flatness:.2f})"]
    if np.isfinite(ref):
        if rms <= NOISE_RMS_FACTOR * ref:
            why.append(f"RMS {rms / ref:.1f}× the converter noise")
        else:
            why.append(
                f"RMS {rms / ref:.1f}× the converter noise: above it, but with no tone or "
                "spectral shape"
            )
    return ChannelActivity("noise", rms, ref, max_peak, flatness, tuple(why))


def classify_channels(
    records: ArrayLike,
    sample_rate_hz: float,
    full_scale: float | None = None,
    bits: int | None = None,
    noise_rms: float | None = None,
) -> list[ChannelActivity]:
    """:func:`channel_activity` for every channel of a ``(channels, samples)`` array.

    Parameters
    ----------
    records : array_like
        2-D array, one row per channel (a 1-D record is one channel).
    sample_rate_hz, full_scale, bits, noise_rms
        As in :func:`channel_activity`, shared by all channels.
    """
    arr = np.asarray(records)
    if arr.ndim == 1:
        arr = arr[None, :]
    if arr.ndim != 2 or arr.shape[0] < 1:
        raise InputError(
            "records must be a (channels, samples) array", field="records", code="bad_shape"
        )
    out = []
    for i in range(arr.shape[0]):  # a handful of channels; each is vectorised
        try:
            out.append(channel_activity(arr[i], sample_rate_hz, full_scale, bits, noise_rms))
        except InputError as exc:
            raise exc.under(f"channels[{i}]") from None
    return out


def channels_sentence(activity: list[ChannelActivity], chosen: int | None = None) -> str:
    """One sentence naming the channels that carry signal and those that do not.

    Parameters
    ----------
    activity : list of ChannelActivity
        From :func:`classify_channels`, channel 0 first.
    chosen : int, optional
        The channel the request analyses; the sentence starts with it when it holds no
        signal.

    Returns
    -------
    str
        e.g. ``"channel 0 holds only noise; channels 1, 2 carry signal"``.
    """

    def names(idx: list[int]) -> str:
        word = "channel" if len(idx) == 1 else "channels"
        return f"{word} {', '.join(str(i) for i in idx)}"

    quiet = [i for i, a in enumerate(activity) if a.verdict != "signal"]
    loud = [i for i, a in enumerate(activity) if a.verdict == "signal"]
    parts: list[str] = []
    if chosen is not None and chosen in quiet:
        what = (
            "is constant (a dead input)"
            if activity[chosen].verdict == "constant"
            else ("holds only noise")
        )
        parts.append(f"channel {chosen}, the one analysed, {what}")
        quiet = [i for i in quiet if i != chosen]
    if quiet:
        verb = "holds" if len(quiet) == 1 else "hold"
        parts.append(f"{names(quiet)} {verb} only noise")
    if loud:
        verb = "carries" if len(loud) == 1 else "carry"
        parts.append(f"{names(loud)} {verb} signal")
    elif activity:
        parts.append("no channel carries a signal")
    return "; ".join(parts)
