"""Numbers are bounded by what the physics and the machine can honour, and cross-field
rules are written into the published schema, where clients and fuzzers can see them."""

from __future__ import annotations

from typing import Any

import pytest
from fastapi.testclient import TestClient

from service.demo import demo_fold_request, demo_plan_request

PROBLEM = "application/problem+json"


def _schema(client: TestClient, name: str) -> dict[str, Any]:
    schema: dict[str, Any] = client.get("/openapi.json").json()["components"]["schemas"][name]
    return schema


class TestBounds:
    def test_basic(self, client: TestClient) -> None:
        # The schema-fuzzing find: a 1e-10 S/s rate is refused by the model, naming the
        # field and the limit in plain numbers, before any computation.
        body = {"sample_rate_hz": 1e-10, "tones": [{"label": "a", "freq_hz": 1e10}]}
        r = client.post("/api/v1/fold", json=body)
        assert r.status_code == 422 and r.headers["content-type"] == PROBLEM
        err = r.json()["errors"][0]
        assert err["field"] == "sample_rate_hz" and err["limit"] == "ge 1"

    def test_edges(self, client: TestClient) -> None:
        # The slowest and fastest rates and the highest tone still compute; the Nyquist
        # zone of 1e10 Hz at 1 S/s is 2e10 (f / (fs/2)), well inside an int64.
        for fs, f in ((1.0, 1e10), (1e10, 1e10)):
            body = {"sample_rate_hz": fs, "tones": [{"label": "a", "freq_hz": f}]}
            r = client.post("/api/v1/fold", json=body)
            assert r.status_code == 200, r.text
            # Reference: fold(f, fs) = |f - fs*round(f/fs)| by hand: both are whole
            # multiples of fs, so each lands at 0 Hz.
            assert r.json()["tones"][0]["apparent_hz"] == pytest.approx(0.0, abs=1e-6)

    def test_errors(self, client: TestClient) -> None:
        # A measured value beyond 1e12 (any unit) is refused by the model, not left to
        # overflow in the spectrum's sums of squares.
        body = {
            "sample_rate_hz": 1000.0,
            "time_record": {"samples": [1.7e308] + [0.0] * 63},
        }
        r = client.post("/api/v1/diagnose", json=body)
        assert r.status_code == 422
        assert r.json()["errors"][0]["field"] == "time_record.samples[0]"


class TestMessages:
    def test_basic(self, client: TestClient) -> None:
        # A 0 among the orders of interest is an order out of range, not "not a string".
        body = {**demo_plan_request(), "runup": {"orders_of_interest": [0]}}
        r = client.post("/api/v1/plan", json=body)
        assert r.status_code == 422
        errors = r.json()["errors"]
        assert errors == [
            {
                "field": "runup.orders_of_interest[0]",
                "message": "Input should be greater than 0",
                "value": 0,
                "limit": "gt 0",
            }
        ]

    def test_edges(self, client: TestClient) -> None:
        # Text is still a tone label: an empty one is reported as text too short.
        body = {**demo_plan_request(), "runup": {"orders_of_interest": [""]}}
        r = client.post("/api/v1/plan", json=body)
        assert r.status_code == 422
        assert "at least 1 character" in r.json()["errors"][0]["message"]


class TestSchemaRules:
    """Each cross-field rule is in the published schema and the server holds to it."""

    @pytest.mark.parametrize(
        ("model", "rule", "path", "body"),
        [
            (
                "FoldIn",
                {"oneOf": [{"required": ["sample_rate_hz"]}, {"required": ["chain"]}]},
                "/api/v1/fold",
                {"tones": [{"label": "a", "freq_hz": 1.0}]},
            ),
            (
                "FoldIn",
                {"anyOf": [{"required": ["tones"]}, {"required": ["sources"]}]},
                "/api/v1/fold",
                {"sample_rate_hz": 100.0},
            ),
            (
                "DiagnoseIn",
                {"oneOf": [{"required": ["spectrum"]}, {"required": ["time_record"]}]},
                "/api/v1/diagnose",
                {"sample_rate_hz": 100.0},
            ),
            (
                "DiagnoseIn",
                {
                    "if": {
                        "required": ["time_record"],
                        "properties": {"time_record": {"not": {"required": ["sample_rate_hz"]}}},
                    },
                    "then": {"anyOf": [{"required": ["sample_rate_hz"]}, {"required": ["chain"]}]},
                },
                "/api/v1/diagnose",
                {"time_record": {"samples": [float(i % 7) for i in range(256)]}},
            ),
            (
                "DiagnoseIn",
                {
                    "if": {"required": ["spectrum"]},
                    "then": {"anyOf": [{"required": ["sample_rate_hz"]}, {"required": ["chain"]}]},
                },
                "/api/v1/diagnose",
                {"spectrum": {"freq_hz": list(range(16)), "amplitude": [1.0] * 15 + [2.0]}},
            ),
            (
                "PlanIn",
                {"oneOf": [{"required": ["rejection_db"]}, {"required": ["floor"]}]},
                "/api/v1/plan",
                {**demo_plan_request(), "floor": 0.001},
            ),
        ],
    )
    def test_basic(
        self, client: TestClient, model: str, rule: dict[str, Any], path: str, body: Any
    ) -> None:
        assert rule in _schema(client, model)["allOf"]
        assert client.post(path, json=body).status_code == 422

    def test_edges(self, client: TestClient) -> None:
        deps = _schema(client, "FoldIn")["dependentRequired"]
        assert deps == {"anti_alias": ["sample_rate_hz"]}
        chain = [{"stage": "sample", "rate_hz": 100.0}]
        body = {**demo_fold_request(), "chain": chain}
        body.pop("sample_rate_hz")
        assert client.post("/api/v1/fold", json=body).status_code == 422  # anti_alias left

    def test_errors(self, client: TestClient) -> None:
        assert _schema(client, "PlanIn")["dependentRequired"] == {
            "speed_range_rpm": ["nominal_rpm"]
        }
        body = {**demo_plan_request()}
        body.pop("nominal_rpm")
        assert client.post("/api/v1/plan", json=body).status_code == 422


