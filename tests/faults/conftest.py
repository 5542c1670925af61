"""Fixtures for the fault tests: a database URL per backend for a real server process."""

from __future__ import annotations

from pathlib import Path

import pytest


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def server_env(request: pytest.FixtureRequest, tmp_path: Path) -> dict[str, str]:
    """Settings for ``foldwise serve``: SQLite in a fresh data dir, or a fresh PG schema."""
    env = {"FOLDWISE_DATA_DIR": str(tmp_path / "data"), "FOLDWISE_LOG_LEVEL": "warning"}
    if request.param == "postgresql":
        env["FOLDWISE_DATABASE_URL"] = request.getfixturevalue("pg_schema_url")
    return env
