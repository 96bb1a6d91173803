"""an issued report is a signed act of the person issuing it

Revision ID: 0017
Revises: 0016
Create Date: 2026-12-02

``report_issue`` gains who issued it (``person_id``, ``key_id``), their Ed25519
``signature`` over the issue record (report number, revision, date of issue, campaign,
manifest root, the length and SHA-256 of the PDF before its signed tail, time of issue) and
``base_sha256``. ``pdf_sha256`` stays the SHA-256 of the whole issued file. Issues recorded
before this revision have none of these and verify as they did.
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0017"
down_revision = "0016"
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table("report_issue", schema=None) as batch_op:
        batch_op.add_column(sa.Column("person_id", sa.Uuid(), nullable=True))
        batch_op.add_column(sa.Column("key_id", sa.Uuid(), nullable=True))
        batch_op.add_column(sa.Column("signature", sa.String(length=128), nullable=True))
        batch_op.add_column(sa.Column("base_sha256", sa.String(length=64), nullable=True))


def downgrade() -> None:
    # Plain DROP COLUMN on both engines: a batch rebuild would drop the table's append-only
    # triggers (migration 0016) on SQLite.
    for name in ("base_sha256", "signature", "key_id", "person_id"):
        op.execute(f"ALTER TABLE report_issue DROP COLUMN {name}")
