"""a logger import can be withdrawn (who, when, why) until the run's data check

Revision ID: 0011
Revises: 0009
Create Date: 2026-12-02
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0011"
down_revision = "0010"
branch_labels = None
depends_on = None


def upgrade() -> None:
    # plain ADD COLUMN (nullable): SQLite keeps the table, so rows referring to it stay valid
    op.add_column("raw_file", sa.Column("withdrawn_at", sa.DateTime(timezone=True), nullable=True))
    op.add_column("raw_file", sa.Column("withdrawn_by", sa.String(), nullable=True))
    op.add_column("raw_file", sa.Column("withdrawn_why", sa.String(), nullable=True))


def downgrade() -> None:
    # ALTER TABLE ... DROP COLUMN (SQLite 3.35+): the table is kept, so foreign keys hold
    op.drop_column("raw_file", "withdrawn_why")
    op.drop_column("raw_file", "withdrawn_by")
    op.drop_column("raw_file", "withdrawn_at")
