"""Clipping detection and clipping products against independent computations."""

from __future__ import annotations

import numpy as np
import pytest

from service.core.attribution import frequency_tolerance_hz
from service.core.clipping import detect_clipping
from service.core.clipping_products import (
    ClippingProducts,
    clipped_sine_harmonics,
    clipping_products,
    strongest_tones,
)
from service.core.errors import InputError
from service.core.spectrum import amplitude_spectrum, find_peaks


def _sine(n: int, fs: float, freq: float, amp: float = 1.0, phase: float = 0.3) -> np.ndarray:
    t = np.arange(n) / fs
    return amp * np.cos(2 * np.pi * freq * t + phase)


class TestDetectClipping:
    def test_basic(self) -> None:
        # 50 Hz at 10 kS/s, clipped symmetrically at 80 % of its crest.
        x = np.clip(_sine(2**16, 10_000.0, 50.0), -0.8, 0.8)
        r = detect_clipping(x)
        assert r.verdict == "clipped"
        assert r.symmetric and r.high_clipped and r.low_clipped
        assert r.high_level == pytest.approx(0.8) and r.low_level == pytest.approx(-0.8)
        # Reference: a sine spends the fraction (2/π)·arccos(c/A) of its time beyond ±c
        # (from memory: solve |cos θ| >= c/A over one period).
        assert r.fraction == pytest.approx(2 / np.pi * np.arccos(0.8), abs=0.002)
        # Reference: numpy count of the flattened crests (runs of samples at ±0.8).
        on = np.abs(x) >= 0.8
        starts = np.flatnonzero(np.diff(on.astype(int)) == 1).size + int(on[0])
        assert r.runs == starts

    def test_one_polarity_is_asymmetric(self) -> None:
        x = np.clip(_sine(2**16, 10_000.0, 50.0), -5.0, 0.7)
        r = detect_clipping(x)
        assert r.verdict == "clipped"
        assert r.high_clipped and not r.low_clipped and not r.symmetric
        assert r.low_fraction == 0.0

    def test_clean_records_are_not_flagged(self) -> None:
        # A clean sine, float.
        assert detect_clipping(_sine(2**16, 10_000.0, 50.0)).verdict == "none"
        # A 16-bit quantised 10 Hz sine at 51.2 kS/s: several samples share the top code
        # at each crest (runs of up to ~9), but they do not pile up against the band below.
        q = np.round(_sine(2**17, 51_200.0, 10.0, phase=0.0) * 32767)
        r = detect_clipping(q)
        assert r.longest_run >= 2
        assert r.verdict == "none"
        # Gaussian noise: the extreme value is not held.
        noise = np.random.default_rng(3).normal(0, 1, 20_000)
        assert detect_clipping(noise).verdict == "none"

    def test_full_scale(self) -> None:
        x = np.clip(_sine(2**15, 10_000.0, 50.0, amp=1.5), -1.0, 1.0)
        assert detect_clipping(x, full_scale=1.0).verdict == "clipped"
        r = detect_clipping(x, full_scale=(-2.0, 2.0))
        assert r.verdict == "none" and r.levels_from == "full_scale"
        assert r.high_level == 2.0

    def test_suspected_for_a_few_short_clips(self) -> None:
        # A burst: three crests of a 50 Hz sine in 2**17 samples exceed the limit a little.
        n, fs = 2**17, 10_000.0
        x = _sine(n, fs, 50.0, amp=0.5)
        x[1000:1600] *= 2.04  # three crests at 1.02
        y = np.clip(x, -1.0, 1.0)
        r = detect_clipping(y)
        assert 1e-4 <= r.fraction < 1e-3
        assert r.verdict == "suspected"

    def test_edges(self) -> None:
        r = detect_clipping(np.zeros(100))
        assert r.verdict == "none" and r.fraction == 0.0
        # Isolated single samples at the level count only with min_run=1.
        x = np.clip(_sine(2**14, 5120.0, 1700.0), -0.9, 0.9)
        assert detect_clipping(x, min_run=1).verdict == "clipped"

    def test_errors(self) -> None:
        with pytest.raises(InputError, match="1-D"):
            detect_clipping(np.zeros((2, 10)))
        with pytest.raises(InputError, match="at least 3"):
            detect_clipping([1.0, 2.0])
        with pytest.raises(InputError, match=r"samples\[1\]"):
            detect_clipping([1.0, np.nan, 2.0])
        with pytest.raises(InputError, match="tolerance"):
            detect_clipping(np.arange(10.0), tolerance=-1)
        with pytest.raises(InputError, match="full_scale"):
            detect_clipping(np.arange(10.0), full_scale=(2.0, 1.0))
        with pytest.raises(InputError, match="min_run"):
            detect_clipping(np.arange(10.0), min_run=0)


