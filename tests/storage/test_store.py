"""Store against real SQLite and PostgreSQL: round trips, delete tokens, ids, failures."""

from __future__ import annotations

import base64
import hashlib
import re
import sqlite3
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import numpy as np
import psycopg
import pytest
from sqlalchemy import text

from service.storage import KINDS, SavedDiagnosis, Store, StoreUnavailable

F32_EPS = float(np.finfo(np.float32).eps)
URLSAFE = re.compile(r"[A-Za-z0-9_-]+")

# Invented demo scenario: an accelerometer on a drive-unit bench, 12.8 kS/s converter.
REQUEST: dict[str, Any] = {
    "sample_rate_hz": 12_800.0,
    "anti_alias": {"type": "butterworth", "order": 2, "cutoff_hz": 5_000.0},
    "sources": [
        {"type": "shaft", "rpm": 9_000, "orders": [1, 2, 0.5]},
        {"type": "gear_mesh", "teeth": 17, "label": "first mesh"},
        {"type": "pwm", "carrier_hz": 10_000.0, "fundamental_hz": 600.0},
    ],
    "notes": "Prüfstand 3 — zweiter Kanal dezimiert ✓",
    "tiny": 0.1,
    "huge": 1e300,
    "negative_zero": -0.0,
    "big_int": 2**53 + 1,
    "nothing": None,
    "flags": [True, False],
}
RESULT: dict[str, Any] = {
    "peaks": [
        {"apparent_hz": 2_800.0, "verdict": "alias", "true_hz": 10_000.0, "zone": 2},
        {"apparent_hz": 150.0, "verdict": "direct", "confidence": 0.93},
    ],
    "empty": {},
}


def _spectrum_uniform() -> tuple[np.ndarray, np.ndarray]:
    freq = np.fft.rfftfreq(4096, d=1 / 12_800)
    amp = np.random.default_rng(7).lognormal(-5, 1.5, freq.size)
    return freq, amp


def _row(store: Store, record_id: str) -> dict[str, Any]:
    with store.engine.connect() as conn:
        row = (
            conn.execute(text("SELECT * FROM saved_diagnosis WHERE id = :id"), {"id": record_id})
            .mappings()
            .one()
        )
    return dict(row)


class TestCreateGet:
    def test_basic(self, store: Store) -> None:
        before = datetime.now(UTC)
        freq, amp = _spectrum_uniform()
        record_id, _token = store.create(
            "diagnose",
            REQUEST,
            RESULT,
            computation_version="2026.12.1",
            app_version="0.1.0",
            spectrum=(freq, amp),
            title="Bench 3, input shaft, run-up",
        )
        after = datetime.now(UTC)
        got = store.get(record_id)
        assert isinstance(got, SavedDiagnosis)
        assert got.id == record_id
        assert got.kind == "diagnose"
        assert got.request == REQUEST
        assert got.result == RESULT
        assert type(got.request["big_int"]) is int
        assert got.computation_version == "2026.12.1"
        assert got.app_version == "0.1.0"
        assert got.title == "Bench 3, input shaft, run-up"
        assert got.created_at.tzinfo is not None
        assert got.created_at.utcoffset().total_seconds() == 0  # type: ignore[union-attr]
        assert before <= got.created_at <= after
        assert got.spectrum is not None
        f_out, a_out = got.spectrum
        # Reference: numpy float32 cast; the uniform axis is kept to float64 rounding.
        np.testing.assert_allclose(a_out, amp, rtol=F32_EPS, atol=0)
        np.testing.assert_allclose(f_out, freq, rtol=0, atol=0.5 * F32_EPS * freq.max())

    def test_non_uniform_spectrum(self, store: Store) -> None:
        freq = np.sort(np.random.default_rng(3).uniform(10.0, 6_400.0, 300))
        amp = np.random.default_rng(4).normal(-60.0, 10.0, freq.size)
        record_id, _ = store.create("compare", {}, {}, "c", "a", spectrum=(freq, amp))
        got = store.get(record_id)
        assert got is not None and got.spectrum is not None
        # Reference: numpy float32 cast.
        np.testing.assert_allclose(got.spectrum[0], freq, rtol=F32_EPS, atol=0)
        np.testing.assert_allclose(got.spectrum[1], amp, rtol=F32_EPS, atol=0)

    def test_edges(self, store: Store) -> None:
        for kind in KINDS:
            record_id, _ = store.create(kind, {"k": kind}, {"ok": True}, "c", "a")
            got = store.get(record_id)
            assert got is not None
            assert (got.kind, got.request, got.result) == (kind, {"k": kind}, {"ok": True})
            assert got.spectrum is None
            assert got.title is None
        # Unknown and malformed ids read as absent without touching the database.
        assert store.get("A" * 32) is None
        for bad in ["", "short", "A" * 31, "A" * 33, "A" * 31 + "/", "' OR 1=1 --" + "x" * 21]:
            assert store.get(bad) is None
        assert store.get(None) is None  # type: ignore[arg-type]

    def test_size_limit(self, db_url: str) -> None:
        small = Store.from_url(db_url, max_json_bytes=1_000)
        small.migrate()
        try:
            ok = {"x": "a" * 900}
            record_id, _ = small.create("fold", ok, ok, "c", "a")
            assert small.get(record_id) is not None
            big = {"x": "a" * 1_000}
            with pytest.raises(
                ValueError, match=r"request is 1008 bytes as JSON; the limit is 1000"
            ):
                small.create("fold", big, ok, "c", "a")
            with pytest.raises(
                ValueError, match=r"result is 1008 bytes as JSON; the limit is 1000"
            ):
                small.create("fold", ok, big, "c", "a")
        finally:
            small.close()
        # The default limit is 16 MiB.
        assert Store.from_url(db_url).max_json_bytes == 16 * 1024 * 1024

    @pytest.mark.parametrize(
        ("kwargs", "message"),
        [
            ({"kind": "predict"}, "kind='predict' must be one of diagnose, compare, fold, plan"),
            ({"request": [1, 2]}, "request is a list; it must be a JSON object"),
            ({"result": {"x": float("nan")}}, "result is not plain JSON"),
            ({"result": {"x": np.float32(1.0)}}, "result is not plain JSON"),
            ({"computation_version": ""}, "computation_version is empty"),
            ({"app_version": "v" * 65}, "app_version has 65 characters; the limit is 64"),
            ({"title": "t" * 201}, "title has 201 characters; the limit is 200"),
            ({"title": 5}, "title=5 must be a string"),
            ({"spectrum": (np.ones(3),)}, "spectrum must be a pair"),
            ({"spectrum": (np.ones(3), np.ones(2))}, "amplitude has 2 points"),
        ],
    )
    def test_errors(self, store: Store, kwargs: dict[str, Any], message: str) -> None:
        args: dict[str, Any] = {
            "kind": "diagnose",
            "request": {},
            "result": {},
            "computation_version": "c",
            "app_version": "a",
        }
        args.update(kwargs)
        with pytest.raises(ValueError, match=re.escape(message)):
            store.create(**args)
        with store.engine.connect() as conn:
            assert conn.execute(text("SELECT count(*) FROM saved_diagnosis")).scalar() == 0


