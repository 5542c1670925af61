"""The plan page in a real headless Chromium against a running server with the page."""

from __future__ import annotations

import os
import subprocess
import sys
import time
import urllib.request
from collections.abc import Iterator
from typing import Any

import pytest

from .conftest import ROOT, _free_port

pytestmark = pytest.mark.browser


@pytest.fixture(scope="module")
def plan_url(tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    """A server whose app has the plan page installed (whatever the default factory has)."""
    port = _free_port()
    env = {**os.environ, "FOLDWISE_DATA_DIR": str(tmp_path_factory.mktemp("plan-data"))}
    cmd = [
        sys.executable,
        "-m",
        "uvicorn",
        "service.web.plan_page:create_app_with_plan_page",
        "--factory",
        "--host",
        "127.0.0.1",
        "--port",
        str(port),
        "--log-level",
        "warning",
    ]
    proc = subprocess.Popen(cmd, cwd=ROOT, env=env)
    url = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + 60
        while True:
            try:
                with urllib.request.urlopen(url + "/plan", timeout=1):
                    break
            except OSError:
                if proc.poll() is not None or time.monotonic() > deadline:
                    raise RuntimeError("the server did not start") from None
                time.sleep(0.2)
        yield url
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            proc.kill()


@pytest.fixture
def page(browser: Any) -> Iterator[Any]:
    context = browser.new_context(viewport={"width": 1280, "height": 1000})
    p = context.new_page()
    p.console_errors = []  # type: ignore[attr-defined]
    p.on("console", lambda m: m.type == "error" and p.console_errors.append(m.text))
    p.on("pageerror", lambda e: p.console_errors.append(str(e)))
    try:
        yield p
    finally:
        context.close()


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
    def test_basic(self, page: Any, plan_url: str) -> None:
        page.goto(plan_url + "/plan")
        page.wait_for_load_state("networkidle")
        assert page.console_errors == []
        page.goto(plan_url + "/plan?demo=1")
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

    def test_form_submit(self, page: Any, plan_url: str) -> None:
        page.goto(plan_url + "/plan")
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
