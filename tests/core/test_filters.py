"""Tests for service.core.filters (analog, table, sensor) and service.core.digital."""

from __future__ import annotations

import re

import numpy as np
import pytest
import scipy.signal as sig

from service.core.digital import decimation_filter, design_lowpass_fir, digital_attenuation_db
from service.core.filters import (
    MAX_ATTENUATION_DB,
    analog_attenuation_db,
    sensor_attenuation_db,
    table_attenuation_db,
)

FAMILY_DESIGNS = {
    # family: (scipy design function, extra positional parameters, our keyword arguments)
    "butterworth": (sig.butter, (), {}),
    "chebyshev1": (sig.cheby1, (0.5,), {"ripple_db": 0.5}),
    "chebyshev2": (sig.cheby2, (60.0,), {"stop_atten_db": 60.0}),
    "elliptic": (sig.ellip, (0.5, 70.0), {"ripple_db": 0.5, "stop_atten_db": 70.0}),
    "bessel": (sig.bessel, (), {}),
}


def _freqs_reference_db(family: str, order: int, cutoff_hz: float, f: np.ndarray) -> np.ndarray:
    """Attenuation from scipy.signal's ba-form analog design evaluated with freqs."""
    design, extra, _ = FAMILY_DESIGNS[family]
    kwargs = {"norm": "mag"} if family == "bessel" else {}
    b, a = design(order, *extra, 2 * np.pi * cutoff_hz, analog=True, **kwargs)
    _, h = sig.freqs(b, a, worN=2 * np.pi * f)
    return -20 * np.log10(np.maximum(np.abs(h), 1e-15))


