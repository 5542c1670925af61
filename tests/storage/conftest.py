"""Fixtures: every storage test runs against a real SQLite file and the real PostgreSQL.

PostgreSQL runs get a schema of their own (random name, dropped afterwards), reached by
setting ``search_path`` through the libpq ``options`` parameter, so concurrent test runs
never see each other's tables. When the server cannot be reached the PostgreSQL cases
fail under CI (``CI`` set to a non-empty value) and are skipped, with the reason, outside
it.
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import pytest

from service.storage import Store


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def db_url(request: pytest.FixtureRequest, tmp_path: Path) -> str:
    """A URL to an empty database, one per backend."""
    if request.param == "sqlite":
        return f"sqlite:///{tmp_path / 'db' / 'foldwise.sqlite3'}"
    url: str = request.getfixturevalue("pg_schema_url")
    return url


@pytest.fixture
def store(db_url: str) -> Iterator[Store]:
    """A migrated store on each backend."""
    s = Store.from_url(db_url)
    s.migrate()
    try:
        yield s
    finally:
        s.close()
