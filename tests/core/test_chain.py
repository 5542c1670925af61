"""Tests for service.core.chain: stages, validation and tones pushed through a chain."""

from __future__ import annotations

import re

import numpy as np
import pytest
import scipy.signal as sig
from hypothesis import given, settings
from hypothesis import strategies as st

from service.core.chain import Chain, ChainResponse
from service.core.errors import InputError
from service.core.folding import fold
from service.core.stages import AnalogLowpass, Decimate, DigitalLowpass, Sample, SensorResonance


def _simulate_levels_db(
    freqs_hz: np.ndarray,
    rate_hz: float,
    filters: list[tuple[np.ndarray, np.ndarray]],
    factor: int,
    n_out: int = 4096,
) -> tuple[np.ndarray, np.ndarray]:
    """Sample unit sines at rate_hz, filter with lfilter, keep every factor-th sample.

    Returns the amplitude spectrum (dB re 1) of the last n_out output samples and its
    frequencies. The tones sit on exact bins of that record, so after the filters'
    start-up the record holds whole periods and a rectangular window neither leaks
    nor scallops.
    """
    settle = 1024
    n_in = (n_out + settle) * factor
    t = np.arange(n_in) / rate_hz
    x = np.sin(2 * np.pi * np.outer(freqs_hz, t)).sum(axis=0)
    for b, a in filters:
        x = sig.lfilter(b, a, x)
    y = x[::factor][-n_out:]
    amp = 2 * np.abs(np.fft.rfft(y)) / n_out
    f = np.fft.rfftfreq(n_out, d=factor / rate_hz)
    return f, 20 * np.log10(np.maximum(amp, 1e-300))


class TestStages:
    def test_basic(self) -> None:
        assert SensorResonance(28000, 20).natural_hz == 28000.0
        lp = AnalogLowpass("butterworth", 8, 5000)
        assert lp.cutoff_hz == 5000.0 and not lp.is_table
        table = AnalogLowpass(table_hz=[100, 1000, 10000], table_gain_db=[0, -3, -40])
        assert table.table_hz == (100.0, 1000.0, 10000.0) and table.is_table
        dig = DigitalLowpass(b=[0.5, 0.5])
        assert dig.a == (1.0,) and not dig.is_spec
        assert Decimate(4).filter == "fir"
        # Frozen and hashable, so chains can be cached by value.
        assert hash(Chain((lp, Sample(12800)))) == hash(Chain((lp, Sample(12800.0))))

    def test_names(self) -> None:
        chain = Chain(
            (
                SensorResonance(28000, 20),
                AnalogLowpass("butterworth", 8, 5000),
                AnalogLowpass("chebyshev1", 4, 5000, ripple_db=0.5),
                AnalogLowpass(table_hz=(100, 1000), table_gain_db=(0, -3)),
                Sample(12800),
                DigitalLowpass(2500, 3000, 80),
                Decimate(4, "none"),
                Decimate(2, "fir"),
                Decimate(2, "iir"),
            )
        )
        assert chain.stage_names == (
            "sensor resonance 28 kHz, Q 20",
            "analog butterworth 8th order, 5 kHz",
            "analog chebyshev I 4th order, 5 kHz (0.5 dB ripple)",
            "analog measured response (2 points)",
            "sample 12.8 kS/s",
            "digital low-pass 2.5 kHz to 3 kHz, 80 dB (FIR, 130 taps)",
            "decimate ÷4 (no filter)",
            "decimate ÷2 (FIR, 41 taps)",
            "decimate ÷2 (IIR chebyshev I, 8th order)",
        )

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match="natural_hz=0 must be > 0"):
            SensorResonance(0, 10)
        with pytest.raises(ValueError, match=re.escape("q=2000 must be between 0.001 and 1000")):
            SensorResonance(1000, 2000)
        with pytest.raises(ValueError, match="not both"):
            AnalogLowpass("butterworth", 4, 1000, table_hz=(1, 2), table_gain_db=(0, 0))
        with pytest.raises(ValueError, match="needs family, order and cutoff_hz"):
            AnalogLowpass("butterworth", 4)
        with pytest.raises(ValueError, match="needs both table_hz and table_gain_db"):
            AnalogLowpass(table_hz=(1.0, 2.0))
        with pytest.raises(ValueError, match="strictly increasing"):
            AnalogLowpass(table_hz=(2.0, 1.0), table_gain_db=(0.0, -1.0))
        with pytest.raises(ValueError, match="order=0 must be between 1 and 20"):
            AnalogLowpass("butterworth", 0, 1000)
        with pytest.raises(ValueError, match="ripple_db is required"):
            AnalogLowpass("elliptic", 4, 1000, stop_atten_db=60)
        with pytest.raises(ValueError, match="rate_hz=-1 must be > 0"):
            Sample(-1)
        with pytest.raises(ValueError, match="rate_hz=nan"):
            Sample(float("nan"))
        with pytest.raises(ValueError, match="passband_hz=3000 must be below stopband_hz=2000"):
            DigitalLowpass(3000, 2000, 60)
        with pytest.raises(ValueError, match="needs passband_hz, stopband_hz and atten_db"):
            DigitalLowpass(1000, 2000)
        with pytest.raises(ValueError, match="not both"):
            DigitalLowpass(1000, 2000, 60, b=(1.0,))
        with pytest.raises(ValueError, match="must be stable"):
            DigitalLowpass(b=(1.0,), a=(1.0, -1.5))
        with pytest.raises(ValueError, match=re.escape("a[0]=0.0 must be non-zero")):
            DigitalLowpass(b=(1.0,), a=(0.0, 1.0))
        with pytest.raises(ValueError, match="factor=0 must be between 1 and 4096"):
            Decimate(0)
        with pytest.raises(ValueError, match="factor=5000 must be between 1 and 4096"):
            Decimate(5000)
        with pytest.raises(ValueError, match="factor=16 must be between 1 and 13"):
            Decimate(16, "iir")
        with pytest.raises(ValueError, match="filter='cic' must be one of"):
            Decimate(2, "cic")


