"""Independent first-principles run-up simulator: the reference for the run-up tests.

Nothing here uses the project's code. The shaft speed is a linear sweep; the shaft angle
and every line's phase are integrated numerically (cumulative trapezoid at
:data:`OVERSAMPLE` times the converter rate, then taken at the converter's instants
``t = n/fs``). The analog anti-alias filter acts through its exact complex response at
each sample's instantaneous frequency, from ``scipy.signal.freqs`` (gain and phase).
A script's decimation is the slice ``[::M]``. The tacho is a square pulse train at equal
shaft-angle steps.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.integrate
import scipy.signal

OVERSAMPLE = 8


@dataclass(frozen=True)
class Line:
    """True frequency ``fixed_hz + order · shaft speed (Hz)``, amplitude."""

    label: str
    order: float
    fixed_hz: float
    amplitude: float
    #: Optional level bump: amplitude × (0.03 + exp(−½((rpm − peak_rpm)/width_rpm)²)).
    peak_rpm: float | None = None
    width_rpm: float = 1000.0


@dataclass
class Record:
    vibration: np.ndarray
    tacho: np.ndarray
    rate_hz: float
    rpm0: float
    rpm1: float
    duration_s: float

    def rpm_at(self, t):
        return self.rpm0 + (self.rpm1 - self.rpm0) * np.asarray(t) / self.duration_s


def simulate(
    lines,
    *,
    rate_hz=12_800.0,
    duration_s=30.0,
    rpm0=0.0,
    rpm1=12_000.0,
    analog=("butter", 2, 5_000.0),
    decimate=1,
    pulses_per_rev=1,
    noise_rms=0.01,
    seed=1,
):
    fine = rate_hz * OVERSAMPLE
    n_fine = round(duration_s * fine) + 1
    t_fine = np.arange(n_fine) / fine
    shaft_hz = (rpm0 + (rpm1 - rpm0) * t_fine / duration_s) / 60.0
    angle = scipy.integrate.cumulative_trapezoid(shaft_hz, t_fine, initial=0.0)  # revs
    take = slice(0, n_fine - 1, OVERSAMPLE)
    n = len(range(*take.indices(n_fine)))
    x = np.zeros(n)
    if analog is not None:
        b, a = scipy.signal.iirfilter(analog[1], 2 * np.pi * analog[2], btype="low",
                                      analog=True, ftype=analog[0])  # fmt: skip
    for ln in lines:
        f_inst = ln.fixed_hz + ln.order * shaft_hz[take]
        cycles = ln.fixed_hz * t_fine[take] + ln.order * angle[take]
        if analog is not None:
            _, h = scipy.signal.freqs(b, a, worN=2 * np.pi * np.abs(f_inst))
            gain, shift = np.abs(h), np.sign(f_inst) * np.angle(h)
        else:
            gain, shift = 1.0, 0.0
        amp = ln.amplitude
        if ln.peak_rpm is not None:
            rpm = 60.0 * shaft_hz[take]
            amp = amp * (0.03 + np.exp(-0.5 * ((rpm - ln.peak_rpm) / ln.width_rpm) ** 2))
        x += amp * gain * np.cos(2 * np.pi * cycles + shift)
    rng = np.random.default_rng(seed)
    x += noise_rms * rng.standard_normal(n)
    tacho = np.where(np.mod(angle[take] * pulses_per_rev, 1.0) < 0.3, 4.0, 0.5)
    tacho = tacho + 0.01 * rng.standard_normal(n)
    return Record(x[::decimate], tacho[::decimate], rate_hz / decimate, rpm0, rpm1, duration_s)


def drive_unit():
    """The invented e-drive of the design notes (amplitudes invented)."""
    return [
        Line("shaft 1×", 1, 0.0, 0.5),
        Line("shaft 2×", 2, 0.0, 0.3),
        Line("2·f1 (4 pole pairs)", 8, 0.0, 0.4),
        Line("mesh 1× (17 teeth)", 17, 0.0, 1.0),
        Line("mesh 2×", 34, 0.0, 0.8),
        Line("mesh 3×", 51, 0.0, 0.6),
        Line("mesh 4×", 68, 0.0, 0.5),
        Line("carrier 10 kHz", 0, 10_000.0, 0.8),
        Line("carrier − 2·f1", -8, 10_000.0, 0.5),
        Line("carrier + 2·f1", 8, 10_000.0, 0.5),
    ]


def zone(freq_hz, rate_hz):
    """Nyquist zone by its definition: ((z−1)·fs/2, z·fs/2] (Lyons, sec. 2.3)."""
    return np.maximum(np.ceil(np.asarray(freq_hz) / (rate_hz / 2)), 1).astype(int)
