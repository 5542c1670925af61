"""The pages through the real application: HTML, forms, errors, escaping, assets."""

from __future__ import annotations

import html as html_lib
import re
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any

import numpy as np
from fastapi.testclient import TestClient

from service.demo import demo_fold_request
from service.web.assets import plotly_js_path
from service.web.forms import form_from_request
from service.web.pages import CAUTION

from .conftest import assert_strict_page, controls_without_label, figures_of, form_data

HTML = "text/html"


def _summary(html: str) -> str:
    """The text of the error summary above the form ('' when there is none)."""
    m = re.search(r'<div class="error-summary".*?</div>', html, re.S)
    return html_lib.unescape(re.sub(r"<[^>]+>", "", m.group(0))) if m else ""


class TestHome:
    def test_basic(self, page_client: TestClient) -> None:
        r = page_client.get("/")
        assert r.status_code == 200 and r.headers["content-type"].startswith(HTML)
        assert CAUTION in r.text
        assert 'href="/predict?demo=1"' in r.text and 'href="/diagnose?demo=1"' in r.text
        assert "script-src 'self'" in r.headers["content-security-policy"]
        assert "unsafe-inline" not in r.headers["content-security-policy"].split("style-src")[0]
        assert_strict_page(r.text)


class TestPredictPage:
    def test_basic(self, page_client: TestClient) -> None:
        r = page_client.get("/predict")
        assert r.status_code == 200 and r.headers["content-type"].startswith(HTML)
        assert CAUTION in r.text  # footer
        assert controls_without_label(r.text) == []
        assert_strict_page(r.text)
        # One row per source type works without JS.
        for kind in ("shaft", "gear_mesh", "bearing", "blade_pass", "line", "pwm"):
            assert f'name="{kind}-0-label"' in r.text
        assert "/assets/plotly.min.js" in r.text

    def test_demo(self, page_client: TestClient) -> None:
        r = page_client.get("/predict?demo=1")
        assert r.status_code == 200
        assert r.text.count(CAUTION) >= 2  # with the result and in the footer
        assert controls_without_label(r.text) == []
        assert_strict_page(r.text)
        figs = figures_of(r.text)
        assert set(figs) == {"fold-figure-data", "spectrum-figure-data"}

    def test_post_demo_matches_api(self, page_client: TestClient) -> None:
        data = form_data(form_from_request(demo_fold_request()))
        r = page_client.post("/predict", data=data)
        assert r.status_code == 200, r.text[:2000]
        api = page_client.post("/api/v1/fold", json=demo_fold_request()).json()
        # The table has a row per tone.
        tbody = r.text.split("<tbody>", 1)[1].split("</tbody>", 1)[0]
        assert tbody.count("<tr") == len(api["tones"])
        fig = figures_of(r.text)["fold-figure-data"]
        names = [t["name"] for t in fig["data"]]
        assert names[:1] == ["fold line"] and "aliases" in names and "chain gain" in names
        # The figure holds exactly the tones the JSON API predicts, on the fold line.
        xs = sorted(
            x for t in fig["data"] if t["name"] in ("aliases", "direct tones") for x in t["x"]
        )
        np.testing.assert_allclose(xs, sorted(t["freq_hz"] for t in api["tones"]))
        ys = sorted(
            y for t in fig["data"] if t["name"] in ("aliases", "direct tones") for y in t["y"]
        )
        np.testing.assert_allclose(ys, sorted(t["apparent_hz"] for t in api["tones"]))
        alias_x = next(t for t in fig["data"] if t["name"] == "aliases")["x"]
        assert len(alias_x) == sum(t["aliased"] for t in api["tones"])

    def test_errors(self, page_client: TestClient) -> None:
        r = page_client.post("/predict", data={"sample_rate_hz": "-5", "tone_list": "a, 100, 1"})
        assert r.status_code == 422 and r.headers["content-type"].startswith(HTML)
        assert "Sample rate: must be at least 1 (got -5)" in _summary(r.text)
        assert re.search(r'id="sample_rate_hz"[^>]*aria-invalid="true"', r.text)
        assert 'value="-5"' in r.text  # what was typed comes back
        r = page_client.post("/predict", data={"sample_rate_hz": "fast", "tone_list": "a, 1"})
        assert r.status_code == 422
        # The form's own label and what to write, never the request's field name.
        assert "Sample rate: 'fast' is not a number" in _summary(r.text)
        assert "sample_rate_hz" not in _summary(r.text)
        # Numbers as the pages print them: the same answer as the plain digits.
        for typed in ("12.8k", "12,800", "12 800", "12.8 kS/s"):
            r = page_client.post(
                "/predict", data={"sample_rate_hz": typed, "tone_list": "a, 7300, 1"}
            )
            assert r.status_code == 200, typed
            assert _summary(r.text) == ""
            # Reference: fold(7300, 12800) = |7300 - 12800| = 5500 Hz, worked by hand.
            assert "shows at 5,500.0 Hz" in r.text
        # A source field error lands on that row's field.
        r = page_client.post(
            "/predict",
            data={
                "sample_rate_hz": "12800",
                "gear_mesh-0-label": "mesh",
                "gear_mesh-0-speed": "9000",
                "gear_mesh-0-speed_unit": "rpm",
                "gear_mesh-0-teeth": "0",
            },
        )
        assert r.status_code == 422
        assert re.search(r'id="gear_mesh-0-teeth"[^>]*aria-invalid="true"', r.text)
        assert "Gear mesh, row 1: Teeth: must be at least 1" in _summary(r.text)
        # Bad tone line, bad JSON, nothing to fold, half a band.
        r = page_client.post(
            "/predict",
            data={"sample_rate_hz": "1000", "tone_list": "no number here", "chain_json": "[1,"},
        )
        assert r.status_code == 422
        errors = _summary(r.text)
        assert (
            "Tone list, line 1: write" in errors and "Full chain (JSON): not valid JSON" in errors
        )
        r = page_client.post("/predict", data={"sample_rate_hz": "1000"})
        assert r.status_code == 422 and "at least one tone" in _summary(r.text)
        r = page_client.post(
            "/predict", data={"sample_rate_hz": "1000", "tone_list": "a, 1", "band_low_hz": "5"}
        )
        assert r.status_code == 422 and "both ends of the band" in _summary(r.text)
        # An error from the computation (a chain in the wrong order) is shown, not a 500.
        r = page_client.post(
            "/predict",
            data={
                "chain_json": '[{"stage": "decimate", "factor": 2}, '
                '{"stage": "sample", "rate_hz": 1000}]',
                "tone_list": "a, 100",
            },
        )
        assert r.status_code == 422 and _summary(r.text).count("Full chain (JSON):") == 1

    def test_escaping(self, page_client: TestClient) -> None:
        evil = "<script>alert(1)</script>"
        r = page_client.post(
            "/predict", data={"sample_rate_hz": "10000", "tone_list": f"{evil}, 7300, 1\nb, 13200"}
        )
        assert r.status_code == 200
        assert evil not in r.text
        assert "&lt;script&gt;alert(1)&lt;/script&gt;" in r.text
        # In the figure JSON the label arrives as text Plotly will not read as markup.
        fig = figures_of(r.text)["fold-figure-data"]
        alias = next(t for t in fig["data"] if t["name"] == "aliases")
        assert any("&lt;script&gt;" in h for h in alias["hovertext"])
        # And a label that came back into the form with an error is escaped there too.
        r = page_client.post("/predict", data={"sample_rate_hz": "-1", "tone_list": f"{evil}, 5"})
        assert r.status_code == 422 and evil not in r.text

    def test_edges(self, page_client: TestClient) -> None:
        # Line harmonics as a count, a full chain as JSON, and more sources as JSON.
        r = page_client.post(
            "/predict",
            data={
                "chain_json": '[{"stage": "sample", "rate_hz": 12800}, '
                '{"stage": "decimate", "factor": 2, "filter": "none"}]',
                "line-0-label": "supply",
                "line-0-line_hz": "50",
                "line-0-harmonics": "3",
                "sources_json": '[{"type": "resonance", "label": "mount", "freq_hz": 9000}]',
            },
        )
        assert r.status_code == 200, r.text[:3000]
        out = page_client.post(
            "/api/v1/fold",
            json={
                "chain": [
                    {"stage": "sample", "rate_hz": 12800},
                    {"stage": "decimate", "factor": 2, "filter": "none"},
                ],
                "sources": [
                    {"type": "line", "label": "supply", "line_hz": 50, "harmonics": 3},
                    {"type": "resonance", "label": "mount", "freq_hz": 9000},
                ],
            },
        ).json()
        fig = figures_of(r.text)["fold-figure-data"]
        n = sum(len(t["x"]) for t in fig["data"] if t["name"] in ("aliases", "direct tones"))
        assert n == len(out["tones"]) == 4
        line = next(t for t in fig["data"] if t["name"] == "fold line")
        assert line["y"][1] == out["nyquist_hz"] == 3200.0


