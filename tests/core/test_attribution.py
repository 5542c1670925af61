"""Attribution of peaks: confidence rules on small cases, then simulated acquisitions.

The simulated cases (tests/core/simulate.py) build the record from first principles with
numpy and scipy (analog design + freqs, sampling at t = k/fs, lfilter, slicing), never
through the project's chain code, and check that diagnosis names the right tone, zone,
true frequency and attenuation.
"""

from __future__ import annotations

import numpy as np
import pytest

from service.core.attribution import attribute, frequency_tolerance_hz
from service.core.attribution_model import MIN_CONFIDENCE, Attribution
from service.core.chain import Chain
from service.core.electrical_sources import PwmCarrier
from service.core.fixed_sources import ExplicitTones
from service.core.harmonics import find_families
from service.core.rotating_sources import BladePass, GearMesh, Shaft
from service.core.sources import expand_sources
from service.core.stages import AnalogLowpass, Decimate, DigitalLowpass, Sample
from service.core.tones import ToneSet

from .simulate import (
    SimChain,
    analog_attenuation_db,
    fir_attenuation_db,
    kaiser_taps,
    nearest_peak,
    simulate_capture,
)

FS = 12_800.0
BW = FS / 4096  # 1600 lines


def _butter_db(order: int, cutoff: float, f: float) -> float:
    # Source: Butterworth |H|² = 1/(1+(f/fc)^(2N)) (S. Butterworth, Wireless Eng. 7, 1930).
    return 10 * np.log10(1 + (f / cutoff) ** (2 * order))


def _demo_chain() -> Chain:
    # The invented demo bench (service/demo.py): 12.8 kS/s behind a weak 2nd-order
    # filter (here Butterworth at 5 kHz).
    return Chain.shorthand(FS, AnalogLowpass(family="butterworth", order=2, cutoff_hz=5000.0))


def _plain_chain() -> Chain:
    return Chain.shorthand(FS)


def _one(freq: float, amp: float, tones: ToneSet | None, chain: Chain, **kw) -> Attribution:
    return attribute([freq], [amp], 1e-4, chain, tones, BW, **kw)


class TestFrequencyTolerance:
    def test_basic(self) -> None:
        # Source: J. O. Smith, Spectral Audio Signal Processing, "Resolving sinusoids":
        # main-lobe half-width of Hann is 2 bins, rectangular 1, Blackman-Harris 4.
        assert frequency_tolerance_hz(1.0, "hann") == pytest.approx(2.0, abs=0.1)
        assert frequency_tolerance_hz(1.0, "rectangular") == pytest.approx(1.0, abs=0.1)
        assert frequency_tolerance_hz(2.0, "blackmanharris") == pytest.approx(8.0, abs=0.2)

    def test_edges(self) -> None:
        # An unknown window is read as Hann, with a larger refinement error.
        assert frequency_tolerance_hz(1.0, "unknown") > frequency_tolerance_hz(1.0, "hann")

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match="bin_width_hz=0"):
            frequency_tolerance_hz(0.0)
        with pytest.raises(ValueError, match="window='kaiser'"):
            frequency_tolerance_hz(1.0, "kaiser")


