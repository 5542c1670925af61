"""POST /api/v1/fold through the real application."""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest
from fastapi.testclient import TestClient
from scipy import signal

from service.demo import demo_fold_request

PROBLEM = "application/problem+json"


def _fold(client: TestClient, body: Any) -> Any:
    return client.post("/api/v1/fold", json=body)


class TestFoldEndpoint:
    def test_basic(self, client: TestClient) -> None:
        body = {
            "sample_rate_hz": 10_000,
            "tones": [
                {"label": "a", "freq_hz": 7300, "amplitude": 1.0},
                {"label": "b", "freq_hz": 13200},
                {"label": "c", "freq_hz": 1000},
            ],
        }
        r = _fold(client, body)
        assert r.status_code == 200, r.text
        out = r.json()
        assert out["nyquist_hz"] == 5000
        a, b, c = out["tones"]
        # Source: Oppenheim & Schafer, DTSP, sec. 4.2 (fold) and Lyons, Understanding DSP,
        # sec. 2.3 (zones): 7.3 kHz → 2.7 kHz (zone 2, inverted); 13.2 kHz → 3.2 kHz (zone 3).
        assert (a["apparent_hz"], a["zone"], a["inverted"], a["aliased"]) == (2700, 2, True, True)
        assert (b["apparent_hz"], b["zone"], b["inverted"]) == (3200, 3, False)
        assert (c["apparent_hz"], c["aliased"]) == (1000, False)
        # Common practice: the default band of interest is DC to fs/2.56.
        assert out["band_hz"] == [0, pytest.approx(10_000 / 2.56)]
        assert c["in_band"] and a["in_band"] and b["in_band"]
        assert b["amplitude"] is None and b["apparent_amplitude"] is None
        for key in (
            "label",
            "source",
            "freq_hz",
            "apparent_hz",
            "zone",
            "inverted",
            "attenuation_db",
            "aliased",
            "in_band",
        ):
            assert key in a
        assert isinstance(out["collisions"], list)

    def test_anti_alias_attenuation(self, client: TestClient) -> None:
        body = {
            "sample_rate_hz": 12_800,
            "anti_alias": {"family": "butterworth", "order": 4, "cutoff_hz": 2500},
            "tones": [{"label": "x", "freq_hz": 5000, "amplitude": 2.0}],
        }
        t = _fold(client, body).json()["tones"][0]
        # Source: Butterworth |H|² = 1/(1+(f/fc)^(2N)); N=4 at 2·fc → 24.10 dB (Butterworth, 1930).
        assert t["attenuation_db"] == pytest.approx(24.10, abs=0.01)
        assert t["apparent_amplitude"] == pytest.approx(2.0 * 10 ** (-24.10 / 20), rel=1e-3)

    def test_chain_with_decimation(self, client: TestClient) -> None:
        body = {
            "chain": [
                {"stage": "sample", "rate_hz": 12_800},
                {"stage": "decimate", "factor": 2, "filter": "none"},
            ],
            "tones": [{"label": "mesh", "freq_hz": 4000}],
        }
        out = _fold(client, body).json()
        t = out["tones"][0]
        assert out["final_rate_hz"] == 6400
        # Reference: an unfiltered slice folds at the new rate: |4000 − 6400| = 2400 Hz.
        assert t["apparent_hz"] == pytest.approx(2400)
        assert t["aliased"] and t["attenuation_db"] == pytest.approx(0, abs=1e-9)
        assert any("filter" in n for n in out["notes"])

    def test_sources_and_collisions(self, client: TestClient) -> None:
        r = _fold(client, demo_fold_request())
        assert r.status_code == 200, r.text
        out = r.json()
        carrier = [t for t in out["tones"] if t["kind"] == "pwm" and t["freq_hz"] == 10_000]
        assert len(carrier) == 1
        # Reference: fold(10 kHz, 12.8 kS/s) = 2.8 kHz, zone 2 (|10000 − 12800|).
        assert carrier[0]["apparent_hz"] == pytest.approx(2800)
        assert carrier[0]["zone"] == 2 and carrier[0]["inverted"]
        # Reference: scipy.signal.butter(2, 2π·5 kHz, analog) evaluated with freqs at 10 kHz.
        b, a = signal.butter(2, 2 * np.pi * 5000, analog=True)
        _, h = signal.freqs(b, a, worN=[2 * np.pi * 10_000])
        assert carrier[0]["attenuation_db"] == pytest.approx(-20 * np.log10(abs(h[0])), abs=1e-3)
        for c in out["collisions"]:
            assert c["separation_bins"] <= 3.0 + 1e-9
            assert out["tones"][c["alias_index"]]["aliased"]

    def test_speed_tolerance_interval(self, client: TestClient) -> None:
        body = {
            "sample_rate_hz": 1000,
            "sources": [{"type": "shaft", "label": "s", "speed_hz": 600, "orders": [1]}],
            "speed_tolerance_pct": 10,
        }
        t = _fold(client, body).json()["tones"][0]
        # Reference: brute-force fold of 540..660 Hz at 1 kS/s gives 340..460 Hz.
        grid = np.linspace(540, 660, 2001)
        folded = np.abs(grid - 1000 * np.rint(grid / 1000))
        assert t["apparent_low_hz"] == pytest.approx(folded.min())
        assert t["apparent_high_hz"] == pytest.approx(folded.max())