class TestAssets:
    def test_basic(self, page_client: TestClient) -> None:
        r = page_client.get("/assets/plotly.min.js")
        assert r.status_code == 200
        assert r.content == plotly_js_path().read_bytes()
        assert "max-age=31536000" in r.headers["cache-control"]
        again = page_client.get(
            "/assets/plotly.min.js", headers={"If-None-Match": r.headers["etag"]}
        )
        assert again.status_code == 304
        css = page_client.get("/static/foldwise.css")
        assert css.status_code == 200 and css.headers["content-type"].startswith("text/css")
        for name in ("plots.js", "tables.js", "rows.js"):
            assert page_client.get(f"/static/{name}").status_code == 200


@dataclass
class _Saved:
    id: str
    kind: str
    created_at: datetime
    computation_version: str
    app_version: str
    request: dict[str, Any]
    result: dict[str, Any]
    title: str | None


class TestSavedPage:
    def test_basic(self, page_client: TestClient) -> None:
        req = demo_fold_request()
        result = page_client.post("/api/v1/fold", json=req).json()
        saved = _Saved(
            "a" * 32, "fold", datetime(2025, 1, 2, tzinfo=UTC), "1", "0.1", req, result, "Bench <A>"
        )

        async def lookup(record_id: str) -> _Saved | None:
            return saved if record_id == saved.id else None

        page_client.app.state.saved_lookup = lookup  # type: ignore[attr-defined]
        r = page_client.get(f"/d/{saved.id}")
        assert r.status_code == 200 and "Bench &lt;A&gt;" in r.text and CAUTION in r.text
        assert "fold-figure-data" in figures_of(r.text)
        assert_strict_page(r.text)
        assert page_client.get("/d/" + "b" * 32).status_code == 404

    def test_errors(self, page_client: TestClient) -> None:
        r = page_client.get("/d/nothing-here")
        assert r.status_code == 404 and r.headers["content-type"].startswith(HTML)
        assert "nothing-here" in r.text