class TestClippedSineHarmonics:
    @pytest.mark.parametrize("ratio", [0.3, 0.7, 0.95])
    def test_basic(self, ratio: float) -> None:
        # Reference: Fourier series of one period of clip(A cos θ, ±c) computed with
        # numpy's FFT on 8192 points (a periodic integrand: the FFT is exact to round-off
        # up to the band limit of the kinks, well below 1e-5 here).
        m = 8192
        y = np.clip(2.0 * np.cos(2 * np.pi * np.arange(m) / m), -2.0 * ratio, 2.0 * ratio)
        ref = np.abs(np.fft.rfft(y)) * 2 / m
        k = np.arange(1, 16)
        got = clipped_sine_harmonics(2.0, 2.0 * ratio, k)
        np.testing.assert_allclose(got, ref[k], atol=2e-5)

    def test_odd_only(self) -> None:
        # From memory: Oppenheim & Willsky, Signals and Systems, ch. 3 — half-wave
        # symmetry (symmetric clipping of a sine) leaves odd harmonics only.
        got = clipped_sine_harmonics(1.0, 0.5, [2, 4, 6, 8])
        np.testing.assert_array_equal(got, 0.0)
        assert np.all(clipped_sine_harmonics(1.0, 0.5, [3, 5, 7]) > 0)

    def test_edges(self) -> None:
        np.testing.assert_array_equal(clipped_sine_harmonics(1.0, 1.5, [1, 3]), [1.0, 0.0])

    def test_errors(self) -> None:
        with pytest.raises(InputError, match="orders"):
            clipped_sine_harmonics(1.0, 0.5, [0])
        with pytest.raises(InputError, match="clip_level"):
            clipped_sine_harmonics(1.0, -1.0, [1])


def _clipped_two_tones(symmetric: bool):
    fs, n = 5120.0, 2**17
    rng = np.random.default_rng(1)
    x = _sine(n, fs, 300.0) + _sine(n, fs, 412.5, 0.5, 1.1) + rng.normal(0, 1e-4, n)
    y = np.clip(x, -1.35, 1.35) if symmetric else np.clip(x, -5.0, 1.35)
    spec = amplitude_spectrum(y, fs, lines=3200)
    peaks = find_peaks(spec.freq_hz, spec.amplitude)
    return y, fs, spec, peaks


