"""Sideband attribution to the strongest consistent carrier after the chain."""

from __future__ import annotations

import numpy as np
import pytest

from service.core.attribution import attribute
from service.core.chain import AnalogLowpass, Chain, Decimate, Sample
from service.core.errors import InputError
from service.core.sidebands import (
    FLOOR_WEIGHT,
    carrier_levels_db,
    prefer_strongest_carrier,
    pwm_carriers,
)
from service.core.sources import PwmCarrier

from .simulate import SimChain, analog_attenuation_db, nearest_peak, simulate_capture


class TestPreferStrongestCarrier:
    def test_basic(self) -> None:
        # Peak 0: the 1× carrier reaches −22 dB, the 3× −60 dB; peak 1: one candidate.
        got = prefer_strongest_carrier([0, 0, 1], [0.1, 0.0, 0.2], 0.5, [-22.0, -60.0, -40.0])
        assert got.preferred.tolist() == [True, False, True]
        np.testing.assert_allclose(got.deficit_db, [0.0, 38.0, 0.0])
        # 38 dB below, 6 dB margin: 10**(-32/20) = 0.025 is below the floor of 5 %.
        np.testing.assert_allclose(got.weight, [1.0, FLOOR_WEIGHT, 1.0])
        assert got.best_row.tolist() == [0, 0, 2]

    def test_edges(self) -> None:
        # Within the margin both stay preferred; 12 dB down keeps 10**(-6/20) = 0.50.
        got = prefer_strongest_carrier([3, 3, 3], [0, 0, 0], 1.0, [-20.0, -25.0, -32.0])
        assert got.preferred.tolist() == [True, True, False]
        assert got.weight[2] == pytest.approx(10 ** (-6 / 20))
        # A stronger carrier outside the frequency tolerance does not count.
        got = prefer_strongest_carrier([0, 0], [2.0, 0.1], 1.0, [-10.0, -50.0])
        assert got.consistent.tolist() == [False, True]
        assert got.preferred.tolist() == [False, True] and got.weight.tolist() == [1.0, 1.0]
        # A carrier the chain removes entirely (−inf) next to a real one.
        got = prefer_strongest_carrier([0, 0], [0, 0], 1.0, [-np.inf, -30.0])
        assert got.preferred.tolist() == [False, True] and got.weight[0] == FLOOR_WEIGHT
        assert len(prefer_strongest_carrier([], [], 1.0, []).weight) == 0

    def test_errors(self) -> None:
        with pytest.raises(InputError, match="peak"):
            prefer_strongest_carrier([-1], [0.0], 1.0, [0.0])
        with pytest.raises(InputError, match="freq_error_hz"):
            prefer_strongest_carrier([0, 1], [0.0], 1.0, [0.0, 0.0])
        with pytest.raises(InputError, match="tolerance_hz"):
            prefer_strongest_carrier([0], [0.0], 0.0, [0.0])
        with pytest.raises(InputError, match="carrier_level_db"):
            prefer_strongest_carrier([0], [0.0], 1.0, [np.nan])


class TestCarrierLevels:
    def test_basic(self) -> None:
        # 0.05 at the sensor, 16 dB off: 20·log10(0.05) − 16 = −42.02 dB (by hand).
        np.testing.assert_allclose(carrier_levels_db([16.0], [0.05]), [-42.0206], atol=1e-3)
        # Unknown amplitude: as strong as the strongest known one.
        got = carrier_levels_db([16.0, 35.0], [0.05, np.nan])
        assert got[0] - got[1] == pytest.approx(19.0)

    def test_errors(self) -> None:
        with pytest.raises(InputError, match="carrier_amplitude"):
            carrier_levels_db([1.0], [-1.0])


