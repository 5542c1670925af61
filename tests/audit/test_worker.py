"""One row on a worker, without a cluster: hashing, skipping, limits, errors."""

from __future__ import annotations

import hashlib
from pathlib import Path

from service.audit.engine import _worker_settings
from service.audit.library import read_library, read_manifest
from service.audit.worker import audit_chunk, audit_one, row_key
from service.config import Settings


def _task(archive, i: int = 0):
    folder, manifest, library = archive
    return read_manifest(manifest, read_library(library), folder)[i]


class TestAuditOne:
    def test_basic(self, archive, audit_settings) -> None:
        t = _task(archive)
        r = audit_one(t, audit_settings)
        assert r["status"] == "computed" and r["summary"]["status"] == "ok"
        # Reference: hashlib over the file's bytes, independently of the worker.
        sha = hashlib.sha256(Path(t.path).read_bytes()).hexdigest()
        assert r["summary"]["content_sha256"] == sha
        assert r["key"] == row_key(sha, t.settings_key)
        assert len(r["peaks"]["freq_hz"]) == r["summary"]["n_peaks"] > 0

    def test_done_key_is_skipped(self, archive, audit_settings) -> None:
        t = _task(archive)
        key = audit_one(t, audit_settings)["key"]
        r = audit_one(t, audit_settings, done=frozenset({key}))
        assert r["status"] == "skipped" and r["summary"] is None and r["key"] == key
        other = audit_one(_task(archive, 1), audit_settings, done=frozenset({key}))
        assert other["status"] == "computed"

    def test_errors(self, archive, audit_settings) -> None:
        small = Settings(data_dir=audit_settings.data_dir, max_upload_bytes=1024)
        r = audit_one(_task(archive), small)
        assert r["status"] == "error"
        assert "the limit is 1024" in r["summary"]["error"]
        assert r["summary"]["error_field"] == "path"
        missing = audit_one(_task(archive, 15), audit_settings)
        assert missing["status"] == "error" and "No such file" in missing["summary"]["error"]

    def test_chunk_returns_one_arrow_table(self, archive, audit_settings) -> None:
        tasks = [_task(archive, i) for i in (0, 1, 15)]
        results, peaks = audit_chunk(tasks, audit_settings)
        assert [r["status"] for r in results] == ["computed", "computed", "error"]
        assert all("peaks" not in r for r in results)
        n = sum(r["summary"]["n_peaks"] for r in results[:2])
        assert peaks.num_rows == n
        assert set(peaks.column("key").to_pylist()) == {r["key"] for r in results[:2]}


class TestWorkerSettings:
    def test_basic(self, monkeypatch) -> None:
        monkeypatch.setenv("FOLDWISE_API_KEYS", "k-1")
        monkeypatch.setenv("FOLDWISE_DATABASE_URL", "postgresql://u:pw@db/x")
        s = Settings(max_tones=77)
        w = _worker_settings(s)
        assert (w.max_tones, w.max_upload_bytes) == (77, s.max_upload_bytes)
        assert w.api_keys == "" and w.database_url == ""
        assert "pw" not in repr(w)