class TestIdsAndTokens:
    def test_basic(self, store: Store) -> None:
        pairs = [store.create("fold", {"i": i}, {}, "c", "a") for i in range(50)]
        ids = [p[0] for p in pairs]
        tokens = [p[1] for p in pairs]
        assert len(set(ids)) == len(ids)
        assert len(set(tokens)) == len(tokens)
        assert not set(ids) & set(tokens)
        for record_id, token in pairs:
            # 32 characters of the 64-symbol URL-safe alphabet carry 32 * 6 = 192 bits,
            # above the 128 bits the design asks for; they decode to 24 bytes.
            assert len(record_id) == 32 and URLSAFE.fullmatch(record_id)
            assert len(base64.urlsafe_b64decode(record_id)) == 24
            assert len(token) == 43 and URLSAFE.fullmatch(token)
            assert len(base64.urlsafe_b64decode(token + "=")) == 32

    def test_token_not_stored_in_clear(self, store: Store) -> None:
        record_id, token = store.create("diagnose", {"a": 1}, {"b": 2}, "c", "a", title="t")
        row = _row(store, record_id)
        # Reference: hashlib's SHA-256 of the token.
        assert row["delete_token_hash"] == hashlib.sha256(token.encode()).hexdigest()
        for value in row.values():
            assert token not in str(value)
            if isinstance(value, bytes | memoryview):
                assert token.encode() not in bytes(value)


class TestDelete:
    def test_basic(self, store: Store) -> None:
        record_id, token = store.create("plan", {"a": 1}, {"b": 2}, "c", "a")
        assert store.delete(record_id, token) == "deleted"
        assert store.get(record_id) is None
        assert store.delete(record_id, token) == "not_found"

    def test_wrong_token(self, store: Store) -> None:
        record_id, token = store.create("plan", {"a": 1}, {"b": 2}, "c", "a")
        other_id, other_token = store.create("plan", {"a": 2}, {"b": 3}, "c", "a")
        for wrong in [other_token, token[:-1], token + "x", "", "x" * 10_000]:
            assert store.delete(record_id, wrong) == "forbidden"
        assert store.delete(record_id, None) == "forbidden"  # type: ignore[arg-type]
        # The hash itself is not a token.
        assert store.delete(record_id, _row(store, record_id)["delete_token_hash"]) == "forbidden"
        assert store.get(record_id) is not None
        assert store.get(other_id) is not None

    def test_unknown_id(self, store: Store) -> None:
        _, token = store.create("plan", {}, {}, "c", "a")
        assert store.delete("B" * 32, token) == "not_found"
        assert store.delete("not an id", token) == "not_found"
        assert store.delete("", token) == "not_found"