class TestFoldErrors:
    @pytest.mark.parametrize(
        ("body", "field"),
        [
            ({"sample_rate_hz": 0, "tones": [{"label": "a", "freq_hz": 1}]}, "sample_rate_hz"),
            ({"sample_rate_hz": -5, "tones": [{"label": "a", "freq_hz": 1}]}, "sample_rate_hz"),
            ({"sample_rate_hz": 1000, "tones": []}, "tones"),
            (
                {"sample_rate_hz": 1000, "tones": [{"label": "a", "freq_hz": -1}]},
                "tones[0].freq_hz",
            ),
            (
                {
                    "sample_rate_hz": 1000,
                    "anti_alias": {"family": "butterworth", "order": 0, "cutoff_hz": 100},
                    "tones": [{"label": "a", "freq_hz": 1}],
                },
                "anti_alias.order",
            ),
            (
                {
                    "sample_rate_hz": 1000,
                    "anti_alias": {"family": "butterworth", "order": 21, "cutoff_hz": 100},
                    "tones": [{"label": "a", "freq_hz": 1}],
                },
                "anti_alias.order",
            ),
            (
                {"sample_rate_hz": 1000, "sources": [{"type": "warp_drive", "label": "x"}]},
                "sources[0]",
            ),
            ({"sample_rate_hz": 1000}, "body"),
        ],
    )
    def test_invalid_fields(self, client: TestClient, body: dict[str, Any], field: str) -> None:
        r = _fold(client, body)
        assert r.status_code == 422, r.text
        assert r.headers["content-type"] == PROBLEM
        p = r.json()
        assert p["status"] == 422 and p["title"] and p["detail"]
        assert any(e["field"].startswith(field) for e in p["errors"]), p

    def test_order_limit_named(self, client: TestClient) -> None:
        body = {
            "sample_rate_hz": 1000,
            "anti_alias": {"family": "bessel", "order": 25, "cutoff_hz": 100},
            "tones": [{"label": "a", "freq_hz": 1}],
        }
        e = _fold(client, body).json()["errors"][0]
        assert e["field"] == "anti_alias.order" and e["value"] == 25 and "20" in e["limit"]

    @pytest.mark.parametrize("literal", ["NaN", "Infinity", "-Infinity"])
    def test_non_finite(self, client: TestClient, literal: str) -> None:
        raw = '{"sample_rate_hz": LIT, "tones": [{"label": "a", "freq_hz": 1}]}'.replace(
            "LIT", literal
        )
        r = client.post("/api/v1/fold", content=raw, headers={"content-type": "application/json"})
        assert r.status_code == 422
        assert r.headers["content-type"] == PROBLEM
        assert r.json()["errors"][0]["field"] == "sample_rate_hz"

    def test_non_finite_tone(self, client: TestClient) -> None:
        raw = '{"sample_rate_hz": 100, "tones": [{"label": "a", "freq_hz": NaN}]}'
        r = client.post("/api/v1/fold", content=raw, headers={"content-type": "application/json"})
        assert r.status_code == 422
        assert r.json()["errors"][0]["field"] == "tones[0].freq_hz"

    def test_malformed_json(self, client: TestClient) -> None:
        r = client.post(
            "/api/v1/fold",
            content='{"sample_rate_hz": 10,',
            headers={"content-type": "application/json"},
        )
        assert r.status_code == 400
        assert r.headers["content-type"] == PROBLEM
        assert "malformed JSON" in r.json()["detail"]

    def test_too_many_tones(self, client: TestClient) -> None:
        # The fixture configures max_tones=5000.
        tones = [{"label": f"t{i}", "freq_hz": float(i)} for i in range(5001)]
        r = _fold(client, {"sample_rate_hz": 1000, "tones": tones})
        assert r.status_code == 422
        p = r.json()
        assert p["errors"][0]["field"] == "tones" and p["errors"][0]["limit"] == 5000

    def test_sources_expand_past_limit(self, client: TestClient) -> None:
        src = {"type": "tones", "label": "many", "freq_hz": [float(i) for i in range(1, 3001)]}
        r = _fold(client, {"sample_rate_hz": 1000, "sources": [src, {**src, "label": "more"}]})
        assert r.status_code == 422
        assert "5000" in r.json()["detail"]

    def test_chain_order_error(self, client: TestClient) -> None:
        body = {
            "chain": [{"stage": "decimate", "factor": 2}, {"stage": "sample", "rate_hz": 100}],
            "tones": [{"label": "a", "freq_hz": 1}],
        }
        r = _fold(client, body)
        assert r.status_code == 422
        p = r.json()
        # The first stage (a decimation with nothing sampled yet) is the one to move.
        assert p["errors"][0]["field"] == "chain[0]" and "decimat" in p["detail"].lower()

    def test_unknown_field(self, client: TestClient) -> None:
        r = _fold(
            client,
            {"sample_rate_hz": 100, "tones": [{"label": "a", "freq_hz": 1}], "samplerate": 5},
        )
        assert r.status_code == 422 and r.json()["errors"][0]["field"] == "samplerate"

    def test_wrong_method_and_path(self, client: TestClient) -> None:
        r = client.get("/api/v1/fold")
        assert r.status_code == 405 and r.headers["content-type"] == PROBLEM
        r = client.get("/api/v1/nothing-here")
        assert r.status_code == 404 and r.headers["content-type"] == PROBLEM


