"""The one reader of numbers typed into the forms (service.web.numbers)."""

from __future__ import annotations

import pytest

from service.web.numbers import parse_quantity


class TestParseQuantity:
    # Reference: worked by hand: k = 10^3, M = 10^6 (SI prefixes, BIPM SI Brochure, 9th
    # edition, Table 7); a comma or space between groups of three digits is a thousands
    # separator (common practice in test reports).
    @pytest.mark.parametrize(
        ("text", "kind", "value"),
        [
            ("12.8k", "rate", 12_800.0),
            ("12,800", "rate", 12_800.0),
            ("12 800", "rate", 12_800.0),
            ("12\u202f800", "rate", 12_800.0),
            ("12.8 kS/s", "rate", 12_800.0),
            ("12.8kS/s", "rate", 12_800.0),
            ("51.2 kHz", "rate", 51_200.0),
            ("1 MS/s", "rate", 1_000_000.0),
            ("5 kHz", "freq", 5_000.0),
            ("5k", "freq", 5_000.0),
            ("1,234,567.5", "freq", 1_234_567.5),
            ("2.5e3", "freq", 2_500.0),
            ("50 Hz", "freq", 50.0),
            (".5", "plain", 0.5),
            ("60 dB", "db", 60.0),
            ("-3", "db", -3.0),
            ("2 %", "percent", 2.0),
            ("3.2k", "count", 3_200.0),
            ("6,400", "count", 6_400.0),
        ],
    )
    def test_basic(self, text: str, kind: str, value: float) -> None:
        assert parse_quantity(text, kind).value == value

    def test_speed_keeps_its_unit(self) -> None:
        assert parse_quantity("1480 rpm", "speed").value == 1480.0
        assert parse_quantity("1480 rpm", "speed").unit == "rpm"
        assert parse_quantity("24.5 Hz", "speed").unit == "hz"
        assert parse_quantity("1,480", "speed").unit is None

    @pytest.mark.parametrize(
        ("text", "kind"),
        [
            ("12,8", "rate"),  # a decimal comma or a thousands comma: refused, not guessed
            ("1,2345", "freq"),
            ("12.8m", "rate"),  # milli or mega: refused
            ("5 kHz", "speed"),  # a frequency is not a speed unit here
            ("1480 rpm", "freq"),
            ("3.5", "count"),
            ("abc", "plain"),
            ("", "rate"),
            (".", "rate"),
            ("nan", "freq"),
            ("inf", "freq"),
            ("5 k dB", "db"),
        ],
    )
    def test_errors(self, text: str, kind: str) -> None:
        with pytest.raises(ValueError, match=r"write e\.g\."):
            parse_quantity(text, kind)
