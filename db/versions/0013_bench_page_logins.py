"""bench page logins: argon2id password hashes and failed-login records for back-off

Revision ID: 0013
Revises: 0012
Create Date: 2026-12-02
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0013"
down_revision = "0012"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "person_password",
        sa.Column("person_id", sa.Uuid(), nullable=False),
        sa.Column("hash", sa.String(), nullable=False),
        sa.Column("set_by", sa.String(), nullable=False),
        sa.Column("set_at", sa.DateTime(timezone=True), nullable=False),
        sa.ForeignKeyConstraint(["person_id"], ["person.id"]),
        sa.PrimaryKeyConstraint("person_id"),
    )
    op.create_table(
        "login_failure",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("initials", sa.String(length=16), nullable=False),
        sa.Column("at", sa.DateTime(timezone=True), nullable=False),
        sa.PrimaryKeyConstraint("id"),
    )
    op.create_index("ix_login_failure_initials", "login_failure", ["initials"])


def downgrade() -> None:
    op.drop_index("ix_login_failure_initials", table_name="login_failure")
    op.drop_table("login_failure")
    op.drop_table("person_password")
