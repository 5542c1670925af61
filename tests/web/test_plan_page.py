"""The plan page through the real application: form, result, run-up figure, errors,
escaping and sharing; and the run-up figure against an independent fold computation."""

from __future__ import annotations

import html as html_lib
import json
import re
from collections.abc import Iterator
from typing import Any

import numpy as np
import pytest
from fastapi.testclient import TestClient

from service.app import create_app
from service.config import Settings
from service.contract.caution import CAUTION
from service.demo import demo_plan_request
from service.web.pages import templates
from service.web.plan_figures import runup_figure
from service.web.plan_page import plan_form_from_request, plan_result_context

from .conftest import assert_strict_page, controls_without_label, figures_of, form_data, parse_page

HTML = "text/html"
SOURCE_KINDS = ("shaft", "gear_mesh", "bearing", "blade_pass", "line", "pwm")
# The first mesh (17 teeth on the motor shaft) at its 3rd harmonic: order 51. It crosses
# fs/2 = 6.4 kHz at 60·6400/51 = 7,529 rpm, inside the demo's 1,000 to 12,000 rpm.
FOLDING_ORDER = 51.0


@pytest.fixture
def plan_client(settings: Settings) -> Iterator[TestClient]:
    app = create_app(settings)
    with TestClient(app, raise_server_exceptions=True) as c:
        yield c


def _demo(**extra: Any) -> dict[str, Any]:
    return {
        **demo_plan_request(),
        "runup": {"orders_of_interest": [FOLDING_ORDER, "first mesh 17/53: GMF 1×"]},
        **extra,
    }


def _post(client: TestClient, req: dict[str, Any], **fields: str) -> Any:
    data = form_data(plan_form_from_request(req))
    data.update(fields)
    return client.post("/plan", data=data)


def _summary(html: str) -> str:
    m = re.search(r'<div class="error-summary".*?</div>', html, re.S)
    return html_lib.unescape(re.sub(r"<[^>]+>", "", m.group(0))) if m else ""


def _invalid_ids(html: str) -> set[str]:
    return {str(a["id"]) for _, a in parse_page(html).tags if a.get("aria-invalid") == "true"}


