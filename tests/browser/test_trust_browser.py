"""Issue 14 in a real browser: layout at 1280 × 800, forms that keep what was typed, the
CSV export, the not-found page, the printed report and the delete button."""

from __future__ import annotations

import csv
import io
import json
import urllib.request
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from service.contract.caution import CAUTION
from service.demo import demo_diagnose_request

pytestmark = pytest.mark.browser

SHOTS = Path(__file__).parent / "screenshots"  # git-ignored: for a person to look at


def _api(url: str, body: dict[str, Any] | None = None, method: str = "GET") -> Any:
    data = None if body is None else json.dumps(body).encode()
    req = urllib.request.Request(
        url, data=data, method=method, headers={"Content-Type": "application/json"}
    )
    with urllib.request.urlopen(req, timeout=120) as r:
        return json.loads(r.read())


def _pasted_spectrum() -> str:
    # Reference: a numpy simulation: 1 kHz and 7.3 kHz sampled at 10 kS/s; the second
    # shows at |7300 - 10000| = 2700 Hz.
    fs, n = 10_000.0, 4096
    t = np.arange(n) / fs
    x = np.sin(2 * np.pi * 1000.0 * t) + 0.5 * np.sin(2 * np.pi * 7300.0 * t)
    amp = np.abs(np.fft.rfft(x * np.hanning(n))) * 2 / np.hanning(n).sum()
    freq = np.fft.rfftfreq(n, 1 / fs)
    return "frequency_hz, amplitude\n" + "\n".join(
        f"{f:.4f}, {a:.6g}" for f, a in zip(freq, amp, strict=True)
    )


def _saved_diagnosis(server_url: str) -> dict[str, Any]:
    body = {"kind": "diagnose", "request": demo_diagnose_request(), "title": "Bench check"}
    out: dict[str, Any] = _api(server_url + "/api/v1/diagnoses", body, "POST")
    if out["url"].startswith("/"):
        out["url"] = server_url + out["url"]
    return out


def _wait_plots(page: Any, n: int = 1) -> None:
    # A selector, not a JS predicate: the pages' CSP forbids eval.
    page.wait_for_selector(f".js-plotly-plot >> nth={n - 1}", state="attached", timeout=60_000)


class TestLayout:
    def test_tables_fit_their_cards(self, page: Any, server_url: str) -> None:
        saved = _saved_diagnosis(server_url)
        page.set_viewport_size({"width": 1280, "height": 800})
        SHOTS.mkdir(exist_ok=True)
        for path in ("/diagnose?demo=1", "/plan?demo=1", "/predict?demo=1", saved["url"]):
            page.goto(server_url + path if path.startswith("/") else path)
            if path == saved["url"]:
                path = "/saved"
            _wait_plots(page)
            widths = page.evaluate(
                """() => Array.from(document.querySelectorAll('table.data')).map(t => {
                    const card = t.closest('.table-wrap') || t.parentElement;
                    return [t.getBoundingClientRect().width, card.clientWidth];
                })"""
            )
            assert widths, path
            for table_w, card_w in widths:
                assert table_w <= card_w + 1, (path, table_w, card_w)
            # The submit button sits after the last field, not over the form.
            button = page.locator("form .form-actions button[type=submit]")
            if button.count():
                last = page.locator("form .form-actions").first.bounding_box()
                fields = page.evaluate(
                    """() => Math.max(...Array.from(
                        document.querySelectorAll('form.fold-form .field')
                    ).map(f => f.getBoundingClientRect().bottom + window.scrollY))"""
                )
                assert last is not None
                page_top = last["y"] + page.evaluate("window.scrollY")
                assert page_top >= fields - 1, path
            name = path.strip("/").split("/")[-1].replace("?", "-").replace("=", "")
            for w, h in ((1280, 800), (1920, 1080)):
                page.set_viewport_size({"width": w, "height": h})
                page.screenshot(path=str(SHOTS / f"{name or 'saved'}-{w}.png"), full_page=True)
            page.set_viewport_size({"width": 1280, "height": 800})

    def test_legends_clear_of_titles(self, page: Any, server_url: str) -> None:
        page.set_viewport_size({"width": 1280, "height": 800})
        for path in ("/diagnose?demo=1", "/predict?demo=1", "/plan?demo=1"):
            page.goto(server_url + path)
            _wait_plots(page)
            boxes = page.evaluate(
                """() => Array.from(document.querySelectorAll('.js-plotly-plot')).map(p => {
                    const l = p.querySelector('.legend'), t = p.querySelector('.gtitle');
                    if (!l || !t) return null;
                    const a = l.getBoundingClientRect(), b = t.getBoundingClientRect();
                    return [a.left, a.top, a.right, a.bottom, b.left, b.top, b.right, b.bottom];
                })"""
            )
            checked = [b for b in boxes if b is not None]
            assert checked, path
            for al, at, ar, ab, bl, bt, br, bb in checked:
                overlap = al < br and bl < ar and at < bb and bt < ab
                assert not overlap, (path, (al, at, ar, ab), (bl, bt, br, bb))


