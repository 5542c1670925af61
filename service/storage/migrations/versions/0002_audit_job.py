"""Add the audit_job table; let saved_diagnosis hold the kind "audit".

Revision ID: 0002
Revises: 0001
Create Date: 2026-12-04
"""

from __future__ import annotations

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0002"
down_revision: str | None = "0001"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None

_OLD_KINDS = "kind IN ('diagnose', 'compare', 'fold', 'plan')"
_NEW_KINDS = "kind IN ('diagnose', 'compare', 'fold', 'plan', 'audit')"


def _saved_table(condition: str) -> sa.Table:
    """saved_diagnosis as 0001 made it, with the kind constraint given."""
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
        sa.CheckConstraint(condition, name="ck_saved_diagnosis_kind"),
        sa.Index("ix_saved_diagnosis_created_at", "created_at"),
    )


def _kinds(condition: str) -> None:
    if op.get_bind().dialect.name == "sqlite":
        # SQLite cannot alter a constraint in place: the table is copied into one
        # defined with the new constraint (rows and index kept).
        with op.batch_alter_table(
            "saved_diagnosis", copy_from=_saved_table(condition), recreate="always"
        ):
            pass
        return
    # 0001's constraint went through the naming convention twice on PostgreSQL
    # (ck_saved_diagnosis_ck_saved_diagnosis_kind); either name is dropped.
    for name in ("ck_saved_diagnosis_ck_saved_diagnosis_kind", "ck_saved_diagnosis_kind"):
        op.execute(f"ALTER TABLE saved_diagnosis DROP CONSTRAINT IF EXISTS {name}")
    op.execute(
        f"ALTER TABLE saved_diagnosis ADD CONSTRAINT ck_saved_diagnosis_kind CHECK ({condition})"
    )


def upgrade() -> None:
    _kinds(_NEW_KINDS)
    op.create_table(
        "audit_job",
        sa.Column("id", sa.String(64), nullable=False),
        sa.Column("status", sa.String(16), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("updated_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("request", sa.JSON(), nullable=False),
        sa.Column("done", sa.Integer(), nullable=False),
        sa.Column("total", sa.Integer(), nullable=False),
        sa.Column("errors", sa.Integer(), nullable=False),
        sa.Column("message", sa.Text(), nullable=True),
        sa.Column("summary", sa.JSON(), nullable=True),
        sa.Column("saved_id", sa.String(64), nullable=True),
        sa.PrimaryKeyConstraint("id", name="pk_audit_job"),
        sa.CheckConstraint(
            "status IN ('queued', 'running', 'done', 'failed', 'interrupted')",
            name=op.f("ck_audit_job_status"),
        ),
    )
    op.create_index("ix_audit_job_status", "audit_job", ["status"])


def downgrade() -> None:
    op.drop_index("ix_audit_job_status", table_name="audit_job")
    op.drop_table("audit_job")
    op.execute("DELETE FROM saved_diagnosis WHERE kind = 'audit'")
    _kinds(_OLD_KINDS)
