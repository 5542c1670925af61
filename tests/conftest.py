"""Shared fixtures: the real application, a client on it, settings in a temporary folder,
and a fresh schema in the real PostgreSQL at 127.0.0.1:5432.

PostgreSQL runs get a schema of their own (random name, dropped afterwards), reached by
setting ``search_path`` through the libpq ``options`` parameter, so concurrent test runs
never see each other's tables. When the server cannot be reached the PostgreSQL cases
fail under CI (``CI`` set to a non-empty value) and are skipped, with the reason, outside
it.
"""

from __future__ import annotations

import os
import secrets
from collections.abc import Iterator
from functools import cache
from pathlib import Path

import psycopg
import pytest
from fastapi.testclient import TestClient

from service.app import create_app
from service.config import Settings


@pytest.fixture
def settings(tmp_path: Path) -> Settings:
    return Settings(data_dir=tmp_path / "data", max_tones=5000, max_body_bytes=2_000_000)


@pytest.fixture
def client(settings: Settings) -> Iterator[TestClient]:
    with TestClient(create_app(settings), raise_server_exceptions=True) as c:
        yield c


PG_CONNINFO = "host=127.0.0.1 port=5432 user=postgres dbname=test connect_timeout=5"
PG_URL = "postgresql+psycopg://postgres@127.0.0.1:5432/test"


@cache
def _pg_unreachable_reason() -> str | None:
    try:
        with psycopg.connect(PG_CONNINFO) as conn:
            conn.execute("SELECT 1")
    except psycopg.Error as exc:
        return f"PostgreSQL at 127.0.0.1:5432 (user postgres, db test) is unreachable: {exc}"
    return None


def require_postgres() -> None:
    """Fail under CI, skip elsewhere, when PostgreSQL cannot be reached."""
    reason = _pg_unreachable_reason()
    if reason is None:
        return
    if os.environ.get("CI"):
        pytest.fail(reason)
    pytest.skip(reason)


@pytest.fixture
def pg_conninfo() -> str:
    """libpq connection string for administrative statements in tests."""
    require_postgres()
    return PG_CONNINFO


@pytest.fixture
def pg_schema_url() -> Iterator[str]:
    """URL of the test PostgreSQL database with a fresh, empty schema first on the path."""
    require_postgres()
    schema = f"fw_test_{secrets.token_hex(8)}"
    with psycopg.connect(PG_CONNINFO, autocommit=True) as admin:
        admin.execute(f'CREATE SCHEMA "{schema}"')
    try:
        yield f"{PG_URL}?options=-csearch_path%3D{schema}&application_name={schema}"
    finally:
        with psycopg.connect(PG_CONNINFO, autocommit=True) as admin:
            # Connections a test left open (e.g. killed children) must not block the drop.
            admin.execute(
                "SELECT pg_terminate_backend(pid) FROM pg_stat_activity "
                "WHERE application_name = %s",
                (schema,),
            )
            admin.execute(f'DROP SCHEMA "{schema}" CASCADE')