class TestForms:
    def test_pasted_input_kept(self, page: Any, server_url: str) -> None:
        text = _pasted_spectrum()
        page.goto(server_url + "/diagnose")
        page.fill("#spectrum_text", text)
        page.fill("#sample_rate_hz", "10k")
        page.click("form.fold-form button[type=submit]")
        page.wait_for_selector("table.peaks")
        assert page.input_value("#spectrum_text").strip() == text.strip()
        assert page.input_value("#sample_rate_hz") == "10k"
        # Reference: fold(7300, 10000) = 2700 Hz, worked by hand.
        assert "2,700" in page.inner_text("table.peaks")
        # A mistake: the error in the form's words, the pasted text still there.
        page.fill("#sample_rate_hz", "fast")
        page.click("form.fold-form button[type=submit]")
        page.wait_for_selector("#error-summary")
        summary = page.inner_text("#error-summary")
        assert "Sample rate" in summary and "sample_rate_hz" not in summary
        assert "Input should" not in summary
        assert page.input_value("#spectrum_text").strip() == text.strip()


class TestExport:
    def test_csv_rows_equal_the_answer(self, page: Any, server_url: str) -> None:
        saved = _saved_diagnosis(server_url)
        answer = _api(f"{server_url}/api/v1/diagnoses/{saved['id']}")["result"]
        r = page.request.get(f"{server_url}/d/{saved['id']}/peaks.csv")
        assert r.status == 200 and r.headers["content-type"].startswith("text/csv")
        rows = list(csv.reader(io.StringIO(r.text())))
        assert len(rows) - 1 == len(answer["peaks"])
        for row, peak in zip(rows[1:], answer["peaks"], strict=True):
            assert float(row[0]) == peak["freq_hz"]
            assert float(row[1]) == peak["amplitude"]
            assert float(row[2]) == peak["amplitude_db"]
        # The link on the live demo page gives the demo answer's peaks.
        demo = _api(server_url + "/api/v1/diagnose", demo_diagnose_request(), "POST")
        page.goto(server_url + "/diagnose?demo=1")
        with page.expect_download() as info:
            page.click("[data-export=peaks-csv]")
        got = list(csv.reader(io.StringIO(Path(info.value.path()).read_text())))
        assert [float(r[0]) for r in got[1:]] == [p["freq_hz"] for p in demo["peaks"]]
        assert "dB re 1 g" in got[0][2]

    def test_report_prints(self, page: Any, server_url: str) -> None:
        from pypdf import PdfReader

        page.goto(server_url + "/diagnose?demo=1")
        _wait_plots(page, 2)
        pdf = PdfReader(io.BytesIO(page.pdf(format="A4", landscape=True)))
        assert len(pdf.pages) == 1  # the demo's report fits one landscape A4 page
        text = " ".join((p.extract_text() or "") for p in pdf.pages)
        flat = " ".join(text.split())
        assert " ".join(CAUTION.split()[:8]) in flat
        assert "Measured spectrum" in flat  # the one figure: its title
        assert "Folding diagram" not in flat  # the second figure stays on screen
        assert "Sample rate, S/s 12,800" in flat  # the inputs as entered
        assert "probable alias" in flat  # the table's note: the aliases are listed
        assert "Diagnose the peaks" not in flat  # no form, no buttons

    def test_delete_button(self, page: Any, server_url: str) -> None:
        saved = _saved_diagnosis(server_url)
        page.goto(saved["url"])
        page.fill("#delete-token-input", "not-the-token")
        page.once("dialog", lambda d: d.accept())
        page.click("form[data-delete-form] button[type=submit]")
        page.wait_for_selector("[data-delete-status]:has-text('Not deleted')")
        page.fill("#delete-token-input", saved["delete_token"])
        page.once("dialog", lambda d: d.accept())
        page.click("form[data-delete-form] button[type=submit]")
        page.wait_for_selector("[data-delete-status]:has-text('Deleted.')")
        assert page.request.get(saved["url"]).status == 404


class TestNotFound:
    def test_html_for_browsers_json_for_clients(self, page: Any, server_url: str) -> None:
        r = page.goto(server_url + "/no-such-page")
        assert r.status == 404 and r.headers["content-type"].startswith("text/html")
        assert "No such page" in page.inner_text("h1")
        api = page.request.get(server_url + "/no-such-page", headers={"Accept": "application/json"})
        assert api.status == 404
        assert api.headers["content-type"].startswith("application/problem+json")
        assert api.json()["status"] == 404
