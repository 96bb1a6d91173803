"""on SQLite, a raw file's bytes are the last column of its row

Revision ID: 0015
Revises: 0014
Create Date: 2026-12-02

SQLite writes a large blob in place (a zeroblob filled piece by piece) only when no other
column's data follows it in the row; otherwise it builds the whole row in memory, about
twice the file's size. ``raw_file.content`` moves to the end: copied to a new last column,
the old one dropped, the new one renamed (no table rebuild, so the samples and channels
that refer to each raw file are untouched). PostgreSQL keeps large values out of line and
is left as it is. Downgrading leaves the column where it is (order has no meaning).
"""

from __future__ import annotations

from alembic import op

revision = "0015"
down_revision = "0014"
branch_labels = None
depends_on = None


def upgrade() -> None:
    if op.get_bind().dialect.name != "sqlite":
        return
    op.execute("ALTER TABLE raw_file ADD COLUMN content_last BLOB NOT NULL DEFAULT x''")
    op.execute("UPDATE raw_file SET content_last = content")
    op.execute("ALTER TABLE raw_file DROP COLUMN content")
    op.execute("ALTER TABLE raw_file RENAME COLUMN content_last TO content")


def downgrade() -> None:
    pass
