"""a logger import can be withdrawn (who, when, why) until the run's data check

Revision ID: 0011
Revises: 0009
Create Date: 2026-12-02
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0011"
down_revision = "0009"
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table("raw_file") as batch:
        batch.add_column(sa.Column("withdrawn_at", sa.DateTime(timezone=True), nullable=True))
        batch.add_column(sa.Column("withdrawn_by", sa.String(), nullable=True))
        batch.add_column(sa.Column("withdrawn_why", sa.String(), nullable=True))


def downgrade() -> None:
    with op.batch_alter_table("raw_file") as batch:
        batch.drop_column("withdrawn_why")
        batch.drop_column("withdrawn_by")
        batch.drop_column("withdrawn_at")