class TestOptionalMembers:
    def test_basic(self, client: TestClient) -> None:
        # Optional request members are published as "leave it out", so the required-based
        # rules above mean what they say ...
        prop = _schema(client, "FoldIn")["properties"]["sample_rate_hz"]
        assert "anyOf" not in prop and prop["type"] == "number" and prop["minimum"] == 1
        assert prop["description"] == "Shorthand: the sample rate, Hz"
        # ... and the server still reads a null as absent.
        body = {"sample_rate_hz": 100.0, "chain": None, "tones": [{"label": "a", "freq_hz": 70.0}]}
        r = client.post("/api/v1/fold", json=body)
        assert r.status_code == 200, r.text
        # Reference: fold(70, 100) = |70 - 100*round(0.7)| = 30 Hz, by hand.
        assert r.json()["tones"][0]["apparent_hz"] == pytest.approx(30.0)

    def test_edges(self, client: TestClient) -> None:
        # Result models keep their nulls: an answer may carry them.
        prop = _schema(client, "FoldToneOut")["properties"]["family"]
        assert {"type": "null"} in prop["anyOf"]

    def test_errors(self, client: TestClient) -> None:
        rules = _schema(client, "ShaftIn")["allOf"]
        speeds = {"oneOf": [{"required": [n]} for n in ("speed_hz", "speed_rpm", "speed_cpm")]}
        assert speeds in rules
        src = {"type": "shaft", "label": "m", "speed_hz": 10.0, "speed_rpm": 600.0}
        r = client.post("/api/v1/fold", json={"sample_rate_hz": 100.0, "sources": [src]})
        assert r.status_code == 422


class TestFuzzFinds:
    """Bodies schema fuzzing found to reach a crash in the core, now refused by the model."""

    def test_basic(self, client: TestClient) -> None:
        # A 5e-324 dB ripple made scipy's Chebyshev prototype divide by zero.
        aa = {"family": "chebyshev1", "order": 1, "cutoff_hz": 1000.0, "ripple_db": 5e-324}
        body = {
            "sample_rate_hz": 10_000.0,
            "anti_alias": aa,
            "tones": [{"label": "a", "freq_hz": 1.0}],
        }
        r = client.post("/api/v1/fold", json=body)
        assert r.status_code == 422
        assert r.json()["errors"][0]["field"] == "anti_alias.ripple_db"

    def test_edges(self, client: TestClient) -> None:
        # The smallest ripple and speed allowed still compute.
        aa = {"family": "chebyshev1", "order": 4, "cutoff_hz": 1000.0, "ripple_db": 0.001}
        src = {"type": "shaft", "label": "kiln", "speed_rpm": 0.001, "orders": [1]}
        body = {"sample_rate_hz": 10_000.0, "anti_alias": aa, "sources": [src]}
        r = client.post("/api/v1/fold", json=body)
        assert r.status_code == 200, r.text
        # Reference: 0.001 rpm is 0.001/60 Hz, far below Nyquist: it stays where it is.
        assert r.json()["tones"][0]["apparent_hz"] == pytest.approx(0.001 / 60)

    def test_errors(self, client: TestClient) -> None:
        # A shaft turning at 7.9e-230 cpm sent the zone computation a NaN.
        src = {
            "type": "bearing",
            "label": "b",
            "speed_cpm": 7.9e-230,
            "n_elements": 3,
            "element_diameter": 1.0,
            "pitch_diameter": 5.0,
        }
        r = client.post("/api/v1/fold", json={"sample_rate_hz": 1e9, "sources": [src]})
        assert r.status_code == 422
        assert r.json()["errors"][0]["field"] == "sources[0].bearing.speed_cpm"


class TestTinyResolution:
    """A required bin width at the bottom of the float range is refused, not a 500."""

    def test_basic(self, client: TestClient) -> None:
        # Found by schema fuzzing: bin_width_hz=5e-324 overflowed log2(fs / bin) to inf.
        body = {
            "band_hz": [0.0, 100.0],
            "tones": [{"label": "a", "freq_hz": 50.0, "amplitude": 1.0}],
            "rejection_db": 60.0,
            "bin_width_hz": 5e-324,
        }
        r = client.post("/api/v1/plan", json=body)
        assert r.status_code == 422, r.text
        # Common practice: a bin of fs/(2.56 N) Hz; no N up to 2^20 reaches 5e-324 Hz.
        assert "relax the resolution" in r.text
        assert "offer more analysis lines" not in r.text


class TestExtremeCoefficients:
    """Digital coefficients 1e308 apart are refused as unstable, not a 500."""

    def test_basic(self, client: TestClient) -> None:
        # Found by schema fuzzing: np.roots overflowed on a = [0.94, ..., -1.8e308, ...].
        # Reference: numpy.roots builds the companion matrix from -a[1:] / a[0]; a
        # division that overflows gives no finite pole radius.
        chain = [
            {"stage": "sample", "rate_hz": 1000.0},
            {"stage": "digital_lowpass", "b": [1.0], "a": [0.9435, -1.7976931348623155e308, 1.0]},
        ]
        r = client.post(
            "/api/v1/fold", json={"chain": chain, "tones": [{"label": "a", "freq_hz": 1.0}]}
        )
        assert r.status_code == 422, r.text
        assert "stable" in r.text
