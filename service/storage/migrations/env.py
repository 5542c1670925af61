"""Alembic environment for the saved-diagnosis store.

``Store.migrate`` passes an open connection (already holding the migration lock) in
``config.attributes["connection"]``; the ``alembic`` command line, given a config with
``sqlalchemy.url``, gets a connection of its own.
"""

from __future__ import annotations

from alembic import context
from sqlalchemy import Connection, create_engine

from service.storage.models import Base

config = context.config
target_metadata = Base.metadata


def _configure_and_run(connection: Connection) -> None:
    context.configure(
        connection=connection,
        target_metadata=target_metadata,
        # SQLite cannot ALTER most things in place; batch mode copies the table instead.
        render_as_batch=connection.dialect.name == "sqlite",
        compare_type=True,
    )
    with context.begin_transaction():
        context.run_migrations()


def _run() -> None:
    if context.is_offline_mode():
        context.configure(
            url=config.get_main_option("sqlalchemy.url"),
            target_metadata=target_metadata,
            literal_binds=True,
        )
        with context.begin_transaction():
            context.run_migrations()
        return
    given = config.attributes.get("connection")
    if given is not None:
        _configure_and_run(given)
        return
    url = config.get_main_option("sqlalchemy.url")
    if not url:
        raise RuntimeError("set sqlalchemy.url or pass a connection to run migrations")
    engine = create_engine(url)
    try:
        with engine.connect() as connection:
            _configure_and_run(connection)
            connection.commit()
    finally:
        engine.dispose()


_run()
