"""The diagnose and compare pages, sharing and saved pages, through the real application."""

from __future__ import annotations

import html as html_lib
import json
import re
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from fastapi.testclient import TestClient

from service.app import create_app
from service.config import Settings
from service.demo import demo_fold_request
from service.storage import StoreUnavailable
from service.web.diagnose_forms import SHARE_FIELDS_LIMIT, SHARE_TEXT_LIMIT
from service.web.pages import CAUTION

from .conftest import assert_strict_page, controls_without_label, figures_of
from .test_pages import _summary

MAX_PAGE_BYTES = 1_500_000


def _fold(f: float, fs: float) -> float:
    # Reference: Oppenheim & Schafer, DTSP, sec. 4.2, fold(f, fs) = |f - fs*round(f/fs)|,
    # evaluated with numpy.
    return float(np.abs(f - fs * np.round(f / fs)))


def _sampled_spectrum(
    fs: float, tones: list[tuple[float, float]], n: int = 4096, seed: int = 3
) -> str:
    """Spectrum text of cosines sampled at k/fs: Hann window and numpy's rFFT.

    Reference: numpy sampling and FFT, independent of the project's spectrum code."""
    rng = np.random.default_rng(seed)
    t = np.arange(n) / fs
    x = sum(a * np.cos(2 * np.pi * f * t) for f, a in tones) + rng.normal(0.0, 1e-4, n)
    w = np.hanning(n)
    amp = np.abs(np.fft.rfft(x * w)) * 2.0 / w.sum()
    freq = np.fft.rfftfreq(n, 1.0 / fs)
    rows = "\n".join(f"{f:.4f}, {a:.6g}" for f, a in zip(freq, amp, strict=True))
    return "frequency_hz, amplitude\n" + rows


def _rows(html: str) -> list[dict[str, str]]:
    """The peak table as (at Hz, verdict text, source, true Hz) per row."""
    table = html.split('class="data sortable peaks"', 1)[1].split("</table>", 1)[0]
    out = []
    for tr in re.findall(r"<tr class=\"verdict-[^\"]*\">(.*?)</tr>", table, re.S):
        cells = [
            html_lib.unescape(re.sub(r"<[^>]+>|\s+", " ", c)).strip()
            for c in re.findall(r"<td[^>]*>(.*?)</td>", tr, re.S)
        ]
        out.append({"at": cells[0], "verdict": cells[2], "source": cells[4], "true": cells[5]})
    return out


def _trace(fig: dict[str, Any], name: str) -> dict[str, Any]:
    found = [t for t in fig["data"] if t.get("name") == name]
    assert len(found) == 1, [t.get("name") for t in fig["data"]]
    return found[0]


def _share_inputs(html: str, kind: str) -> str | None:
    """The carried inputs of the page's after-the-fact share form of ``kind`` (None: none)."""
    forms = re.findall(r'<form method="post" action="/share".*?</form>', html, re.S)
    mine = [f for f in forms if f'name="kind" value="{kind}"' in f]
    if not mine:
        return None
    assert len(mine) == 1
    m = re.search(r'name="inputs" value="([^"]*)"', mine[0])
    assert m, mine[0]
    return html_lib.unescape(m.group(1))


def _compare_verdicts(html: str) -> list[tuple[str, str]]:
    """The compare page's groups as (verdict, heading text) in page order."""
    out = []
    for verdict, head in re.findall(
        r'<section class="compare-group compare-(\w+)".*?<h4[^>]*>(.*?)</h4>', html, re.S
    ):
        out.append((verdict, re.sub(r"<[^>]+>|\s+", " ", head).strip()))
    return out


def _saved_path(html: str) -> str:
    m = re.search(r'class="share-url" href="(/d/[A-Za-z0-9_-]{32})"', html)
    assert m, html[:2000]
    return m.group(1)


# Noise alone pokes above a 10 dB threshold in about 1 bin in 1000 (Rayleigh statistics);
# 20 dB keeps these small synthetic spectra to their tones.
BASIC = {
    "sample_rate_hz": "10000",
    "tone_list": "carrier, 7300, 1\nshaft, 1000, 0.5",
    "threshold_db": "20",
}


