"""The invented demo scenario: an end-of-line test bench for an electric drive unit.

A permanent-magnet motor (4 pole pairs) drives a two-stage reduction (first mesh 17/53
teeth, second 19/61); a ball bearing carries the input shaft; the inverter switches at
10 kHz; a cooling fan with 7 blades sits on the motor shaft; the supply is 50 Hz. The
accelerometer is read at 12.8 kS/s behind a weak 2nd-order filter, and a second channel
is decimated in software by slicing. Every number here is invented for the demo; nothing
comes from a real product.
"""

from __future__ import annotations

import functools
from typing import Any

import numpy as np

from .contract.filters import AnalogFilterIn
from .core.chain import Chain
from .core.sources import expand_sources, source_from_dict
from .core.spectrum import amplitude_spectrum

__all__ = [
    "DEMO_RPM",
    "DEMO_TOP_RPM",
    "demo_anti_alias",
    "demo_fold_request",
    "demo_plan_request",
    "demo_sources",
]

DEMO_RPM = 9000.0
POLE_PAIRS = 4
FIRST_MESH = (17, 53)
SECOND_MESH = (19, 61)


def demo_anti_alias() -> dict[str, Any]:
    return {"family": "butterworth", "order": 2, "cutoff_hz": 5000.0}


def demo_sources(rpm: float = DEMO_RPM) -> list[dict[str, Any]]:
    """The drive unit's sources at motor speed ``rpm``; amplitudes in g, invented."""
    motor_hz = rpm / 60.0
    middle_hz = motor_hz * FIRST_MESH[0] / FIRST_MESH[1]
    return [
        {
            "type": "shaft",
            "label": "motor shaft",
            "speed_rpm": rpm,
            "orders": [1, 2, 3],
            "amplitude": 0.05,
        },
        {
            "type": "gear_mesh",
            "label": "first mesh 17/53",
            "speed_rpm": rpm,
            "teeth": FIRST_MESH[0],
            "harmonics": 3,
            "sidebands": 1,
            "amplitude": 0.8,
        },
        {
            "type": "gear_mesh",
            "label": "second mesh 19/61",
            "speed_hz": middle_hz,
            "teeth": SECOND_MESH[0],
            "harmonics": 3,
            "sidebands": 1,
            "amplitude": 0.4,
        },
        {
            "type": "bearing",
            "label": "input shaft bearing",
            "speed_rpm": rpm,
            "n_elements": 8,
            "element_diameter": 11.1,
            "pitch_diameter": 46.0,
            "contact_angle_deg": 0.0,
            "harmonics": 3,
            "amplitude": 0.02,
        },
        {
            "type": "blade_pass",
            "label": "cooling fan",
            "speed_rpm": rpm,
            "blades": 7,
            "harmonics": 2,
            "amplitude": 0.1,
        },
        {
            "type": "line",
            "label": "supply",
            "line_hz": 50.0,
            "harmonics": [1, 2, 3, 5, 7],
            "amplitude": 0.01,
        },
        {
            "type": "pwm",
            "label": "inverter",
            "carrier_hz": 10_000.0,
            "pole_pairs": POLE_PAIRS,
            "speed_rpm": rpm,
            "carrier_multiples": 2,
            "sidebands": 2,
            "amplitude": 0.5,
        },
    ]


def demo_fold_request(rpm: float = DEMO_RPM) -> dict[str, Any]:
    """A fold request for the bench's main channel (12.8 kS/s, weak 2nd-order filter)."""
    return {
        "sample_rate_hz": 12_800.0,
        "anti_alias": demo_anti_alias(),
        "sources": demo_sources(rpm),
        "lines": 1600,
        "speed_tolerance_pct": 1.0,
    }


def demo_sliced_chain() -> list[dict[str, Any]]:
    """The second channel: same converter, then decimated by 2 in software by slicing."""
    return [
        {"stage": "analog_lowpass", **demo_anti_alias()},
        {"stage": "sample", "rate_hz": 12_800.0},
        {"stage": "decimate", "factor": 2, "filter": "none"},
    ]


