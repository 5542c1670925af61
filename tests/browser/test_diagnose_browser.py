"""The diagnose and compare pages and shared links in a real headless Chromium."""

from __future__ import annotations

import io
import wave
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from .test_pages_browser import _trace_names

pytestmark = pytest.mark.browser


def _spectrum_text(fs: float, tones: list[tuple[float, float]], n: int = 2048) -> str:
    # Reference: numpy — cosines sampled at k/fs, Hann window, rFFT.
    t = np.arange(n) / fs
    x = sum(a * np.cos(2 * np.pi * f * t) for f, a in tones)
    x = x + np.random.default_rng(5).normal(0.0, 1e-4, n)
    w = np.hanning(n)
    amp = np.abs(np.fft.rfft(x * w)) * 2.0 / w.sum()
    freq = np.fft.rfftfreq(n, 1.0 / fs)
    return "\n".join(f"{f:.3f}\t{a:.5g}" for f, a in zip(freq, amp, strict=True))


def _verdicts(page: Any) -> list[tuple[str, str]]:
    rows: list[tuple[str, str]] = page.evaluate(
        "Array.from(document.querySelector('table.peaks').tBodies[0].rows,"
        " r => [r.cells[0].textContent.trim(), r.cells[2].textContent.trim()])"
    )
    return [tuple(r) for r in rows]  # type: ignore[misc]


class TestDiagnoseInBrowser:
    def test_basic(self, page: Any, server_url: str) -> None:
        for path in ("/diagnose", "/compare", "/diagnose?demo=1"):
            page.goto(server_url + path)
            page.wait_for_load_state("networkidle")
            assert page.console_errors == [], (path, page.console_errors)
        names = _trace_names(page, "#measured-figure")
        assert names[:2] == ["spectrum", "noise floor"] and "alias" in names
        assert "alias peaks" in _trace_names(page, "#diag-fold-figure")

    def test_paste_share_and_escape(self, page: Any, server_url: str, browser: Any) -> None:
        page.goto(server_url + "/diagnose")
        text = _spectrum_text(10_000.0, [(7300.0, 1.0), (1000.0, 0.3)])
        # As a paste does: the whole text at once (typing a thousand lines takes long).
        page.locator("#spectrum_text").evaluate("(el, v) => { el.value = v; }", text)
        page.fill("#sample_rate_hz", "10000")
        page.fill("#threshold_db", "20")
        page.fill("#tone_list", "<script>alert(1)</script>, 7300, 1\nshaft, 1000")
        page.check("#share")
        dialogs: list[str] = []
        page.on("dialog", lambda d: (dialogs.append(d.message), d.dismiss()))
        page.click("button[type=submit]")
        page.wait_for_load_state("networkidle")
        names = _trace_names(page, "#measured-figure")
        assert names[:2] == ["spectrum", "noise floor"]
        assert "alias" in names and "real (direct)" in names
        alias_x = page.evaluate(
            "Array.from(document.querySelector('#measured-figure').data)"
            ".filter(t => t.name === 'alias')[0].x"
        )
        # Reference: fold(7.3 kHz, 10 kS/s) = 2.7 kHz (Oppenheim & Schafer, DTSP, sec. 4.2).
        assert len(alias_x) == 1 and abs(alias_x[0] - 2700.0) < 5.0
        # The label is text in the source and explanation cells, never markup.
        cells = page.locator("table.peaks td").filter(has_text="<script>alert(1)</script>")
        assert cells.count() == 2
        assert page.locator("table.peaks script").count() == 0
        verdicts = _verdicts(page)
        link = page.locator("a.share-url").get_attribute("href")
        assert link and link.startswith("/d/")
        # The link in a fresh context (no cookies, no history) shows the same verdicts.
        other = browser.new_context()
        try:
            p2 = other.new_page()
            errors: list[str] = []
            p2.on("console", lambda m: m.type == "error" and errors.append(m.text))
            p2.goto(server_url + link)
            p2.wait_for_load_state("networkidle")
            assert _verdicts(p2) == verdicts
            assert "alias" in _trace_names(p2, "#measured-figure")
            assert errors == []
        finally:
            other.close()
        assert dialogs == [] and page.console_errors == []

    def test_upload_progress(self, page: Any, server_url: str, tmp_path: Path) -> None:
        # A WAV time record of a 7.3 kHz sine sampled at 10 kS/s, 30 s (600 kB).
        fs, n = 10_000, 300_000
        x = 0.5 * np.sin(2 * np.pi * 7300.0 * np.arange(n) / fs)
        x += np.random.default_rng(2).normal(0.0, 1e-3, n)
        buf = io.BytesIO()
        with wave.open(buf, "wb") as w:
            w.setnchannels(1)
            w.setsampwidth(2)
            w.setframerate(fs)
            w.writeframes((x * 32767).astype("<i2").tobytes())
        path = tmp_path / "capture.wav"
        path.write_bytes(buf.getvalue())
        page.goto(server_url + "/diagnose")
        page.wait_for_load_state("networkidle")
        page.set_input_files("#file", str(path))
        page.fill("#tone_list", "carrier, 7300")
        page.fill("#threshold_db", "20")
        page.click("button[type=submit]")
        page.wait_for_selector("table.peaks", timeout=30_000)
        # The progress bar reached the end before the result replaced the page.
        page.wait_for_load_state("networkidle")
        assert page.evaluate("window.foldwiseUpload && window.foldwiseUpload.percent") == 100
        verdicts = _verdicts(page)
        assert [v for _, v in verdicts] == ["alias"]
        assert abs(float(verdicts[0][0].replace(",", "")) - 2700.0) < 5.0
        assert page.console_errors == []
