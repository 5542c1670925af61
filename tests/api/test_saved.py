"""Saved results through the real app, on real SQLite and the real PostgreSQL."""

from __future__ import annotations

import re
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pytest
from fastapi.testclient import TestClient

from service import COMPUTATION_VERSION
from service.app import create_app
from service.config import Settings
from service.demo import demo_fold_request

PROBLEM = "application/problem+json"


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def saving_client(request: pytest.FixtureRequest, tmp_path: Path) -> Iterator[TestClient]:
    url = "" if request.param == "sqlite" else request.getfixturevalue("pg_schema_url")
    settings = Settings(data_dir=tmp_path / "data", database_url=url)
    with TestClient(create_app(settings)) as c:
        yield c


class TestSaveReadDelete:
    def test_basic(self, saving_client: TestClient) -> None:
        c = saving_client
        r = c.post(
            "/api/v1/diagnoses",
            json={"kind": "fold", "request": demo_fold_request(), "title": "bench"},
        )
        assert r.status_code == 201, r.text
        saved = r.json()
        assert r.headers["location"] == f"/api/v1/diagnoses/{saved['id']}"
        # ≥ 128 random bits: 22+ url-safe base64 characters.
        assert re.fullmatch(r"[A-Za-z0-9_-]{22,}", saved["id"])
        got = c.get(saved["api_url"]).json()
        assert got["result"] == saved["result"]
        assert got["computation_version"] == COMPUTATION_VERSION
        assert got["title"] == "bench" and got["kind"] == "fold"
        assert got["request"]["sample_rate_hz"] == 12_800
        # The direct computation gives the same verdicts as the saved one.
        direct = c.post("/api/v1/fold", json=demo_fold_request()).json()
        assert [t["apparent_hz"] for t in direct["tones"]] == [
            t["apparent_hz"] for t in got["result"]["tones"]
        ]

        r = c.delete(saved["api_url"], headers={"X-Delete-Token": "wrong" + saved["delete_token"]})
        assert r.status_code == 403 and r.headers["content-type"] == PROBLEM
        assert c.get(saved["api_url"]).status_code == 200
        r = c.delete(saved["api_url"], headers={"X-Delete-Token": saved["delete_token"]})
        assert r.status_code == 204
        r = c.get(saved["api_url"])
        assert r.status_code == 404 and r.headers["content-type"] == PROBLEM

    def test_ids_differ_and_no_listing(self, saving_client: TestClient) -> None:
        c = saving_client
        body = {
            "kind": "fold",
            "request": {"sample_rate_hz": 100, "tones": [{"label": "a", "freq_hz": 70}]},
        }
        ids = {c.post("/api/v1/diagnoses", json=body).json()["id"] for _ in range(3)}
        assert len(ids) == 3
        assert c.get("/api/v1/diagnoses").status_code in (404, 405)

    def test_errors(self, saving_client: TestClient) -> None:
        c = saving_client
        r = c.post("/api/v1/diagnoses", json={"kind": "fold", "request": {"sample_rate_hz": -1}})
        assert r.status_code == 422 and r.headers["content-type"] == PROBLEM
        fields = [e["field"] for e in r.json()["errors"]]
        assert "request.sample_rate_hz" in fields
        r = c.post("/api/v1/diagnoses", json={"kind": "nonsense", "request": {}})
        assert r.status_code == 422
        assert c.get("/api/v1/diagnoses/not-an-id").status_code == 404
        r = c.delete("/api/v1/diagnoses/" + "A" * 32)
        assert r.status_code == 422  # the token header is required


def test_survives_restart(tmp_path: Path) -> None:
    settings = Settings(data_dir=tmp_path / "data")
    with TestClient(create_app(settings)) as c:
        saved = c.post(
            "/api/v1/diagnoses", json={"kind": "fold", "request": demo_fold_request()}
        ).json()
    with TestClient(create_app(settings)) as c:
        got = c.get(saved["api_url"]).json()
    assert got["result"] == saved["result"]


def test_unreachable_database_is_503(tmp_path: Path) -> None:
    # A closed local port: the app starts, answers health, and says 503 on storage.
    settings = Settings(
        data_dir=tmp_path / "data", database_url="postgresql+psycopg://postgres@127.0.0.1:1/test"
    )
    with TestClient(create_app(settings)) as c:
        assert c.get("/healthz").status_code == 200
        r = c.get("/readyz")
        assert r.status_code == 503 and r.headers["content-type"] == PROBLEM
        r = c.post("/api/v1/diagnoses", json={"kind": "fold", "request": demo_fold_request()})
        assert r.status_code == 503
        assert "database" in r.json()["detail"]


def test_save_diagnosis_by_kind(client: TestClient) -> None:
    # A diagnose request saved through the generic endpoint keeps its spectrum apart.
    f = np.arange(0, 5001, 10.0)
    # Reference: a 7.3 kHz tone sampled at 10 kS/s reads 2.7 kHz (Oppenheim & Schafer,
    # DTSP, sec. 4.2).
    amp = 1e-4 + np.where(np.abs(f - 2700) < 1, 0.5, 0.0)
    req = {
        "sample_rate_hz": 10_000,
        "spectrum": {"freq_hz": f.tolist(), "amplitude": amp.tolist()},
        "tones": [{"label": "x", "freq_hz": 7300}],
    }
    r = client.post("/api/v1/diagnoses", json={"kind": "diagnose", "request": req})
    assert r.status_code == 201, r.text
    got = client.get(r.json()["api_url"]).json()
    assert "spectrum" not in got["request"]
    assert len(got["spectrum"]["amplitude"]) == f.size
    peak = next(p for p in got["result"]["peaks"] if abs(p["freq_hz"] - 2700) < 10)
    assert peak["verdict"] == "alias" and peak["true_hz"] == 7300