class TestAttribute:
    def test_basic(self) -> None:
        # Source: fold |f − fs·round(f/fs)| (Oppenheim & Schafer 2010, sec. 4.2; zones: Lyons 2011,
        # sec. 2.3), by hand at
        # fs = 10 kHz: 10 − 7.3 = 2.7 kHz (zone 2, inverted), 13.2 − 10 = 3.2 kHz (zone 3).
        chain = Chain.shorthand(10_000.0)
        tones = ToneSet.explicit([7300.0, 13200.0, 1000.0], ["a", "b", "c"], [0.1, 0.1, 0.1])
        bw = 10_000.0 / 4096
        at = attribute([1000.0, 2700.0, 3200.0], [0.1] * 3, 1e-4, chain, tones, bw)
        assert list(at.verdict) == ["direct", "alias", "alias"]
        assert list(at.zone) == [1, 2, 3]
        assert list(at.inverted) == [False, True, False]
        np.testing.assert_allclose(at.true_hz, [1000.0, 7300.0, 13200.0])
        assert list(at.tone_label) == ["c", "a", "b"]
        assert all(0 < c <= 0.97 for c in at.confidence)  # never certain (calibrated cap)
        assert all(0 < c <= 0.95 for c in at.raw_confidence)  # nor the raw score
        assert "zone 2 (inverted)" in at.explanation[1]

    def test_alias_far_below_floor_not_chosen(self) -> None:
        # A carrier whose predicted level is 40 dB under the floor cannot make a peak
        # 10 dB above it, however well its frequency matches.
        chain = _plain_chain()
        carrier = ToneSet.explicit([10_000.0], ["carrier"], [1e-6], source="inverter")
        at = attribute([2800.0], [1e-3], 1e-4, chain, carrier, BW)  # floor −80 dB
        assert at.verdict[0] == "unexplained"
        assert at.raw_confidence[0] < MIN_CONFIDENCE
        assert "far below the floor" in at.alternatives[0][0].sentence
        # With an in-band candidate of unknown level at the same frequency, that wins.
        both = ToneSet.concat([carrier, ToneSet.explicit([2800.0], ["2.8k line"])])
        at = attribute([2800.0], [1e-3], 1e-4, chain, both, BW)
        assert at.verdict[0] == "direct"
        assert at.tone_label[0] == "2.8k line"

    def test_speed_tolerance_widens_the_match(self) -> None:
        # 10 × 100 Hz = 1 kHz nominal; the peak at 1.01 kHz is 1 % off, i.e. 3.2 bins.
        chain = _plain_chain()
        order = expand_sources([Shaft("shaft", 100.0, orders=(10,))])
        strict = _one(1010.0, 0.1, order, chain)
        assert strict.verdict[0] == "unexplained"
        loose = _one(1010.0, 0.1, order, chain, speed_tolerance_pct=2.0)
        assert loose.verdict[0] == "family"  # the 10th order of the shaft
        # Inside the interval [980, 1020] Hz the frequency matches exactly.
        assert loose.alternatives[0][0].freq_error_hz == 0.0

    def test_level_mismatch_lowers_confidence(self) -> None:
        chain = _plain_chain()
        tone = ToneSet.explicit([1000.0], ["line"], [0.1])
        right = _one(1000.0, 0.1, tone, chain).raw_confidence[0]
        off = _one(1000.0, 0.01, tone, chain).raw_confidence[0]  # 20 dB below prediction
        assert right >= 0.9
        assert off < right - 0.3

    def test_frequency_error_lowers_confidence(self) -> None:
        chain = _plain_chain()
        tone = ToneSet.explicit([1000.0], ["line"])
        near = _one(1000.0 + 0.1 * BW, 0.1, tone, chain).raw_confidence[0]
        mid = _one(1000.0 + 1.0 * BW, 0.1, tone, chain).raw_confidence[0]
        far = _one(1000.0 + 3.0 * BW, 0.1, tone, chain)  # beyond Hann's 2-bin half lobe
        assert near > mid > 0
        assert far.verdict[0] == "unexplained" and not far.alternatives[0]

    def test_tie_names_both(self) -> None:
        # 3 × 50 Hz supply and 1× of a 150 Hz shaft sit on the same line.
        chain = _plain_chain()
        tones = ToneSet.concat(
            [
                ToneSet.explicit([150.0], ["3×"], source="supply"),
                ToneSet.explicit([150.0], ["1×"], source="motor shaft"),
            ]
        )
        at = _one(150.0, 0.05, tones, chain)
        assert at.verdict[0] == "direct"
        assert "or, about as likely" in at.explanation[0]
        assert {e.source for e in at.alternatives[0]} == {"supply", "motor shaft"}

    def test_mirror_above_the_span(self) -> None:
        # No tones given: a peak between fs/2.56 and fs/2 may be the image of energy at
        # fs − f just above Nyquist.
        chain = _demo_chain()
        at = attribute([6100.0, 1000.0], [0.01, 0.5], 1e-5, chain, None, BW)
        assert at.verdict[0] == "mirror"
        assert at.beyond_span[0] and not at.beyond_span[1]
        assert at.verdict[1] == "unexplained"
        mirror = at.alternatives[0][0]
        assert mirror.true_hz == pytest.approx(FS - 6100.0)
        assert mirror.attenuation_db == pytest.approx(_butter_db(2, 5000.0, 6700.0), abs=1e-6)
        assert "6.70 kHz" in at.explanation[0]

    def test_implausible_mirror(self) -> None:
        # A mirror through 8th-order filtering that would need a source far above the
        # strongest peak is not believed.
        chain = Chain.shorthand(FS, AnalogLowpass(family="butterworth", order=8, cutoff_hz=1000.0))
        at = attribute([6300.0, 500.0], [0.01, 0.02], 1e-6, chain, None, BW)
        assert at.verdict[0] == "unexplained"

    def test_family_member(self) -> None:
        chain = _plain_chain()
        mesh = expand_sources([GearMesh("first mesh 17/53", 150.0, 17, harmonics=2, sidebands=0)])
        at = _one(5100.0, 0.1, mesh, chain)
        assert at.verdict[0] == "family"
        assert "harmonic 2× of gear mesh of 'first mesh 17/53'" in at.explanation[0]

    def test_edges(self) -> None:
        chain = _plain_chain()
        empty = attribute([], [], 1e-4, chain, None, BW)
        assert len(empty) == 0 and empty.alternatives == []
        at = attribute([1000.0], [0.1], 1e-4, chain, ToneSet.empty(), BW)
        assert at.verdict[0] == "unexplained" and at.confidence[0] == 0.0
        assert at.source[0] is None and np.isnan(at.true_hz[0]) and at.zone[0] == 0
        # max_alternatives bounds the list
        many = ToneSet.explicit([1000.0, 1000.5, 1001.0], ["a", "b", "c"])
        at = attribute([1000.0], [0.1], 1e-4, chain, many, BW, max_alternatives=2)
        assert len(at.alternatives[0]) == 2
        # band of interest
        at = attribute([1000.0, 3000.0], [0.1, 0.1], 1e-4, chain, None, BW, band_hz=(0, 2000))
        assert list(at.in_band) == [True, False]

    def test_performance_shape(self) -> None:
        # 500 peaks × 5000 tones stays vectorised (timing is reported by the bench, not
        # asserted here); every peak gets at most max_alternatives explanations.
        rng = np.random.default_rng(0)
        tones = ToneSet.explicit(rng.uniform(1, 60_000, 5000), [f"t{i}" for i in range(5000)])
        peaks = np.sort(rng.uniform(1, 6400, 500))
        at = attribute(peaks, np.full(500, 0.01), 1e-4, _demo_chain(), tones, BW)
        assert len(at) == 500
        assert max(len(a) for a in at.alternatives) <= 4

    def test_errors(self) -> None:
        chain = _plain_chain()
        with pytest.raises(ValueError, match=r"peaks_freq_hz\[0\]=7000.0 must be between 0"):
            attribute([7000.0], [0.1], 1e-4, chain, None, BW)
        with pytest.raises(ValueError, match="peaks_amplitude has 2 values"):
            attribute([1000.0], [0.1, 0.2], 1e-4, chain, None, BW)
        with pytest.raises(ValueError, match=r"floor\[0\]=0.0"):
            attribute([1000.0], [0.1], 0.0, chain, None, BW)
        with pytest.raises(ValueError, match="bin_width_hz=-1"):
            attribute([1000.0], [0.1], 1e-4, chain, None, -1)
        with pytest.raises(ValueError, match="speed_tolerance_pct=60"):
            attribute([1000.0], [0.1], 1e-4, chain, None, BW, speed_tolerance_pct=60)
        with pytest.raises(ValueError, match="max_alternatives=0"):
            attribute([1000.0], [0.1], 1e-4, chain, None, BW, max_alternatives=0)
        with pytest.raises(ValueError, match="level_tolerance_db=0"):
            attribute([1000.0], [0.1], 1e-4, chain, None, BW, level_tolerance_db=0)
        with pytest.raises(ValueError, match="band_hz"):
            attribute([1000.0], [0.1], 1e-4, chain, None, BW, band_hz=(5, 1))
        with pytest.raises(ValueError, match="tones must be a ToneSet"):
            attribute([1000.0], [0.1], 1e-4, chain, [1000.0], BW)  # type: ignore[arg-type]