class TestAnalogAttenuationDb:
    def test_basic(self) -> None:
        # Source: Butterworth |H|^2 = 1/(1+(f/fc)^(2N)) (S. Butterworth, Wireless Eng. 7, 1930): N=4
        # at 2 fc,
        # 10·log10(1 + 2^8) = 24.10 dB.
        assert analog_attenuation_db([2.0], "butterworth", 4, 1.0)[0] == pytest.approx(
            24.10, abs=0.005
        )
        # Source: the same closed form, N=8, fc=5 kHz, at 8 kHz: 10·log10(1 + 1.6^16) = 32.66 dB.
        assert analog_attenuation_db([8000.0], "butterworth", 8, 5000.0)[0] == pytest.approx(
            32.66, abs=0.005
        )
        # Reference: Chebyshev I 0.5 dB ripple, N=4 at 2 fc: 30.60 dB was computed with
        # scipy.signal.cheby1 + freqs (not a published value); checked against that too.
        got = analog_attenuation_db([2000.0], "chebyshev1", 4, 1000.0, ripple_db=0.5)[0]
        assert got == pytest.approx(30.60, abs=0.005)
        # Reference: scipy.signal.cheby1 + freqs.
        assert got == pytest.approx(
            _freqs_reference_db("chebyshev1", 4, 1000.0, np.array([2000.0]))[0], abs=1e-9
        )

    @pytest.mark.parametrize("family", list(FAMILY_DESIGNS))
    @pytest.mark.parametrize("order", range(1, 9))
    def test_matches_freqs(self, family: str, order: int) -> None:
        f = np.logspace(1, 6, 1500)  # 10 Hz to 1 MHz around a 3 kHz cutoff
        got = analog_attenuation_db(f, family, order, 3000.0, **FAMILY_DESIGNS[family][2])
        # Reference: scipy.signal analog design (ba form) + freqs.
        want = _freqs_reference_db(family, order, 3000.0, f)
        finite = want < 250  # where freqs' ba form still carries digits
        np.testing.assert_allclose(got[finite], want[finite], atol=1e-6)

    def test_cutoff_meaning(self) -> None:
        fc = np.array([1000.0])
        # Reference: scipy.signal Wn conventions (-3 dB; ripple edge; stopband edge).
        assert analog_attenuation_db(fc, "butterworth", 5, 1000.0)[0] == pytest.approx(
            10 * np.log10(2), abs=1e-9
        )
        assert analog_attenuation_db(fc, "bessel", 6, 1000.0)[0] == pytest.approx(
            10 * np.log10(2), abs=1e-6
        )
        assert analog_attenuation_db(fc, "chebyshev1", 5, 1000.0, ripple_db=1.0)[
            0
        ] == pytest.approx(1.0, abs=1e-9)
        assert analog_attenuation_db(fc, "elliptic", 5, 1000.0, 0.5, 60.0)[0] == pytest.approx(
            0.5, abs=1e-9
        )
        assert analog_attenuation_db(fc, "chebyshev2", 5, 1000.0, stop_atten_db=40.0)[
            0
        ] == pytest.approx(40.0, abs=1e-9)

    @pytest.mark.parametrize("order", [4, 5, 6, 7, 8])
    def test_bessel_is_weak(self, order: int) -> None:
        got = analog_attenuation_db([2.0], "bessel", order, 1.0)[0]
        # Reference: scipy.signal.bessel(norm="mag") + freqs gives about 13-14 dB at twice
        # the -3 dB frequency for orders 4-8 (computed, not a published value).
        assert 12.5 < got < 14.5
        # Reference: scipy.signal.bessel(norm="mag") + freqs.
        assert got == pytest.approx(
            _freqs_reference_db("bessel", order, 1.0, np.array([2.0]))[0], abs=1e-9
        )
        # Source: Butterworth closed form (S. Butterworth, Wireless Eng. 7, 1930): 10·log10(1 +
        # 2^(2N)) is 24.1 dB at
        # N = 4 and 48.2 dB at N = 8.
        assert 24 <= analog_attenuation_db([2.0], "butterworth", order, 1.0)[0] <= 48.2

    def test_edges(self) -> None:
        # Butterworth: 0 dB at DC. Reference: the closed form 1/(1+0).
        assert analog_attenuation_db([0.0], "butterworth", 8, 100.0)[0] == pytest.approx(
            0.0, abs=1e-12
        )
        # Even-order Chebyshev I reads its ripple at DC, odd order reads 0 dB.
        # Reference: Chebyshev polynomial T_N(0) = ±1 for even N, 0 for odd N.
        assert analog_attenuation_db([0.0], "chebyshev1", 4, 100.0, ripple_db=2.0)[
            0
        ] == pytest.approx(2.0, abs=1e-9)
        assert analog_attenuation_db([0.0], "chebyshev1", 5, 100.0, ripple_db=2.0)[
            0
        ] == pytest.approx(0.0, abs=1e-9)
        # Order 20: the ba form is useless there, so compare with the closed form.
        f = np.logspace(-2, 2, 2001)
        got = analog_attenuation_db(f, "butterworth", 20, 1.0)
        # Reference: closed form 10 log10(1 + (f/fc)^40), capped at 300 dB.
        want = np.minimum(10 * np.log10(1 + f**40), MAX_ATTENUATION_DB)
        np.testing.assert_allclose(got, want, atol=1e-9)
        # Order 20 through the pole sum (elliptic and Chebyshev) stays finite and
        # monotonic enough to be sane: the ripple edge is at ripple_db.
        got = analog_attenuation_db([1.0, 1e6], "chebyshev1", 20, 1.0, ripple_db=0.1)
        assert got[0] == pytest.approx(0.1, abs=1e-6)
        assert got[1] == MAX_ATTENUATION_DB
        # An exact transmission zero of an elliptic filter: large and finite.
        z, _, _ = sig.ellip(6, 0.5, 60.0, 1.0, analog=True, output="zpk")
        null_hz = float(np.max(z.imag)) * 1000.0  # prototype zeros are in units of fc
        got = analog_attenuation_db([null_hz, 1e12], "elliptic", 6, 1000.0, 0.5, 60.0)
        assert np.all(np.isfinite(got)) and np.all(got > 60.0)
        assert np.all(got <= MAX_ATTENUATION_DB)
        # Far above the cutoff (f/fc = 1e25) an even-order elliptic filter sits on its
        # constant asymptote and an odd-order Chebyshev II is capped, never NaN.
        far = analog_attenuation_db([4e7, 1e28], "elliptic", 4, 1000.0, 0.5, 70.0)
        # Reference: scipy.signal.ellip (0.5 dB, 70 dB) + freqs at 4e4 fc, on the asymptote.
        want = _freqs_reference_db("elliptic", 4, 1000.0, np.array([4e7]))[0]
        np.testing.assert_allclose(far, [want, want], atol=1e-6)
        got = analog_attenuation_db([1e28], "chebyshev2", 5, 1000.0, stop_atten_db=60.0)
        assert got[0] == MAX_ATTENUATION_DB
        # Shape is kept.
        assert analog_attenuation_db(np.ones((2, 3)), "bessel", 3, 1.0).shape == (2, 3)

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match="family='cauer'"):
            analog_attenuation_db([1.0], "cauer", 4, 1.0)
        for order in (0, 21, 2.5, True):
            with pytest.raises(ValueError, match="order="):
                analog_attenuation_db([1.0], "butterworth", order, 1.0)  # type: ignore[arg-type]
        with pytest.raises(ValueError, match="cutoff_hz=0"):
            analog_attenuation_db([1.0], "butterworth", 4, 0.0)
        with pytest.raises(ValueError, match="cutoff_hz=nan"):
            analog_attenuation_db([1.0], "butterworth", 4, float("nan"))
        with pytest.raises(ValueError, match="ripple_db is required"):
            analog_attenuation_db([1.0], "chebyshev1", 4, 1.0)
        with pytest.raises(
            ValueError, match=re.escape("ripple_db=7.0 must be between 0.001 and 6 dB")
        ):
            analog_attenuation_db([1.0], "chebyshev1", 4, 1.0, ripple_db=7.0)
        with pytest.raises(ValueError, match="does not apply"):
            analog_attenuation_db([1.0], "butterworth", 4, 1.0, ripple_db=1.0)
        with pytest.raises(ValueError, match="stop_atten_db is required"):
            analog_attenuation_db([1.0], "chebyshev2", 4, 1.0)
        with pytest.raises(
            ValueError, match=re.escape("stop_atten_db=2.0 must be > ripple_db=3.0")
        ):
            analog_attenuation_db([1.0], "elliptic", 4, 1.0, ripple_db=3.0, stop_atten_db=2.0)
        with pytest.raises(
            ValueError, match=re.escape("stop_atten_db=250.0 must be between 1 and 200 dB")
        ):
            analog_attenuation_db([1.0], "chebyshev2", 4, 1.0, stop_atten_db=250.0)
        with pytest.raises(ValueError, match=re.escape("freq_hz contains -1.0")):
            analog_attenuation_db([-1.0], "butterworth", 4, 1.0)
        with pytest.raises(ValueError, match="freq_hz contains inf"):
            analog_attenuation_db([np.inf], "butterworth", 4, 1.0)


