"""The plan page in a real headless Chromium against a running server with the page."""

from __future__ import annotations

from typing import Any

import pytest

pytestmark = pytest.mark.browser


def _traces(page: Any) -> list[dict[str, Any]]:
    page.wait_for_function(
        "document.querySelector('#runup-figure') && document.querySelector('#runup-figure').data"
    )
    traces: list[dict[str, Any]] = page.evaluate(
        "Array.from(document.querySelector('#runup-figure').data,"
        " t => ({name: t.name, part: t.meta && t.meta.part}))"
    )
    return traces


class TestPlanInBrowser:
    def test_basic(self, page: Any, server_url: str) -> None:
        page.goto(server_url + "/plan")
        page.wait_for_load_state("networkidle")
        assert page.console_errors == []
        page.goto(server_url + "/plan?demo=1")
        page.wait_for_load_state("networkidle")
        expected = page.evaluate(
            "JSON.parse(document.getElementById('runup-figure-data').textContent).data.length"
        )
        traces = _traces(page)
        assert len(traces) == expected
        parts = [t["part"] for t in traces]
        # The demo: its 45 tones and the numeric order of interest, each one line.
        assert parts.count("direct") == 46 and "alias" in parts and "crossing" in parts
        # Plotly draws a group for every trace with data (the legend keys hold one gap);
        # a line aliased at every speed has an empty direct part, which is not drawn.
        drawn = page.evaluate(
            "JSON.parse(document.getElementById('runup-figure-data').textContent).data"
            ".filter(t => t.x.length > 0).length"
        )
        assert page.locator("#runup-figure .scatterlayer .trace").count() == drawn > 50
        assert page.console_errors == []

    def test_form_submit(self, page: Any, server_url: str) -> None:
        page.goto(server_url + "/plan")
        page.fill("#band_high_hz", "2000")
        page.fill("#tone_list", "<script>alert(1)</script>, 10000, 0.5\nmesh, 1700, 0.8")
        page.fill("#rejection_db", "80")
        page.fill("#speed_tolerance_pct", "5")
        dialogs: list[str] = []
        page.on("dialog", lambda d: (dialogs.append(d.message), d.dismiss()))
        page.click("button[type=submit]")
        page.wait_for_load_state("networkidle")
        assert page.locator(".verdict-text").inner_text().startswith("Sample at")
        names = [t["name"] for t in _traces(page) if t["part"] == "direct"]
        assert len(names) == 2 and any("&lt;script&gt;" in n for n in names)
        # Sorting the tone table by a column works from the keyboard.
        page.focus("#plan-tones-title + .table-wrap th:nth-child(8) button")
        page.keyboard.press("Enter")
        assert (
            page.get_attribute("#plan-tones-title + .table-wrap th:nth-child(8)", "aria-sort")
            == "ascending"
        )
        assert dialogs == [] and page.console_errors == []
