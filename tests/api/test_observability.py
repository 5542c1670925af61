"""Request ids, JSON access-log lines and Prometheus metrics, through the real app."""

from __future__ import annotations

import json
import logging
import re
from collections.abc import Iterator
from pathlib import Path

import pytest
from fastapi.testclient import TestClient
from prometheus_client.parser import text_string_to_metric_families

from service.app import create_app
from service.config import Settings
from service.http.observability import ACCESS_LOGGER

FOLD = {"sample_rate_hz": 1000, "tones": [{"label": "a", "freq_hz": 700}]}
SAVE = {"kind": "fold", "request": FOLD}


class _Lines(logging.Handler):
    def __init__(self) -> None:
        super().__init__()
        self.lines: list[str] = []

    def emit(self, record: logging.LogRecord) -> None:
        self.lines.append(record.getMessage())


@pytest.fixture
def access_lines() -> Iterator[list[str]]:
    handler = _Lines()
    logger = logging.getLogger(ACCESS_LOGGER)
    logger.addHandler(handler)
    try:
        yield handler.lines
    finally:
        logger.removeHandler(handler)


@pytest.fixture
def app_client(tmp_path: Path) -> Iterator[TestClient]:
    settings = Settings(data_dir=tmp_path / "data", max_body_bytes=2_000_000)
    with TestClient(create_app(settings), raise_server_exceptions=False) as c:
        yield c


def _samples(client: TestClient) -> dict[tuple[str, tuple[tuple[str, str], ...]], float]:
    """Every sample of /metrics, parsed by prometheus_client's own parser."""
    r = client.get("/metrics")
    assert r.status_code == 200
    out = {}
    for family in text_string_to_metric_families(r.text):
        for s in family.samples:
            out[(s.name, tuple(sorted(s.labels.items())))] = s.value
    return out


def _value(samples: dict, name: str, **labels: str) -> float:
    return samples.get((name, tuple(sorted(labels.items()))), 0.0)


class TestRequestId:
    def test_basic(self, app_client: TestClient) -> None:
        a = app_client.get("/healthz").headers["x-request-id"]
        b = app_client.get("/healthz").headers["x-request-id"]
        assert re.fullmatch(r"[0-9a-f]{32}", a) and a != b
        r = app_client.get("/healthz", headers={"X-Request-ID": "cell-7.run-42"})
        assert r.headers["x-request-id"] == "cell-7.run-42"

    def test_edges(self, app_client: TestClient) -> None:
        # Not a plain token (or too long): replaced, so it cannot forge log content.
        for given in ('x" "status":200', "a" * 129, "spaces are not ok"):
            got = app_client.get("/healthz", headers={"X-Request-ID": given}).headers
            assert got["x-request-id"] != given
            assert re.fullmatch(r"[0-9a-f]{32}", got["x-request-id"])
        # Errors carry it too.
        r = app_client.post("/api/v1/fold", json={"sample_rate_hz": -1})
        assert r.status_code == 422 and r.headers["x-request-id"]


class TestAccessLog:
    def test_basic(self, app_client: TestClient, access_lines: list[str]) -> None:
        saved = app_client.post("/api/v1/diagnoses", json=SAVE).json()
        r = app_client.get(saved["api_url"], headers={"X-Request-ID": "read-1"})
        assert r.status_code == 200
        app_client.get("/static/foldwise.css")
        app_client.get("/no/such/thing")
        records = [json.loads(line) for line in access_lines]
        assert len(records) == 4
        for rec in records:
            assert set(rec) >= {
                "ts",
                "method",
                "path",
                "status",
                "duration_ms",
                "client",
                "request_id",
            }
            assert isinstance(rec["duration_ms"], float) and rec["duration_ms"] >= 0
        save, read, static, missing = records
        assert (save["method"], save["path"], save["status"]) == (
            "POST",
            "/api/v1/diagnoses",
            201,
        )
        # The route template, never the id: a saved result's link stays out of the log.
        assert read["path"] == "/api/v1/diagnoses/{rid}"
        assert saved["id"] not in "\n".join(access_lines)
        assert read["request_id"] == "read-1" == r.headers["x-request-id"]
        assert static["path"] == "/static/{path}" and static["status"] == 200
        assert missing["path"] == "<unmatched>" and missing["status"] == 404

    def test_unhandled_error(self, app_client: TestClient, access_lines: list[str]) -> None:
        async def boom() -> None:
            raise RuntimeError("boom")

        app_client.app.add_api_route("/boom", boom)  # type: ignore[attr-defined]
        r = app_client.get("/boom")
        assert r.status_code == 500
        (rec,) = [json.loads(line) for line in access_lines]
        assert rec["status"] == 500 and rec["path"] == "/boom"
        assert rec["request_id"] == r.headers["x-request-id"]