class TestAttributeSimulated:
    def test_pwm_carrier_above_nyquist(self) -> None:
        """The invented demo bench at 9000 rpm: inverter lines fold, gear mesh stays direct."""
        shaft_hz = 150.0  # 9000 rpm
        f1 = 4 * shaft_hz  # 4 pole pairs
        second_mesh = shaft_hz * 17 / 53 * 19
        truth = [
            (shaft_hz, 0.05),
            (2 * shaft_hz, 0.03),
            (17 * shaft_hz, 0.8),  # first gear mesh
            (second_mesh, 0.4),
            (10_000.0, 0.5),  # carrier
            (10_000.0 - 2 * f1, 0.2),  # sine-triangle sidebands m + n odd (Holmes & Lipo)
            (10_000.0 + 2 * f1, 0.2),
        ]
        cap = simulate_capture(truth, SimChain(FS, ("butter", 2, 5000.0)), 2.0, 1e-3, 1,
                               lines=1600)  # fmt: skip
        sources = [
            Shaft("motor shaft", shaft_hz, orders=(1, 2), harmonic_amplitudes=(0.05, 0.03)),
            GearMesh("first mesh 17/53", shaft_hz, 17, harmonics=2, sidebands=1, amplitude=0.8),
            GearMesh("second mesh 19/61", shaft_hz * 17 / 53, 19, harmonics=2, sidebands=0,
                     amplitude=0.4),
            PwmCarrier.from_shaft("inverter", 10_000.0, shaft_hz, 4, carrier_multiples=1,
                                  sidebands=2, amplitude=0.5),
        ]  # fmt: skip
        p = cap.peaks
        at = attribute(p.freq_hz, p.amplitude, p.floor, _demo_chain(), expand_sources(sources),
                       cap.spectrum.bin_width_hz)  # fmt: skip
        # Source: fold |f − fs·round(f/fs)| (Oppenheim & Schafer 2010, sec. 4.2), by hand at 12.8
        # kS/s:
        # 12.8 − 10 = 2.8 kHz, 12.8 − 8.8 = 4.0 kHz, 12.8 − 11.2 = 1.6 kHz, all zone 2.
        for true, apparent, label in (
            (10_000.0, 2800.0, "carrier 1×"),
            (8800.0, 4000.0, "carrier 1× − 2·f1"),
            (11_200.0, 1600.0, "carrier 1× + 2·f1"),
        ):
            i = nearest_peak(p, apparent)
            assert abs(p.freq_hz[i] - apparent) < 0.1 * BW
            assert at.verdict[i] == "alias", at.explanation[i]
            assert at.source[i] == "inverter"
            assert at.tone_label[i] == label
            assert at.true_hz[i] == pytest.approx(true)
            assert at.zone[i] == 2 and at.inverted[i]
            best = at.alternatives[i][0]
            # Reference: scipy.signal.freqs of the analog Butterworth design
            ref = analog_attenuation_db("butter", 2, 5000.0, true)
            assert best.attenuation_db == pytest.approx(ref, abs=0.01)
        i = nearest_peak(p, 2800.0)
        # Level check: 0.5 through the filter, as simulated.
        seen_db = 20 * np.log10(p.amplitude[i])
        assert seen_db == pytest.approx(20 * np.log10(0.5) - ref_db(10_000.0), abs=0.3)
        assert "inverter" in at.explanation[i] and "zone 2 (inverted)" in at.explanation[i]
        assert "12.3 dB" in at.explanation[i]
        for apparent, source in ((17 * shaft_hz, "first mesh 17/53"),
                                 (second_mesh, "second mesh 19/61")):  # fmt: skip
            i = nearest_peak(p, apparent)
            assert at.verdict[i] == "direct" and at.source[i] == source
        # Only the three inverter lines are called aliases.
        assert int(np.sum(at.verdict == "alias")) == 3

    def test_unfiltered_software_decimation(self) -> None:
        """Second bench channel: slice ÷2 without a filter; 3.2..6.4 kHz folds."""
        shaft_hz = 150.0
        truth = [(shaft_hz, 0.05), (7 * shaft_hz, 0.1), (17 * shaft_hz, 0.8),
                 (34 * shaft_hz, 0.3)]  # fmt: skip
        sim = SimChain(FS, ("butter", 2, 5000.0), digital=(("decimate", 2, "none"),))
        cap = simulate_capture(truth, sim, 3.0, 1e-3, 2, lines=800)
        assert cap.rate_hz == FS / 2
        chain = Chain(
            (AnalogLowpass(family="butterworth", order=2, cutoff_hz=5000.0), Sample(FS),
             Decimate(2, filter="none"))
        )  # fmt: skip
        tones = expand_sources(
            [
                Shaft("motor shaft", shaft_hz, orders=(1,), amplitude=0.05),
                BladePass("cooling fan", shaft_hz, 7, harmonics=1, amplitude=0.1),
                GearMesh("first mesh 17/53", shaft_hz, 17, harmonics=2, sidebands=0,
                         harmonic_amplitudes=(0.8, 0.3)),
            ]
        )  # fmt: skip
        p = cap.peaks
        at = attribute(p.freq_hz, p.amplitude, p.floor, chain, tones, cap.spectrum.bin_width_hz)
        # Source: fold formula (Oppenheim & Schafer 2010, sec. 4.2), by hand: 6.4 − 5.1 = 1.3 kHz,
        # zone 2.
        i = nearest_peak(p, 1300.0)
        assert abs(p.freq_hz[i] - 1300.0) < 0.1 * cap.spectrum.bin_width_hz
        assert at.verdict[i] == "alias"
        assert at.tone_label[i] == "GMF 2×" and at.source[i] == "first mesh 17/53"
        assert at.true_hz[i] == pytest.approx(5100.0) and at.zone[i] == 2 and at.inverted[i]
        # Reference: scipy.signal.freqs; the slice adds no attenuation.
        ref = analog_attenuation_db("butter", 2, 5000.0, 5100.0)
        assert at.alternatives[i][0].attenuation_db == pytest.approx(ref, abs=0.01)
        for apparent in (shaft_hz, 7 * shaft_hz, 17 * shaft_hz):
            j = nearest_peak(p, apparent)
            assert at.verdict[j] == "direct", at.explanation[j]
        assert int(np.sum(at.verdict == "alias")) == 1

    def test_oversampling_converter_transition_band(self) -> None:
        """Sigma-delta style: 102.4 kS/s, Kaiser FIR 5.0–7.5 kHz, keep every 8th sample."""
        high = 102_400.0
        fir = ("fir", 5000.0, 7500.0, 80.0)
        sim = SimChain(high, None, digital=(fir, ("decimate", 8, "none")))
        cap = simulate_capture([(1000.0, 0.5), (6800.0, 0.5)], sim, 1.6, 1e-4, 3, lines=1600)
        assert cap.rate_hz == FS
        chain = Chain(
            (Sample(high), DigitalLowpass(passband_hz=5000.0, stopband_hz=7500.0, atten_db=80.0),
             Decimate(8, filter="none"))
        )  # fmt: skip
        p = cap.peaks
        bw = cap.spectrum.bin_width_hz
        # Reference: scipy.signal.freqz of the Kaiser FIR designed in the simulation.
        ref = fir_attenuation_db(kaiser_taps(high, 5000.0, 7500.0, 80.0), high, 6800.0)
        assert 10.0 < ref < 30.0  # really in the transition band
        i = nearest_peak(p, FS - 6800.0)  # Source: fold ({OS}): 12.8 − 6.8 = 6.0 kHz
        assert abs(p.freq_hz[i] - 6000.0) < 0.1 * bw
        known = ExplicitTones("test signal", (1000.0, 6800.0), ("reference", "transition tone"),
                              amplitudes=(0.5, 0.5)).expand()  # fmt: skip
        at = attribute(p.freq_hz, p.amplitude, p.floor, chain, known, bw)
        assert at.verdict[i] == "alias" and at.tone_label[i] == "transition tone"
        assert at.beyond_span[i] and at.zone[i] == 2
        assert at.alternatives[i][0].attenuation_db == pytest.approx(ref, abs=0.1)
        assert at.confidence[i] > 0.8  # level agrees too
        # Without the tone in the list the peak is a transition-band mirror of 6.8 kHz.
        only_ref = ExplicitTones("test signal", (1000.0,), amplitudes=(0.5,)).expand()
        at = attribute(p.freq_hz, p.amplitude, p.floor, chain, only_ref, bw)
        assert at.verdict[i] == "mirror"
        mirror = at.alternatives[i][0]
        assert mirror.true_hz == pytest.approx(6800.0, abs=0.1 * bw)
        assert mirror.attenuation_db == pytest.approx(ref, abs=0.2)
        j = nearest_peak(p, 1000.0)
        assert at.verdict[j] == "direct"

    def test_clean_setup_has_no_false_alarms(self) -> None:
        """Steep 8th-order filter, tones in band: no alias and no mirror verdicts."""
        shaft_hz = 150.0
        truth = [(shaft_hz, 0.05), (7 * shaft_hz, 0.1), (17 * shaft_hz, 0.8),
                 (shaft_hz * 17 / 53 * 19, 0.4), (10_000.0, 0.01)]  # fmt: skip
        cap = simulate_capture(truth, SimChain(FS, ("butter", 8, 4000.0)), 2.0, 1e-3, 4,
                               lines=1600)  # fmt: skip
        chain = Chain.shorthand(FS, AnalogLowpass(family="butterworth", order=8, cutoff_hz=4000.0))
        tones = expand_sources(
            [
                Shaft("motor shaft", shaft_hz, orders=(1, 2, 3), amplitude=0.05),
                BladePass("cooling fan", shaft_hz, 7, harmonics=2, amplitude=0.1),
                GearMesh("first mesh 17/53", shaft_hz, 17, harmonics=3, sidebands=2,
                         amplitude=0.8),
                GearMesh("second mesh 19/61", shaft_hz * 17 / 53, 19, harmonics=3,
                         sidebands=1, amplitude=0.4),
                PwmCarrier.from_shaft("inverter", 10_000.0, shaft_hz, 4, carrier_multiples=2,
                                      sidebands=3, amplitude=0.01),
            ]
        )  # fmt: skip
        p = cap.peaks
        at = attribute(p.freq_hz, p.amplitude, p.floor, chain, tones, cap.spectrum.bin_width_hz)
        assert len(at) >= 4
        assert not set(at.verdict) & {"alias", "mirror"}, list(at.explanation)
        for f, _ in truth[:4]:
            i = nearest_peak(p, f)
            assert at.verdict[i] == "direct"

    def test_blind_family_members_are_aliases(self) -> None:
        """No sources: a 1.1 kHz family with 12 harmonics, 7 of them above Nyquist."""
        f0 = 1100.0
        truth = [(k * f0, 0.3 / np.sqrt(k)) for k in range(1, 13)] + [(777.0, 0.05)]
        cap = simulate_capture(truth, SimChain(FS), 2.0, 1e-3, 5, lines=1600)
        p = cap.peaks
        bw = cap.spectrum.bin_width_hz
        fams = find_families(p.freq_hz, p.amplitude, p.floor, FS, bw)
        at = attribute(p.freq_hz, p.amplitude, p.floor, _plain_chain(), None, bw, families=fams)
        for k in range(6, 13):  # 6.6 kHz and up are above 6.4 kHz
            true = k * f0
            # Source: fold |f − fs·round(f/fs)| (Oppenheim & Schafer 2010, sec. 4.2)
            i = nearest_peak(p, abs(true - FS * round(true / FS)))
            assert at.verdict[i] == "alias", at.explanation[i]
            assert at.source[i] == "harmonic family of 1.100 kHz (blind)"
            assert at.true_hz[i] == pytest.approx(true, abs=bw)
            assert at.zone[i] == int(np.ceil(true / (FS / 2)))
        i = nearest_peak(p, 3 * f0)
        assert at.verdict[i] == "family"
        i = nearest_peak(p, 777.0)
        assert at.verdict[i] == "unexplained"


def ref_db(f: float) -> float:
    """Reference: scipy.signal.freqs of the demo's 2nd-order Butterworth at 5 kHz."""
    return analog_attenuation_db("butter", 2, 5000.0, f)
