"""The pages in a real headless Chromium against a running server."""

from __future__ import annotations

from typing import Any

import pytest

pytestmark = pytest.mark.browser


def _trace_names(page: Any, selector: str) -> list[str]:
    page.wait_for_function(
        f"document.querySelector('{selector}') && document.querySelector('{selector}').data"
    )
    names: list[str] = page.evaluate(
        f"Array.from(document.querySelector('{selector}').data, t => t.name)"
    )
    return names


class TestPagesInBrowser:
    def test_basic(self, page: Any, server_url: str) -> None:
        for path in ("/", "/predict", "/predict?demo=1"):
            page.goto(server_url + path)
            page.wait_for_load_state("networkidle")
            assert page.console_errors == [], (path, page.console_errors)
        names = _trace_names(page, "#fold-figure")
        assert names[0] == "fold line" and "aliases" in names and "chain gain" in names
        assert "aliases" in _trace_names(page, "#spectrum-figure")
        assert page.console_errors == []

    def test_form_submit(self, page: Any, server_url: str) -> None:
        page.goto(server_url + "/predict")
        page.fill("#sample_rate_hz", "10000")
        page.select_option("#aa_family", "")
        page.fill("#tone_list", "<script>alert(1)</script>, 7300, 1\nlow, 1000, 0.5")
        dialogs: list[str] = []
        page.on("dialog", lambda d: (dialogs.append(d.message), d.dismiss()))
        page.click("button[type=submit]")
        page.wait_for_load_state("networkidle")
        x = page.evaluate(
            "Array.from(document.querySelector('#fold-figure').data)"
            ".filter(t => t.name === 'aliases')[0].x"
        )
        assert x == [7300]
        # The label is shown as text, never run.
        cell = page.locator("table.data tbody td").filter(has_text="<script>alert(1)</script>")
        assert cell.count() == 1
        assert dialogs == [] and page.console_errors == []

    def test_sort_and_rows(self, page: Any, server_url: str) -> None:
        page.goto(server_url + "/predict?demo=1")
        page.wait_for_load_state("networkidle")
        # Sorting by the keyboard: focus the header button and press Enter.
        header = page.locator("th[data-sort] button", has_text="True, Hz").first
        header.focus()
        page.keyboard.press("Enter")
        values = page.evaluate(
            "Array.from(document.querySelectorAll('table.data')[0].tBodies[0].rows,"
            " r => parseFloat(r.cells[2].dataset.value))"
        )
        assert values == sorted(values)
        page.keyboard.press("Enter")
        values = page.evaluate(
            "Array.from(document.querySelectorAll('table.data')[0].tBodies[0].rows,"
            " r => parseFloat(r.cells[2].dataset.value))"
        )
        assert values == sorted(values, reverse=True)
        # Add a gear mesh row, then remove it; names stay numbered in order.
        group = page.locator("details[data-source=gear_mesh]")
        before = group.locator("[data-row]").count()
        group.locator("[data-add-row]").click()
        assert group.locator("[data-row]").count() == before + 1
        assert group.locator(f"input[name='gear_mesh-{before}-teeth']").count() == 1
        group.locator("[data-remove-row]").first.click()
        assert group.locator("[data-row]").count() == before
        assert group.locator("input[name='gear_mesh-0-teeth']").count() == 1
        assert page.console_errors == []
