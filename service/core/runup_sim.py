"""Simulated run-up records for the demo: a linear speed sweep, true sampling instants.

Every line is ``x(t) = A·|H(f(t))|·cos(2π∫f dt + ∠H(f(t)))`` with the instantaneous
frequency ``f(t) = fixed_hz + order·rpm(t)/60``. For a linear sweep
``rpm(t) = rpm0 + a·t`` the phase integral has the closed form
``2π(fixed_hz·t + order·(rpm0·t + a·t²/2)/60)``, evaluated at the converter's sampling
instants ``t = n/fs``. The analog anti-alias filter acts through its exact complex
response at each sample's instantaneous frequency (a quasi-static approximation: the
sweep is slow against the filter's settling time). A tacho channel gives square pulses
at equal shaft-angle steps.

The invented scenario is that of the project's design notes (an electric drive bench:
permanent-magnet motor with 4 pole pairs, 0–12,000 rpm, first gear mesh 17 teeth,
inverter at 10 kHz, converter at 12.8 kS/s behind a weak 2nd-order filter at 5 kHz).
Amplitudes are invented.

References
----------
.. [1] A. V. Oppenheim and R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
   2010, sec. 4.2 (sampling of a continuous-time sinusoid).
.. [2] D. G. Holmes and T. A. Lipo, *Pulse Width Modulation for Power Converters*,
   2003 (sine-triangle PWM lines at m·fc ± n·f1 with m + n odd).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import scipy.signal
from numpy.typing import NDArray

__all__ = ["SimLine", "SimRecord", "drive_lines", "simulate_run_up"]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class SimLine:
    """One line: true frequency ``fixed_hz + order · shaft speed (Hz)``, amplitude."""

    label: str
    order: float
    fixed_hz: float
    amplitude: float


@dataclass(frozen=True, eq=False)
class SimRecord:
    """A simulated record: vibration and tacho channels, the true speed, the lines."""

    vibration: FloatArray
    tacho: FloatArray
    rate_hz: float
    rpm_start: float
    rpm_end: float
    duration_s: float
    pulses_per_rev: int
    lines: tuple[SimLine, ...] = field(default_factory=tuple)

    def rpm_at(self, t_s: FloatArray) -> FloatArray:
        """True speed, rpm, at times ``t_s``, s."""
        slope = (self.rpm_end - self.rpm_start) / self.duration_s
        return self.rpm_start + slope * np.asarray(t_s, dtype=np.float64)


def drive_lines(
    *, pole_pairs: int = 4, mesh_teeth: int = 17, carrier_hz: float = 10_000.0
) -> tuple[SimLine, ...]:
    """The invented e-drive's lines: orders, gear mesh harmonics, PWM carrier and sidebands.

    Sidebands ``fc ± 2·f1`` and ``2·fc ± f1`` (f1 = pole pairs × shaft speed) are the
    sine-triangle PWM lines with m + n odd [2]_.
    """
    pp = float(pole_pairs)
    z = float(mesh_teeth)
    return (
        SimLine("shaft 1×", 1.0, 0.0, 0.5),
        SimLine("shaft 2×", 2.0, 0.0, 0.3),
        SimLine("electrical 2·f1", 2 * pp, 0.0, 0.4),
        SimLine("mesh 1×", z, 0.0, 1.0),
        SimLine("mesh 2×", 2 * z, 0.0, 0.8),
        SimLine("mesh 3×", 3 * z, 0.0, 0.6),
        SimLine("mesh 4×", 4 * z, 0.0, 0.5),
        SimLine("carrier", 0.0, carrier_hz, 0.8),
        SimLine("carrier − 2·f1", -2 * pp, carrier_hz, 0.5),
        SimLine("carrier + 2·f1", 2 * pp, carrier_hz, 0.5),
    )


def _analog_response(
    kind: str, order: int, cutoff_hz: float, freq_hz: FloatArray
) -> NDArray[np.complex128]:
    b, a = scipy.signal.iirfilter(
        order, 2 * np.pi * cutoff_hz, btype="low", analog=True, ftype=kind
    )
    s = 2j * np.pi * freq_hz
    h: NDArray[np.complex128] = np.polyval(b, s) / np.polyval(a, s)
    return h


def simulate_run_up(
    lines: Sequence[SimLine] | None = None,
    *,
    rate_hz: float = 12_800.0,
    duration_s: float = 30.0,
    rpm_start: float = 0.0,
    rpm_end: float = 12_000.0,
    analog: tuple[str, int, float] | None = ("butter", 2, 5_000.0),
    decimate: int = 1,
    pulses_per_rev: int = 1,
    noise_rms: float = 0.01,
    seed: int = 0,
    block: int = 1 << 18,
) -> SimRecord:
    """Simulate a linear run-up sampled at ``rate_hz`` (then sliced ``[::decimate]``).

    Parameters
    ----------
    lines : sequence of SimLine, optional
        Lines to generate; default :func:`drive_lines`. A line whose true frequency is
        negative at some speed is taken by magnitude (it mirrors at 0 Hz).
    rate_hz : float
        Converter sample rate, Hz.
    duration_s : float
        Record length, s.
    rpm_start, rpm_end : float
        Speed at the start and end, rpm (linear in time).
    analog : (ftype, order, cutoff_hz) or None
        Analog low-pass ahead of the converter (scipy.signal.iirfilter ``ftype``).
    decimate : int
        Keep every ``decimate``-th sample with no filter (a script's slice).
    pulses_per_rev : int
        Tacho pulses per revolution.
    noise_rms : float
        White converter noise, RMS, in the vibration unit.
    seed : int
        Random seed of the noise.
    block : int
        Samples generated per step (memory bound).

    Returns
    -------
    SimRecord
        ``rate_hz`` of the result is the rate after the slice.
    """
    lines = tuple(drive_lines() if lines is None else lines)
    n = round(duration_s * rate_hz)
    rng = np.random.default_rng(seed)
    slope = (rpm_end - rpm_start) / 60.0 / duration_s  # shaft Hz per s
    r0 = rpm_start / 60.0
    vib = np.empty(n, dtype=np.float64)
    tach = np.empty(n, dtype=np.float64)
    orders = np.array([ln.order for ln in lines])
    fixed = np.array([ln.fixed_hz for ln in lines])
    amps = np.array([ln.amplitude for ln in lines])
    for a in range(0, n, block):
        t = np.arange(a, min(n, a + block), dtype=np.float64) / rate_hz
        rev = r0 * t + 0.5 * slope * t * t  # shaft angle, revolutions
        inst = fixed[:, None] + orders[:, None] * (r0 + slope * t)[None, :]
        phase = 2 * np.pi * (fixed[:, None] * t[None, :] + orders[:, None] * rev[None, :])
        if analog is not None:
            h = _analog_response(analog[0], analog[1], analog[2], np.abs(inst))
            # A line with negative frequency is the conjugate of its mirror: its phase
            # runs the other way, so the filter's phase enters with the sign of f.
            gain, shift = np.abs(h), np.sign(inst) * np.angle(h)
        else:
            gain, shift = np.ones_like(inst), np.zeros_like(inst)
        vib[a : a + t.size] = np.sum(amps[:, None] * gain * np.cos(phase + shift), axis=0)
        vib[a : a + t.size] += noise_rms * rng.standard_normal(t.size)
        frac = np.mod(rev * pulses_per_rev, 1.0)
        tach[a : a + t.size] = np.where(frac < 0.25, 5.0, 0.0)
    tach += 0.02 * rng.standard_normal(n)
    m = int(decimate)
    return SimRecord(
        vibration=vib[::m].copy(),
        tacho=tach[::m].copy(),
        rate_hz=rate_hz / m,
        rpm_start=rpm_start,
        rpm_end=rpm_end,
        duration_s=duration_s,
        pulses_per_rev=pulses_per_rev,
        lines=lines,
    )
