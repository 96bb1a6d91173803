"""signatures carry their context (signer's record, audit-chain head); issues their date

Revision ID: 0014
Revises: 0009
Create Date: 2026-12-02

``signature.context_json`` holds what a signature covers besides the manifest root: the
SHA-256 of the signer's person record (name, initials, roles) and the head of the audit
chain (chain, length, hash) when it was made. ``report_issue.issue_date`` keeps the date of
issue printed on the report, so printing the issued revision again gives the same PDF.
Signatures made before this revision have no context and verify as they did.
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0014"
down_revision = "0009"
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table("signature", schema=None) as batch_op:
        batch_op.add_column(sa.Column("context_json", sa.Text(), nullable=True))
    with op.batch_alter_table("report_issue", schema=None) as batch_op:
        batch_op.add_column(sa.Column("issue_date", sa.Date(), nullable=True))


def downgrade() -> None:
    with op.batch_alter_table("report_issue", schema=None) as batch_op:
        batch_op.drop_column("issue_date")
    with op.batch_alter_table("signature", schema=None) as batch_op:
        batch_op.drop_column("context_json")
