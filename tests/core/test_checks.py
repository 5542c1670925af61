"""Tests for service.core.checks: every refusal names its field, value, limit and code.

These check the error contract the edges rely on (no prose parsing): the field is the
parameter name exactly as the message starts, numbers print plainly, and the code is
stable.
"""

from __future__ import annotations

import numpy as np
import pytest

from service.core import checks
from service.core.chain import Chain
from service.core.errors import InputError
from service.core.filters import analog_attenuation_db
from service.core.folding import fold
from service.core.plan_model import API_FAILURE, REJECTION_CODES
from service.core.rotating_sources import GearMesh, Shaft
from service.core.stages import Decimate, SensorResonance


def _refusal(fn, *args, **kwargs) -> InputError:  # type: ignore[no-untyped-def]
    with pytest.raises(InputError) as info:
        fn(*args, **kwargs)
    return info.value


class TestCheckPositive:
    def test_basic(self) -> None:
        assert checks.check_positive(2, "x") == 2.0
        assert checks.check_positive(np.float32(0.5), "x") == 0.5

    def test_errors(self) -> None:
        err = _refusal(checks.check_positive, -5, "sample_rate_hz")
        assert str(err) == "sample_rate_hz=-5 must be a finite number > 0"
        assert (err.field, err.value, err.limit, err.code) == (
            "sample_rate_hz",
            -5,
            0,
            "not_positive",
        )
        err = _refusal(checks.check_positive, np.float64(62.5), "q", 10.0)
        # A numpy scalar prints as Python writes the number, never as np.float64(62.5).
        assert str(err) == "q=62.5 must be <= 10"
        assert (err.code, err.limit) == ("above_limit", 10)
        assert _refusal(checks.check_positive, np.inf, "x").code == "not_finite"
        assert _refusal(checks.check_positive, "5", "x").code == "not_a_number"
        assert _refusal(checks.check_positive, True, "x").code == "not_a_number"
        err = _refusal(checks.check_positive, 0.0, "nominal_rpm", unit=" rpm", separate=True)
        assert str(err) == "nominal_rpm=0.0 must be > 0 rpm"

    def test_edges(self) -> None:
        # The smallest positive double is positive; the largest finite one is finite.
        assert checks.check_positive(5e-324, "x") == 5e-324
        assert checks.check_positive(1.7976931348623157e308, "x") > 0


class TestCheckInt:
    def test_basic(self) -> None:
        assert checks.check_int(np.int16(4), "n", 1, 8) == 4
        assert checks.check_int(4.0, "n", 1, 8, integral_floats=True) == 4

    def test_errors(self) -> None:
        err = _refusal(checks.check_int, 2.5, "order", 1, 20)
        assert str(err) == "order=2.5 must be an integer between 1 and 20"
        assert err.code == "not_integer"
        err = _refusal(checks.check_int, 0, "order", 1, 20)
        assert str(err) == "order=0 must be between 1 and 20"
        assert (err.code, err.limit) == ("below_limit", 1)
        assert _refusal(checks.check_int, 21, "order", 1, 20).code == "above_limit"
        assert _refusal(checks.check_int, True, "order", 1, 20).code == "not_integer"


class TestOtherChecks:
    def test_range_and_choice(self) -> None:
        assert checks.check_range(50, "p", 0, 50) == 50.0
        err = _refusal(checks.check_range, 60, "speed_tolerance_pct", 0, 50)
        assert str(err) == "speed_tolerance_pct=60 must be between 0 and 50"
        assert (err.code, err.limit) == ("above_limit", 50)
        assert checks.check_one_of("Hann", "window", ("hann",)) == "hann"
        assert _refusal(checks.check_one_of, "x", "window", ("hann",)).code == "not_allowed"

    def test_arrays(self) -> None:
        err = _refusal(checks.check_finite_array, [1.0, np.nan], "amplitude")
        assert (err.field, err.code) == ("amplitude[1]", "not_finite")
        err = _refusal(checks.check_freqs, np.array([2.0, -1.0]), "freq_hz")
        assert str(err) == "freq_hz contains -1.0; frequencies must be >= 0 Hz"
        assert checks.check_band_hz(None, (0.0, 5.0)) == (0.0, 5.0)
        assert _refusal(checks.check_band_hz, (5, 1), (0.0, 5.0)).code == "out_of_range"


class TestCoreRefusals:
    """The core's public functions refuse with the field a caller wrote."""

    def test_fields_and_codes(self) -> None:
        cases = [
            (lambda: fold(1.0, -5), "sample_rate_hz", "not_positive"),
            (lambda: analog_attenuation_db([1.0], "butterworth", 0, 1.0), "order", "below_limit"),
            (lambda: SensorResonance(100.0, 5000.0), "q", "above_limit"),
            (lambda: Decimate(2.5), "factor", "not_integer"),  # type: ignore[arg-type]
            (lambda: Shaft("s", np.float64(-2.5)), "speed_hz", "not_positive"),
            (lambda: GearMesh("g", 10.0, teeth=0), "teeth", "below_limit"),
            (lambda: Chain.shorthand(100.0).evaluate([-1.0]), "freq_hz", "below_limit"),
        ]
        for call, field, code in cases:
            err = _refusal(call)
            assert (err.field, err.code) == (field, code)
            assert str(err).startswith(field)
            assert "np.float64" not in str(err)


class TestRejectionCodes:
    def test_mapping(self) -> None:
        # The published API words stay as they were (span, resolution, band_loss, alias).
        assert REJECTION_CODES[0] == "passes"
        assert sorted(API_FAILURE.values()) == ["alias", "band_loss", "resolution", "span"]
        assert set(API_FAILURE) == set(REJECTION_CODES[1:])
