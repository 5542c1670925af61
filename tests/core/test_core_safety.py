"""The core refuses, with a typed InputError, inputs its numerical tools cannot honour.

Every finite input reaches either an answer or an ``InputError`` naming the field, the
code and the limit; never a ``ZeroDivisionError`` from scipy or an ``IndexError`` from
a zone made up out of a NaN.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.signal as sig
from hypothesis import given, settings
from hypothesis import strategies as st

from service.core.chain import Chain
from service.core.errors import InputError
from service.core.filter_catalogue import FilterOption
from service.core.filters import (
    MIN_CUTOFF_HZ,
    MIN_Q,
    MIN_RIPPLE_DB,
    MIN_STOP_ATTEN_DB,
    analog_attenuation_db,
    sensor_attenuation_db,
)
from service.core.folding import zone_unchecked
from service.core.plan_common import check_band
from service.core.spectrum import MAX_ABS_DB, to_linear
from service.core.stages import AnalogLowpass, Sample


class TestScipyLimits:
    """The limits exist because scipy's prototypes fail below them."""

    def test_cheb1ap_fails_for_a_denormal_ripple(self) -> None:
        # Reference: scipy.signal.cheb1ap divides by sqrt(10**(rp/10) - 1), which is 0
        # in double precision for rp = 5e-324 dB.
        with pytest.raises(ZeroDivisionError):
            sig.cheb1ap(4, 5e-324)

    def test_cheb2ap_fails_for_a_tiny_stopband(self) -> None:
        # Reference: scipy.signal.cheb2ap divides by the same factor of rs.
        with pytest.raises(ZeroDivisionError):
            sig.cheb2ap(4, 1e-20)

    def test_the_limits_design_finite_prototypes(self) -> None:
        # Reference: scipy.signal's prototypes at the smallest values the core accepts.
        _, p1, k1 = sig.cheb1ap(20, MIN_RIPPLE_DB)
        z2, p2, k2 = sig.cheb2ap(20, MIN_STOP_ATTEN_DB)
        assert np.all(np.isfinite(p1)) and np.isfinite(k1)
        assert np.all(np.isfinite(p2)) and np.all(np.isfinite(z2)) and np.isfinite(k2)


TINY = st.floats(min_value=0.0, max_value=MIN_RIPPLE_DB, exclude_max=True)


class TestFilterRefusals:
    @settings(max_examples=40, deadline=None)
    @given(ripple=TINY, order=st.integers(1, 20))
    def test_tiny_ripple(self, ripple: float, order: int) -> None:
        for family, kw in (
            ("chebyshev1", {"ripple_db": ripple}),
            ("elliptic", {"ripple_db": ripple, "stop_atten_db": 60.0}),
        ):
            with pytest.raises(InputError) as err:
                analog_attenuation_db([10.0, 300.0], family, order, 100.0, **kw)
            e = err.value
            assert e.field == "ripple_db" and e.code in ("below_limit", "not_positive")
            assert e.limit in (MIN_RIPPLE_DB, 0)

    @settings(max_examples=40, deadline=None)
    @given(
        atten=st.floats(min_value=0.0, max_value=MIN_STOP_ATTEN_DB, exclude_max=True),
        order=st.integers(1, 20),
    )
    def test_tiny_stopband(self, atten: float, order: int) -> None:
        for make in (
            lambda: AnalogLowpass("chebyshev2", order, 100.0, stop_atten_db=atten),
            lambda: FilterOption("chebyshev2", order, stop_atten_db=atten),
        ):
            with pytest.raises(InputError) as err:
                make()
            assert err.value.field == "stop_atten_db"
            assert err.value.code in ("below_limit", "not_positive")

    def test_denormal_ripple_named_with_limit(self) -> None:
        # The fuzzing find: 5e-324 dB of ripple.
        with pytest.raises(InputError) as err:
            AnalogLowpass("chebyshev1", 4, 100.0, ripple_db=5e-324)
        e = err.value
        assert (e.field, e.code, e.limit) == ("ripple_db", "below_limit", MIN_RIPPLE_DB)


class TestNanFrequencies:
    def test_zone_of_nan_is_refused(self) -> None:
        with pytest.raises(InputError) as err:
            zone_unchecked(np.array([1.0, np.nan]), 1000.0)
        assert (err.value.field, err.value.code) == ("freq_hz", "not_finite")

    @settings(max_examples=40, deadline=None)
    @given(
        freqs=st.lists(
            st.one_of(st.floats(0.0, 1e9), st.just(float("nan"))), min_size=1, max_size=8
        ),
        rate=st.floats(1.0, 1e6),
    )
    def test_chain_never_indexes_a_made_up_zone(self, freqs: list[float], rate: float) -> None:
        chain = Chain(stages=(AnalogLowpass("butterworth", 4, rate / 4.0), Sample(rate_hz=rate)))
        f = np.array(freqs)
        if np.isnan(f).any():
            with pytest.raises(InputError) as err:
                chain.evaluate(f)
            assert err.value.code == "not_finite"
        else:
            # Reference: zone k covers ((k-1)·fs/2, k·fs/2] (Lyons, Understanding DSP,
            # 3rd ed., sec. 2.3), computed here with Python's own arithmetic.
            expected = [max(1, int(np.ceil(x / (rate / 2.0)))) for x in freqs]
            got = chain.evaluate(f).zone.tolist()
            assert all(abs(g - e) <= 1 for g, e in zip(got, expected, strict=True))
            assert all(g >= 1 for g in got)


class TestDbLevels:
    @settings(max_examples=40, deadline=None)
    @given(level=st.floats(min_value=1000.0, max_value=1e308, exclude_min=True))
    def test_levels_past_the_double_range_are_refused(self, level: float) -> None:
        # Reference: 10**(L/20) overflows a double (max ~1.8e308) above about 6165 dB;
        # the bound is far below that and far above any measurement.
        with pytest.raises(InputError) as err:
            to_linear([0.0, level], "db")
        assert (err.value.field, err.value.code, err.value.limit) == (
            "values[1]",
            "above_limit",
            MAX_ABS_DB,
        )

    def test_levels_inside_the_bound_convert(self) -> None:
        # Reference: 20·log10 definition of the decibel for an amplitude ratio.
        assert to_linear([-120.0, 0.0, 20.0], "db").tolist() == pytest.approx([1e-6, 1.0, 10.0])


class TestPlanBand:
    def test_band_below_the_lowest_cutoff_is_refused(self) -> None:
        # The plan puts cutoffs at the band's high edge; 5e-324 Hz (found by fuzzing)
        # made 0 Hz evaluate to NaN attenuation.
        with pytest.raises(InputError) as err:
            check_band((0.0, 5e-324))
        e = err.value
        assert (e.field, e.code, e.limit) == ("band_hz[1]", "below_limit", MIN_CUTOFF_HZ)
        assert check_band((0.0, MIN_CUTOFF_HZ)) == (0.0, MIN_CUTOFF_HZ)


class TestSensorQ:
    @settings(max_examples=30, deadline=None)
    @given(q=st.floats(min_value=0.0, max_value=MIN_Q, exclude_max=True))
    def test_q_below_the_floor_is_refused(self, q: float) -> None:
        # Reference: |H|² = 1/((1 - r²)² + r²/Q²); a denormal Q makes Q² = 0 in double
        # precision (found by fuzzing: 5e-324).
        with pytest.raises(InputError) as err:
            sensor_attenuation_db([10.0], 100.0, q)
        assert err.value.field == "q" and err.value.code in ("below_limit", "not_positive")