class TestTableAttenuationDb:
    TABLE_HZ = (100.0, 1000.0, 2000.0, 5000.0, 10000.0)
    GAIN_DB = (0.0, -0.5, -3.0, -20.0, -44.0)

    def test_basic(self) -> None:
        f = np.logspace(2, 4, 301)
        got = table_attenuation_db(f, self.TABLE_HZ, self.GAIN_DB)
        # Reference: numpy.interp on log10 frequency.
        want = -np.interp(np.log10(f), np.log10(self.TABLE_HZ), self.GAIN_DB)
        np.testing.assert_allclose(got, want, atol=1e-12)

    def test_edges(self) -> None:
        # Below the first point (and at 0 Hz) the first value is held.
        got = table_attenuation_db([0.0, 10.0], (100.0, 1000.0), (-1.0, -2.0))
        np.testing.assert_allclose(got, [1.0, 1.0])
        # Above the last point a roll-off continues at its dB/decade slope:
        # last segment 5 kHz -> 10 kHz falls 24 dB over log10(2) decades.
        slope = -24.0 / np.log10(2.0)
        got = table_attenuation_db([20000.0, 100000.0], self.TABLE_HZ, self.GAIN_DB)
        # Reference: straight-line arithmetic on log10 f.
        np.testing.assert_allclose(got, [44.0 - slope * np.log10(2), 44.0 - slope * 1.0])
        # A rising last segment is held, never extrapolated into gain.
        got = table_attenuation_db([1e6], (10.0, 100.0), (-3.0, 2.0))
        assert got[0] == pytest.approx(-2.0)
        # Far above, the extrapolation caps at the 300 dB floor.
        assert table_attenuation_db([1e30], self.TABLE_HZ, self.GAIN_DB)[0] == MAX_ATTENUATION_DB

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match="table_hz has 1 points"):
            table_attenuation_db([1.0], [10.0], [0.0])
        with pytest.raises(ValueError, match="table_gain_db has 1 values; expected 2"):
            table_attenuation_db([1.0], [10.0, 20.0], [0.0])
        with pytest.raises(ValueError, match="strictly increasing"):
            table_attenuation_db([1.0], [10.0, 10.0], [0.0, -1.0])
        with pytest.raises(ValueError, match=re.escape("table_hz contains 0.0")):
            table_attenuation_db([1.0], [0.0, 10.0], [0.0, -1.0])
        with pytest.raises(ValueError, match="table_gain_db contains nan"):
            table_attenuation_db([1.0], [1.0, 10.0], [0.0, np.nan])


