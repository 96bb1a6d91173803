"""judgements and verdicts

Revision ID: 0003
Revises: 0002
Create Date: 2026-12-01 23:44:02.553232
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0003"
down_revision = "0002"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "judgement",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("run_id", sa.Uuid(), nullable=False),
        sa.Column("revision_id", sa.Uuid(), nullable=False),
        sa.Column("rule", sa.String(length=16), nullable=False),
        sa.Column("guard_factor", sa.Float(), nullable=False),
        sa.Column("rule_agreement", sa.String(), nullable=True),
        sa.Column("outcome", sa.String(length=24), nullable=False),
        sa.Column("interpretation_json", sa.Text(), nullable=True),
        sa.Column("tool_version", sa.String(), nullable=False),
        sa.Column("inputs_sha256", sa.String(length=64), nullable=False),
        sa.Column("judged_by", sa.String(), nullable=False),
        sa.Column("judged_at", sa.DateTime(timezone=True), nullable=False),
        sa.ForeignKeyConstraint(
            ["revision_id"],
            ["plan_revision.id"],
        ),
        sa.ForeignKeyConstraint(
            ["run_id"],
            ["run.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
    )
    with op.batch_alter_table("judgement", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_judgement_run_id"), ["run_id"], unique=False)

    op.create_table(
        "verdict",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("judgement_id", sa.Uuid(), nullable=False),
        sa.Column("criterion_key", sa.String(length=128), nullable=False),
        sa.Column("quantity", sa.String(), nullable=False),
        sa.Column("specimen_id", sa.Uuid(), nullable=True),
        sa.Column("outcome", sa.String(length=24), nullable=False),
        sa.Column("measured", sa.Float(), nullable=True),
        sa.Column("unit", sa.String(), nullable=True),
        sa.Column("limit_min", sa.Float(), nullable=True),
        sa.Column("limit_max", sa.Float(), nullable=True),
        sa.Column("accept_min", sa.Float(), nullable=True),
        sa.Column("accept_max", sa.Float(), nullable=True),
        sa.Column("margin", sa.Float(), nullable=True),
        sa.Column("uncertainty", sa.Float(), nullable=True),
        sa.Column("coverage_k", sa.Float(), nullable=True),
        sa.Column("window_start", sa.DateTime(timezone=True), nullable=True),
        sa.Column("window_end", sa.DateTime(timezone=True), nullable=True),
        sa.Column("detail", sa.Text(), nullable=False),
        sa.Column("flags_json", sa.Text(), nullable=False),
        sa.Column("inputs_sha256", sa.String(length=64), nullable=False),
        sa.ForeignKeyConstraint(
            ["judgement_id"],
            ["judgement.id"],
        ),
        sa.ForeignKeyConstraint(
            ["specimen_id"],
            ["specimen.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
    )
    with op.batch_alter_table("verdict", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_verdict_judgement_id"), ["judgement_id"], unique=False)


def downgrade() -> None:
    with op.batch_alter_table("verdict", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_verdict_judgement_id"))

    op.drop_table("verdict")
    with op.batch_alter_table("judgement", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_judgement_run_id"))

    op.drop_table("judgement")