class TestChainValidate:
    def test_basic(self) -> None:
        chain = Chain(
            (
                AnalogLowpass("butterworth", 8, 5000),
                Sample(12800),
                DigitalLowpass(1200, 1600, 80),
                Decimate(4, "none"),
            )
        )
        assert chain.validate() == []
        assert chain.sample_rate_hz == 12800.0
        assert chain.final_rate_hz == 3200.0
        assert chain.nyquist_hz == 1600.0

    def test_notes(self) -> None:
        # Cutoff above the Nyquist frequency.
        notes = Chain((AnalogLowpass("bessel", 2, 8000), Sample(12800))).validate()
        assert notes == [
            "the anti-alias filter's cutoff 8 kHz is above the Nyquist frequency 6.4 kHz: "
            "it cannot protect the band"
        ]
        # No anti-alias filter, then an unfiltered slice.
        notes = Chain((SensorResonance(30000, 10), Sample(12800), Decimate(4, "none"))).validate()
        assert notes == [
            "no anti-alias filter before the converter: everything above the Nyquist "
            "frequency 6.4 kHz folds into the band unattenuated",
            "decimate by 4 without a filter: everything between 1.6 and 6.4 kHz folds into "
            "the band",
        ]
        # A digital low-pass whose stopband is above the Nyquist frequency after the slice.
        notes = Chain(
            (
                AnalogLowpass("butterworth", 4, 5000),
                Sample(12800),
                DigitalLowpass(1000, 2000, 60),
                Decimate(4, "none"),
            )
        ).validate()
        assert notes == [
            "the digital low-pass's stopband edge 2 kHz is above the Nyquist frequency "
            "1.6 kHz after decimate by 4: content between 1.6 and 2 kHz is not fully "
            "suppressed and folds into the band"
        ]
        # A filtered decimation needs no note.
        chain = Chain((AnalogLowpass("butterworth", 4, 5000), Sample(12800), Decimate(4)))
        assert chain.validate() == []

    def test_errors(self) -> None:
        lp = AnalogLowpass("butterworth", 4, 1000)
        with pytest.raises(ValueError, match="no Sample stage"):
            Chain((lp,))
        with pytest.raises(ValueError, match="2 Sample stages"):
            Chain((Sample(1000), Sample(500)))
        with pytest.raises(ValueError, match="before the Sample stage"):
            Chain((Decimate(2), Sample(1000)))
        with pytest.raises(ValueError, match="before the Sample stage"):
            Chain((DigitalLowpass(b=(1.0,)), Sample(1000)))
        with pytest.raises(ValueError, match="after the Sample stage"):
            Chain((Sample(1000), lp))
        with pytest.raises(ValueError, match="after the Sample stage"):
            Chain((Sample(1000), SensorResonance(5000, 10)))
        with pytest.raises(ValueError, match=re.escape("brings the rate to 0.25 Hz")):
            Chain((Sample(1000), Decimate(100), Decimate(40)))
        with pytest.raises(ValueError, match="stopband_hz=600 is above the Nyquist"):
            Chain((Sample(1000), DigitalLowpass(400, 600, 60)))
        with pytest.raises(ValueError, match="stopband_hz=400 is above the Nyquist"):
            Chain((Sample(1000), Decimate(2), DigitalLowpass(200, 400, 60)))
        with pytest.raises(ValueError, match="is not a chain stage"):
            Chain(("sample",))  # type: ignore[arg-type]