class TestMetrics:
    def test_basic(self, app_client: TestClient) -> None:
        r = app_client.get("/metrics")
        assert r.headers["content-type"].startswith("text/plain; version=0.0.4")
        before = _samples(app_client)
        for _ in range(3):
            assert app_client.post("/api/v1/fold", json=FOLD).status_code == 200
        assert app_client.post("/api/v1/fold", json={"sample_rate_hz": -1}).status_code == 422
        after = _samples(app_client)
        ok = {"method": "POST", "route": "/api/v1/fold", "status_class": "2xx"}
        bad = {**ok, "status_class": "4xx"}
        req = "foldwise_http_requests_total"
        assert _value(after, req, **ok) - _value(before, req, **ok) == 3
        assert _value(after, req, **bad) - _value(before, req, **bad) == 1
        hist = "foldwise_http_request_duration_seconds_count"
        lab = {"method": "POST", "route": "/api/v1/fold"}
        assert _value(after, hist, **lab) - _value(before, hist, **lab) == 4
        inf = _value(after, "foldwise_http_request_duration_seconds_bucket", **lab, le="+Inf")
        assert inf == _value(after, hist, **lab)
        # The same fold three times: one computed, two from the cache; the invalid body
        # is looked up (a miss) before it is refused.
        hits = "foldwise_fold_cache_hits_total"
        misses = "foldwise_fold_cache_misses_total"
        assert _value(after, hits) - _value(before, hits) == 2
        assert _value(after, misses) - _value(before, misses) == 2

    def test_saved_counts(self, app_client: TestClient) -> None:
        saved = app_client.post("/api/v1/diagnoses", json=SAVE).json()
        app_client.delete(saved["api_url"], headers={"X-Delete-Token": saved["delete_token"]})
        app_client.delete(saved["api_url"], headers={"X-Delete-Token": "again"})  # 404
        s = _samples(app_client)
        assert _value(s, "foldwise_saved_results_created_total") == 1
        assert _value(s, "foldwise_saved_results_deleted_total") == 1
        lab = {"method": "DELETE", "route": "/api/v1/diagnoses/{rid}", "status_class": "4xx"}
        assert _value(s, "foldwise_http_requests_total", **lab) == 1
        # No label carries an id.
        assert saved["id"] not in app_client.get("/metrics").text

    def test_edges(self, tmp_path: Path) -> None:
        # Each app counts for itself (tests and multi-app processes never mix counts).
        settings = Settings(data_dir=tmp_path / "data")
        with TestClient(create_app(settings)) as a, TestClient(create_app(settings)) as b:
            for _ in range(5):
                a.get("/healthz")
            b.get("/healthz")
            lab = {"method": "GET", "route": "/healthz", "status_class": "2xx"}
            assert _value(_samples(a), "foldwise_http_requests_total", **lab) == 5
            assert _value(_samples(b), "foldwise_http_requests_total", **lab) == 1
        # /metrics is not part of the API document.
        assert "/metrics" not in a.app.openapi()["paths"]  # type: ignore[attr-defined]
