"""Blind harmonic family search: synthetic peak lists and a simulated acquisition."""

from __future__ import annotations

import numpy as np
import pytest

from service.core.harmonics import find_families, format_db, format_hz

from .simulate import SimChain, analog_attenuation_db, simulate_capture

FS = 12_800.0
BW = FS / 4096


def _fold(f: np.ndarray | float, fs: float = FS) -> np.ndarray:
    # Reference: fold(f, fs) = |f − fs·round(f/fs)| (Oppenheim & Schafer 2010, sec. 4.2), in numpy.
    f = np.asarray(f, dtype=np.float64)
    return np.abs(f - fs * np.round(f / fs))


class TestFormat:
    def test_basic(self) -> None:
        assert format_hz(2800.0) == "2.80 kHz"
        assert format_hz(914.15) == "914 Hz"
        assert format_hz(13_200.0) == "13.2 kHz"
        assert format_hz(10_000.0, 3, "S/s") == "10.0 kS/s"
        assert format_db(-43.21) == "−43.2 dB"

    def test_edges(self) -> None:
        assert format_hz(999.96) == "1.00 kHz"  # rounding crosses the prefix
        assert format_hz(0.5) == "0.500 Hz"
        assert format_hz(float("nan")) == "? Hz"
        assert format_db(-0.01) == "0.0 dB"


class TestFindFamilies:
    def test_basic(self) -> None:
        # 1.1 kHz, 12 harmonics at 12.8 kS/s: 6.6 kHz and up fold (7 aliased members).
        rng = np.random.default_rng(7)
        k = np.arange(1, 13)
        apparent = _fold(1100.0 * k) + rng.normal(0, 0.02 * BW, k.size)
        others = np.array([777.0, 2345.0, 3777.0])
        freq = np.concatenate([apparent, others])
        amp = np.concatenate([0.3 / k, [0.05, 0.05, 0.05]])
        fams = find_families(freq, amp, 1e-4, FS, BW)
        assert len(fams) == 1
        fam = fams[0]
        assert fam.fundamental_hz == pytest.approx(1100.0, abs=0.05)
        assert abs(fam.fundamental_hz - 1100.0) < 5 * fam.uncertainty_hz + 0.01
        assert fam.aliased_count == 7
        assert [m.harmonic for m in fam.members] == list(range(1, 13))
        assert sorted(m.peak for m in fam.members) == list(range(12))
        for m in fam.members:
            true = 1100.0 * m.harmonic
            assert m.true_hz == pytest.approx(true, abs=0.1 * BW)
            assert m.zone == int(np.ceil(true / (FS / 2)))
            assert m.aliased == (true > FS / 2)
            assert m.inverted == (m.zone % 2 == 0)
        assert fam.p_value < 1e-4
        assert fam.label == "harmonic family of 1.100 kHz (blind)"

    def test_simulated(self) -> None:
        """A record simulated with numpy (no anti-alias filter): family and its aliases."""
        f0 = 1100.0
        truth = [(k * f0, 0.3 / np.sqrt(k)) for k in range(1, 13)] + [(777.0, 0.05)]
        cap = simulate_capture(truth, SimChain(FS), 2.0, 1e-3, 11, lines=1600)
        p = cap.peaks
        fams = find_families(p.freq_hz, p.amplitude, p.floor, FS, cap.spectrum.bin_width_hz)
        assert len(fams) >= 1
        fam = fams[0]
        assert fam.fundamental_hz == pytest.approx(f0, abs=0.05)
        assert len(fam.members) == 12 and fam.aliased_count == 7
        for m in fam.members:
            assert m.true_hz == pytest.approx(m.harmonic * f0, abs=0.1)
        assert not any(abs(p.freq_hz[m.peak] - 777.0) < 5 for f in fams for m in f.members)

    def test_prefers_highest_fundamental(self) -> None:
        # A peak at f0/2 lets "f0/2" explain every member of f0 through its even
        # harmonics; the search must keep f0 and leave f0/2 out.
        k = np.arange(1, 9)
        freq = np.concatenate([_fold(900.0 * k), [450.0]])
        amp = np.full(freq.size, 0.1)
        fams = find_families(freq, amp, 1e-4, FS, BW)
        assert fams[0].fundamental_hz == pytest.approx(900.0, abs=0.01)
        assert 8 not in fams[0].peaks  # the 450 Hz peak

    def test_prefers_lowest_of_equivalent_fundamentals(self) -> None:
        # fs − f0 folds every harmonic onto the same place as f0; the plain f0 is kept.
        k = np.arange(1, 6)
        freq = _fold(1300.0 * k)
        fams = find_families(freq, np.full(5, 0.1), 1e-4, FS, BW, max_harmonic=5)
        assert fams[0].fundamental_hz == pytest.approx(1300.0, abs=0.01)

    def test_attenuation_rejects_implausible_members(self) -> None:
        # Behind a steep filter, members far above Nyquist would need absurd sources.
        def atten(f: np.ndarray) -> np.ndarray:
            # Reference: scipy.signal.freqs of an 8th-order Butterworth at 2 kHz
            return np.array([analog_attenuation_db("butter", 8, 2000.0, x) for x in f])

        k = np.arange(1, 13)
        freq = _fold(1100.0 * k)
        free = find_families(freq, np.full(12, 0.1), 1e-4, FS, BW)
        steep = find_families(freq, np.full(12, 0.1), 1e-4, FS, BW, attenuation=atten)
        assert free[0].aliased_count == 7
        assert not steep or steep[0].aliased_count < 7

    def test_edges(self) -> None:
        rng = np.random.default_rng(3)
        # Random peaks: no family beyond chance.
        freq = np.sort(rng.uniform(20, 6400, 60))
        assert find_families(freq, np.full(60, 0.1), 1e-4, FS, BW) == []
        # Too few peaks
        assert find_families([1000.0, 2000.0], [0.1, 0.1], 1e-4, FS, BW) == []
        assert find_families([], [], 1e-4, FS, BW) == []
        # A fundamental below 3 bins is never proposed.
        low = np.arange(1, 30) * 2 * BW
        fams = find_families(low, np.full(low.size, 0.1), 1e-4, FS, BW)
        assert all(f.fundamental_hz >= 3 * BW for f in fams)

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match="sample_rate_hz=0"):
            find_families([100.0], [1.0], 1e-4, 0, BW)
        with pytest.raises(ValueError, match="bin_width_hz=-2"):
            find_families([100.0], [1.0], 1e-4, FS, -2)
        with pytest.raises(ValueError, match="max_harmonic=1 must be"):
            find_families([100.0], [1.0], 1e-4, FS, BW, max_harmonic=1)
        with pytest.raises(ValueError, match=r"peaks_freq_hz\[0\]=7000.0"):
            find_families([7000.0], [1.0], 1e-4, FS, BW)
        with pytest.raises(ValueError, match="max_p_value=2"):
            find_families([100.0], [1.0], 1e-4, FS, BW, max_p_value=2)
        with pytest.raises(ValueError, match="attenuation=3"):
            find_families([100.0], [1.0], 1e-4, FS, BW, attenuation=3)  # type: ignore[arg-type]