class TestSensorAttenuationDb:
    def test_basic(self) -> None:
        f = np.logspace(2, 6, 800)
        got = sensor_attenuation_db(f, 25000.0, 30.0)
        # Reference: scipy.signal.freqs on H(s) = wn^2 / (s^2 + (wn/Q) s + wn^2).
        wn = 2 * np.pi * 25000.0
        _, h = sig.freqs([wn**2], [1.0, wn / 30.0, wn**2], worN=2 * np.pi * f)
        np.testing.assert_allclose(got, -20 * np.log10(np.abs(h)), atol=1e-9)
        # From memory (Harris' Shock and Vibration Handbook): gain Q at the resonance.
        assert sensor_attenuation_db([25000.0], 25000.0, 30.0)[0] == pytest.approx(
            -20 * np.log10(30.0)
        )

    def test_edges(self) -> None:
        assert sensor_attenuation_db([0.0], 1000.0, 10.0)[0] == pytest.approx(0.0)
        # Far above resonance it falls at 40 dB/decade (two poles).
        a = sensor_attenuation_db([1e5, 1e6], 1000.0, 10.0)
        assert a[1] - a[0] == pytest.approx(40.0, abs=0.01)

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match="natural_hz=-5"):
            sensor_attenuation_db([1.0], -5, 10.0)
        with pytest.raises(ValueError, match="q=0"):
            sensor_attenuation_db([1.0], 1000.0, 0)
        with pytest.raises(ValueError, match=re.escape("q=5000 must be between 0.001 and 1000")):
            sensor_attenuation_db([1.0], 1000.0, 5000)


class TestDesignLowpassFir:
    def test_basic(self) -> None:
        rate, fp, fstop, att = 12800.0, 2500.0, 3000.0, 80.0
        taps = design_lowpass_fir(rate, fp, fstop, att)
        # Source: Kaiser (1974), N - 1 = (A - 7.95) / (2.285 * delta_omega), delta_omega
        # the transition width in rad/sample (as given by Oppenheim & Schafer, ch. 7).
        delta = 2 * np.pi * (fstop - fp) / rate
        assert abs(taps.size - ((att - 7.95) / (2.285 * delta) + 1)) <= 1.5
        # Reference: scipy.signal.freqz of the taps.
        w, h = sig.freqz(taps, worN=np.linspace(0, rate / 2, 8001), fs=rate)
        db = -20 * np.log10(np.maximum(np.abs(h), 1e-15))
        assert np.max(np.abs(db[w <= fp])) < 0.01
        # Kaiser's formulas meet the attenuation approximately (within about 1 dB).
        assert np.min(db[w >= fstop]) > att - 1.0
        assert np.sum(taps) == pytest.approx(1.0)

    def test_edges(self) -> None:
        taps = design_lowpass_fir(1000.0, 300.0, 500.0, 40.0)  # stopband at Nyquist
        _, h = sig.freqz(taps, worN=[500.0], fs=1000.0)
        assert -20 * np.log10(abs(h[0])) > 39.0

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match=re.escape("passband_hz=3000.0 must be below")):
            design_lowpass_fir(12800.0, 3000.0, 2500.0, 80.0)
        with pytest.raises(
            ValueError, match=re.escape("stopband_hz=7000.0 must be <= the Nyquist")
        ):
            design_lowpass_fir(12800.0, 3000.0, 7000.0, 80.0)
        with pytest.raises(ValueError, match=re.escape("atten_db=5.0 must be >= 10")):
            design_lowpass_fir(12800.0, 2500.0, 3000.0, 5.0)
        with pytest.raises(ValueError, match="taps; at most 65537"):
            design_lowpass_fir(1e6, 1000.0, 1000.5, 100.0)
        with pytest.raises(ValueError, match="rate_hz=0"):
            design_lowpass_fir(0, 1.0, 2.0, 60.0)


class TestDecimationFilter:
    @pytest.mark.parametrize("q", [2, 3, 5, 8])
    def test_basic(self, q: int) -> None:
        rng = np.random.default_rng(q)
        x = rng.standard_normal(4000)
        b, a = decimation_filter(q, "fir")
        assert b.size == 20 * q + 1 and a.tolist() == [1.0]
        # Reference: scipy.signal.decimate (zero_phase=False filters, then keeps every q-th).
        want = sig.decimate(x, q, ftype="fir", zero_phase=False)
        np.testing.assert_allclose(sig.lfilter(b, a, x)[::q], want, atol=1e-12)
        b, a = decimation_filter(q, "iir")
        want = sig.decimate(x, q, ftype="iir", zero_phase=False)
        np.testing.assert_allclose(sig.lfilter(b, a, x)[::q], want, atol=1e-7)

    def test_edges(self) -> None:
        b, a = decimation_filter(1)
        assert b.tolist() == [1.0] and a.tolist() == [1.0]
        assert decimation_filter(13, "iir")[1].size == 9  # 8th order

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match="kind='cic'"):
            decimation_filter(2, "cic")
        with pytest.raises(ValueError, match="factor=0 must be between 1 and 4096"):
            decimation_filter(0)
        with pytest.raises(ValueError, match="factor=4097"):
            decimation_filter(4097)
        with pytest.raises(ValueError, match="factor=14 must be between 1 and 13"):
            decimation_filter(14, "iir")
        with pytest.raises(ValueError, match=re.escape("factor=2.0")):
            decimation_filter(2.0)  # type: ignore[arg-type]