class TestHealth:
    def test_basic(self, client: TestClient) -> None:
        assert client.get("/healthz").json() == {"status": "ok"}
        r = client.get("/readyz")
        assert r.status_code == 200 and r.json()["status"] == "ready"

    def test_openapi_examples(self, client: TestClient) -> None:
        spec = client.get("/openapi.json").json()
        op = spec["paths"]["/api/v1/fold"]["post"]
        examples = op["requestBody"]["content"]["application/json"]["examples"]
        assert "drive_unit" in examples
        resp = op["responses"]["200"]["content"]["application/json"]
        assert "example" in resp and resp["example"]["tones"]
        # Every operation that answers with a JSON body documents a worked example.
        for path, ops in spec["paths"].items():
            for method, operation in ops.items():
                for code, r in operation["responses"].items():
                    body = r.get("content", {}).get("application/json")
                    if code.startswith("2") and body is not None:
                        assert "example" in body or "examples" in body, (method, path)


class TestFoldBody:
    def test_repeat_is_served_from_cache(self, client: TestClient) -> None:
        body = {"sample_rate_hz": 1000, "tones": [{"label": "a", "freq_hz": 700}]}
        first = _fold(client, body)
        second = _fold(client, body)
        assert first.headers["x-foldwise-cache"] == "miss"
        assert second.headers["x-foldwise-cache"] == "hit"
        assert first.content == second.content
        # A different request is computed afresh.
        body["tones"][0]["freq_hz"] = 800
        third = _fold(client, body)
        assert third.headers["x-foldwise-cache"] == "miss"
        assert third.json()["tones"][0]["apparent_hz"] == 200

    def test_errors_are_not_cached(self, client: TestClient) -> None:
        body = {"sample_rate_hz": -1, "tones": [{"label": "a", "freq_hz": 700}]}
        assert _fold(client, body).status_code == 422
        assert _fold(client, body).status_code == 422

    def test_wrong_content_type(self, client: TestClient) -> None:
        r = client.post(
            "/api/v1/fold", content="sample_rate_hz=5", headers={"content-type": "text/plain"}
        )
        assert r.status_code == 415 and r.headers["content-type"] == PROBLEM
        assert r.json()["errors"][0]["field"] == "content-type"

    def test_empty_body(self, client: TestClient) -> None:
        r = client.post("/api/v1/fold", content=b"", headers={"content-type": "application/json"})
        assert r.status_code == 400 and r.headers["content-type"] == PROBLEM

    def test_body_too_large(self, client: TestClient, settings: object) -> None:
        limit = client.app.state.settings.max_body_bytes  # type: ignore[attr-defined]
        big = b'{"sample_rate_hz": 1000, "tones": [' + b" " * (limit + 10) + b"]}"
        r = client.post("/api/v1/fold", content=big, headers={"content-type": "application/json"})
        assert r.status_code == 413 and r.headers["content-type"] == PROBLEM
        assert r.json()["errors"][0]["limit"] == limit
