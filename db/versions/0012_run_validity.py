"""run validity: invalidated runs and their repeats, deviations covering a criterion,
people's job titles

Revision ID: 0012
Revises: 0011
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0012"
down_revision = "0011"
branch_labels = None
depends_on = None


def upgrade() -> None:
    # Plain ALTER TABLE ADD COLUMN, no new constraint: recreating the run table on SQLite
    # would fail on a store with records and foreign keys on. The repeat's original is
    # written only by judging.invalidate_run, in the same unit of work.
    op.add_column("run", sa.Column("invalid_reason", sa.String(length=2000), nullable=True))
    op.add_column("run", sa.Column("repeat_of_id", sa.Uuid(), nullable=True))
    op.add_column("deviation", sa.Column("criterion_key", sa.String(length=64), nullable=True))
    op.add_column("person", sa.Column("title", sa.String(length=120), nullable=True))


def downgrade() -> None:
    # Plain DROP COLUMN (SQLite 3.35 and later): a table copy would trip the foreign keys.
    op.drop_column("person", "title")
    op.drop_column("deviation", "criterion_key")
    op.drop_column("run", "repeat_of_id")
    op.drop_column("run", "invalid_reason")