class TestShorthand:
    def test_basic(self) -> None:
        lp = AnalogLowpass("butterworth", 2, 3000)
        assert Chain.shorthand(12800, lp) == Chain((lp, Sample(12800)))
        assert Chain.shorthand(12800) == Chain((Sample(12800),))
        assert Chain.shorthand(12800).nyquist_hz == 6400.0

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match="anti_alias="):
            Chain.shorthand(12800, "butterworth")  # type: ignore[arg-type]
        with pytest.raises(ValueError, match="rate_hz=0"):
            Chain.shorthand(0)


class TestSharedAnalysis:
    """Chains with equal stages share one analysis (filter design included)."""

    def test_equal_stages_equal_answers(self) -> None:
        stages = (
            AnalogLowpass("elliptic", 6, 4000, ripple_db=0.1, stop_atten_db=80),
            Sample(51200),
            Decimate(4),
        )
        f = np.array([100.0, 5000.0, 7300.0, 60000.0])
        first, second = Chain(stages), Chain(tuple(stages))
        np.testing.assert_array_equal(
            first.evaluate(f).attenuation_db, second.evaluate(f).attenuation_db
        )
        assert first.stage_names == second.stage_names
        assert first.validate() == second.validate()

    def test_shared_coefficients_cannot_be_changed(self) -> None:
        chain = Chain((Sample(48000), Decimate(8)))
        b, _ = chain._plan.coefficients[1]  # type: ignore[misc]
        with pytest.raises(ValueError, match="read-only"):
            b[0] = 1.0
        # A validation note is not shared state either: the caller gets its own list.
        notes = chain.validate()
        notes.append("x")
        assert "x" not in chain.validate()


class TestDescribe:
    def test_basic(self) -> None:
        chain = Chain(
            (
                AnalogLowpass("elliptic", 6, 5000, ripple_db=0.1, stop_atten_db=80),
                Sample(12800),
                DigitalLowpass(b=(0.5, 0.5)),
                Decimate(2, "none"),
            )
        )
        assert chain.describe() == [
            {
                "type": "analog_lowpass",
                "family": "elliptic",
                "order": 6,
                "cutoff_hz": 5000.0,
                "ripple_db": 0.1,
                "stop_atten_db": 80.0,
            },
            {"type": "sample", "rate_hz": 12800.0},
            {"type": "digital_lowpass", "b": [0.5, 0.5], "a": [1.0]},
            {"type": "decimate", "factor": 2, "filter": "none"},
        ]


