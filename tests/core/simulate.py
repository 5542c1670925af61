"""Simulated acquisitions from first principles: the independent reference for diagnosis.

Nothing here uses the project's chain or filter code. Tones pass an analog filter
designed with scipy.signal (its exact complex response from ``freqs`` scales and shifts
each tone), are sampled at the real instants ``t = k/fs`` with ``numpy.cos``, get white
converter noise, then run through real digital filters (``scipy.signal.lfilter`` with
taps from ``firwin``/``kaiserord``) and decimation by slicing ``[::M]``. The spectrum
and its peaks come from :mod:`service.core.spectrum`, which is what diagnosis reads.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import scipy.signal

from service.core.spectrum import Peaks, Spectrum, amplitude_spectrum, find_peaks

__all__ = [
    "Capture",
    "SimChain",
    "analog_attenuation_db",
    "decimate_taps",
    "fir_attenuation_db",
    "kaiser_taps",
    "simulate_capture",
]


@dataclass(frozen=True)
class SimChain:
    """A plain description of an acquisition chain for the simulation.

    Attributes
    ----------
    rate_hz : float
        Converter sample rate, Hz.
    analog : (ftype, order, cutoff_hz) or None
        Analog low-pass before the converter, ``ftype`` as in scipy.signal.iirfilter
        (``"butter"``, ``"bessel"``...); cutoff in Hz.
    digital : tuple of steps
        After sampling, in order: ``("fir", passband_hz, stopband_hz, atten_db)`` (a
        Kaiser-window FIR at the rate in force) or ``("decimate", M, "none" | "fir")``
        (keep every M-th sample, after scipy.signal.decimate's FIR for ``"fir"``).
    """

    rate_hz: float
    analog: tuple[str, int, float] | None = None
    digital: tuple[tuple[object, ...], ...] = field(default_factory=tuple)


@dataclass(frozen=True, eq=False)
class Capture:
    """A simulated record, its spectrum and peaks."""

    samples: np.ndarray
    rate_hz: float
    spectrum: Spectrum
    peaks: Peaks


def _analog_ba(ftype: str, order: int, cutoff_hz: float) -> tuple[np.ndarray, np.ndarray]:
    b, a = scipy.signal.iirfilter(order, 2 * np.pi * cutoff_hz, btype="low", analog=True,
                                  ftype=ftype)  # fmt: skip
    return b, a


def analog_attenuation_db(ftype: str, order: int, cutoff_hz: float, freq_hz: float) -> float:
    """Reference: attenuation of the analog design at ``freq_hz`` (scipy.signal.freqs)."""
    b, a = _analog_ba(ftype, order, cutoff_hz)
    _, h = scipy.signal.freqs(b, a, worN=[2 * np.pi * freq_hz])
    return float(-20 * np.log10(np.abs(h[0])))


def kaiser_taps(rate_hz: float, passband_hz: float, stopband_hz: float, atten_db: float):
    """Kaiser-window low-pass taps (scipy.signal.kaiserord + firwin), cut mid-transition."""
    numtaps, beta = scipy.signal.kaiserord(atten_db, (stopband_hz - passband_hz) / (rate_hz / 2))
    return scipy.signal.firwin(
        numtaps, (passband_hz + stopband_hz) / 2, window=("kaiser", beta), fs=rate_hz
    )


def decimate_taps(factor: int) -> np.ndarray:
    """The FIR scipy.signal.decimate uses by default: firwin(20·M + 1, 1/M, hamming)."""
    return scipy.signal.firwin(20 * factor + 1, 1.0 / factor, window="hamming")


def fir_attenuation_db(taps: np.ndarray, rate_hz: float, freq_hz: float) -> float:
    """Reference: attenuation of FIR ``taps`` at ``freq_hz`` (scipy.signal.freqz)."""
    _, h = scipy.signal.freqz(taps, worN=[freq_hz], fs=rate_hz)
    return float(-20 * np.log10(np.abs(h[0])))


def simulate_capture(
    tones: Sequence[tuple[float, float]],
    chain: SimChain,
    duration_s: float,
    noise_rms: float,
    seed: int,
    lines: int | None = None,
    window: str = "hann",
) -> Capture:
    """Simulate a record of ``tones`` (frequency Hz, amplitude) through ``chain``.

    Each tone gets a random phase; the analog filter's complex response at the tone's
    frequency scales its amplitude and shifts its phase; samples are taken at
    ``t = k/fs``; white noise of ``noise_rms`` is added at the converter; digital
    filters run with lfilter and their start-up transient (one filter length) is dropped
    before any further stage.
    """
    rng = np.random.default_rng(seed)
    fs = float(chain.rate_hz)
    n = round(duration_s * fs)
    t = np.arange(n) / fs
    freqs = np.array([f for f, _ in tones], dtype=np.float64)
    amps = np.array([a for _, a in tones], dtype=np.float64)
    phases = rng.uniform(0, 2 * np.pi, freqs.size)
    if chain.analog is not None:
        b, a = _analog_ba(*chain.analog)
        _, h = scipy.signal.freqs(b, a, worN=2 * np.pi * freqs)
        amps = amps * np.abs(h)
        phases = phases + np.angle(h)
    x = np.zeros(n)
    for f, amp, ph in zip(freqs, amps, phases, strict=True):  # a few tones
        x += amp * np.cos(2 * np.pi * f * t + ph)
    x += rng.normal(0.0, noise_rms, n)
    rate = fs
    for step in chain.digital:
        if step[0] == "fir":
            _, fp, fstop, att = step
            taps = kaiser_taps(rate, float(fp), float(fstop), float(att))  # type: ignore[arg-type]
            x = scipy.signal.lfilter(taps, 1.0, x)[taps.size :]
        elif step[0] == "decimate":
            _, m, kind = step
            m = int(m)  # type: ignore[call-overload]
            if kind == "fir":
                taps = decimate_taps(m)
                x = scipy.signal.lfilter(taps, 1.0, x)[taps.size :]
            x = x[::m]
            rate /= m
        else:
            raise ValueError(f"unknown step {step!r}")
    spec = amplitude_spectrum(x, rate, lines=lines, window=window)
    peaks = find_peaks(spec.freq_hz, spec.amplitude, window=window)
    return Capture(samples=x, rate_hz=rate, spectrum=spec, peaks=peaks)


def nearest_peak(peaks: Peaks, freq_hz: float) -> int:
    """Index of the peak nearest ``freq_hz``."""
    return int(np.argmin(np.abs(peaks.freq_hz - freq_hz)))
