"""Allow the kind "run-up" among saved results.

Revision ID: 0003
Revises: 0002
Create Date: 2026-12-04
"""

from __future__ import annotations

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0003"
down_revision: str | None = "0002"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None

_NAME = "ck_saved_diagnosis_kind"
_OLD = "kind IN ('diagnose', 'compare', 'fold', 'plan', 'audit')"
_NEW = "kind IN ('diagnose', 'compare', 'fold', 'plan', 'audit', 'run-up')"


def _table(check: str) -> sa.Table:
    """The table as 0001 made it (0002 changed only its kind rule), with ``check``."""
    return sa.Table(
        "saved_diagnosis",
        sa.MetaData(),
        sa.Column("id", sa.String(64), nullable=False),
        sa.Column("delete_token_hash", sa.String(64), nullable=False),
        sa.Column("kind", sa.String(16), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("computation_version", sa.String(64), nullable=False),
        sa.Column("app_version", sa.String(64), nullable=False),
        sa.Column("request", sa.JSON(), nullable=False),
        sa.Column("result", sa.JSON(), nullable=False),
        sa.Column("spectrum", sa.LargeBinary(), nullable=True),
        sa.Column("title", sa.String(200), nullable=True),
        sa.PrimaryKeyConstraint("id", name="pk_saved_diagnosis"),
        sa.CheckConstraint(check, name=_NAME),
        sa.Index("ix_saved_diagnosis_created_at", "created_at"),
    )


def _swap(check: str) -> None:
    if op.get_context().dialect.name == "sqlite":
        # SQLite cannot alter a constraint: copy the rows into the table as it should be
        # (given in full, since SQLite's reflection does not name CHECK constraints).
        with op.batch_alter_table("saved_diagnosis", copy_from=_table(check), recreate="always"):
            pass
        return
    # 0001's name went through the naming convention (it may read ck_..._ck_..._kind):
    # drop whichever check constrains the kind, by the name the database gave it.
    found = sa.inspect(op.get_bind()).get_check_constraints("saved_diagnosis")
    for ck in found:
        if ck.get("name") and "kind" in str(ck.get("sqltext", "")):
            op.drop_constraint(op.f(ck["name"]), "saved_diagnosis", type_="check")
    op.create_check_constraint(op.f(_NAME), "saved_diagnosis", check)


def upgrade() -> None:
    _swap(_NEW)


def downgrade() -> None:
    op.execute("DELETE FROM saved_diagnosis WHERE kind = 'run-up'")
    _swap(_OLD)