class TestEvaluate:
    def test_basic(self) -> None:
        chain = Chain.shorthand(10000)
        r = chain.evaluate([7300.0, 13200.0, 1000.0])
        assert isinstance(r, ChainResponse)
        # Source: fold |f − fs·round(f/fs)| (Oppenheim & Schafer 2010, sec. 4.2; zones: Lyons 2011,
        # sec. 2.3), by hand at
        # fs = 10 kHz: 7.3 kHz -> 2.7 kHz in zone 2, inverted; 13.2 kHz -> 3.2 kHz in zone 3.
        np.testing.assert_allclose(r.apparent_hz, [2700.0, 3200.0, 1000.0])
        assert r.zone.tolist() == [2, 3, 1]
        assert r.inverted.tolist() == [True, False, False]
        assert r.fold_stage.tolist() == [0, 0, -1]
        assert r.attenuation_db.tolist() == [0.0, 0.0, 0.0]
        assert r.stage_names == ("sample 10 kS/s",)
        assert r.final_rate_hz == 10000.0

    def test_stage_rows(self) -> None:
        rate = 12800.0
        chain = Chain(
            (
                SensorResonance(25000, 20),
                AnalogLowpass("butterworth", 8, 5000),
                Sample(rate),
                DigitalLowpass(2500, 3000, 80),
                Decimate(2),
            )
        )
        f = np.linspace(0, 60000, 2001)
        r = chain.evaluate(f)
        assert r.stage_attenuation_db.shape == (5, f.size)
        # Reference: second-order resonance closed form.
        ratio = f / 25000
        want = 10 * np.log10((1 - ratio**2) ** 2 + (ratio / 20) ** 2)
        np.testing.assert_allclose(r.stage_attenuation_db[0], want, atol=1e-9)
        # Reference: Butterworth closed form 10 log10(1 + (f/fc)^16).
        want = 10 * np.log10(1 + (f / 5000) ** 16)
        np.testing.assert_allclose(r.stage_attenuation_db[1], want, atol=1e-9)
        assert np.all(r.stage_attenuation_db[2] == 0.0)
        # Reference: scipy.signal.freqz of scipy's Kaiser design, at the frequency folded
        # at the converter's rate (numpy arithmetic).
        n, beta = sig.kaiserord(80, 500 / (rate / 2))
        taps = sig.firwin(n, 2750, window=("kaiser", beta), fs=rate)
        folded = np.abs(f - rate * np.rint(f / rate))
        _, h = sig.freqz(taps, worN=folded, fs=rate)
        want = -20 * np.log10(np.maximum(np.abs(h), 1e-15))
        np.testing.assert_allclose(r.stage_attenuation_db[3], want, atol=1e-6)
        # Reference: scipy.signal.decimate's FIR (firwin(41, 1/2, hamming)) and freqz.
        _, h = sig.freqz(sig.firwin(41, 0.5, window="hamming"), worN=folded, fs=rate)
        want = -20 * np.log10(np.maximum(np.abs(h), 1e-15))
        np.testing.assert_allclose(r.stage_attenuation_db[4], want, atol=1e-6)
        np.testing.assert_allclose(r.attenuation_db, r.stage_attenuation_db.sum(axis=0))
        # The sensor resonance amplifies near 25 kHz.
        assert r.stage_attenuation_db[0][np.argmin(np.abs(f - 25000))] < -25.0

    def test_fold_through_decimation(self) -> None:
        rng = np.random.default_rng(3)
        f = rng.random(20000) * 1e5
        for rate, m in ((12800.0, 4), (48000.0, 3), (1000.0, 7)):
            # Reference: numpy arithmetic; fold(fold(f, fs), fs/M) = fold(f, fs/M).
            once = np.abs(f - rate * np.rint(f / rate))
            twice = np.abs(once - rate / m * np.rint(once / (rate / m)))
            direct = np.abs(f - rate / m * np.rint(f / (rate / m)))
            np.testing.assert_allclose(twice, direct, atol=1e-9 * rate)
            r = Chain((Sample(rate), Decimate(m, "none"))).evaluate(f)
            np.testing.assert_allclose(r.apparent_hz, direct, atol=1e-9 * rate)
            np.testing.assert_array_equal(r.apparent_hz, fold(f, rate / m))

    def test_fold_stage(self) -> None:
        chain = Chain(
            (
                AnalogLowpass("butterworth", 4, 2000),
                Sample(12800),
                Decimate(2, "none"),
                DigitalLowpass(b=(0.5, 0.5)),
                Decimate(2, "fir"),
            )
        )
        f = np.array([100.0, 1600.0, 2000.0, 3200.0, 5000.0, 6400.0, 7000.0, 40000.0])
        r = chain.evaluate(f)
        # Nyquist frequencies 6.4 kHz (stage 1), 3.2 kHz (stage 2), 1.6 kHz (stage 4).
        assert r.fold_stage.tolist() == [-1, -1, 4, 4, 2, 2, 1, 1]
        # Reference: zones at the final rate, 3.2 kS/s, counted by hand.
        assert r.zone.tolist() == [1, 1, 2, 2, 4, 4, 5, 25]
        assert r.inverted.tolist() == [False, False, True, True, True, True, False, False]
        # Very deep decimation (4096 x 4096) takes the per-stage comparison route.
        deep = Chain((Sample(1e9), Decimate(4096, "none"), Decimate(4096, "none")))
        nyq = [5e8, 5e8 / 4096, 5e8 / 4096**2]
        f = np.array([nyq[2] * 0.5, nyq[2] * 1.5, nyq[1] * 1.5, nyq[0] * 1.5])
        assert deep.evaluate(f).fold_stage.tolist() == [-1, 2, 1, 0]

    def test_fir_decimation_matches_simulation(self) -> None:
        rate, m = 12800.0, 4
        chain = Chain((Sample(rate), DigitalLowpass(1200, 1500, 60), Decimate(m, "fir")))
        # Bins of a 4096-sample record at 3.2 kS/s are 0.78125 Hz wide; every tone sits on
        # one and the apparent frequencies differ: in band, in the transition band, above
        # the decimated Nyquist frequency (1.6 kHz), and above the converter's Nyquist.
        tones = np.array([500.0, 1300.0, 1450.0, 1700.0, 2100.0, 7000.0])
        r = chain.evaluate(tones)
        # Reference: scipy's own designs, applied with lfilter (not the chain's arrays).
        n, beta = sig.kaiserord(60, 300 / (rate / 2))
        kaiser = sig.firwin(n, 1350, window=("kaiser", beta), fs=rate)
        taps = [(kaiser, np.ones(1)), (sig.firwin(20 * m + 1, 1 / m, window="hamming"), np.ones(1))]
        f_sim, level = _simulate_levels_db(tones, rate, taps, m)
        for k, tone in enumerate(tones):
            bin_ = int(np.argmin(np.abs(f_sim - r.apparent_hz[k])))
            assert f_sim[bin_] == pytest.approx(r.apparent_hz[k], abs=1e-6)
            # The measured level matches the predicted attenuation.
            assert level[bin_] == pytest.approx(-r.attenuation_db[k], abs=0.2), tone
        np.testing.assert_allclose(r.apparent_hz, [500, 1300, 1450, 1500, 1100, 600])
        # The same tones among a million others go through the cached grid path: the
        # levels still match the simulation where they are above -80 dB.
        many = np.concatenate([tones, np.linspace(0, 50000, 1_000_000)])
        big = chain.evaluate(many)
        for k, tone in enumerate(tones):
            if r.attenuation_db[k] < 80:
                bin_ = int(np.argmin(np.abs(f_sim - big.apparent_hz[k])))
                assert level[bin_] == pytest.approx(-big.attenuation_db[k], abs=0.2), tone

    def test_unfiltered_slice_matches_simulation(self) -> None:
        rate, m = 12800.0, 4
        chain = Chain((Sample(rate), Decimate(m, "none")))
        tones = np.array([500.0, 2100.0, 5000.0])  # two above the new Nyquist, 1.6 kHz
        r = chain.evaluate(tones)
        # Reference: numpy sampling and slicing x[::4], FFT peak.
        f_sim, level = _simulate_levels_db(tones, rate, [], m)
        for k in range(tones.size):
            bin_ = int(np.argmin(np.abs(f_sim - r.apparent_hz[k])))
            assert level[bin_] == pytest.approx(0.0, abs=1e-6)
        # Reference: by hand, 2100 -> 3200 - 2100 = 1100; 5000 -> 5000 - 3200 = 1800,
        # mirrored in the even zone to 3200 - 1800 = 1400.
        np.testing.assert_allclose(r.apparent_hz, [500.0, 1100.0, 1400.0])
        assert r.attenuation_db.tolist() == [0.0, 0.0, 0.0]
        assert r.fold_stage.tolist() == [-1, 1, 1]

    def test_edges(self) -> None:
        chain = Chain((AnalogLowpass("butterworth", 2, 1000), Sample(8000)))
        r = chain.evaluate(1000.0)
        assert r.freq_hz.shape == (1,)
        assert r.attenuation_db[0] == pytest.approx(10 * np.log10(2))
        r = chain.evaluate([])
        assert r.stage_attenuation_db.shape == (2, 0) and r.fold_stage.shape == (0,)
        # Exactly at the Nyquist frequency: zone 1, not folded.
        r = chain.evaluate([4000.0])
        assert r.zone.tolist() == [1] and r.fold_stage.tolist() == [-1]
        assert r.apparent_hz.tolist() == [4000.0]
        # Decimation by 1 changes nothing.
        r = Chain((Sample(8000), Decimate(1, "none"))).evaluate([3000.0, 5000.0])
        assert r.final_rate_hz == 8000.0 and r.fold_stage.tolist() == [-1, 0]
        # A measured table and an explicit (stable) IIR.
        iir_b, iir_a = sig.butter(4, 0.25)
        chain = Chain(
            (
                AnalogLowpass(table_hz=(100, 1000, 10000), table_gain_db=(0, -3, -40)),
                Sample(8000),
                DigitalLowpass(b=tuple(iir_b), a=tuple(iir_a)),
            )
        )
        r = chain.evaluate([0.0, 1000.0, 5000.0])
        # Reference: numpy.interp on log10 f for the table row; freqz for the IIR row.
        want = -np.interp(np.log10([100.0, 1000.0, 5000.0]), [2, 3, 4], [0, -3, -40])
        np.testing.assert_allclose(r.stage_attenuation_db[0], want, atol=1e-12)
        _, h = sig.freqz(iir_b, iir_a, worN=[0.0, 1000.0, 3000.0], fs=8000)
        np.testing.assert_allclose(r.stage_attenuation_db[2], -20 * np.log10(np.abs(h)), atol=1e-9)

    def test_errors(self) -> None:
        chain = Chain.shorthand(1000)
        with pytest.raises(ValueError, match=re.escape("freq_hz contains -5.0")):
            chain.evaluate([-5.0])
        with pytest.raises(ValueError, match="freq_hz contains nan"):
            chain.evaluate([np.nan])
        with pytest.raises(ValueError, match="scalar or 1-D"):
            chain.evaluate(np.ones((2, 2)))


