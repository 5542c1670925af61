"""Folding against published worked values and an independent sampling simulation."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from service.core.errors import InputError
from service.core.folding import fold, fold_intervals, fold_line, is_inverted, nyquist_zone
from service.core.spectrum import amplitude_spectrum


def _fft_peak_hz(freq_hz: float, fs: float, n: int, phase: float) -> float:
    """Reference: sample cos(2π f t + φ) at t = k/fs with numpy, FFT, take the peak bin.

    With n samples the bin width is fs/n; frequencies in the tests sit on bins so the
    peak is exact and needs no interpolation.
    """
    t = np.arange(n) / fs
    x = np.cos(2 * np.pi * freq_hz * t + phase)
    spec = np.abs(np.fft.rfft(x))
    return float(np.argmax(spec) * fs / n)


class TestFold:
    def test_basic(self) -> None:
        # Source: fold |f − fs·round(f/fs)| (Oppenheim & Schafer 2010, sec. 4.2), by hand at fs = 10
        # kHz:
        # 10 − 7.3 = 2.7 kHz, 13.2 − 10 = 3.2 kHz.
        np.testing.assert_allclose(fold([7300.0, 13200.0], 10_000.0), [2700.0, 3200.0])

    def test_against_sampling_simulation(self) -> None:
        # Reference: numpy sampling + FFT peak (independent of the fold formula).
        rng = np.random.default_rng(1)
        fs, n = 1024.0, 1024  # 1 Hz bins; integer frequencies are exact bins
        true = rng.integers(0, 40 * 1024, size=3000).astype(float)
        # Zone edges and exact multiples of fs/2 (Nyquist, DC images).
        edges = np.arange(0, 41) * fs / 2
        true = np.concatenate([true, edges, edges + 1, np.maximum(edges - 1, 0)])
        expected = np.array(
            [_fft_peak_hz(f, fs, n, phase=0.3) for f in true]  # phase ≠ 0 keeps fs/2 visible
        )
        np.testing.assert_allclose(fold(true, fs), expected, atol=1e-9)

    def test_common_practice_facts(self) -> None:
        # Common practice: a sine sampled at 4/3 of its frequency shows at 1/3 of it.
        f = 3000.0
        assert fold(f, 4.0 / 3.0 * f) == pytest.approx(f / 3.0)
        # Common practice: sampled exactly twice per cycle at its zero crossings a sine
        # reads as a flat line. The fold puts it at fs/2, and the project's spectrum of
        # those samples shows nothing there, while the same tone sampled at its crests
        # shows a line at fs/2.
        fs = 2 * f
        assert fold(f, fs) == pytest.approx(fs / 2)
        k = np.arange(8192)
        at_zeros = amplitude_spectrum(np.sin(np.pi * k), fs, lines=800)
        at_crests = amplitude_spectrum(np.cos(np.pi * k), fs, lines=800)
        assert np.max(at_zeros.amplitude) < 1e-9
        top = int(np.argmax(at_crests.amplitude))
        # Within Hann's main-lobe half-width of 2 bins (Harris 1978, Table 1).
        assert abs(at_crests.freq_hz[top] - fs / 2) <= 2 * at_crests.bin_width_hz
        assert at_crests.amplitude[top] > 0.1

    def test_edges(self) -> None:
        fs = 10_000.0
        np.testing.assert_array_equal(
            fold([0.0, 5000.0, 10_000.0, 15_000.0], fs), [0.0, 5000.0, 0.0, 5000.0]
        )
        assert fold(np.array([]), fs).shape == (0,)

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match="sample_rate_hz=-5"):
            fold(1.0, -5)
        with pytest.raises(ValueError, match="must be finite"):
            fold([1.0, np.nan], 100.0)
        with pytest.raises(ValueError, match=">= 0"):
            fold([-1.0], 100.0)
        with pytest.raises(ValueError, match="sample_rate_hz=inf"):
            fold(1.0, np.inf)


class TestNyquistZone:
    def test_basic(self) -> None:
        # Source: zone k covers ((k−1)·fs/2, k·fs/2], even zones inverted (Lyons 2011, sec. 2.3):
        # 7.3 kHz at 10 kHz is zone 2 (5..10 kHz), 13.2 kHz zone 3 (10..15 kHz).
        np.testing.assert_array_equal(nyquist_zone([7300.0, 13200.0], 10_000.0), [2, 3])
        np.testing.assert_array_equal(is_inverted([7300.0, 13200.0], 10_000.0), [True, False])

    def test_inversion_direction(self) -> None:
        # Reference: the sampling simulation; in an even zone a rising true frequency
        # gives a falling apparent frequency.
        fs, n = 1024.0, 1024
        for f in (600.0, 1700.0, 2100.0):
            up = _fft_peak_hz(f + 5, fs, n, 0.1) - _fft_peak_hz(f, fs, n, 0.1)
            inverted = bool(is_inverted(f, fs))
            assert (up < 0) == inverted

    def test_edges(self) -> None:
        np.testing.assert_array_equal(
            nyquist_zone([0.0, 5000.0, 5000.1, 10_000.0], 10_000.0), [1, 1, 2, 2]
        )

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match="sample_rate_hz"):
            nyquist_zone(1.0, 0.0)


class TestFoldLine:
    def test_corners_of_seven_zones(self) -> None:
        # Source: Lyons, Understanding DSP, 3rd ed., sec. 2.3: zone k covers
        # ((k-1)·fs/2, k·fs/2], so 3,100 Hz at 1 kS/s lies in zone 7, which ends at 3,500 Hz;
        # the apparent frequency is 0 Hz at even multiples of fs/2 and fs/2 at odd ones.
        x, y = fold_line(3100.0, 1000.0)
        assert x.tolist() == [0.0, 500.0, 1000.0, 1500.0, 2000.0, 2500.0, 3000.0, 3500.0]
        assert y.tolist() == [0.0, 500.0, 0.0, 500.0, 0.0, 500.0, 0.0, 500.0]

    def test_at_least_two_zones(self) -> None:
        # Common practice: a folding diagram shows the first alias zone even when empty.
        x, _ = fold_line(10.0, 1000.0)
        assert x.tolist() == [0.0, 500.0, 1000.0]

    @settings(max_examples=60, deadline=None)
    @given(
        fs=st.floats(1.0, 1e6),
        top_ratio=st.floats(0.0, 40.0),
    )
    def test_line_through_corners_is_the_fold(self, fs: float, top_ratio: float) -> None:
        # Reference: the apparent frequency is the distance to the nearest multiple of fs
        # (Oppenheim & Schafer, Discrete-Time Signal Processing, 3rd ed., sec. 4.2),
        # computed here by brute force over the multiples, not with the project's fold.
        x, y = fold_line(top_ratio * fs, fs)
        assert x[-1] >= top_ratio * fs
        f = np.linspace(0.0, x[-1], 997)
        k = np.arange(0, int(np.ceil(x[-1] / fs)) + 2)
        brute = np.min(np.abs(f[:, None] - k[None, :] * fs), axis=1)
        assert np.allclose(np.interp(f, x, y), brute, rtol=0, atol=1e-9 * fs)


class TestFoldIntervals:
    def test_basic(self) -> None:
        # Reference: brute force — fold a dense grid of points inside the interval.
        fs = 10_000.0
        rng = np.random.default_rng(7)
        lo = rng.uniform(0, 40_000, 500)
        hi = lo + rng.uniform(0, 3000, 500)
        a_lo, a_hi = fold_intervals(lo, hi, fs)
        grid = np.linspace(0, 1, 4001)
        pts = fold(lo[:, None] + (hi - lo)[:, None] * grid[None, :], fs)
        np.testing.assert_allclose(a_lo, pts.min(axis=1), atol=fs / 4000)
        np.testing.assert_allclose(a_hi, pts.max(axis=1), atol=fs / 4000)

    def test_edges(self) -> None:
        fs = 10_000.0
        # Crossing fs/2 upward from zone 1: the apparent interval ends at fs/2.
        lo, hi = fold_intervals([4900.0], [5100.0], fs)
        np.testing.assert_allclose([lo[0], hi[0]], [4900.0, 5000.0])
        # Spanning a whole zone covers the whole band.
        lo, hi = fold_intervals([100.0], [12_000.0], fs)
        np.testing.assert_allclose([lo[0], hi[0]], [0.0, 5000.0])
        # A point interval is the fold of the point.
        lo, hi = fold_intervals([7300.0], [7300.0], fs)
        np.testing.assert_allclose([lo[0], hi[0]], [2700.0, 2700.0])

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match="below low_hz"):
            fold_intervals([10.0], [5.0], 100.0)


finite_freq = st.floats(min_value=0, max_value=1e7, allow_nan=False, allow_infinity=False)
rates = st.floats(min_value=1.0, max_value=1e6, allow_nan=False, allow_infinity=False)


class TestFoldProperties:
    @settings(max_examples=300, deadline=None)
    @given(finite_freq, rates)
    def test_apparent_in_band(self, f: float, fs: float) -> None:
        a = float(fold(f, fs))
        assert 0.0 <= a <= fs / 2 * (1 + 1e-12)

    @settings(max_examples=300, deadline=None)
    @given(finite_freq, rates, st.integers(min_value=0, max_value=50))
    def test_periodic_in_rate(self, f: float, fs: float, k: int) -> None:
        # fold(f + k·fs) = fold(f); tolerance scales with the magnitudes involved.
        tol = 1e-9 * (f + k * fs + fs)
        assert abs(float(fold(f + k * fs, fs)) - float(fold(f, fs))) <= tol

    @settings(max_examples=300, deadline=None)
    @given(rates, st.floats(min_value=0, max_value=1, allow_nan=False))
    def test_mirror(self, fs: float, x: float) -> None:
        # fold(fs − f) = fold(f) for 0 <= f <= fs.
        f = x * fs
        assert abs(float(fold(fs - f, fs)) - float(fold(f, fs))) <= 1e-9 * fs


# Every finite double, from subnormals to the largest: the core must either answer or
# refuse with InputError, never fail with another exception or a numpy warning (warnings
# are errors in this suite).
any_finite = st.floats(allow_nan=False, allow_infinity=False)
any_positive = st.floats(min_value=0.0, exclude_min=True, allow_nan=False, allow_infinity=False)


class TestFiniteInputs:
    @settings(max_examples=400, deadline=None)
    @given(any_finite, any_finite)
    def test_fold_and_zone_answer_or_refuse(self, f: float, fs: float) -> None:
        try:
            a = float(fold(f, fs))
            z = int(nyquist_zone(f, fs)[()])
            inv = bool(is_inverted(f, fs)[()])
        except InputError:
            return
        assert 0.0 <= a <= fs / 2 * (1 + 1e-9) + 5e-324
        assert z >= 1
        assert inv == (z % 2 == 0)

    @settings(max_examples=300, deadline=None)
    @given(any_finite, any_finite, any_finite)
    def test_fold_intervals_answer_or_refuse(self, lo: float, hi: float, fs: float) -> None:
        try:
            a_lo, a_hi = fold_intervals(lo, hi, fs)
        except InputError:
            return
        assert float(a_lo[0]) <= float(a_hi[0])

    def test_huge_ratio_is_refused_with_its_limit(self) -> None:
        # The case schema fuzzing found (an IndexError before): a tone at 1e10 Hz with
        # fs = 1e-10 Hz is 1e20 times the rate. Limit: 1e12 × 1e-10 Hz = 100 Hz (by hand).
        with pytest.raises(InputError) as info:
            fold(1e10, 1e-10)
        assert info.value.field == "freq_hz"
        assert info.value.code == "above_limit"
        assert info.value.limit == pytest.approx(100.0)
