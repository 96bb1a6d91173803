"""run validity: invalidated runs and their repeats, deviations covering a criterion,
people's job titles

Revision ID: 0012
Revises: 0009
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0012"
down_revision = "0009"
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table("run", schema=None) as batch_op:
        batch_op.add_column(sa.Column("invalid_reason", sa.String(), nullable=True))
        batch_op.add_column(sa.Column("repeat_of_id", sa.Uuid(), nullable=True))
        batch_op.create_foreign_key("fk_run_repeat_of", "run", ["repeat_of_id"], ["id"])
    with op.batch_alter_table("deviation", schema=None) as batch_op:
        batch_op.add_column(sa.Column("criterion_key", sa.String(), nullable=True))
    with op.batch_alter_table("person", schema=None) as batch_op:
        batch_op.add_column(sa.Column("title", sa.String(), nullable=True))


def downgrade() -> None:
    with op.batch_alter_table("person", schema=None) as batch_op:
        batch_op.drop_column("title")
    with op.batch_alter_table("deviation", schema=None) as batch_op:
        batch_op.drop_column("criterion_key")
    with op.batch_alter_table("run", schema=None) as batch_op:
        batch_op.drop_constraint("fk_run_repeat_of", type_="foreignkey")
        batch_op.drop_column("repeat_of_id")
        batch_op.drop_column("invalid_reason")