class TestClippingProducts:
    def test_basic(self) -> None:
        y, fs, spec, peaks = _clipped_two_tones(symmetric=True)
        report = detect_clipping(y)
        assert report.verdict == "clipped" and report.symmetric
        tones = strongest_tones(peaks.freq_hz, peaks.amplitude, count=2)
        np.testing.assert_allclose(np.sort(tones), [300.0, 412.5], atol=0.05)
        tol = frequency_tolerance_hz(spec.bin_width_hz)
        got = clipping_products(peaks.freq_hz, tones, fs, tol, symmetric=report.symmetric)
        assert isinstance(got, ClippingProducts) and len(got) == len(peaks)
        level = 20 * np.log10(peaks.amplitude / peaks.amplitude.max())
        strong = level > -60.0
        # Every peak within 60 dB of the strongest is a tone or a clipping product.
        assert np.all(got.explained[strong] | (got.kind[strong] == "tone"))
        assert np.sum(got.kind == "tone") == 2
        # Reference (sampling theory, by hand): 5 × 412.5 Hz = 2062.5 Hz is below
        # fs/2 = 2560 Hz; 7 × 412.5 = 2887.5 Hz folds to 5120 − 2887.5 = 2232.5 Hz.
        for true_hz, seen_hz in ((2062.5, 2062.5), (2887.5, 2232.5)):
            i = int(np.argmin(np.abs(peaks.freq_hz - seen_hz)))
            assert abs(peaks.freq_hz[i] - seen_hz) < tol
            assert got.kind[i] == "harmonic"
            assert got.true_hz[i] == pytest.approx(true_hz, abs=0.1)

    def test_single_tone_levels(self) -> None:
        # One 300 Hz tone clipped at ±0.6 and sampled at 5120 S/s.
        fs, n = 5120.0, 2**17
        x = np.clip(_sine(n, fs, 300.0) + np.random.default_rng(2).normal(0, 1e-5, n), -0.6, 0.6)
        spec = amplitude_spectrum(x, fs, lines=3200)
        peaks = find_peaks(spec.freq_hz, spec.amplitude)
        tol = frequency_tolerance_hz(spec.bin_width_hz)
        got = clipping_products(peaks.freq_hz, [300.0], fs, tol, symmetric=True, max_order=31)
        strong = peaks.amplitude > 10 ** (-55 / 20) * peaks.amplitude.max()  # -55 dB
        assert np.all(got.explained[strong] | (got.kind[strong] == "tone"))
        # From memory (Oppenheim & Willsky, ch. 3): symmetric clipping makes no even
        # harmonic: the simulated spectrum has no peak at 2 × 300 = 600 Hz.
        assert np.min(np.abs(peaks.freq_hz - 600.0)) > tol
        # The measured odd harmonics agree with the Fourier-series levels (the numpy
        # reference above checks the formula); 9 × 300 = 2700 Hz folds to 2420 Hz.
        for k, seen_hz in ((3, 900.0), (5, 1500.0), (9, 2420.0)):
            i = int(np.argmin(np.abs(peaks.freq_hz - seen_hz)))
            assert got.order[i] == k
            want = clipped_sine_harmonics(1.0, 0.6, [k])[0]
            assert 20 * np.log10(peaks.amplitude[i] / want) == pytest.approx(0.0, abs=0.2)

    def test_asymmetric_even_orders(self) -> None:
        y, fs, spec, peaks = _clipped_two_tones(symmetric=False)
        report = detect_clipping(y)
        assert report.verdict == "clipped" and not report.symmetric
        tol = frequency_tolerance_hz(spec.bin_width_hz)
        got = clipping_products(peaks.freq_hz, [300.0, 412.5], fs, tol, symmetric=False)
        # One-sided clipping is not odd-symmetric: the simulated spectrum does show the
        # second harmonic and the order-2 products, and they are explained as such.
        for seen_hz, kind in ((600.0, "harmonic"), (712.5, "intermodulation"),
                              (112.5, "intermodulation")):  # fmt: skip
            i = int(np.argmin(np.abs(peaks.freq_hz - seen_hz)))
            assert abs(peaks.freq_hz[i] - seen_hz) < tol
            assert got.kind[i] == kind and got.order[i] == 2

    def test_edges(self) -> None:
        # A peak that no product reaches stays unexplained; a tone is marked as a tone.
        got = clipping_products([100.0, 300.0, 333.3], [100.0], 1000.0, 0.5)
        assert got.kind.tolist() == ["tone", "harmonic", ""]
        assert got.explained.tolist() == [False, True, False]
        # Symmetric: the 2nd harmonic (200 Hz) is not offered; asymmetric: it is.
        assert not clipping_products([200.0], [100.0], 1000.0, 0.5).explained[0]
        assert clipping_products([200.0], [100.0], 1000.0, 0.5, symmetric=False).explained[0]
        # Apparent or true fundamental give the same folded product (fs = 1000 Hz:
        # 700 Hz reads 300 Hz; 3 × 700 = 2100 → 100 Hz; 3 × 300 = 900 → 100 Hz).
        a = clipping_products([100.0], [700.0], 1000.0, 0.5)
        b = clipping_products([100.0], [300.0], 1000.0, 0.5)
        assert a.explained[0] and b.explained[0] and a.order[0] == b.order[0] == 3
        assert len(clipping_products([], [100.0], 1000.0, 0.5)) == 0

    def test_errors(self) -> None:
        with pytest.raises(InputError, match="fundamentals_hz"):
            clipping_products([1.0], [], 1000.0, 0.5)
        with pytest.raises(InputError, match="sample_rate_hz"):
            clipping_products([1.0], [2.0], 0.0, 0.5)
        with pytest.raises(InputError, match="max_order"):
            clipping_products([1.0], [2.0], 1000.0, 0.5, max_order=1)
        with pytest.raises(InputError, match=r"peaks_hz\[0\]"):
            clipping_products([-1.0], [2.0], 1000.0, 0.5)
        with pytest.raises(InputError, match="peaks_amplitude"):
            strongest_tones([1.0, 2.0], [1.0])
