"""signatures carry their context (signer's record, audit-chain head); issues their date

Revision ID: 0014
Revises: 0010
Create Date: 2026-12-02

``signature.context_json`` holds what a signature covers besides the manifest root: the
SHA-256 of the signer's person record (name, initials) and the head of the audit
chain (chain, length, hash) when it was made. ``report_issue.issue_date`` keeps the date of
issue printed on the report, so printing the issued revision again gives the same PDF.
Signatures made before this revision have no context and verify as they did. On
PostgreSQL every table refuses TRUNCATE by trigger.
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0014"
down_revision = "0013"
branch_labels = None
depends_on = None


REFUSE_TRUNCATE = """
CREATE OR REPLACE FUNCTION testplan_refuse_truncate() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
  RAISE EXCEPTION 'testplan: % cannot be truncated: records are kept', TG_TABLE_NAME;
END $$;
"""


def _tables() -> list[str]:
    names = sa.inspect(op.get_bind()).get_table_names()
    return sorted(n for n in names if n != "alembic_version")


def upgrade() -> None:
    if op.get_bind().dialect.name == "postgresql":
        op.execute(REFUSE_TRUNCATE)
        for table in _tables():
            op.execute(
                f'CREATE TRIGGER {table}_no_truncate BEFORE TRUNCATE ON "{table}" '
                "FOR EACH STATEMENT EXECUTE FUNCTION testplan_refuse_truncate()"
            )
    with op.batch_alter_table("signature", schema=None) as batch_op:
        batch_op.add_column(sa.Column("context_json", sa.Text(), nullable=True))
    with op.batch_alter_table("report_issue", schema=None) as batch_op:
        batch_op.add_column(sa.Column("issue_date", sa.Date(), nullable=True))


def downgrade() -> None:
    if op.get_bind().dialect.name == "postgresql":
        for table in _tables():
            op.execute(f'DROP TRIGGER IF EXISTS {table}_no_truncate ON "{table}"')
        op.execute("DROP FUNCTION IF EXISTS testplan_refuse_truncate()")
    with op.batch_alter_table("report_issue", schema=None) as batch_op:
        batch_op.drop_column("issue_date")
    with op.batch_alter_table("signature", schema=None) as batch_op:
        batch_op.drop_column("context_json")
