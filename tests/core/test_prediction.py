"""Tones through a chain: levels, bins, intervals and collisions."""

from __future__ import annotations

import numpy as np
import pytest

from service.core.chain import Chain
from service.core.prediction import predict
from service.core.stages import AnalogLowpass
from service.core.tones import ToneSet


def _tones(freqs: np.ndarray, amplitude: float = 1.0) -> ToneSet:
    return ToneSet.explicit(
        freqs, [f"t{i}" for i in range(freqs.size)], np.full(freqs.size, amplitude)
    )


class TestPredict:
    def test_basic(self) -> None:
        chain = Chain.shorthand(
            12_800.0, AnalogLowpass(family="butterworth", order=8, cutoff_hz=5000.0)
        )
        p = predict(_tones(np.array([8000.0, 1000.0]), 2.0), chain, lines=1600)
        # Source: Butterworth closed form |H|² = 1/(1+(f/fc)^(2N)) (Butterworth, 1930),
        # N=8, fc=5 kHz at 8 kHz: 10·log10(1 + 1.6^16) = 32.66 dB.
        assert p.response.attenuation_db[0] == pytest.approx(32.66, abs=0.01)
        assert p.apparent_amplitude[0] == pytest.approx(2.0 * 10 ** (-32.66 / 20), rel=1e-3)
        # Common practice: bin width = span / lines with span = fs / 2.56.
        assert p.bin_width_hz == pytest.approx(12_800 / 2.56 / 1600)
        assert p.bin[1] == round(1000 / p.bin_width_hz)
        assert p.aliased.tolist() == [True, False]
        assert p.band_hz == (0.0, pytest.approx(5000.0))

    def test_edges(self) -> None:
        chain = Chain.shorthand(1000.0)
        p = predict(_tones(np.array([250.0])), chain, band_hz=(300.0, 400.0))
        assert not p.in_band[0]
        assert p.collisions.total == 0

    def test_errors(self) -> None:
        chain = Chain.shorthand(1000.0)
        t = _tones(np.array([1.0]))
        with pytest.raises(ValueError, match="lines=0"):
            predict(t, chain, lines=0)
        with pytest.raises(ValueError, match="band_hz"):
            predict(t, chain, band_hz=(10.0, 5.0))
        with pytest.raises(ValueError, match="speed_tolerance_pct"):
            predict(t, chain, speed_tolerance_pct=80)


class TestCollisions:
    # Few tones are checked pair by pair in one table, many by a sorted window search:
    # sizes on both sides of the switch.
    @pytest.mark.parametrize(("n", "lines"), [(12, 25), (40, 100), (400, 400)])
    def test_against_brute_force(self, n: int, lines: int) -> None:
        # Reference: an independent double loop over all pairs with numpy's fold formula.
        rng = np.random.default_rng(3)
        fs = 2000.0
        f = rng.uniform(0, 5000, n)
        chain = Chain.shorthand(fs)
        p = predict(_tones(f), chain, lines=lines, collision_bins=3)
        tol = 3 * fs / 2.56 / lines
        app = np.abs(f - fs * np.rint(f / fs))
        aliased = f > fs / 2
        expected = set()
        for i in range(f.size):
            for j in range(f.size):
                if i == j or not aliased[i] or abs(app[i] - app[j]) > tol:
                    continue
                if abs(f[i] - f[j]) <= tol:
                    continue
                pair = (i, j) if not (aliased[j] and j < i) else None
                if pair:
                    expected.add(pair)
        got = set(zip(p.collisions.alias.tolist(), p.collisions.other.tolist(), strict=True))
        assert expected, "the case must have collisions to compare"
        assert p.collisions.total == len(expected)
        assert got == expected
        # Closest first.
        assert np.all(np.diff(p.collisions.separation_hz) >= 0)

    def test_speed_tolerance_widens(self) -> None:
        fs = 1000.0
        # 1.3 kHz folds to 300 Hz; a direct line at 320 Hz is 20 Hz away.
        tones = ToneSet(
            label=np.array(["order", "line"], dtype=object),
            source=np.array(["shaft", "supply"], dtype=object),
            kind=np.array(["shaft", "line"], dtype=object),
            fixed_hz=np.array([0.0, 320.0]),
            speed_hz=np.array([1300.0, 0.0]),
            amplitude=np.array([1.0, 1.0]),
        )
        chain = Chain.shorthand(fs)
        assert predict(tones, chain, lines=400).collisions.total == 0
        p = predict(tones, chain, lines=400, speed_tolerance_pct=2.0)
        # Worked by hand: 1300 × 0.98 = 1274 Hz and 1300 × 1.02 = 1326 Hz, both in zone 3
        # (1000..1500 Hz at fs = 1 kHz, not inverted), so each folds to f − 1000:
        # 274 Hz and 326 Hz (fold formula, Oppenheim & Schafer sec. 4.2).
        np.testing.assert_allclose(
            [p.apparent_low_hz[0], p.apparent_high_hz[0]], [274.0, 326.0], rtol=1e-12
        )
        assert p.collisions.total == 1
