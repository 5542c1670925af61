"""The run-up page through the real application: form, demo, upload, errors, saved redraw."""

from __future__ import annotations

import numpy as np
from fastapi.testclient import TestClient

from service.contract.caution import CAUTION
from service.core.runup_sim import simulate_run_up
from tests.api.test_runup import _wav

from .conftest import assert_strict_page, controls_without_label, figures_of

HTML = "text/html"
FS = 12_800.0


def _map_trace(fig: dict, label: str) -> dict:
    return next(
        t for t in fig["data"] if t["type"] == "scatter" and label in t.get("hovertemplate", "")
    )


class TestForm:
    def test_basic(self, page_client: TestClient) -> None:
        r = page_client.get("/run-up")
        assert r.status_code == 200 and r.headers["content-type"].startswith(HTML)
        assert_strict_page(r.text)
        assert controls_without_label(r.text) == []
        assert CAUTION in r.text
        assert 'href="/run-up"' in page_client.get("/").text  # linked from the home page

    def test_errors(self, page_client: TestClient) -> None:
        r = page_client.post("/run-up", data={"vibration_channel": "0"}, files={"x": ("", b"")})
        assert r.status_code == 422 and "Choose a file" in r.text
        rec = simulate_run_up(duration_s=3.0, seed=5)
        data = _wav([rec.vibration / 4.0], int(FS))  # one channel: no tacho to read
        r = page_client.post(
            "/run-up",
            data={"vibration_channel": "0", "tacho_channel": "1"},
            files={"file": ("one.wav", data)},
        )
        assert r.status_code == 422
        assert "upload.tacho_channel" in r.text and "Choose a channel from 0 to 0" in r.text


class TestDemo:
    def test_figures(self, page_client: TestClient) -> None:
        r = page_client.get("/run-up?demo=1")
        assert r.status_code == 200
        assert_strict_page(r.text)
        figs = figures_of(r.text)
        fmap = figs["runup-map-data"]
        assert fmap["data"][0]["type"] == "heatmap"
        # The chain's predicted line of the first mesh's 3rd harmonic (order 51): at
        # 12,000 rpm its true frequency is 10,200 Hz, which folds to |10,200 - 12,800| =
        # 2,600 Hz at 12.8 kS/s (fold formula by hand).
        pred = _map_trace(fmap, "GMF 3× (predicted)")
        i = int(np.argmin(np.abs(np.array(pred["x"]) - 12_000.0)))
        rpm = pred["x"][i]
        assert abs(rpm - 12_000.0) < 200.0
        # Speeds are published to 0.1 rpm: 51/60 × 0.05 rpm is 0.043 Hz at most.
        assert abs(pred["y"][i] - abs(51 * rpm / 60 - 12_800.0)) < 0.05
        # The order spectrum shades where order 51 shows when folded: fold(51·r)/r, which
        # at 12,000 rpm (r = 200 Hz) is 2,600 / 200 = 13 (by hand).
        shapes = figs["runup-orders-data"]["layout"]["shapes"]
        assert any(s["x0"] <= 13.0 + 0.01 and s["x1"] >= 13.0 - 0.01 for s in shapes)
        assert "folded back from above Nyquist" in r.text

    def test_save_demo_and_redraw(self, page_client: TestClient) -> None:
        r = page_client.post("/run-up/demo/share")
        assert r.status_code == 200
        path = r.text.split('class="share-url" href="', 1)[1].split('"', 1)[0]
        rid = path.rsplit("/", 1)[1]
        saved = page_client.get(f"/api/v1/diagnoses/{rid}").json()
        page = page_client.get(path)
        assert page.status_code == 200
        assert_strict_page(page.text)
        fig = figures_of(page.text)["runup-map-data"]
        # Redrawn from the stored display payload: the heatmap is the stored map.
        stored = saved["result"]["display"]["map"]
        assert fig["data"][0]["x"] == stored["rpm"]
        assert len(fig["data"][0]["y"]) == len(stored["freq_hz"])


class TestUpload:
    def test_two_channel_wav(self, page_client: TestClient) -> None:
        rec = simulate_run_up(duration_s=4.0, seed=6)
        data = _wav([rec.vibration / 4.0, rec.tacho / 8.0], int(FS))
        r = page_client.post(
            "/run-up",
            data={"vibration_channel": "0", "tacho_channel": "1", "pulses_per_rev": "1"},
            files={"file": ("bench.wav", data)},
        )
        assert r.status_code == 200, r.text[-2000:]
        assert "folded order" in r.text and "runup-map" in r.text