class TestDigitalAttenuationDb:
    RATE = 12800.0

    def _reference(self, f: np.ndarray, b: np.ndarray, a: np.ndarray) -> np.ndarray:
        # Reference: scipy.signal.freqz at the requested frequencies.
        _, h = sig.freqz(b, a, worN=f, fs=self.RATE)
        return -20 * np.log10(np.maximum(np.abs(h), 1e-15))

    def test_basic(self) -> None:
        b = design_lowpass_fir(self.RATE, 2500.0, 3000.0, 80.0)
        f = np.linspace(0, self.RATE / 2, 3001)  # small: evaluated exactly
        got = digital_attenuation_db(f, self.RATE, b)
        np.testing.assert_allclose(got, self._reference(f, b, np.ones(1)), atol=1e-9)
        b, a = sig.cheby1(6, 0.5, 0.3)
        got = digital_attenuation_db(f, self.RATE, b, a)
        np.testing.assert_allclose(got, self._reference(f, b, a), atol=1e-9)

    @pytest.mark.parametrize(
        "coef",
        [
            pytest.param(
                lambda: (design_lowpass_fir(12800.0, 2500.0, 3000.0, 80.0), [1.0]), id="kaiser"
            ),
            pytest.param(lambda: decimation_filter(2, "fir"), id="decimate-fir-2"),
            pytest.param(lambda: decimation_filter(16, "fir"), id="decimate-fir-16"),
            pytest.param(lambda: decimation_filter(8, "iir"), id="decimate-iir-8"),
        ],
    )
    def test_grid_path(self, coef) -> None:  # type: ignore[no-untyped-def]
        b, a = (np.asarray(c, dtype=float) for c in coef())
        rng = np.random.default_rng(7)
        n = 4_000_000 // (b.size + a.size - 1) + 10  # just past the exact-evaluation limit
        f = rng.random(n) * self.RATE / 2
        f[:3] = [0.0, self.RATE / 2, self.RATE / 4]
        got = digital_attenuation_db(f, self.RATE, b, a)
        sub = np.r_[0:3, rng.choice(n, min(n, 20000), replace=False)]
        want = self._reference(f[sub], b, a)
        near = want < 80.0
        # Grid path: within 0.05 dB where the attenuation is below 80 dB.
        assert np.max(np.abs(got[sub][near] - want[near])) < 0.05
        assert np.all(got[sub][~near] > 70.0)
        assert np.all(np.isfinite(got))

    def test_edges(self) -> None:
        # b = [1, 1] has an exact zero at the Nyquist frequency: finite and capped.
        got = digital_attenuation_db([0.0, self.RATE / 2], self.RATE, [0.5, 0.5])
        assert got[0] == pytest.approx(0.0, abs=1e-12)
        assert got[1] == pytest.approx(MAX_ATTENUATION_DB)
        many = np.full(2_000_001, self.RATE / 2)
        many[0] = 0.0
        got = digital_attenuation_db(many, self.RATE, [0.5, 0.5])  # grid path
        assert got[0] == pytest.approx(0.0, abs=1e-4)
        assert got[1] == pytest.approx(MAX_ATTENUATION_DB, abs=0.01)

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match=re.escape("apparent_hz contains 7000.0")):
            digital_attenuation_db([7000.0], self.RATE, [1.0])
        with pytest.raises(ValueError, match=r"a\[0\]=0.0 must be non-zero"):
            digital_attenuation_db([1.0], self.RATE, [1.0], [0.0, 1.0])
        with pytest.raises(ValueError, match="b must be a non-empty"):
            digital_attenuation_db([1.0], self.RATE, [])
        with pytest.raises(ValueError, match="b contains nan"):
            digital_attenuation_db([1.0], self.RATE, [np.nan])
        with pytest.raises(ValueError, match="rate_hz=-1"):
            digital_attenuation_db([1.0], -1, [1.0])