any_finite = st.floats(allow_nan=False, allow_infinity=False)


class TestFiniteInputs:
    """Every finite rate and tone: an answer or an InputError, nothing else."""

    @settings(max_examples=300, deadline=None)
    @given(any_finite, st.lists(any_finite, min_size=1, max_size=4))
    def test_shorthand_answers_or_refuses(self, fs: float, tones: list[float]) -> None:
        try:
            out = Chain.shorthand(fs).evaluate(tones)
        except InputError:
            return
        assert np.all(out.zone >= 1)
        assert np.all(out.apparent_hz <= fs / 2 * (1 + 1e-9) + 5e-324)

    @settings(max_examples=200, deadline=None)
    @given(any_finite, any_finite, st.integers(1, 8), any_finite)
    def test_full_chain_answers_or_refuses(
        self, fs: float, cutoff: float, factor: int, tone: float
    ) -> None:
        try:
            chain = Chain(
                [
                    SensorResonance(28000.0, 20.0),
                    AnalogLowpass("butterworth", 4, cutoff),
                    Sample(fs),
                    Decimate(factor),
                ]
            )
            out = chain.evaluate([tone])
        except InputError:
            return
        assert int(out.zone[0]) >= 1
        assert np.isfinite(out.attenuation_db[0])

    def test_reported_request_is_refused(self) -> None:
        # POST /api/v1/fold {"sample_rate_hz": 1e-10, "tones": [{"freq_hz": 1e10}]} gave
        # an IndexError in the zone lookup: 1e10 / 1e-10 = 1e20 overflows int64.
        with pytest.raises(InputError) as info:
            Chain.shorthand(1e-10).evaluate([1e10])
        assert (info.value.field, info.value.code) == ("freq_hz", "above_limit")
