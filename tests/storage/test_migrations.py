"""Schema migrations on both backends: from empty, repeated, downgrade, models in step."""

from __future__ import annotations

from alembic import command
from alembic.autogenerate import compare_metadata
from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from sqlalchemy import inspect, text

import service.storage.store as store_module
from service.storage import Store
from service.storage.models import Base

COLUMNS = {
    "id",
    "delete_token_hash",
    "kind",
    "created_at",
    "computation_version",
    "app_version",
    "request",
    "result",
    "spectrum",
    "title",
}


class TestMigrate:
    def test_from_empty(self, db_url: str) -> None:
        store = Store.from_url(db_url)
        try:
            assert store.schema_revision() is None
            with store.engine.connect() as conn:
                assert not inspect(conn).has_table("saved_diagnosis")
            store.migrate()
            assert store.schema_revision() == Store.head_revision() == "0003"
            with store.engine.connect() as conn:
                insp = inspect(conn)
                assert {c["name"] for c in insp.get_columns("saved_diagnosis")} == COLUMNS
                assert insp.get_pk_constraint("saved_diagnosis")["constrained_columns"] == ["id"]
                nullable = {c["name"]: c["nullable"] for c in insp.get_columns("saved_diagnosis")}
                assert {name for name, null in nullable.items() if null} == {"spectrum", "title"}
        finally:
            store.close()

    def test_twice_is_idempotent(self, store: Store) -> None:
        record_id, _ = store.create("fold", {"a": 1}, {"b": 2}, "c", "a")
        store.migrate()
        store.migrate()
        assert store.schema_revision() == Store.head_revision()
        with store.engine.connect() as conn:
            assert conn.execute(text("SELECT count(*) FROM alembic_version")).scalar() == 1
        got = store.get(record_id)
        assert got is not None and got.request == {"a": 1}

    def test_models_match_migrations(self, store: Store) -> None:
        # Alembic's own comparison of the migrated schema with the ORM models.
        with store.engine.connect() as conn:
            ctx = MigrationContext.configure(conn, opts={"compare_type": True})
            assert compare_metadata(ctx, Base.metadata) == []

    def test_kind_constraint_in_database(self, store: Store) -> None:
        # The database itself refuses unknown kinds, whatever code writes to it.
        with store.engine.connect() as conn:
            try:
                conn.execute(
                    text(
                        "INSERT INTO saved_diagnosis (id, delete_token_hash, kind, created_at, "
                        "computation_version, app_version, request, result) VALUES "
                        "('x', 'h', 'other', CURRENT_TIMESTAMP, 'c', 'a', '{}', '{}')"
                    )
                )
            except Exception as exc:  # IntegrityError on both backends
                assert "ck_saved_diagnosis_kind" in str(exc) or "CHECK" in str(exc)
            else:
                raise AssertionError("insert with kind='other' was accepted")
            finally:
                conn.rollback()
            # Migration 0002 widened the constraint to the run-up kind.
            conn.execute(
                text(
                    "INSERT INTO saved_diagnosis (id, delete_token_hash, kind, created_at, "
                    "computation_version, app_version, request, result) VALUES "
                    "('y', 'h', 'run-up', CURRENT_TIMESTAMP, 'c', 'a', '{}', '{}')"
                )
            )
            conn.rollback()

    def test_upgrade_from_0001_keeps_rows(self, db_url: str) -> None:
        # A store saved under 0001 keeps its rows when 0002 swaps the kind constraint.
        cfg = _alembic_config(db_url)
        store = Store.from_url(db_url)
        try:
            command.upgrade(cfg, "0001")
            with store.engine.begin() as conn:
                conn.execute(
                    text(
                        "INSERT INTO saved_diagnosis (id, delete_token_hash, kind, created_at, "
                        "computation_version, app_version, request, result) VALUES "
                        "('old', 'h', 'plan', CURRENT_TIMESTAMP, 'c', 'a', '{}', '{}')"
                    )
                )
            command.upgrade(cfg, "head")
            with store.engine.connect() as conn:
                kinds = conn.execute(text("SELECT kind FROM saved_diagnosis")).scalars().all()
            assert kinds == ["plan"]
        finally:
            store.close()

    def test_downgrade_and_command_line_config(self, db_url: str) -> None:
        # The path an operator takes with the alembic command: a config naming only the
        # script location and the URL, no connection handed over.
        cfg = _alembic_config(db_url)
        store = Store.from_url(db_url)  # creates the SQLite file's directory
        try:
            command.upgrade(cfg, "head")
            assert store.schema_revision() == Store.head_revision()
            command.downgrade(cfg, "base")
            assert store.schema_revision() is None
            with store.engine.connect() as conn:
                assert not inspect(conn).has_table("saved_diagnosis")
            store.migrate()
            assert store.schema_revision() == Store.head_revision()
        finally:
            store.close()


def _alembic_config(db_url: str) -> Config:
    """What an operator gives the alembic command: the script location and the URL."""
    cfg = Config()
    cfg.set_main_option("script_location", str(store_module._MIGRATIONS_DIR))
    cfg.set_main_option("path_separator", "os")
    cfg.set_main_option("sqlalchemy.url", db_url.replace("%", "%%"))
    return cfg