class TestPing:
    def test_basic(self, store: Store) -> None:
        store.ping()

    def test_closed_port(self) -> None:
        # Nothing listens on port 1 of the loopback interface.
        store = Store.from_url("postgresql+psycopg://postgres@127.0.0.1:1/test")
        calls = [
            store.ping,
            store.migrate,
            lambda: store.get("A" * 32),
            lambda: store.create("fold", {}, {}, "c", "a"),
            lambda: store.delete("A" * 32, "t"),
        ]
        for call in calls:
            with pytest.raises(
                StoreUnavailable, match=r"postgresql database unavailable: .*refused"
            ):
                call()
        # Input errors still come first, without a round trip.
        with pytest.raises(ValueError, match="kind="):
            store.create("nope", {}, {}, "c", "a")
        assert store.get("bad id") is None

    def test_unopenable_sqlite_file(self, tmp_path: Path) -> None:
        # A directory where the database file should be: SQLite cannot open it.
        target = tmp_path / "foldwise.sqlite3"
        target.mkdir()
        store = Store.from_url(f"sqlite:///{target}")
        with pytest.raises(StoreUnavailable, match="sqlite database unavailable"):
            store.ping()


class TestRecovery:
    def test_postgres_connections_killed(self, pg_schema_url: str, pg_conninfo: str) -> None:
        store = Store.from_url(pg_schema_url)
        try:
            store.migrate()
            record_id, _ = store.create("fold", {"a": 1}, {}, "c", "a")
            schema = pg_schema_url.rsplit("application_name=", 1)[1]
            # What a server restart does to pooled connections.
            with psycopg.connect(pg_conninfo, autocommit=True) as admin:
                killed = admin.execute(
                    "SELECT count(pg_terminate_backend(pid)) FROM pg_stat_activity "
                    "WHERE application_name = %s",
                    (schema,),
                ).fetchone()
            assert killed is not None and killed[0] >= 1
            # pool_pre_ping finds the dead connection and opens a new one.
            got = store.get(record_id)
            assert got is not None and got.request == {"a": 1}
        finally:
            store.close()


class TestFromUrl:
    def test_default_sqlite_file(self, tmp_path: Path) -> None:
        data_dir = tmp_path / "nested" / "data"
        store = Store.from_url(None, data_dir)
        try:
            assert store.backend == "sqlite"
            store.migrate()
            record_id, _ = store.create("fold", {}, {}, "c", "a")
        finally:
            store.close()
        path = data_dir / "foldwise.sqlite3"
        assert path.is_file()
        # Independent check with the standard library's sqlite3 module.
        with sqlite3.connect(path) as conn:
            assert conn.execute("PRAGMA journal_mode").fetchone() == ("wal",)
            (found,) = conn.execute(
                "SELECT count(*) FROM saved_diagnosis WHERE id = ?", (record_id,)
            ).fetchone()
            assert found == 1
        conn.close()
        assert Store.from_url("", data_dir).backend == "sqlite"

    def test_sqlite_pragmas(self, tmp_path: Path) -> None:
        store = Store.from_url(f"sqlite:///{tmp_path / 'x.sqlite3'}")
        try:
            with store.engine.connect() as conn:
                values = {
                    name: conn.exec_driver_sql(f"PRAGMA {name}").scalar()
                    for name in ["journal_mode", "synchronous", "foreign_keys", "busy_timeout"]
                }
        finally:
            store.close()
        # SQLite documents synchronous FULL as 2.
        assert values == {
            "journal_mode": "wal",
            "synchronous": 2,
            "foreign_keys": 1,
            "busy_timeout": 30_000,
        }

    def test_postgres_aliases(self) -> None:
        for url in ["postgresql://u@127.0.0.1:1/db", "postgres://u@127.0.0.1:1/db"]:
            store = Store.from_url(url)
            assert store.backend == "postgresql"
            assert store.engine.dialect.driver == "psycopg"

    @pytest.mark.parametrize(
        ("url", "data_dir", "message"),
        [
            (None, None, "data_dir is required when no database URL is given"),
            ("mysql://u@127.0.0.1/db", None, "scheme 'mysql' is not supported"),
            ("sqlite://", None, "in-memory SQLite"),
            ("sqlite:///:memory:", None, "in-memory SQLite"),
        ],
    )
    def test_errors(self, url: str | None, data_dir: Path | None, message: str) -> None:
        with pytest.raises(ValueError, match=re.escape(message)):
            Store.from_url(url, data_dir)
        with pytest.raises(ValueError, match=r"max_json_bytes=0 must be > 0"):
            Store.from_url("postgresql+psycopg://u@127.0.0.1:1/db", max_json_bytes=0)
