"""Running-speed estimation from the peaks, against simulated machines with known speed."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.signal

from service.core.attribution import frequency_tolerance_hz
from service.core.errors import InputError
from service.core.speed import (
    DEFAULT_SEARCH_PCT,
    estimate_speed,
    estimate_speed_for_tones,
    slip,
    synchronous_speed_rpm,
)
from service.core.tones import ToneSet, strings

from .simulate import SimChain, simulate_capture

# A 4-pole motor (nominal 1480 rpm on the request) with a 23-tooth mesh and a bearing;
# orders are multiples of shaft speed. Invented amplitudes.
ORDERS = np.array([1, 2, 3, 4, 5, 6, 8, 10, 23, 46, 69, 3.5848, 5.4152])
AMPS = np.array([1, 0.5, 0.3, 0.2, 0.15, 0.1, 0.08, 0.05, 0.4, 0.2, 0.1, 0.05, 0.05])


def _machine(true_rpm: float, fs: float = 1024.0, seconds: float = 16.0, seed: int = 4):
    shaft_hz = true_rpm / 60.0
    tones = [(o * shaft_hz, a) for o, a in zip(ORDERS, AMPS, strict=True)]
    tones += [(50.0, 0.2), (100.0, 0.1)]  # supply lines: fixed
    return simulate_capture(tones, SimChain(rate_hz=fs), seconds, 1e-3, seed=seed)


def _tone_arrays(nominal_rpm: float) -> tuple[np.ndarray, np.ndarray]:
    fixed = np.r_[np.zeros(ORDERS.size), 50.0, 100.0]
    speed = np.r_[ORDERS * nominal_rpm / 60.0, 0.0, 0.0]
    return fixed, speed


class TestSlip:
    def test_basic(self) -> None:
        # Common practice: n_sync = 120·f/p; a 4-pole 50 Hz motor turns at 1500 rpm
        # synchronous, a 2-pole 60 Hz one at 3600 rpm.
        assert synchronous_speed_rpm(50.0, 4) == pytest.approx(1500.0)
        assert synchronous_speed_rpm(60.0, 2) == pytest.approx(3600.0)
        # Common practice: s = (n_sync − n)/n_sync: 1490 rpm → 0.667 %, 1440 rpm → 4 %.
        np.testing.assert_allclose(slip([1490.0, 1440.0], 50.0, 4), [10 / 1500, 60 / 1500])

    def test_errors(self) -> None:
        with pytest.raises(InputError, match="poles"):
            synchronous_speed_rpm(50.0, 3)
        with pytest.raises(InputError, match="line_hz"):
            synchronous_speed_rpm(0.0, 4)


class TestEstimateSpeed:
    def test_basic(self) -> None:
        # The machine runs at 1490 rpm; the request says the nameplate 1480 rpm. The
        # difference (0.68 %) is a typical change of slip: for the 4-pole 50 Hz motor
        # (n_sync = 1500 rpm) slip 0.67 % instead of 1.33 %, well inside the ±4 % search.
        assert DEFAULT_SEARCH_PCT == 4.0
        cap = _machine(1490.0)
        tol = frequency_tolerance_hz(cap.spectrum.bin_width_hz)
        fixed, speed = _tone_arrays(1480.0)
        got = estimate_speed(
            fixed, speed, cap.peaks.freq_hz, cap.rate_hz, tol, cap.peaks.amplitude,
            nominal_speed=1480.0,
        )  # fmt: skip
        assert got.trustworthy
        # Reference: the simulated truth, 1490 rpm; stated tolerance 0.5 rpm (the bin is
        # 0.5 Hz wide, i.e. 0.3 rpm at the first order, and the fit uses up to 69×).
        assert got.speed_hz == pytest.approx(1490.0, abs=0.5)
        assert got.ratio == pytest.approx(1490.0 / 1480.0, abs=0.5 / 1480.0)
        assert 0 < got.speed_uncertainty < 0.5
        assert got.offset_pct == pytest.approx(100 * 10 / 1480, abs=0.05)
        assert got.explained_at_estimate == len(cap.peaks)
        assert got.explained_at_nominal < got.explained_at_estimate
        assert "1490" in got.reason

    def test_even_zone_members_move_the_other_way(self) -> None:
        # fs = 1000 S/s, harmonics 5, 6, 7 of a 130 Hz fundamental: 650, 780, 910 Hz lie
        # in zone 2 (inverted). At 2 % faster they read lower: 337, 204.4, 71.8 Hz.
        # Reference: numpy FFT peaks of the sampled sines (not the fold formula).
        fs, n = 1000.0, 2**15
        t = np.arange(n) / fs
        true = np.array([5, 6, 7]) * 130.0 * 1.02
        x = np.sum(np.cos(2 * np.pi * true[:, None] * t), axis=0)
        spec = np.abs(np.fft.rfft(x * np.hanning(n)))
        f = np.fft.rfftfreq(n, 1 / fs)
        idx, _ = scipy.signal.find_peaks(spec, height=0.1 * spec.max())
        peaks = f[idx]
        np.testing.assert_allclose(peaks, [71.8, 204.4, 337.0], atol=0.1)
        got = estimate_speed(
            np.zeros(3), np.array([5, 6, 7]) * 130.0, peaks, fs, 0.1, search_pct=4.0
        )
        assert got.trustworthy
        assert got.ratio == pytest.approx(1.02, abs=1e-4)

    def test_for_tones(self) -> None:
        cap = _machine(1490.0, seed=5)
        fixed, speed = _tone_arrays(1480.0)
        n = fixed.size
        tones = ToneSet(
            label=strings([f"t{i}" for i in range(n)]), source=strings(["m"] * n),
            kind=strings(["shaft"] * n), fixed_hz=fixed, speed_hz=speed,
            amplitude=np.full(n, np.nan),
        )  # fmt: skip
        tol = frequency_tolerance_hz(cap.spectrum.bin_width_hz)
        got = estimate_speed_for_tones(tones, cap.peaks.freq_hz, cap.rate_hz, tol)
        assert got.trustworthy
        assert got.ratio * 1480.0 == pytest.approx(1490.0, abs=0.5)

    def test_edges(self) -> None:
        # Fixed tones only: nothing to estimate from.
        got = estimate_speed([50.0], [0.0], [50.0], 1000.0, 0.5, nominal_speed=1480.0)
        assert not got.trustworthy and got.ratio == 1.0 and "moves with speed" in got.reason
        assert got.speed_hz == 1480.0
        # Two matched peaks are too few.
        got = estimate_speed([0.0, 0.0], [100.0, 200.0], [101.0, 202.0], 1000.0, 0.3)
        assert not got.trustworthy and got.ratio == 1.0
        assert got.estimated_ratio == pytest.approx(1.01, abs=1e-3)
        # Two separate speeds explain three peaks each: ambiguous, nominal kept.
        peaks = [98.0, 196.0, 294.0, 102.0, 204.0, 306.0]
        got = estimate_speed([0.0] * 3, [100.0, 200.0, 300.0], peaks, 1000.0, 0.3)
        assert not got.trustworthy and got.ratio == 1.0 and "two speeds" in got.reason
        # No peaks at all.
        assert not estimate_speed([0.0], [100.0], [], 1000.0, 0.3).trustworthy

    def test_errors(self) -> None:
        with pytest.raises(InputError, match="search_pct"):
            estimate_speed([0.0], [1.0], [1.0], 100.0, 0.1, search_pct=50)
        with pytest.raises(InputError, match="tolerance_hz"):
            estimate_speed([0.0], [1.0], [1.0], 100.0, 0.0)
        with pytest.raises(InputError, match="one of each"):
            estimate_speed([0.0, 1.0], [1.0], [1.0], 100.0, 0.1)
        with pytest.raises(InputError, match="peaks_amplitude"):
            estimate_speed([0.0], [1.0], [1.0, 2.0], 100.0, 0.1, peaks_amplitude=[1.0])
        with pytest.raises(InputError, match="tones"):
            estimate_speed_for_tones([1.0], [1.0], 100.0, 0.1)  # type: ignore[arg-type]