def demo_time_record(
    rpm: float = DEMO_RPM,
    seconds: float = 4.0,
    sliced: bool = False,
    seed: int = 1,
    rate_hz: float = 12_800.0,
    anti_alias: dict[str, Any] | None = None,
) -> tuple[Any, float]:
    """A synthetic accelerometer record of the bench, made by the app itself.

    Each tone (from the demo sources, amplitudes invented) is weighted by the analog
    filter's response and sampled at its true frequency at the converter's instants, so
    aliasing happens exactly as in a real capture. With ``sliced`` the record is then
    decimated by 2 by slicing, as the second channel's script does. Unknown harmonic
    amplitudes are set to a fifth of their source's main line. ``rate_hz`` and
    ``anti_alias`` (default the bench's weak filter) give other acquisition setups.
    """
    tones = expand_sources([source_from_dict(s) for s in demo_sources(rpm)])
    amp = tones.amplitude.copy()
    for src in set(tones.source.tolist()):
        sel = tones.source == src
        main = np.nanmax(amp[sel]) if np.any(np.isfinite(amp[sel])) else 0.01
        amp[sel & ~np.isfinite(amp)] = 0.2 * main
    rate = float(rate_hz)
    chain = Chain.shorthand(rate, AnalogFilterIn(**(anti_alias or demo_anti_alias())).to_core())
    gain = 10.0 ** (-chain.evaluate(tones.freq_hz).attenuation_db / 20.0)
    rng = np.random.default_rng(seed)
    n = int(seconds * rate)
    t = np.arange(n) / rate
    phase = rng.uniform(0, 2 * np.pi, len(tones))
    x = np.zeros(n)
    for f, a, p in zip(tones.freq_hz, amp * gain, phase, strict=True):
        x += a * np.cos(2 * np.pi * f * t + p)
    x += rng.normal(0.0, 2e-4, n)
    if sliced:
        return x[::2], rate / 2
    return x, rate


@functools.lru_cache(maxsize=8)
def demo_spectrum(lines: int = 1600, sliced: bool = False) -> tuple[Any, Any, float]:
    """The demo record's averaged amplitude spectrum: (freq_hz, amplitude, rate).

    The same for every call (fixed seed), so it is simulated once per process; the arrays
    are read-only."""
    x, rate = demo_time_record(sliced=sliced)
    s = amplitude_spectrum(x, rate, lines=lines)
    return s.freq_hz, s.amplitude, rate


def demo_diagnose_request(lines: int = 1600) -> dict[str, Any]:
    """A diagnose request for the bench's main channel with its demo spectrum."""
    f, a, rate = demo_spectrum(lines)
    return {
        "sample_rate_hz": rate,
        "anti_alias": demo_anti_alias(),
        "spectrum": {
            "freq_hz": [round(float(v), 4) for v in f],
            "amplitude": [float(f"{v:.5g}") for v in a],
            "unit": "linear",
        },
        "sources": demo_sources(),
        "speed_tolerance_pct": 1.0,
    }


#: The multi-rate demo: the bench's converter rate and a second one, same filter.
DEMO_COMPARE_RATES = (12_800.0, 16_000.0)
#: The bench accelerometer's usable bandwidth, Hz (invented).
DEMO_SENSOR_HZ = 30_000.0


@functools.lru_cache(maxsize=2)
def demo_compare_request(lines: int = 3200) -> dict[str, Any]:
    """A comparison of the bench captured at 12.8 and 16 kS/s behind the same weak filter.

    Each capture is simulated by :func:`demo_time_record` at its rate (same speed, its
    own noise) and sent as its averaged spectrum. The highest true frequency is the
    accelerometer's bandwidth; without it, tones whose images fold alike are ambiguous.
    Callers must not modify the result (it is cached).
    """
    captures = []
    for k, rate in enumerate(DEMO_COMPARE_RATES):
        x, _ = demo_time_record(seed=1 + k, rate_hz=rate)
        s = amplitude_spectrum(x, rate, lines=lines)
        captures.append(
            {
                "label": f"{rate / 1000:g} kS/s",
                "sample_rate_hz": rate,
                "anti_alias": demo_anti_alias(),
                "spectrum": {
                    "freq_hz": [round(float(v), 4) for v in s.freq_hz],
                    "amplitude": [float(f"{v:.5g}") for v in s.amplitude],
                    "unit": "linear",
                },
            }
        )
    # The accelerometer's bandwidth (invented): inside the rates' unambiguous range
    # (32 kHz), so the answers can be unique.
    return {"captures": captures, "threshold_db": 12.0, "max_true_hz": DEMO_SENSOR_HZ}


DEMO_TOP_RPM = 12_000.0


def demo_plan_request() -> dict[str, Any]:
    """The drive-unit bench: 1,000 to 12,000 rpm, band 0-5 kHz, 60 dB alias rejection."""
    return {
        "band_hz": [0.0, 5000.0],
        "sources": demo_sources(DEMO_TOP_RPM),
        "nominal_rpm": DEMO_TOP_RPM,
        "speed_range_rpm": [1000.0, DEMO_TOP_RPM],
        "rejection_db": 60.0,
    }