def _line_points(fig: dict[str, Any], line: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """x, y and aliased flag of every drawn point of one run-up line."""
    xs: list[float] = []
    ys: list[float] = []
    aliased: list[bool] = []
    for t in fig["data"]:
        meta = t.get("meta", {})
        if meta.get("line") != line:
            continue
        for x, y in zip(t["x"], t["y"], strict=True):
            if x is not None:
                xs.append(x)
                ys.append(y)
                aliased.append(meta["part"] == "alias")
    return np.array(xs), np.array(ys), np.array(aliased)


def _fold_reference(f: np.ndarray, fs: float) -> np.ndarray:
    # Reference: numpy, |f - fs·round(f/fs)| (Oppenheim & Schafer sec. 4.2).
    return np.abs(f - fs * np.round(f / fs))


class TestPlanForm:
    def test_basic(self, plan_client: TestClient) -> None:
        r = plan_client.get("/plan")
        assert r.status_code == 200 and r.headers["content-type"].startswith(HTML)
        assert controls_without_label(r.text) == []
        assert_strict_page(r.text)
        assert "script-src 'self'" in r.headers["content-security-policy"]
        for kind in SOURCE_KINDS:
            assert f'name="{kind}-0-label"' in r.text
        for name in (
            "band_low_hz",
            "band_high_hz",
            "nominal_rpm",
            "speed_min_rpm",
            "speed_max_rpm",
            "speed_tolerance_pct",
            "rejection_db",
            "floor",
            "bin_width_hz",
            "resolve_a",
            "resolve_b",
            "window",
            "rates_hz",
            "rate_series",
            "filters_json",
            "lines_options",
            "averages",
            "overlap_pct",
            "runup",
            "orders_of_interest",
            "n_speeds",
            "tone_list",
            "sources_json",
        ):
            assert f'name="{name}"' in r.text, name
        assert 'class="empty-result"' in r.text and 'href="/plan?demo=1"' in r.text

    def test_demo(self, plan_client: TestClient) -> None:
        r = plan_client.get("/plan?demo=1")
        assert r.status_code == 200
        assert controls_without_label(r.text) == []
        assert_strict_page(r.text)
        api = plan_client.post("/api/v1/plan", json=demo_plan_request()).json()
        rec = api["recommendation"]
        assert rec["sample_rate_hz"] == 12800.0
        assert "Sample at 12.8 kS/s" in r.text
        assert html_lib.escape(rec["filter"]["name"]) in r.text
        # The demo's sources fill the predict-style rows.
        assert 'value="first mesh 17/53"' in r.text and 'value="inverter"' in r.text
        assert "runup-figure-data" in figures_of(r.text)
        # The second rate that would confirm the plan's aliases, as the API offers it.
        assert api["confirm_rate"] is not None
        assert "data-confirm-rate" in r.text
        assert html_lib.escape(api["confirm_rate"]["sentence"]) in r.text


class TestPlanSubmit:
    def test_basic(self, plan_client: TestClient) -> None:
        req = _demo()
        r = _post(plan_client, req)
        assert r.status_code == 200 and r.headers["content-type"].startswith(HTML)
        assert_strict_page(r.text)
        api = plan_client.post("/api/v1/plan", json=req).json()
        rec = api["recommendation"]
        text = html_lib.unescape(r.text)
        assert "Sample at 12.8 kS/s" in text and rec["filter"]["name"] in text
        assert f"{rec['lines']:,}" in text
        assert CAUTION in text and 'class="caution"' in r.text
        assert len(api["rejected"]) > 5
        for rej in api["rejected"]:
            assert rej["reason"] in text
        for risk in api["residual_risk"]:
            assert risk in text
        # The run-up: one direct trace per line, named after it, and the crossings listed.
        fig = figures_of(r.text)["runup-figure-data"]
        direct = [t for t in fig["data"] if t.get("meta", {}).get("part") == "direct"]
        lines = api["runup"]["lines"]
        assert len(direct) == len(lines)
        assert [t["name"] for t in direct] == [
            html_lib.escape(f"{ln['label']} · {ln['source']}", quote=False) for ln in lines
        ]
        assert api["runup"]["crossings"]
        crossing = api["runup"]["crossings"][0]
        assert f"{crossing['rpm']:,.0f}" in text
        marks = [t for t in fig["data"] if t.get("meta", {}).get("part") == "crossing"]
        assert len(marks) == 1 and len(marks[0]["x"]) == len(api["runup"]["crossings"])

    def test_runup_against_reference(self, plan_client: TestClient) -> None:
        req = _demo()
        r = _post(plan_client, req)
        api = plan_client.post("/api/v1/plan", json=req).json()
        fs = api["runup"]["final_rate_hz"]
        fig = figures_of(r.text)["runup-figure-data"]
        j = next(i for i, ln in enumerate(api["runup"]["lines"]) if ln["label"] == "order 51")
        x, y, aliased = _line_points(fig, j)
        assert x.size >= 200 and np.all(np.diff(x) >= 0)
        true_hz = FOLDING_ORDER * x / 60.0
        # Values are sent to 0.01 Hz and 0.01 rpm: 0.005 + 51·0.005/60 Hz at most.
        np.testing.assert_allclose(y, _fold_reference(true_hz, fs), atol=0.02)
        # Drawn as an alias exactly where the true frequency is above fs/2 ...
        assert np.all(true_hz[aliased] >= fs / 2 - 0.01)
        assert np.all(true_hz[~aliased] <= fs / 2 + 0.01)
        assert aliased.any() and (~aliased).any()
        # ... and the corner at the fold is drawn: 51·n/60 = fs/2 at n = 60·fs/(2·51).
        n_fold = 60.0 * fs / (2.0 * FOLDING_ORDER)
        k = int(np.argmin(np.abs(x - n_fold)))
        assert abs(x[k] - n_fold) < 0.01 and y[k] == pytest.approx(fs / 2, abs=1e-9)
        folds = [t for t in fig["data"] if t.get("meta", {}).get("part") == "fold"]
        assert len(folds) == 1 and min(abs(v - n_fold) for v in folds[0]["x"]) < 0.01

    def test_edges(self, plan_client: TestClient) -> None:
        # No speed range: the plan is shown, the run-up is skipped with a note.
        req = {k: v for k, v in demo_plan_request().items() if k != "speed_range_rpm"}
        r = _post(plan_client, req, runup="1")
        assert r.status_code == 200
        assert "No run-up: it needs a speed range" in r.text
        assert "runup-figure-data" not in figures_of(r.text)
        # A list of rates replaces the series.
        r = _post(plan_client, _demo(), rates_hz="25600, 51200")
        assert r.status_code == 200 and "Sample at 25.6 kS/s" in r.text

    def test_impossible(self, plan_client: TestClient) -> None:
        req = _demo(rates_hz=[12800.0], rejection_db=200.0)
        r = _post(plan_client, req)
        assert r.status_code == 422 and r.headers["content-type"].startswith(HTML)
        body = plan_client.post("/api/v1/plan", json=req).json()
        assert body["suggestions"]
        m = re.search(r'<div class="notes plan-suggestions".*?</div>', r.text, re.S)
        assert m
        items = [html_lib.unescape(s) for s in re.findall(r"<li>(.*?)</li>", m.group(0))]
        assert items == body["suggestions"]
        assert "no listed option reaches 200 dB rejection" in _summary(r.text)
        assert "rejection_db" in _invalid_ids(r.text)
        assert 'class="empty-result"' in r.text  # no result beside the errors

    def test_errors(self, plan_client: TestClient) -> None:
        req = _demo(floor=0.001)  # both rejection_db and floor
        r = _post(
            plan_client,
            req,
            band_high_hz="",
            **{"gear_mesh-0-teeth": "many"},
            filters_json="[{",
            orders_of_interest="1\nno such tone",
        )
        assert r.status_code == 422
        assert {"band_high_hz", "filters_json"} <= _invalid_ids(r.text)
        summary = _summary(r.text)
        assert "give both ends of the band" in summary and "not valid JSON" in summary
        # Once those are fixed, the request's own checks name their fields.
        r = _post(plan_client, req, **{"gear_mesh-0-teeth": "many"})
        assert r.status_code == 422
        assert {"gear_mesh-0-teeth", "floor"} <= _invalid_ids(r.text)
        assert "Gear mesh, row 1: Teeth" in _summary(r.text)
        # A label the run-up cannot find is a problem of the lines-of-interest field.
        r = _post(plan_client, _demo(), orders_of_interest="no such tone")
        assert r.status_code == 422 and "orders_of_interest" in _invalid_ids(r.text)
        assert "matches no tone label" in _summary(r.text)
        # No band at all; nothing to plan.
        r = plan_client.post("/plan", data={"rejection_db": "60"})
        assert r.status_code == 422
        assert "give the band of interest" in _summary(r.text)
        assert "give at least one tone" in _summary(r.text)

    def test_escaping(self, plan_client: TestClient) -> None:
        evil = "<script>alert(1)</script>"
        req = {
            "band_hz": [0.0, 2000.0],
            "tones": [
                {"label": evil, "freq_hz": 9000.0, "amplitude": 0.5},
                {"label": "mesh", "freq_hz": 1700.0, "amplitude": 0.8},
            ],
            "rejection_db": 60.0,
            "speed_tolerance_pct": 5.0,
        }
        r = _post(plan_client, req, runup="1")
        assert r.status_code == 200
        assert evil not in r.text and "<script>alert" not in r.text
        assert html_lib.escape(evil) in r.text
        fig = figures_of(r.text)["runup-figure-data"]
        names = [t["name"] for t in fig["data"] if t.get("meta", {}).get("part") == "direct"]
        assert any("&lt;script&gt;" in n for n in names)
        assert not any("<script" in json.dumps(t) for t in fig["data"])
        # Tones without a speed: the run-up is drawn against the speed factor.
        assert fig["layout"]["xaxis"]["title"]["text"] == "speed, × nominal"


class TestShare:
    def test_basic(self, plan_client: TestClient) -> None:
        r = _post(plan_client, _demo())
        m = re.search(r'action="/plan/share".*?name="request" value="([^"]+)"', r.text, re.S)
        assert m
        r = plan_client.post(
            "/plan/share", data={"request": html_lib.unescape(m.group(1)), "title": "Bench"}
        )
        assert r.status_code == 200
        path = re.search(r'class="share-url" href="(/d/[A-Za-z0-9_-]{32})"', r.text)
        assert path and 'id="delete-token"' in r.text
        saved = plan_client.get("/api/v1/diagnoses/" + path.group(1)[3:]).json()
        assert saved["kind"] == "plan" and saved["title"] == "Bench"
        # The saved page's partial, drawn from the stored record alone.
        ctx = plan_result_context(saved["request"], saved["result"])
        assert ctx["share_request"] == ""
        part = templates.env.get_template("_plan_result.html").render(result=ctx)
        assert "Sample at 12.8 kS/s" in part and 'action="/plan/share"' not in part
        assert saved["result"]["rejected"][0]["reason"] in html_lib.unescape(part)

    def test_errors(self, plan_client: TestClient) -> None:
        r = plan_client.post("/plan/share", data={"request": '{"band_hz": [5, 1]}'})
        assert r.status_code == 422 and "the saved request is not valid" in r.text


class TestRunupFigure:
    def test_edges(self) -> None:
        with pytest.raises(ValueError, match="no run-up"):
            runup_figure({"runup": None})
        lines = [
            {
                "label": f"t{i}",
                "source": "s",
                "interest": i == 7,
                "apparent_hz": [100.0 * i, 100.0 * i],
                "zone": [1, 1],
                "fold_lines": [],
            }
            for i in range(10)
        ]
        plan = {
            "runup": {
                "speed_factor": [0.5, 1.0],
                "rpm": None,
                "final_rate_hz": 4000.0,
                "band_hz": [0.0, 1500.0],
                "lines": lines,
                "crossings": [],
            }
        }
        fig = runup_figure(plan, max_lines=3)
        direct = [t for t in fig["data"] if t.get("meta", {}).get("part") == "direct"]
        assert [t["meta"]["line"] for t in direct] == [0, 1, 7]  # the line of interest kept
        assert fig["layout"]["meta"] == {"lines_drawn": 3, "lines_total": 10}
        assert fig["layout"]["yaxis"]["range"][1] == pytest.approx(2000.0 * 1.04)


def test_saved_plan_page(plan_client: TestClient) -> None:
    """A plan saved through the API opens by link with the same recommendation."""
    r = plan_client.post("/api/v1/diagnoses", json={"kind": "plan", "request": _demo()})
    assert r.status_code == 201, r.text
    saved = r.json()
    rate = saved["result"]["recommendation"]["sample_rate_hz"]
    page = plan_client.get(saved["url"])
    assert page.status_code == 200
    text = html_lib.unescape(page.text)
    assert CAUTION[:40] in text
    # Reference: the stored result's own recommendation, shown in kS/s on the page.
    assert f"{rate / 1000:g} kS/s" in text
