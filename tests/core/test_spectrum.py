"""Tests for service.core.spectrum: windows, averaged spectra, floor, peaks, units."""

from __future__ import annotations

import tracemalloc

import numpy as np
import pytest
import scipy.signal
import scipy.stats

from service.core import spectrum as sp
from service.core import windows
from service.core.folding import fold, nyquist_zone


def _tone(n: int, fs: float, freq: float, amp: float, phase: float = 0.3) -> np.ndarray:
    t = np.arange(n) / fs
    return amp * np.cos(2 * np.pi * freq * t + phase)


def _welch_amplitude(x: np.ndarray, fs: float, window: str, nfft: int, noverlap: int):
    """Reference: scipy.signal.welch(scaling='spectrum') converted to peak amplitude."""
    f, p = scipy.signal.welch(
        x,
        fs,
        window=window,
        nperseg=nfft,
        noverlap=noverlap,
        detrend=False,
        scaling="spectrum",
    )
    amp = np.sqrt(2.0 * p.astype(np.float64))
    amp[0] /= np.sqrt(2.0)  # welch doubles every bin but DC and Nyquist
    amp[-1] /= np.sqrt(2.0)
    return f, amp


class TestWindowFigures:
    def test_basic(self) -> None:
        hann = windows.window_figures("hann")
        # Source: Harris, Proc. IEEE 66(1) 1978, Table 1 (Hanning, alpha = 2)
        assert hann["enbw_bins"] == pytest.approx(1.50, abs=0.005)
        assert hann["scalloping_loss_db"] == pytest.approx(1.42, abs=0.01)
        assert hann["highest_sidelobe_db"] == pytest.approx(-31.5, abs=0.1)
        assert hann["coherent_gain"] == pytest.approx(0.50, abs=0.005)
        hamming = windows.window_figures("hamming")
        # Source: Harris, Proc. IEEE 66(1) 1978, Table 1 (Hamming)
        assert hamming["enbw_bins"] == pytest.approx(1.36, abs=0.005)
        # From memory: Harris 1978, Table 1, Hamming: highest side lobe -43 dB.
        assert hamming["highest_sidelobe_db"] == pytest.approx(-43.0, abs=0.5)
        # Reference: the exact scalloping loss, −20·log10(|W(½ bin)| / |W(0)|), computed
        # with numpy's own Hamming window and a direct sum (1.751 dB for long windows).
        n = 4096
        w = np.hamming(n + 1)[:-1]  # periodic form, as used for spectral analysis
        half_bin = np.abs(np.sum(w * np.exp(-1j * np.pi * np.arange(n) / n))) / np.sum(w)
        exact_db = -20 * np.log10(half_bin)
        assert exact_db == pytest.approx(1.751, abs=0.001)  # the reference itself, by eye
        assert hamming["scalloping_loss_db"] == pytest.approx(exact_db, abs=0.005)
        # From memory: Harris 1978, Table 1 prints 1.78 dB for the Hamming window; the
        # table rounds differently from the exact value, hence the wider tolerance.
        assert hamming["scalloping_loss_db"] == pytest.approx(1.78, abs=0.05)
        bh = windows.window_figures("blackmanharris")
        # Source: Harris, Proc. IEEE 66(1) 1978, Table 1 (4-term Blackman-Harris, -92 dB)
        assert bh["enbw_bins"] == pytest.approx(2.00, abs=0.01)
        assert bh["highest_sidelobe_db"] == pytest.approx(-92.0, abs=0.5)
        # From memory: Harris 1978, Table 1, 4-term Blackman-Harris scalloping 0.83 dB
        assert bh["scalloping_loss_db"] == pytest.approx(0.83, abs=0.01)
        rect = windows.window_figures("rectangular")
        # From memory: Harris, Proc. IEEE 66(1) 1978, Table 1 (rectangle): ENBW 1.00,
        # scalloping loss 3.92 dB, highest side lobe -13 dB
        assert rect["enbw_bins"] == pytest.approx(1.00, abs=1e-9)
        assert rect["scalloping_loss_db"] == pytest.approx(3.92, abs=0.01)
        assert rect["highest_sidelobe_db"] == pytest.approx(-13.3, abs=0.05)
        # Source: Harris, Proc. IEEE 66(1) 1978, sec. IV: a flat-top window trades
        # bandwidth for (almost) no scalloping loss.
        assert windows.window_figures("flattop")["scalloping_loss_db"] < 0.05

    def test_mainlobe(self) -> None:
        # Source: J. O. Smith, Spectral Audio Signal Processing, "Resolving sinusoids":
        # main lobe of an L-term cosine window is 2L bins wide (half width L).
        assert windows.window_figures("rectangular")["mainlobe_half_width_bins"] == 1.0
        assert windows.window_figures("hann")["mainlobe_half_width_bins"] == 2.0
        assert windows.window_figures("blackmanharris")["mainlobe_half_width_bins"] == 4.0

    def test_edges(self) -> None:
        # Reference: closed form for the periodic Hann window, ENBW = 1.5 bins for any n
        for n in (16, 17, 1000):
            assert windows.window_figures("hann", n)["enbw_bins"] == pytest.approx(1.5, rel=1e-12)
        assert windows.window_figures("HANN")["enbw_bins"] == pytest.approx(1.5)

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match="name='kaiser' must be one of"):
            windows.window_figures("kaiser")
        with pytest.raises(ValueError, match="n=8 must be between 16"):
            windows.window_figures("hann", 8)