def _basic_post(client: TestClient, **extra: str) -> Any:
    text = _sampled_spectrum(10_000.0, [(7300.0, 1.0), (1000.0, 0.5)])
    return client.post("/diagnose", data={**BASIC, "spectrum_text": text, **extra})


class TestDiagnosePage:
    def test_basic(self, page_client: TestClient) -> None:
        r = page_client.get("/diagnose")
        assert r.status_code == 200 and r.headers["content-type"].startswith("text/html")
        assert controls_without_label(r.text) == []
        assert_strict_page(r.text)
        assert 'enctype="multipart/form-data"' in r.text and 'type="file"' in r.text
        assert "/static/upload.js" in r.text and "<progress" in r.text
        assert page_client.get("/static/upload.js").status_code == 200

    def test_demo(self, page_client: TestClient) -> None:
        r = page_client.get("/diagnose?demo=1")
        assert r.status_code == 200
        assert r.text.count(CAUTION) >= 2  # beside the verdicts and in the footer
        assert controls_without_label(r.text) == []
        assert_strict_page(r.text)
        carrier = _fold(10_000.0, 12_800.0)
        assert carrier == 2800.0  # Reference: fold(10 kHz, 12.8 kS/s) = 2.8 kHz
        rows = _rows(r.text)
        hit = [x for x in rows if abs(float(x["at"].replace(",", "")) - carrier) < 6.4]
        assert len(hit) == 1
        assert hit[0]["verdict"] == "alias" and hit[0]["source"].startswith("inverter")
        assert hit[0]["true"] == "10,000.0"
        figs = figures_of(r.text)
        spec = figs["measured-figure-data"]
        names = [t["name"] for t in spec["data"]]
        assert names[:2] == ["spectrum", "noise floor"] and "alias" in names
        assert "real (direct)" in names
        alias = _trace(spec, "alias")
        assert any(abs(x - carrier) < 6.4 for x in alias["x"])
        # The analysed span edge (fs/2.56) and fs/2 are drawn.
        shapes = {s["name"]: s for s in spec["layout"]["shapes"]}
        assert shapes["Nyquist"]["x0"] == 6400.0 and shapes["analysed span edge"]["x0"] == 5000
        # The folding diagram carries the carrier from 10 kHz to where it was measured.
        fold = figs["diag-fold-figure-data"]
        peaks = _trace(fold, "alias peaks")
        pairs = list(zip(peaks["x"], peaks["y"], strict=True))
        assert any(x == 10_000.0 and abs(y - carrier) < 6.4 for x, y in pairs)
        # The share form of the demo.
        assert 'name="kind" value="diagnose_demo"' in r.text

    def test_post_paste(self, page_client: TestClient) -> None:
        r = _basic_post(page_client)
        assert r.status_code == 200, _summary(r.text)
        alias_at = _fold(7300.0, 10_000.0)  # Source: O&S sec. 4.2, 7.3 kHz at 10 kS/s → 2.7 kHz
        assert alias_at == 2700.0
        rows = {x["verdict"]: x for x in _rows(r.text)}
        assert abs(float(rows["alias"]["at"].replace(",", "")) - alias_at) < 2.5
        assert rows["alias"]["true"] == "7,300.0" and "carrier" in rows["alias"]["source"]
        assert abs(float(rows["real (direct)"]["at"].replace(",", "")) - 1000.0) < 2.5
        fig = figures_of(r.text)["measured-figure-data"]
        assert len(_trace(fig, "spectrum")["x"]) == 2049  # under 2 × buckets: kept whole
        assert "1 of 2 peaks is probably alias" in re.sub(r"<[^>]+>|\s+", " ", r.text)
        assert 'data-status="aliases_found"' in r.text
        assert_strict_page(r.text)

    def test_how_the_input_was_read_is_shown(self, page_client: TestClient) -> None:
        # A header naming the unit, and two cells exported negative: bad data, not dB.
        text = _sampled_spectrum(10_000.0, [(7300.0, 1.0), (1000.0, 0.5)])
        lines = text.replace("frequency_hz, amplitude", "Frequency (Hz), Amplitude (g)")
        rows = lines.split("\n")
        for i in (50, 900):
            f, a = rows[i].split(", ")
            rows[i] = f"{f}, -{a}"
        r = page_client.post("/diagnose", data={**BASIC, "spectrum_text": "\n".join(rows)})
        assert r.status_code == 200, _summary(r.text)
        flat = re.sub(r"<[^>]+>|\s+", " ", r.text)
        assert "amplitude in g" in flat
        assert "2 negative amplitudes in a linear column left out as bad data" in flat
        assert "1 of 2 peaks is probably alias" in flat  # the same answer as the clean text

    def test_no_sources_is_not_an_all_clear(self, page_client: TestClient) -> None:
        # Two in-band tones and no sources: nothing explains them, and the page says so
        # with the answer's own headline instead of a calm "no alias".
        text = _sampled_spectrum(10_000.0, [(1000.0, 1.0), (2000.0, 0.5)])
        data = {"sample_rate_hz": "10000", "threshold_db": "20", "spectrum_text": text}
        r = page_client.post("/diagnose", data=data)
        assert r.status_code == 200, _summary(r.text)
        flat = re.sub(r"<[^>]+>|\s+", " ", r.text)
        assert 'data-status="unexplained_peaks"' in r.text
        assert "2 of 2 peaks are unexplained" in flat and "second sample rate" in flat
        assert "No aliases" not in flat

    def test_upload_file(self, page_client: TestClient) -> None:
        text = _sampled_spectrum(10_000.0, [(7300.0, 1.0)])
        r = page_client.post(
            "/diagnose",
            data={"sample_rate_hz": "10000", "tone_list": "carrier, 7300", "threshold_db": "20"},
            files={"file": ("capture.tsv", text.replace(", ", "\t").encode(), "text/plain")},
        )
        assert r.status_code == 200, _summary(r.text)
        assert [x["verdict"] for x in _rows(r.text)] == ["alias"]
        assert "capture.tsv: spectrum of 2049 lines" in r.text

    def test_errors(self, page_client: TestClient) -> None:
        r = page_client.post("/diagnose", data={"sample_rate_hz": "10000"})
        assert r.status_code == 422 and r.headers["content-type"].startswith("text/html")
        assert "Pasted spectrum: paste a spectrum" in _summary(r.text)
        assert re.search(r'id="spectrum_text"[^>]*aria-invalid="true"', r.text)
        text = _sampled_spectrum(10_000.0, [(1000.0, 1.0)])
        r = page_client.post("/diagnose", data={"sample_rate_hz": "-5", "spectrum_text": text})
        assert r.status_code == 422
        assert "Sample rate: must be at least 1 (got -5)" in _summary(r.text)
        # The spectrum reaches 5 kHz: a 4 kS/s rate cannot have made it (from the computation).
        r = page_client.post("/diagnose", data={"sample_rate_hz": "4000", "spectrum_text": text})
        assert r.status_code == 422
        assert re.search(r'id="sample_rate_hz"[^>]*aria-invalid="true"', r.text)
        assert "Nyquist frequency is 2000 Hz" in _summary(r.text)
        # A bad line names the pasted text and the line.
        r = page_client.post(
            "/diagnose",
            data={"sample_rate_hz": "10000", "spectrum_text": text + "\n5001, loud"},
        )
        assert r.status_code == 422 and "Pasted spectrum" in _summary(r.text)
        assert "line 2051" in _summary(r.text)
        # Pasted text and a file at once; bad threshold; bad record rate.
        r = page_client.post(
            "/diagnose",
            data={"sample_rate_hz": "10000", "spectrum_text": text, "threshold_db": "-1"},
            files={"file": ("x.csv", b"1,2\n", "text/plain")},
        )
        assert r.status_code == 422 and "not both" in _summary(r.text)
        r = page_client.post(
            "/diagnose",
            data={"sample_rate_hz": "10000", "spectrum_text": text, "threshold_db": "-1"},
        )
        assert r.status_code == 422
        assert "Peak threshold: must be at least 0" in (_summary(r.text))

    def test_escaping(self, page_client: TestClient) -> None:
        evil = "<script>alert(1)</script>"
        text = _sampled_spectrum(10_000.0, [(7300.0, 1.0)])
        r = page_client.post(
            "/diagnose",
            data={"sample_rate_hz": "10000", "spectrum_text": text, "tone_list": f"{evil}, 7300"},
        )
        assert r.status_code == 200, _summary(r.text)
        assert evil not in r.text and "&lt;script&gt;alert(1)&lt;/script&gt;" in r.text
        fig = figures_of(r.text)["measured-figure-data"]
        assert "&lt;script&gt;" in _trace(fig, "alias")["hovertext"][0]
        fold = figures_of(r.text)["diag-fold-figure-data"]
        assert "&lt;script&gt;" in _trace(fold, "alias peaks")["hovertext"][0]

    def test_large_spectrum_page_weight(self, page_client: TestClient) -> None:
        n = 1_048_576
        rng = np.random.default_rng(7)
        freq = np.arange(n, dtype=np.int64)  # Hz: 1 Hz lines, so the rate is 2^21 S/s
        amp = (100 + rng.rayleigh(20, n)).astype(np.int64).clip(1, 999)
        amp[[1000, 300_000, 700_001]] = 999
        # Fixed-width lines built with array arithmetic: "fffffff,aaa\n".
        digits = np.empty((n, 12), dtype=np.uint8)
        for k in range(7):
            digits[:, 6 - k] = 48 + (freq // 10**k) % 10
        digits[:, 7] = ord(",")
        for k in range(3):
            digits[:, 10 - k] = 48 + (amp // 10**k) % 10
        digits[:, 11] = ord("\n")
        body = digits.tobytes()
        r = page_client.post(
            "/diagnose",
            data={"sample_rate_hz": str(2 * n), "upload_unit": "linear"},
            files={"file": ("big.csv", body, "text/csv")},
        )
        assert r.status_code == 200, _summary(r.text)
        assert len(r.content) <= MAX_PAGE_BYTES, len(r.content)
        fig = figures_of(r.text)["measured-figure-data"]
        spec = _trace(fig, "spectrum")
        assert len(spec["x"]) <= 4000 and max(spec["y"]) == pytest.approx(
            20 * np.log10(999), abs=0.01
        )
        assert f"spectrum of {n} lines" in r.text


def _compare_texts() -> dict[str, str]:
    tones = [(7300.0, 1.0), (1000.0, 0.5)]
    return {
        "a_spectrum_text": _sampled_spectrum(10_000.0, tones),
        "a_sample_rate_hz": "10000",
        "b_spectrum_text": _sampled_spectrum(12_000.0, tones, seed=4),
        "b_sample_rate_hz": "12000",
        # The sensor's bandwidth, inside the unambiguous range of 10 and 12 kS/s
        # (lcm 60 kHz / 2 = 30 kHz): the answers can be unique.
        "max_true_hz": "30000",
        # The default threshold: noise peaks pair by chance with 0.5 % drift, and
        # the chance test keeps such pairings from being called an alias.
    }


class TestComparePage:
    def test_basic(self, page_client: TestClient) -> None:
        r = page_client.get("/compare")
        assert r.status_code == 200
        assert controls_without_label(r.text) == []
        assert_strict_page(r.text)

    def test_post(self, page_client: TestClient) -> None:
        r = page_client.post("/compare", data=_compare_texts())
        assert r.status_code == 200, _summary(r.text)
        assert_strict_page(r.text)
        fig = figures_of(r.text)["compare-figure-data"]
        names = [t["name"] for t in fig["data"]]
        assert "spectrum A (10000 S/s)" in names and "spectrum B (12000 S/s)" in names
        moved = [t for t in fig["data"] if t["name"] == "moves: alias"]
        stayed = [t for t in fig["data"] if t["name"] == "stays: real"]
        # Reference: 7.3 kHz folds to 2.7 kHz at 10 kS/s and to 4.7 kHz at 12 kS/s.
        want = {"x": _fold(7300.0, 10_000.0), "x2": _fold(7300.0, 12_000.0)}
        assert sorted(round(t["x"][0]) for t in moved) == [2700, 4700]
        for t in moved:
            assert abs(t["x"][0] - want[t["xaxis"]]) < 3.0
        # Reference: 1 kHz and 11 kHz read alike at 10 and 12 kS/s (11 − 10 = 1,
        # 12 − 11 = 1): a mixed-sign image inside the range, so the line is ambiguous
        # with 1 kHz listed first, not "stays: real".
        amb = [t for t in fig["data"] if t["name"].startswith("ambiguous")]
        assert stayed == [] and all(abs(t["x"][0] - 1000.0) < 3.0 for t in amb)
        assert len(amb) == 2
        text = re.sub(r"<[^>]+>|\s+", " ", r.text)
        assert "7,300 Hz" in text or "7.300 kHz" in text  # a true-frequency candidate

    def test_three_captures(self, page_client: TestClient) -> None:
        data = _compare_texts()
        tones = [(7300.0, 1.0), (1000.0, 0.5)]
        data.update(
            c_spectrum_text=_sampled_spectrum(16_000.0, tones, seed=5), c_sample_rate_hz="16000"
        )
        r = page_client.post("/compare", data=data)
        assert r.status_code == 200, _summary(r.text)
        assert_strict_page(r.text)
        fig = figures_of(r.text)["compare-figure-data"]
        names = [t["name"] for t in fig["data"] if t["name"].startswith("spectrum")]
        assert names == [
            "spectrum A (10000 S/s)",
            "spectrum B (12000 S/s)",
            "spectrum C (16000 S/s)",
        ]
        groups = _compare_verdicts(r.text)
        # Reference: 7.3 kHz folds to 2.7, 4.7 and 7.3 kHz (below 8 kHz) — a line below
        # one capture's Nyquist still moves in the others.
        alias = [h for v, h in groups if v == "alias"]
        assert len(alias) == 1 and ("true 7,300" in alias[0] or "true 7.3" in alias[0])
        assert [v for v, _ in groups].count("real") == 1
        # An optional row left empty is no capture (and the page says how to remove one).
        assert "Leave this capture empty to remove it" in r.text

    def test_demo(self, page_client: TestClient) -> None:
        r = page_client.get("/compare?demo=1")
        assert r.status_code == 200
        assert_strict_page(r.text)
        assert controls_without_label(r.text) == []
        fig = figures_of(r.text)["compare-figure-data"]
        names = [t["name"] for t in fig["data"] if t["name"].startswith("spectrum")]
        assert names == ["spectrum 12.8 kS/s (12800 S/s)", "spectrum 16 kS/s (16000 S/s)"]
        groups = _compare_verdicts(r.text)
        # Reference: DESIGN.md sec. 6, the 10 kHz carrier reads 12.8 − 10 = 2.8 kHz at
        # 12.8 kS/s and 16 − 10 = 6 kHz at 16 kS/s (fold, checked by FFT elsewhere).
        carrier = [h for v, h in groups if "2,800" in h and "6,000" in h]
        assert len(carrier) == 1 and re.search(r"true (10,000(\.\d)? Hz|10 kHz)", carrier[0])
        assert "caution" in r.text.lower()
        assert 'name="kind" value="compare_demo"' in r.text
        shared = page_client.post("/share", data={"kind": "compare_demo"})
        assert shared.status_code == 200
        saved = page_client.get(_saved_path(shared.text))
        assert _compare_verdicts(saved.text) == groups

    def test_errors(self, page_client: TestClient) -> None:
        data = _compare_texts()
        data["b_spectrum_text"] = _sampled_spectrum(10_000.0, [(1000.0, 1.0)])
        data["b_sample_rate_hz"] = "10000"
        r = page_client.post("/compare", data=data)
        assert r.status_code == 422 and "needs its own sample rate" in _summary(r.text)
        assert re.search(r'id="b_sample_rate_hz"[^>]*aria-invalid="true"', r.text)
        data = _compare_texts()
        del data["a_spectrum_text"]
        r = page_client.post("/compare", data=data)
        assert r.status_code == 422
        assert "Capture A, pasted spectrum: paste a spectrum or choose a file" in _summary(r.text)


class TestShare:
    def test_predict(self, page_client: TestClient) -> None:
        r = page_client.get("/predict?demo=1")
        m = re.search(r'name="request" value="([^"]+)"', r.text)
        assert m
        r = page_client.post(
            "/share", data={"kind": "fold", "request": html_lib.unescape(m.group(1))}
        )
        assert r.status_code == 200
        path = _saved_path(r.text)
        assert f"http://testserver{path}" in r.text and 'id="delete-token"' in r.text
        saved = page_client.get(path)
        assert saved.status_code == 200
        api = page_client.post("/api/v1/fold", json=demo_fold_request()).json()
        fig = figures_of(saved.text)["fold-figure-data"]
        n = sum(len(t["x"]) for t in fig["data"] if t["name"] in ("aliases", "direct tones"))
        assert n == len(api["tones"])
        assert 'name="kind" value="fold"' not in saved.text  # saved: no second share form

    def test_diagnose_saved_same_verdicts(
        self, page_client: TestClient, settings: Settings
    ) -> None:
        r = _basic_post(page_client, share="1", share_title="Bench <B>")
        assert r.status_code == 200
        path = _saved_path(r.text)
        saved = page_client.get(path)
        assert saved.status_code == 200 and "Bench &lt;B&gt;" in saved.text
        assert _rows(saved.text) == _rows(r.text)
        assert saved.text.count(CAUTION) >= 2
        names = [t["name"] for t in figures_of(saved.text)["measured-figure-data"]["data"]]
        assert names[:2] == ["spectrum", "noise floor"]
        assert_strict_page(saved.text)
        # A new app instance on the same data folder shows the very same page.
        with TestClient(create_app(settings)) as again:
            assert again.get(path).text == page_client.get(path).text

    def test_saved_keeps_the_chosen_unit(self, page_client: TestClient) -> None:
        # The unit and kind chosen on the form travel in the request: the saved page and
        # its CSV label the levels the same way as the live result did.
        r = _basic_post(page_client, share="1", amplitude_unit="mm/s", amplitude_kind="rms")
        assert r.status_code == 200
        path = _saved_path(r.text)
        saved = page_client.get(path).text
        for html in (r.text, saved):
            assert "dB re 1 mm/s" in html and "RMS values in mm/s" in html
        csv = page_client.get(path + "/peaks.csv").text
        assert "amplitude (mm/s, RMS)" in csv.splitlines()[0]

    def test_demo_and_compare(self, page_client: TestClient) -> None:
        r = page_client.post("/share", data={"kind": "diagnose_demo"})
        assert r.status_code == 200
        saved = page_client.get(_saved_path(r.text))
        assert _rows(saved.text) == _rows(page_client.get("/diagnose?demo=1").text)
        r = page_client.post("/compare", data={**_compare_texts(), "share": "1"})
        assert r.status_code == 200
        saved = page_client.get(_saved_path(r.text))
        assert saved.status_code == 200 and "only the peaks are drawn" not in saved.text
        fig = figures_of(saved.text)["compare-figure-data"]
        # The saved comparison keeps both spectra: the page redraws them from the store.
        live = figures_of(r.text)["compare-figure-data"]
        spectra = [t for t in fig["data"] if t["name"].startswith("spectrum")]
        assert [t["name"] for t in spectra] == ["spectrum A (10000 S/s)", "spectrum B (12000 S/s)"]
        for t in spectra:
            mine = next(u for u in live["data"] if u["name"] == t["name"])
            assert t["x"] == mine["x"]
            assert np.allclose(t["y"], mine["y"], atol=0.02)  # float32 storage
        assert sorted(round(t["x"][0]) for t in fig["data"] if t["name"] == "moves: alias") == [
            2700,
            4700,
        ]

    def test_diagnose_after_the_fact(self, page_client: TestClient) -> None:
        r = _basic_post(page_client, share_title="Bench 3")
        assert r.status_code == 200, _summary(r.text)
        inputs = _share_inputs(r.text, "diagnose")
        assert inputs is not None and 'value="Bench 3"' in r.text
        assert controls_without_label(r.text) == []
        assert_strict_page(r.text)
        shared = page_client.post(
            "/share", data={"kind": "diagnose", "inputs": inputs, "title": "Bench 3"}
        )
        assert shared.status_code == 200, shared.text[:2000]
        path = _saved_path(shared.text)
        assert f"http://testserver{path}" in shared.text and 'id="delete-token"' in shared.text
        saved = page_client.get(path)
        assert saved.status_code == 200 and "Bench 3" in saved.text
        original = _rows(r.text)
        assert [x["verdict"] for x in original] == ["alias", "real (direct)"]
        assert _rows(saved.text) == original
        # Saved with the spectrum, as the tick box saves it: the whole trace is drawn.
        fig = figures_of(saved.text)["measured-figure-data"]
        assert len(_trace(fig, "spectrum")["x"]) == 2049
        assert _share_inputs(saved.text, "diagnose") is None  # saved: no second share form
        # Ticked before diagnosing: the link is there already, and no share form.
        r = _basic_post(page_client, share="1")
        assert _share_inputs(r.text, "diagnose") is None and 'class="share-url"' in r.text

    def test_compare_after_the_fact(self, page_client: TestClient) -> None:
        r = page_client.post("/compare", data=_compare_texts())
        assert r.status_code == 200, _summary(r.text)
        inputs = _share_inputs(r.text, "compare")
        assert inputs is not None and 'class="small share-hint"' not in r.text
        assert_strict_page(r.text)
        shared = page_client.post("/share", data={"kind": "compare", "inputs": inputs})
        assert shared.status_code == 200, shared.text[:2000]
        saved = page_client.get(_saved_path(shared.text))
        assert saved.status_code == 200
        original = _compare_verdicts(r.text)
        # Reference: 7.3 kHz moves (2.7 kHz at 10 kS/s, 4.7 kHz at 12 kS/s); 1 kHz stays.
        assert [v for v, _ in original].count("alias") == 1
        # At the default threshold noise peaks may pair by chance: such a pairing is
        # ambiguous too (never an alias), beside the 1 kHz line.
        amb = [h for v, h in original if v == "ambiguous"]
        assert any("1,000" in h for h in amb), amb
        assert "true 7,300" in dict(original)["alias"] or "true 7.3" in dict(original)["alias"]
        assert _compare_verdicts(saved.text) == original
        fig = figures_of(saved.text)["compare-figure-data"]
        assert sorted(round(t["x"][0]) for t in fig["data"] if t["name"] == "moves: alias") == [
            2700,
            4700,
        ]

    def test_after_the_fact_edges(self, page_client: TestClient) -> None:
        # An uploaded file is not carried back: the tick box stays the way to a link.
        text = _sampled_spectrum(10_000.0, [(7300.0, 1.0)])
        r = page_client.post(
            "/diagnose",
            data={"sample_rate_hz": "10000", "tone_list": "carrier, 7300", "threshold_db": "20"},
            files={"file": ("capture.csv", text.encode(), "text/csv")},
        )
        assert r.status_code == 200, _summary(r.text)
        assert _share_inputs(r.text, "diagnose") is None and 'name="inputs"' not in r.text
        assert "tick <strong>Save and share this diagnosis</strong>" in r.text
        data = _compare_texts()
        b_text = data.pop("b_spectrum_text")
        r = page_client.post(
            "/compare", data=data, files={"b_file": ("b.csv", b_text.encode(), "text/csv")}
        )
        assert r.status_code == 200, _summary(r.text)
        assert _share_inputs(r.text, "compare") is None and 'class="small share-hint"' in r.text
        # Pasted text over the limit: no share form, the page stays light.
        big = _sampled_spectrum(10_000.0, [(7300.0, 1.0), (1000.0, 0.5)], n=32768)
        assert len(big.encode()) > SHARE_TEXT_LIMIT
        r = page_client.post("/diagnose", data={**BASIC, "spectrum_text": big})
        assert r.status_code == 200, _summary(r.text)
        assert _share_inputs(r.text, "diagnose") is None and 'name="inputs"' not in r.text
        # The pasted text comes back once, in its box (no second paste to correct a
        # setting), and not a second time in a share form.
        assert len(r.content) < 2 * len(big)
        assert big.splitlines()[-1] in r.text
        # Just under the limit: the form, and the page within its weight.
        under = big[: big.rindex("\n", 0, SHARE_TEXT_LIMIT)]
        assert SHARE_TEXT_LIMIT - 100 < len(under.encode()) <= SHARE_TEXT_LIMIT
        r = page_client.post("/diagnose", data={**BASIC, "spectrum_text": under})
        assert r.status_code == 200, _summary(r.text)
        assert _share_inputs(r.text, "diagnose") is not None
        assert len(r.content) <= MAX_PAGE_BYTES, len(r.content)

    def test_after_the_fact_errors(self, page_client: TestClient) -> None:
        r = page_client.post("/share", data={"kind": "diagnose", "inputs": "[1, 2]"})
        assert r.status_code == 422 and "not a JSON object" in r.text
        r = page_client.post("/share", data={"kind": "diagnose", "inputs": '{"a": "\\ud800"}'})
        assert r.status_code == 422 and "not a JSON object" in r.text
        r = page_client.post("/share", data={"kind": "compare", "inputs": "[" * 100_000})
        assert r.status_code == 422
        # Inputs the page would not have offered: too much pasted text.
        big = json.dumps({"spectrum_text": "1, 2\n" * (SHARE_TEXT_LIMIT // 5 + 1)})
        r = page_client.post("/share", data={"kind": "diagnose", "inputs": big})
        assert len(big) < SHARE_FIELDS_LIMIT  # the pasted text is what is too large
        assert r.status_code == 413 and "the pasted text is 262,145 bytes" in r.text
        r = page_client.post(
            "/share", data={"kind": "compare", "inputs": " " * (SHARE_FIELDS_LIMIT + 1)}
        )
        assert r.status_code == 413 and "carried inputs are" in r.text
        # The fields go through the page's parser and the computation again.
        r = page_client.post(
            "/share",
            data={
                "kind": "diagnose",
                "inputs": '{"sample_rate_hz": "-5", "spectrum_text": "1, 2"}',
            },
        )
        assert r.status_code == 422 and "Sample rate" in r.text
        text = _sampled_spectrum(10_000.0, [(1000.0, 1.0)])
        fields = {"sample_rate_hz": "4000", "spectrum_text": text}
        r = page_client.post("/share", data={"kind": "diagnose", "inputs": json.dumps(fields)})
        assert r.status_code == 422 and "Nyquist frequency is 2000 Hz" in r.text

    def test_errors(self, page_client: TestClient) -> None:
        r = page_client.post("/share", data={"kind": "plan"})
        assert r.status_code == 422 and "cannot be shared" in r.text
        r = page_client.post("/share", data={"kind": "fold", "request": '{"sample_rate_hz": -1}'})
        assert r.status_code == 422 and r.headers["content-type"].startswith("text/html")


@pytest.fixture
def broken_store(page_client: TestClient) -> Iterator[TestClient]:
    """The real store, made to fail as an unreachable database does."""
    store = page_client.app.state.store_access.store  # type: ignore[attr-defined]

    def down(*args: Any, **kwargs: Any) -> Any:
        raise StoreUnavailable("connection refused")

    saved = store.get, store.create
    store.get, store.create = down, down
    try:
        yield page_client
    finally:
        store.get, store.create = saved


class TestStoreOutage:
    def test_errors(self, broken_store: TestClient, tmp_path: Path) -> None:
        r = broken_store.get("/d/" + "a" * 32)
        assert r.status_code == 503 and r.headers["content-type"].startswith("text/html")
        assert "does not answer" in r.text and r.headers["retry-after"] == "5"
        r = broken_store.post("/share", data={"kind": "diagnose_demo"})
        assert r.status_code == 503 and r.headers["content-type"].startswith("text/html")
        r = _basic_post(broken_store, share="1")
        assert r.status_code == 503 and "does not answer" in r.text
