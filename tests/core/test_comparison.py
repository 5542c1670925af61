"""Two-rate test: worked fold values, then two simulated captures of one signal."""

from __future__ import annotations

import numpy as np
import pytest

from service.core.comparison import compare_rates

from .simulate import SimChain, nearest_peak, simulate_capture

RA, RB = 10_000.0, 11_500.0
BA, BB = RA / 4096, RB / 4096


class TestCompareRates:
    def test_basic(self) -> None:
        # Source: fold formula (Oppenheim & Schafer 2010, sec. 4.2), by hand: at 10 kHz, 13.2 kHz
        # reads
        # 13.2 − 10 = 3.2 kHz (zone 3). At 11.5 kHz
        # the fold formula gives |13.2 − 11.5| = 1.7 kHz (zone 3).
        res = compare_rates([1200.0, 3200.0], [0.5, 0.3], RA, BA,
                            [1200.0, 1700.0], [0.5, 0.3], RB, BB)  # fmt: skip
        assert list(res.a.verdict) == ["stays", "moves"]
        assert list(res.b.verdict) == ["stays", "moves"]
        assert res.a.partner[0] == 0 and res.a.partner[1] == 1
        best = res.a.candidates[1][0]
        assert best.true_hz == pytest.approx(13_200.0)
        assert (best.zone_a, best.zone_b) == (3, 3)
        assert res.b.candidates[1][0].true_hz == pytest.approx(13_200.0)
        assert res.a.true_hz[0] == 1200.0 and res.a.zone_a[0] == 1
        assert "moves to 1.70 kHz at 11.5 kS/s: an alias" in res.a.sentence[1]
        assert "13.2 kHz (zone 3 at 10.0 kS/s, zone 3 at 11.5 kS/s)" in res.a.sentence[1]
        assert all(0 < c <= 0.95 for c in res.a.confidence)

    def test_simulated(self) -> None:
        """Two records simulated with numpy, no anti-alias filter, 10 and 11.5 kS/s."""
        truth = [(1200.0, 0.5), (13_200.0, 0.3)]
        cap_a = simulate_capture(truth, SimChain(RA), 2.0, 1e-3, 21, lines=1600)
        cap_b = simulate_capture(truth, SimChain(RB), 2.0, 1e-3, 22, lines=1600)
        pa, pb = cap_a.peaks, cap_b.peaks
        res = compare_rates(pa.freq_hz, pa.amplitude, RA, cap_a.spectrum.bin_width_hz,
                            pb.freq_hz, pb.amplitude, RB, cap_b.spectrum.bin_width_hz)  # fmt: skip
        i_real, i_alias = nearest_peak(pa, 1200.0), nearest_peak(pa, 3200.0)
        assert res.a.verdict[i_real] == "stays"
        assert res.a.verdict[i_alias] == "moves"
        best = res.a.candidates[i_alias][0]
        assert best.true_hz == pytest.approx(13_200.0, abs=0.5)
        assert best.partner == nearest_peak(pb, 1700.0)
        j = nearest_peak(pb, 1700.0)
        assert res.b.verdict[j] == "moves"
        assert res.b.candidates[j][0].true_hz == pytest.approx(13_200.0, abs=0.5)
        # Nothing else is called a moving alias.
        assert int(np.sum(res.a.verdict == "moves")) == 1

    def test_edges(self) -> None:
        # A 5.5 kHz tone is real at 11.5 kS/s (zone 1) but above the 5 kHz Nyquist
        # frequency at 10 kS/s, where it reads 4.5 kHz (zone 2).
        res = compare_rates([4500.0], [0.2], RA, BA, [5500.0], [0.2], RB, BB)
        assert res.b.verdict[0] == "moves"
        best = res.b.candidates[0][0]
        assert best.true_hz == pytest.approx(5500.0)
        assert (best.zone_a, best.zone_b) == (2, 1)
        assert "real in this capture" in res.b.sentence[0]
        # Peaks without any counterpart
        res = compare_rates([1200.0, 2100.0], [0.5, 0.1], RA, BA,
                            [1200.0, 5600.0], [0.5, 0.1], RB, BB, max_true_hz=20_000)  # fmt: skip
        assert res.a.verdict[1] == "only_in_a"
        assert res.b.verdict[1] == "only_in_b"
        assert "above the Nyquist frequency 5.00 kHz" in res.b.sentence[1]
        assert res.a.partner[1] == -1 and np.isnan(res.a.true_hz[1])
        # A strong level mismatch weakens "stays".
        same = compare_rates([1200.0], [0.5], RA, BA, [1200.0], [0.5], RB, BB)
        off = compare_rates([1200.0], [0.5], RA, BA, [1200.0], [0.05], RB, BB)
        assert off.a.confidence[0] < same.a.confidence[0]
        empty = compare_rates([], [], RA, BA, [1200.0], [0.5], RB, BB)
        assert len(empty.a) == 0 and empty.b.verdict[0] == "only_in_b"

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match="two different sample rates"):
            compare_rates([1.0], [1.0], RA, BA, [1.0], [1.0], RA, BA)
        with pytest.raises(ValueError, match="rate_a_hz=0"):
            compare_rates([1.0], [1.0], 0, BA, [1.0], [1.0], RB, BB)
        with pytest.raises(ValueError, match="bin_b_hz=-1"):
            compare_rates([1.0], [1.0], RA, BA, [1.0], [1.0], RB, -1)
        with pytest.raises(ValueError, match=r"capture A: peaks_freq_hz\[0\]=6000.0"):
            compare_rates([6000.0], [1.0], RA, BA, [1.0], [1.0], RB, BB)
        with pytest.raises(ValueError, match="capture B: peaks_amplitude"):
            compare_rates([1.0], [1.0], RA, BA, [1.0], [1.0, 2.0], RB, BB)
        with pytest.raises(ValueError, match="level_tolerance_db=0"):
            compare_rates([1.0], [1.0], RA, BA, [1.0], [1.0], RB, BB, level_tolerance_db=0)


class TestCompareLimits:
    def test_errors(self) -> None:
        from service.core.comparison import compare_rates

        f = np.array([100.0, 200.0])
        a = np.array([1.0, 1.0])
        # A search up to 1e9 Hz at 100 S/s would unfold each peak 2·10^7 times: refused.
        with pytest.raises(ValueError, match="max_true_hz"):
            compare_rates(f / 10, a, 100.0, 1.0, f / 10, a, 115.0, 1.0, max_true_hz=1e9)
