"""SQLite keeps samples in their primary-key tree (WITHOUT ROWID): faster bulk writes

Revision ID: 0008
Revises: 0007
Create Date: 2026-12-02

The sample table is rebuilt with the same columns, key and foreign key; PostgreSQL is
unchanged.
"""

from __future__ import annotations

from alembic import op

revision = "0008"
down_revision = "0007"
branch_labels = None
depends_on = None

COLUMNS = (
    "raw_file_id CHAR(32) NOT NULL, seq BIGINT NOT NULL, channel INTEGER NOT NULL, "
    "t_us BIGINT NOT NULL, value FLOAT NOT NULL, PRIMARY KEY (raw_file_id, seq), "
    "FOREIGN KEY(raw_file_id) REFERENCES raw_file (id)"
)


def _rebuild(suffix: str) -> None:
    op.execute(f"CREATE TABLE sample_rebuilt ({COLUMNS}){suffix}")
    op.execute(
        "INSERT INTO sample_rebuilt SELECT raw_file_id, seq, channel, t_us, value FROM sample"
    )
    op.execute("DROP TABLE sample")
    op.execute("ALTER TABLE sample_rebuilt RENAME TO sample")


def upgrade() -> None:
    if op.get_bind().dialect.name == "sqlite":
        _rebuild(" WITHOUT ROWID")


def downgrade() -> None:
    if op.get_bind().dialect.name == "sqlite":
        _rebuild("")
