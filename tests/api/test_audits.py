"""Audits through the real app: submit → poll → results, on SQLite and PostgreSQL, the
job surviving a restart, the pages, and bad input answered with a 4xx problem."""

from __future__ import annotations

import io
import time
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pyarrow.parquet as pq
import pytest
from fastapi.testclient import TestClient

from service.app import create_app
from service.audit.demo import make_demo_archive
from service.config import Settings
from service.contract.audit import AuditJobOut, AuditRecordingsOut
from service.storage import Store

from .test_response_schemas import fits

PROBLEM = "application/problem+json"


def fold(f_hz: float, fs_hz: float) -> float:
    # Reference: DESIGN.md §2, fold(f, fs) = |f - fs*round(f/fs)|, written out here.
    return abs(f_hz - fs_hz * np.round(f_hz / fs_hz))


def test_fold_reference_against_hand_worked_values() -> None:
    # Source: DESIGN.md §5 — fs = 10 kHz: 7.3 kHz shows at 2.7 kHz, 13.2 kHz at 3.2 kHz.
    assert fold(7300.0, 10_000.0) == pytest.approx(2700.0)
    assert fold(13_200.0, 10_000.0) == pytest.approx(3200.0)


@pytest.fixture(scope="module")
def root(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """An archive root with a tiny demo archive (5 recordings, 3 wrong rows) and a
    manifest without a path column."""
    base = tmp_path_factory.mktemp("root")
    make_demo_archive(base / "bench", count=5, seed=11, seconds=0.5)
    (base / "bad.csv").write_text("file,chain_id\nx.wav,a\n", encoding="utf-8")
    return base


def _settings(tmp_path: Path, root: Path | None, url: str = "") -> Settings:
    return Settings(data_dir=tmp_path / "data", database_url=url, audit_root=root)


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def settings(request: pytest.FixtureRequest, tmp_path: Path, root: Path) -> Settings:
    url = "" if request.param == "sqlite" else request.getfixturevalue("pg_schema_url")
    return _settings(tmp_path, root, url)


def _wait(c: TestClient, job_id: str) -> dict:
    # A bound on waiting, not a timing assertion: a tiny archive takes seconds.
    deadline = time.monotonic() + 240
    while True:
        job = c.get(f"/api/v1/audits/{job_id}").json()
        if job["status"] not in ("queued", "running") or time.monotonic() > deadline:
            return job
        time.sleep(0.5)


@pytest.fixture
def finished(settings: Settings) -> Iterator[tuple[TestClient, dict]]:
    with TestClient(create_app(settings)) as c:
        r = c.post(
            "/api/v1/audits",
            json={"manifest": "bench/manifest.csv", "library": "bench/library.json", "title": "t"},
        )
        assert r.status_code == 202, r.text
        assert r.headers["location"] == f"/api/v1/audits/{r.json()['id']}"
        yield c, _wait(c, r.json()["id"])


class TestSubmitPollResults:
    def test_basic(self, finished: tuple[TestClient, dict], settings: Settings) -> None:
        c, job = finished
        assert job["status"] == "done", job
        # 5 recordings and the demo's three wrong rows (missing file, unknown chain,
        # unreadable file): each counted once, the wrong ones as errors.
        assert (job["done"], job["total"], job["errors"]) == (8, 8, 3)
        assert "machine protection" in job["caution"]

        # The real answers are what the schema publishes (as for every endpoint).
        assert fits(AuditJobOut, c.get(f"/api/v1/audits/{job['id']}").text) == []
        listing = c.get(job["recordings_url"], params={"limit": 100})
        assert fits(AuditRecordingsOut, listing.text) == []
        page = listing.json()
        items = page["items"]
        assert page["total"] == 8 and len(items) == 8
        levels = [r["strongest_alias_db"] for r in items if r["strongest_alias_db"] is not None]
        assert levels == sorted(levels, reverse=True) and levels, "ranked by alias level"
        errors = [r for r in items if r["status"] == "error"]
        assert len(errors) == 3 and all(r["error"] for r in errors)
        # Every strongest alias lies where the fold formula puts its true frequency,
        # through the setup's final rate (2 × Nyquist), within 1 % (speed tolerance).
        for r in items:
            if r["strongest_alias_true_hz"] is not None:
                fs = 2 * r["nyquist_hz"]
                want = fold(r["strongest_alias_true_hz"], fs)
                assert r["strongest_alias_hz"] == pytest.approx(want, rel=0.01, abs=5.0)
        # Paging: the second page starts where the first ended.
        second = c.get(job["recordings_url"], params={"offset": 2, "limit": 2}).json()
        assert second["items"] == items[2:4]

        r = c.get(job["peaks_url"])
        assert r.status_code == 200
        peaks = pq.read_table(io.BytesIO(r.content))
        assert peaks.num_rows == sum(x["n_peaks"] or 0 for x in items)
        assert {"recording", "freq_hz", "verdict", "aliased", "true_hz"} <= set(peaks.column_names)
        csv = c.get(job["recordings_csv_url"])
        assert csv.status_code == 200 and csv.text.splitlines()[0].startswith("row,recording")
        assert len(csv.text.splitlines()) == 9

        saved = c.get(job["saved"]["api_url"]).json()
        assert saved["kind"] == "audit" and saved["result"]["counts"]["errors"] == 3

    def test_pages_and_links(self, finished: tuple[TestClient, dict]) -> None:
        c, job = finished
        for url in (job["url"], job["saved"]["url"]):
            r = c.get(url)
            assert r.status_code == 200, url
            assert "eol-12k8-sliced" in r.text and "machine protection" in r.text
            assert "audit-levels-figure" in r.text
        links = [
            part.split('"')[0]
            for part in c.get(job["url"]).text.split('href="')[1:]
            if part.startswith(f"/audits/{job['id']}/recordings/")
        ]
        assert len(links) == 5  # every recording but the rows in error
        r = c.get(links[0])
        assert r.status_code == 200 and "measured-figure" in r.text
        assert "machine protection" in r.text
        assert c.get(f"/audits/{job['id']}/recordings/99").status_code == 404


class TestRestart:
    def test_finished_job_seen_after_restart(
        self, finished: tuple[TestClient, dict], settings: Settings
    ) -> None:
        _, job = finished
        with TestClient(create_app(settings)) as c2:
            again = c2.get(f"/api/v1/audits/{job['id']}").json()
        assert again["status"] == "done" and again["saved"] == job["saved"]

    def test_running_job_resumed_at_start(self, tmp_path: Path, root: Path) -> None:
        settings = _settings(tmp_path, root)
        store = Store.from_url(None, settings.data_dir)
        store.migrate()
        # A job a killed process left running.
        job_id = store.create_job(
            {"manifest": "bench/manifest.csv", "library": "bench/library.json"}
        )
        store.update_job(job_id, status="running", done=2, total=8)
        store.close()
        with TestClient(create_app(settings)) as c:
            job = _wait(c, job_id)
        assert job["status"] == "done" and (job["done"], job["errors"]) == (8, 3)


class TestBadInput:
    def test_unknown_id(self, tmp_path: Path, root: Path) -> None:
        with TestClient(create_app(_settings(tmp_path, root))) as c:
            for url in (
                "/api/v1/audits/nope",
                "/api/v1/audits/nope/recordings",
                "/api/v1/audits/nope/peaks.parquet",
            ):
                r = c.get(url)
                assert r.status_code == 404 and r.headers["content-type"] == PROBLEM
            assert c.get("/audits/nope").status_code == 404
            assert c.get("/audits/nope/recordings/0").status_code == 404

    def test_root_not_configured(self, tmp_path: Path) -> None:
        with TestClient(create_app(_settings(tmp_path, None))) as c:
            r = c.post("/api/v1/audits", json={"manifest": "bench/manifest.csv"})
        assert r.status_code == 403 and r.headers["content-type"] == PROBLEM
        assert "FOLDWISE_AUDIT_ROOT" in r.json()["detail"]

    @pytest.mark.parametrize(
        ("body", "field"),
        [
            ({"manifest": "bad.csv"}, "manifest"),  # no path column
            ({"manifest": "../etc/passwd"}, "manifest"),  # outside the root
            ({"manifest": "/etc/passwd"}, "manifest"),
            ({"manifest": "bench/none.csv"}, "manifest"),
            ({"manifest": "bench/manifest.csv", "library": "bench/rec"}, "library"),
            ({"manifest": "bench/manifest.csv", "folder": "../"}, "folder"),
            ({"manifest": ""}, "manifest"),
            ({"manifest": "bench/manifest.csv", "extra": 1}, "extra"),
        ],
    )
    def test_bad_request(self, tmp_path: Path, root: Path, body: dict, field: str) -> None:
        with TestClient(create_app(_settings(tmp_path, root))) as c:
            r = c.post("/api/v1/audits", json=body)
        assert r.status_code == 422, r.text
        assert r.headers["content-type"] == PROBLEM
        assert field in r.text