class TestPwmCarriers:
    def test_basic(self) -> None:
        tones = PwmCarrier("inverter", 10_000.0, 200.0, carrier_multiples=3, sidebands=2,
                           amplitude=0.05).expand()  # fmt: skip
        hz, amp = pwm_carriers(tones)
        labels = tones.label.tolist()
        # Source: Holmes & Lipo (2003), ch. 3: a phase leg has lines where m + n is odd,
        # so carrier 1× + 2·f1 belongs to the 1× group and 2× + 1·f1 to the 2× group.
        i = labels.index("carrier 1× + 2·f1")
        assert hz[i] == 10_000.0 and amp[i] == 0.05
        j = labels.index("carrier 2× + 1·f1")
        assert hz[j] == 20_000.0 and np.isnan(amp[j])  # no 2× carrier line exists
        k = labels.index("carrier 1×")
        assert hz[k] == 10_000.0 and amp[k] == 0.05  # the line heads its own group

    def test_errors(self) -> None:
        with pytest.raises(InputError, match="ToneSet"):
            pwm_carriers([1.0])  # type: ignore[arg-type]


class TestSlicedRecordScenario:
    def test_sidebands_go_to_the_1x_carrier(self) -> None:
        """12.8 kS/s behind a 2nd-order 4 kHz Butterworth, sliced ÷2 (DESIGN.md §6).

        Only the 1× carrier group (10 kHz, ±2·f1, ±4·f1, f1 = 200 Hz) is simulated; at
        6.4 kS/s its sidebands fold onto lines of the 3× group too (30 kHz folds to
        2.0 kHz, exactly where 10 kHz + 4·f1 = 10.8 kHz lands; 29.6 kHz and 10.4 kHz
        both fold to 2.4 kHz). The 3× group must lose.
        """
        fs, fc, f1 = 12_800.0, 10_000.0, 200.0
        truth = [(fc, 0.05), (fc - 2 * f1, 0.02), (fc + 2 * f1, 0.02),
                 (fc - 4 * f1, 0.008), (fc + 4 * f1, 0.008)]  # fmt: skip
        sim = SimChain(fs, ("butter", 2, 4000.0), digital=(("decimate", 2, "none"),))
        cap = simulate_capture(truth, sim, 3.0, 1e-4, 2, lines=1600)
        chain = Chain((AnalogLowpass(family="butterworth", order=2, cutoff_hz=4000.0),
                       Sample(fs), Decimate(2, filter="none")))  # fmt: skip
        tones = PwmCarrier("inverter", fc, f1, carrier_multiples=3, sidebands=4,
                           amplitude=0.05).expand()  # fmt: skip
        p = cap.peaks
        at = attribute(p.freq_hz, p.amplitude, p.floor, chain, tones,
                       cap.spectrum.bin_width_hz, max_alternatives=5)  # fmt: skip
        carrier_hz, carrier_amp = pwm_carriers(tones)
        att = chain.evaluate(np.array([fc, 3 * fc])).attenuation_db
        # Reference: scipy.signal.freqs of the analog design: 16.0 dB at 10 kHz, 35.0 dB
        # at 30 kHz — the 1× carrier reaches the record 19 dB stronger.
        assert att[0] == pytest.approx(analog_attenuation_db("butter", 2, 4000.0, fc), abs=0.01)
        assert att[1] == pytest.approx(analog_attenuation_db("butter", 2, 4000.0, 3 * fc), abs=0.01)
        for apparent in (2000.0, 2400.0):
            i = nearest_peak(p, apparent)
            alts = [e for e in at.alternatives[i] if np.isfinite(carrier_hz[e.tone_index])]
            groups = {round(carrier_hz[e.tone_index] / fc) for e in alts}
            assert groups == {1, 3}  # both groups offer an explanation
            tone = np.array([e.tone_index for e in alts])
            levels = carrier_levels_db(
                chain.evaluate(carrier_hz[tone]).attenuation_db, carrier_amp[tone]
            )
            choice = prefer_strongest_carrier(
                np.zeros(len(alts), dtype=int), [e.freq_error_hz for e in alts],
                at.tolerance_hz, levels,
            )  # fmt: skip
            conf = np.array([e.confidence for e in alts]) * choice.weight
            winner = alts[int(np.argmax(conf))]
            assert round(carrier_hz[winner.tone_index] / fc) == 1, winner.label
            demoted = [a for a, w in zip(alts, choice.weight, strict=True) if w < 1]
            assert demoted and all(round(carrier_hz[a.tone_index] / fc) == 3 for a in demoted)
