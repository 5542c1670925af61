"""Create the saved_diagnosis table.

Revision ID: 0001
Revises:
Create Date: 2026-01-01
"""

from __future__ import annotations

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0001"
down_revision: str | None = None
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def upgrade() -> None:
    op.create_table(
        "saved_diagnosis",
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
        sa.CheckConstraint(
            "kind IN ('diagnose', 'compare', 'fold', 'plan')",
            name="ck_saved_diagnosis_kind",
        ),
    )
    op.create_index("ix_saved_diagnosis_created_at", "saved_diagnosis", ["created_at"])


def downgrade() -> None:
    op.drop_index("ix_saved_diagnosis_created_at", table_name="saved_diagnosis")
    op.drop_table("saved_diagnosis")