class TestAmplitudeSpectrum:
    def test_basic_on_bin(self) -> None:
        fs, nfft = 25_600.0, 1024
        f0 = 100 * fs / nfft  # exactly on bin 100
        x = _tone(8 * nfft, fs, f0, 2.5)
        s = sp.amplitude_spectrum(x, fs, lines=400, window="hann")
        # The input amplitude is the reference: a bin-centred sine reads A (Hann exact).
        assert s.nfft == nfft
        assert s.amplitude[100] == pytest.approx(2.5, rel=1e-12)
        assert s.freq_hz[100] == pytest.approx(f0)

    def test_flattop_off_bin(self) -> None:
        fs, nfft = 25_600.0, 4096
        for frac in (0.0, 0.25, 0.5):
            x = _tone(4 * nfft, fs, (300 + frac) * fs / nfft, 0.8)
            s = sp.amplitude_spectrum(x, fs, lines=1600, window="flattop")
            level = 20 * np.log10(s.amplitude.max() / 0.8)
            # Source: Harris 1978, Table 1: flat-top scalloping loss ~0 dB
            assert abs(level) < 0.1

    def test_against_welch(self) -> None:
        rng = np.random.default_rng(7)
        fs = 12_800.0
        x = rng.standard_normal(50_000) + _tone(50_000, fs, 1234.5, 3.0)
        for window in sorted(windows.WINDOWS):
            s = sp.amplitude_spectrum(x, fs, lines=800, window=window, overlap_pct=50.0)
            scipy_name = "boxcar" if window == "rectangular" else window
            f, ref = _welch_amplitude(x, fs, scipy_name, s.nfft, s.nfft // 2)
            # Reference: scipy.signal.welch(scaling="spectrum") -> sqrt(2 P)
            np.testing.assert_allclose(s.freq_hz, f, rtol=1e-12)
            np.testing.assert_allclose(s.amplitude, ref, rtol=1e-9)

    def test_against_welch_float32(self) -> None:
        rng = np.random.default_rng(8)
        fs = 51_200.0
        x = (rng.standard_normal(300_000) + _tone(300_000, fs, 5000.0, 1.0)).astype(np.float32)
        s = sp.amplitude_spectrum(x, fs, lines=3200, overlap_pct=75.0)
        _, ref = _welch_amplitude(x.astype(np.float64), fs, "hann", s.nfft, 3 * s.nfft // 4)
        # Reference: scipy.signal.welch in double precision
        np.testing.assert_allclose(s.amplitude, ref, rtol=2e-4)
        # Source: Welch 1967: K = floor((L - N) / D) + 1 segments
        assert s.averages == (300_000 - 8192) // 2048 + 1
        assert s.overlap_pct == 75.0

    def test_common_practice_numbers(self) -> None:
        # Common practice: a test up to 20 kHz needs more than 40 kS/s; with the span
        # fs/2.56, 51.2 kS/s gives 20 kHz; lines = N/2.56; bin width = span/lines.
        fs = 51_200.0
        # The project's zone arithmetic agrees: at 51.2 kS/s 20 kHz sits in the first
        # Nyquist zone (not aliased); at 39 kS/s (< 40 kS/s) it is in zone 2 and reads
        # 39 − 20 = 19 kHz.
        assert nyquist_zone(20_000.0, fs)[()] == 1
        assert fold(20_000.0, fs)[()] == 20_000.0
        assert nyquist_zone(20_000.0, 39_000.0)[()] == 2
        assert fold(20_000.0, 39_000.0)[()] == pytest.approx(19_000.0)
        x = np.random.default_rng(1).standard_normal(20_000)
        s = sp.amplitude_spectrum(x, fs, lines=800)
        assert s.nfft == 2048
        assert s.lines == 800 == s.nfft / 2.56
        assert s.span_hz == pytest.approx(20_000.0)
        assert s.bin_width_hz == pytest.approx(25.0)
        assert s.bin_width_hz == pytest.approx(s.span_hz / s.lines)
        assert s.freq_hz.size == s.nfft // 2 + 1
        assert s.freq_hz[-1] == pytest.approx(fs / 2)

    def test_unusual_lines(self) -> None:
        x = np.random.default_rng(2).standard_normal(20_000)
        s = sp.amplitude_spectrum(x, 10_000.0, lines=1000)
        # Common practice: nfft = next power of two >= 2.56 * lines (2560 -> 4096)
        assert s.nfft == 4096
        assert s.lines == 1600

    def test_auto_lines(self) -> None:
        n = 100_000
        x = np.random.default_rng(3).standard_normal(n)
        s = sp.amplitude_spectrum(x, 1000.0)
        # Largest 25*2**k lines with >= 8 averages at 50 % overlap: nfft 16384 gives
        # floor((100000 - 16384) / 8192) + 1 = 11, nfft 32768 gives 4.
        assert (s.lines, s.nfft, s.averages) == (6400, 16384, 11)
        # 300 samples: nfft 64 still gives (300 - 64) // 32 + 1 = 8 averages
        assert sp.amplitude_spectrum(x[:300], 1000.0).nfft == 64
        # 200 samples: no size gives 8, so the largest block that fits (128, 2 averages)
        s = sp.amplitude_spectrum(x[:200], 1000.0)
        assert (s.nfft, s.averages) == (128, 2)
        s = sp.amplitude_spectrum(x, 1000.0, averages=30)
        assert (s.nfft, s.averages) == (4096, 30)

    def test_averages_limit(self) -> None:
        rng = np.random.default_rng(4)
        x = rng.standard_normal(40_000)
        s = sp.amplitude_spectrum(x, 1000.0, lines=400, averages=5, overlap_pct=0.0)
        _, ref = _welch_amplitude(x[: 5 * 1024], 1000.0, "hann", 1024, 0)
        # Reference: scipy.signal.welch on the first five blocks
        np.testing.assert_allclose(s.amplitude, ref, rtol=1e-9)
        assert s.averages == 5

    def test_edges(self) -> None:
        fs, n = 1024.0, 4096
        nyq = 0.75 * np.cos(np.pi * np.arange(n))  # alternating: the Nyquist bin
        s = sp.amplitude_spectrum(nyq + 1.5, fs, lines=400, window="hann")
        # Reference: a constant reads its value at DC, cos(pi n) its amplitude at fs/2
        assert s.amplitude[0] == pytest.approx(1.5, rel=1e-12)
        assert s.amplitude[-1] == pytest.approx(0.75, rel=1e-12)
        ints = sp.amplitude_spectrum(np.arange(n) % 7, fs, lines=400)
        assert ints.amplitude.dtype == np.float64
        half = sp.amplitude_spectrum((nyq + 1.5).astype(np.float16), fs, lines=400)
        assert half.amplitude[0] == pytest.approx(1.5, rel=1e-3)
        with pytest.raises(ValueError):
            s.amplitude[0] = 0.0  # results are read-only

    def test_memory(self) -> None:
        x = np.random.default_rng(5).standard_normal(2_000_000).astype(np.float32)
        tracemalloc.start()
        try:
            sp.amplitude_spectrum(x, 51_200.0, lines=1600)
            peak = tracemalloc.get_traced_memory()[1]
        finally:
            tracemalloc.stop()
        assert peak < 8 * x.nbytes

    def test_errors(self) -> None:
        x = np.zeros(5000)
        with pytest.raises(ValueError, match="samples must be 1-D"):
            sp.amplitude_spectrum(np.zeros((2, 5000)), 1000.0)
        with pytest.raises(ValueError, match=r"sample_rate_hz=0\.0 must be"):
            sp.amplitude_spectrum(x, 0.0)
        with pytest.raises(ValueError, match="window='kaiser'"):
            sp.amplitude_spectrum(x, 1000.0, window="kaiser")
        with pytest.raises(ValueError, match="lines=3200 needs blocks of 8192 samples"):
            sp.amplitude_spectrum(x, 1000.0, lines=3200)
        with pytest.raises(ValueError, match="averages=20 needs"):
            sp.amplitude_spectrum(x, 1000.0, lines=400, averages=20)
        with pytest.raises(ValueError, match=r"overlap_pct=99\.0 must be between 0 and 95"):
            sp.amplitude_spectrum(x, 1000.0, overlap_pct=99.0)
        with pytest.raises(ValueError, match="at least 64 are needed"):
            sp.amplitude_spectrum(x[:50], 1000.0)
        y = x.copy()
        y[123] = np.nan
        with pytest.raises(ValueError, match=r"samples\[123\]=nan"):
            sp.amplitude_spectrum(y, 1000.0, lines=400)


def _sloping_noise(n: int, rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    """Rayleigh amplitudes whose scale falls from -60 dB to -100 dB across the band."""
    scale = 10 ** (np.linspace(-60.0, -100.0, n) / 20)
    amp = scale * np.abs(rng.standard_normal(n) + 1j * rng.standard_normal(n)) / np.sqrt(2)
    return amp, scale


class TestNoiseFloor:
    def test_basic(self) -> None:
        rng = np.random.default_rng(11)
        n = 65_536
        amp, scale = _sloping_noise(n, rng)
        tones = np.arange(1000, n - 1000, 3000)
        amp[tones] = 1e3 * scale[tones]
        floor = sp.noise_floor(amp)
        # Reference: the median of a Rayleigh variable is scale*sqrt(ln 2) for this
        # scaling (scipy.stats.rayleigh(scale=1/sqrt(2)).median()).
        expected = scale * scipy.stats.rayleigh(scale=1 / np.sqrt(2)).median()
        err_db = 20 * np.log10(floor / expected)
        assert np.max(np.abs(err_db[50:-50])) < 1.0
        assert np.max(np.abs(err_db[tones])) < 1.0  # tones do not lift the floor

    def test_against_brute_force(self) -> None:
        rng = np.random.default_rng(12)
        amp = rng.random(200) + 0.01
        floor = sp.noise_floor(amp, width_bins=9)
        # Reference: np.median over each mirrored window of 9 bins
        db = 20 * np.log10(amp)
        padded = np.concatenate([db[4:0:-1], db, db[-2:-6:-1]])
        ref = np.median(np.lib.stride_tricks.sliding_window_view(padded, 9), axis=1)
        np.testing.assert_allclose(20 * np.log10(floor), ref, atol=1e-9)

    def test_edges(self) -> None:
        amp = np.array([0.0, 1.0, 0.0, 2.0, 3.0])
        floor = sp.noise_floor(amp)
        assert floor.shape == (5,)
        assert np.all(np.isfinite(floor)) and np.all(floor > 0)
        # Reference: median of the five values is 1.0 (short spectrum: one window)
        np.testing.assert_allclose(floor, 1.0)
        np.testing.assert_allclose(sp.noise_floor(np.zeros(100)), np.finfo(float).tiny)

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match=r"amplitude\[1\]=-1.0"):
            sp.noise_floor([1.0, -1.0, 2.0])
        with pytest.raises(ValueError, match=r"amplitude\[0\]=nan"):
            sp.noise_floor([np.nan, 1.0])
        with pytest.raises(ValueError, match="width_bins=1 must be between 3"):
            sp.noise_floor(np.ones(10), width_bins=1)
        with pytest.raises(ValueError, match="amplitude has 0 values"):
            sp.noise_floor([])


class TestFindPeaks:
    def test_basic(self) -> None:
        rng = np.random.default_rng(21)
        fs, n = 12_800.0, 200_000
        freqs = np.array([312.7, 1500.0, 2718.3, 4444.4])
        amps = np.array([0.5, 0.05, 0.2, 0.01])
        x = 1e-3 * rng.standard_normal(n)
        x += sum(
            _tone(n, fs, f, a, phase=i) for i, (f, a) in enumerate(zip(freqs, amps, strict=True))
        )
        s = sp.amplitude_spectrum(x, fs, lines=1600)
        pk = sp.find_peaks(s.freq_hz, s.amplitude)
        # Reference: the frequencies and amplitudes put into the signal
        assert len(pk) == 4
        np.testing.assert_allclose(pk.freq_hz, freqs, atol=0.01 * s.bin_width_hz)
        np.testing.assert_allclose(20 * np.log10(pk.amplitude / amps), 0.0, atol=0.1)
        assert np.all(np.diff(pk.freq_hz) > 0)
        np.testing.assert_array_equal(pk.bin, np.rint(freqs / s.bin_width_hz).astype(int))
        np.testing.assert_allclose(pk.snr_db, 20 * np.log10(pk.amplitude / pk.floor))
        assert np.all(pk.prominence_db >= 6.0)

    @pytest.mark.parametrize("window", sorted(windows.WINDOWS))
    def test_refinement_between_bins(self, window: str) -> None:
        fs, nfft = 4096.0, 4096
        offsets = np.linspace(-0.5, 0.5, 21)
        f_err, a_err = [], []
        for d in offsets:
            f0 = 613 + d
            s = sp.amplitude_spectrum(_tone(nfft, fs, f0, 0.7), fs, lines=1600, window=window)
            pk = sp.find_peaks(
                s.freq_hz,
                s.amplitude,
                floor=np.full(s.freq_hz.size, 1e-6),
                window=window,
                threshold_db=30.0,
            )
            j = int(np.argmax(pk.amplitude))
            f_err.append(pk.freq_hz[j] - f0)
            a_err.append(20 * np.log10(pk.amplitude[j] / 0.7))
        # Source: J. O. Smith, SASP, "Quadratic interpolation of spectral peaks": parabolic
        # interpolation has a worst-case bias of about 0.016 bin for Hann (computed with
        # numpy); the window-matched estimator must do at least as well.
        assert np.max(np.abs(f_err)) < 0.016
        assert np.max(np.abs(a_err)) < 0.1

    def test_unknown_window_parabolic(self) -> None:
        fs, nfft = 4096.0, 4096
        errs, levels = [], []
        for d in np.linspace(-0.5, 0.5, 41):
            s = sp.amplitude_spectrum(_tone(nfft, fs, 700 + d, 1.0), fs, lines=1600)
            pk = sp.find_peaks(
                s.freq_hz,
                s.amplitude,
                floor=np.full(s.freq_hz.size, 1e-6),
                window="unknown",
                threshold_db=30.0,
            )
            j = int(np.argmax(pk.amplitude))
            errs.append(pk.freq_hz[j] - (700 + d))
            levels.append(20 * np.log10(pk.amplitude[j]))
        # Source: J. O. Smith, SASP, "Quadratic interpolation of spectral peaks": about
        # 0.016 bin worst-case bias for Hann (computed with numpy, not quoted).
        assert 0.012 < np.max(np.abs(errs)) < 0.02
        # Source: Harris 1978, Table 1: Hann scalloping loss 1.42 dB, not corrected here
        assert min(levels) == pytest.approx(-1.42, abs=0.01)

    def test_false_alarms(self) -> None:
        rng = np.random.default_rng(31)
        fs = 10_000.0
        x = rng.standard_normal(2**20)
        averaged = sp.amplitude_spectrum(x, fs, lines=3200)
        assert averaged.averages >= 100
        pk = sp.find_peaks(averaged.freq_hz, averaged.amplitude)
        assert len(pk) == 0  # power-averaged noise never stands 10 dB above its median
        single = np.abs(np.fft.rfft(x))
        pk = sp.find_peaks(np.arange(single.size), single, prominence_db=0.0)
        # Reference: one-block noise power is exponential (chi-square, 2 dof), so
        # P(power > 10 x median) = exp(-10 ln 2) = 2**-10 per bin; peaks are fewer.
        assert len(pk) < 1.3 * single.size * 2.0**-10
        assert len(pk) > 0.3 * single.size * 2.0**-10

    def test_sloping_floor(self) -> None:
        rng = np.random.default_rng(41)
        n = 32_768
        amp, scale = _sloping_noise(n, rng)
        amp = np.sqrt(np.mean([_sloping_noise(n, rng)[0] ** 2 for _ in range(16)], axis=0))
        tones = np.array([2000, 9000, 20_000, 30_000])
        amp[tones] = 10 ** (20 / 20) * scale[tones]  # 20 dB above the local noise
        pk = sp.find_peaks(np.arange(n) * 0.5, amp, window="unknown")
        # Reference: the bins where the tones were put
        np.testing.assert_array_equal(pk.bin, tones)

    def test_edges(self) -> None:
        f = np.array([0.0, 1.0, 2.5, 4.0, 10.0])
        a = np.array([0.0, 0.1, 5.0, 0.1, 0.0])
        pk = sp.find_peaks(f, a, floor=np.full(5, 0.01), window="unknown")
        assert len(pk) == 1 and pk.bin[0] == 2
        scalar = sp.find_peaks(f, a, floor=0.01, window="unknown")
        np.testing.assert_array_equal(scalar.floor, [0.01])
        # Reference: symmetric neighbours put the parabola's vertex on the bin
        assert pk.freq_hz[0] == 2.5
        many = np.tile([0.01, 1.0], 200) * np.repeat(np.arange(1, 201), 2)
        pk = sp.find_peaks(np.arange(400.0), many, floor=np.full(400, 0.01), max_peaks=5)
        # the last bin is never a peak; the five highest of the rest are kept
        np.testing.assert_array_equal(pk.bin, [389, 391, 393, 395, 397])

    def test_errors(self) -> None:
        f = np.arange(10.0)
        a = np.ones(10)
        with pytest.raises(ValueError, match="amplitude has 9 values but freq_hz has 10"):
            sp.find_peaks(f, a[:9])
        g = f.copy()
        g[5] = 4.0
        with pytest.raises(ValueError, match=r"freq_hz\[5\]=4.0 does not exceed"):
            sp.find_peaks(g, a)
        with pytest.raises(ValueError, match="window='welch'"):
            sp.find_peaks(f, a, window="welch")
        with pytest.raises(ValueError, match=r"threshold_db=-3\.0 must be between 0 and 200"):
            sp.find_peaks(f, a, threshold_db=-3.0)
        with pytest.raises(ValueError, match=r"floor\[0\]=0.0"):
            sp.find_peaks(f, a, floor=np.zeros(10))
        with pytest.raises(ValueError, match="max_peaks=0 must be between 1"):
            sp.find_peaks(f, a, max_peaks=0)
        with pytest.raises(ValueError, match="freq_hz has 2 values; at least 3"):
            sp.find_peaks([1.0, 2.0], [1.0, 2.0])


class TestDetectUnit:
    def test_basic(self) -> None:
        unit, reason = sp.detect_unit([-80.0, -20.0, 3.0])
        assert unit == "db" and "2 of 3 values are negative" in reason
        unit, reason = sp.detect_unit([0.0, 1e-6, 0.3])
        assert unit == "linear" and "all 3 values are >= 0" in reason

    def test_edges(self) -> None:
        # A linear spectrum (Hann-windowed numpy rFFT of a sampled cosine, independent of
        # the project's spectrum code) with 3 cells exported negative: bad data, not dB.
        n = 2048
        x = np.cos(2 * np.pi * 100.5 * np.arange(n) / n) + np.random.default_rng(1).normal(
            0, 1e-3, n
        )
        amp = np.abs(np.fft.rfft(x * np.hanning(n))) * 2 / np.hanning(n).sum()
        amp[[7, 300, 900]] *= -1
        unit, reason = sp.detect_unit(amp)
        assert unit == "linear" and "3 of 1025 values are negative, too few" in reason
        bad = sp.bad_negative_cells(amp, reason)
        assert np.flatnonzero(bad).tolist() == [7, 300, 900]
        # The same spectrum in dB (20·log10, every value below 1 is negative): dB.
        assert sp.detect_unit(20 * np.log10(np.abs(amp)))[0] == "db"
        # A handful: at most 3, or 1 % of the rows, and fewer than half.
        assert sp.few_bad_cells(3, 10) and not sp.few_bad_cells(4, 10)
        assert sp.few_bad_cells(10, 1000) and not sp.few_bad_cells(11, 1000)
        assert not sp.few_bad_cells(2, 3)

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match=r"amplitude\[1\]=inf"):
            sp.detect_unit([1.0, np.inf])
        # A tenth negative: neither a handful nor a dB scale; the caller must say.
        values = np.linspace(1.0, 2.0, 100)
        values[::10] *= -1
        with pytest.raises(sp.InputError, match="too few to be sure") as exc:
            sp.detect_unit(values, field="spectrum.amplitude")
        assert exc.value.code == "ambiguous_scale" and exc.value.field == "spectrum.amplitude"
        with pytest.raises(sp.InputError, match="10 of 100 amplitudes are negative") as exc:
            sp.bad_negative_cells(values, "the request says so")
        assert exc.value.code == "negative_amplitude" and exc.value.remedy


class TestToLinear:
    def test_basic(self) -> None:
        # Source: definition of the decibel for amplitude ratios, 20 log10(a/ref)
        np.testing.assert_allclose(
            sp.to_linear([20.0, 0.0, -6.0206], "dB"), [10.0, 1.0, 0.5], rtol=1e-5
        )
        np.testing.assert_array_equal(sp.to_linear([0.0, 2.0], "linear"), [0.0, 2.0])

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match=r"values\[1\]=-2.0 is negative"):
            sp.to_linear([1.0, -2.0], "linear")
        with pytest.raises(ValueError, match="unit='dBu' must be 'linear' or 'db'"):
            sp.to_linear([1.0], "dBu")
