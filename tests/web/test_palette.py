"""Contrast of the pages' and the figures' colours (WCAG 2.1 level AA).

# Source: WCAG 2.1, "relative luminance" and "contrast ratio" definitions
# (https://www.w3.org/TR/WCAG21/#dfn-relative-luminance): sRGB channels c/255 linearised
# as c/12.92 when c <= 0.03928, else ((c + 0.055)/1.055)^2.4; L = 0.2126 R + 0.7152 G +
# 0.0722 B; ratio = (L1 + 0.05)/(L2 + 0.05). Success criteria 1.4.3 (text >= 4.5:1) and
# 1.4.11 (graphical objects such as plot markers >= 3:1).
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from service.web.figures import COLOURS
from service.web.plan_figures import _GREY_LINE

CSS = (Path(__file__).resolve().parents[2] / "static" / "foldwise.css").read_text()


def _rgb(colour: str) -> tuple[float, float, float]:
    c = colour.lstrip("#")
    if len(c) == 3:
        c = "".join(ch * 2 for ch in c)
    return (int(c[0:2], 16), int(c[2:4], 16), int(c[4:6], 16))


def _over(rgba: str, ground: str) -> str:
    """A translucent fill painted over an opaque ground, as hex."""
    m = re.match(r"rgba\((\d+),\s*(\d+),\s*(\d+),\s*([\d.]+)\)", rgba)
    assert m, rgba
    a = float(m[4])
    g = _rgb(ground)
    mixed = [round(a * int(m[i + 1]) + (1 - a) * g[i]) for i in range(3)]
    return "#" + "".join(f"{v:02x}" for v in mixed)


def luminance(colour: str) -> float:
    def lin(c: float) -> float:
        c /= 255.0
        return c / 12.92 if c <= 0.03928 else ((c + 0.055) / 1.055) ** 2.4

    r, g, b = (lin(v) for v in _rgb(colour))
    return 0.2126 * r + 0.7152 * g + 0.0722 * b


def contrast(a: str, b: str) -> float:
    la, lb = sorted((luminance(a), luminance(b)), reverse=True)
    return (la + 0.05) / (lb + 0.05)


VARS = dict(re.findall(r"--([a-z-]+):\s*(#[0-9a-fA-F]{3,6})\s*;", CSS))

#: (text colour, background) pairs the stylesheet uses for words.
TEXT_PAIRS = [
    ("ink", "paper"),
    ("ink", "panel"),
    ("muted", "paper"),
    ("muted", "panel"),
    ("direct", "panel"),
    ("alias", "panel"),
    ("alias", "alias-bg"),  # error summary, rows of aliases in band
    ("ink", "amber-bg"),  # caution, notes
    ("amber", "panel"),
    ("#ffffff", "alias"),  # the alias tag
    ("direct", "#e1f1ed"),  # the direct tag
    ("#3a4350", "#eceef1"),  # the neutral tag
    ("#1f4f8a", "panel"),  # links
    ("#1f4f8a", "paper"),
    ("#f4efe4", "ink"),  # masthead
    ("#ffffff", "ink-soft"),  # primary button
    ("alias", "#fffaf8"),  # a field in error
]


def _c(name: str) -> str:
    return name if name.startswith("#") else VARS[name]


class TestPalette:
    def test_reference_values(self) -> None:
        # Source: WCAG 2.1 understanding docs: black on white is 21:1, and #767676 on
        # white is the lightest grey that reaches 4.5:1 (4.54:1).
        assert contrast("#000000", "#ffffff") == pytest.approx(21.0)
        assert contrast("#767676", "#ffffff") == pytest.approx(4.54, abs=0.01)
        assert contrast("#777777", "#ffffff") < 4.5

    @pytest.mark.parametrize(("fg", "bg"), TEXT_PAIRS)
    def test_text(self, fg: str, bg: str) -> None:
        assert contrast(_c(fg), _c(bg)) >= 4.5, (fg, bg, contrast(_c(fg), _c(bg)))

    @pytest.mark.parametrize(
        "name",
        [
            "ink",
            "muted",
            "fold",
            "direct",
            "alias",
            "unknown",
            "gain",
            "floor",
            "spectrum",
            "band_edge",
        ],
    )
    def test_figure_marks(self, name: str) -> None:
        # Marks and lines on the white plot, on the band-of-interest tint and on the
        # even-zone shading must all stay at 3:1 or more.
        grounds = [
            "#ffffff",
            _over(COLOURS["band"], "#ffffff"),
            _over(COLOURS["zone_even"], "#ffffff"),
        ]
        for ground in grounds:
            assert contrast(COLOURS[name], ground) >= 3.0, (name, ground)

    def test_figure_text(self) -> None:
        # Labels on the folding diagram are written in the verdict colours.
        for name in ("direct", "alias", "ink", "muted"):
            assert contrast(COLOURS[name], "#ffffff") >= 4.5, name

    def test_plan_lines(self) -> None:
        assert contrast(_GREY_LINE, "#ffffff") >= 3.0
