"""samples are stored in columnar blocks of 65,536 (sample_block) instead of a row each

Revision ID: 0009
Revises: 0008
Create Date: 2026-12-02

Each import's rows in ``sample`` are moved, in sequence order, into blocks holding three
little-endian arrays (int64 time, int32 channel, float64 value) with the block's SHA-256;
then ``sample`` is dropped. Hashes over an import's samples and manifest chunks are over
the same values in the same order, so signatures made before the upgrade still verify.
On PostgreSQL the approved-campaign lock moves from ``sample`` to ``sample_block``.
"""

from __future__ import annotations

import hashlib
from typing import Any

import sqlalchemy as sa
from alembic import op

revision = "0009"
down_revision = "0008"
branch_labels = None
depends_on = None

BLOCK = 65_536

# 0006's lock function, with the samples table named by the caller (migrations stay frozen
# snapshots: they do not import each other).
GUARD = """
CREATE OR REPLACE FUNCTION testplan_guard_locked() RETURNS trigger LANGUAGE plpgsql AS $$
DECLARE
  r jsonb := to_jsonb(OLD);
  cids uuid[];
BEGIN
  IF TG_TABLE_NAME = 'campaign' THEN
    cids := ARRAY[(r->>'id')::uuid];
  ELSIF TG_TABLE_NAME IN ('plan_revision', 'specimen', 'run') THEN
    cids := ARRAY[(r->>'campaign_id')::uuid];
  ELSIF TG_TABLE_NAME IN ('run_specimen', 'run_equipment', 'deviation', 'raw_file',
                          'observation', 'judgement') THEN
    cids := ARRAY(SELECT campaign_id FROM run WHERE id = (r->>'run_id')::uuid);
  ELSIF TG_TABLE_NAME IN ('logger_channel', '{samples}') THEN
    cids := ARRAY(SELECT u.campaign_id FROM raw_file f JOIN run u ON u.id = f.run_id
                  WHERE f.id = (r->>'raw_file_id')::uuid);
  ELSIF TG_TABLE_NAME = 'verdict' THEN
    cids := ARRAY(SELECT u.campaign_id FROM judgement j JOIN run u ON u.id = j.run_id
                  WHERE j.id = (r->>'judgement_id')::uuid);
  ELSIF TG_TABLE_NAME = 'calibration' THEN
    cids := ARRAY(SELECT DISTINCT u.campaign_id FROM run_equipment e JOIN run u ON u.id = e.run_id
                  WHERE e.calibration_id = (r->>'id')::uuid);
  END IF;
  IF EXISTS (SELECT 1 FROM unnest(cids) c WHERE testplan_campaign_locked(c)) THEN
    RAISE EXCEPTION 'testplan: % belongs to an approved campaign and is locked; use testplan amend',
      TG_TABLE_NAME;
  END IF;
  RETURN CASE WHEN TG_OP = 'DELETE' THEN OLD ELSE NEW END;
END $$
"""


def _digest(t: Any, c: Any, v: Any) -> str:
    h = hashlib.sha256()
    h.update(t.astype("<i8").tobytes())
    h.update(c.astype("<i4").tobytes())
    h.update(v.astype("<f8").tobytes())
    return h.hexdigest()


def _sample_table() -> sa.TableClause:
    """The row-per-sample table of schema 0008."""
    return sa.table(
        "sample",
        sa.column("raw_file_id", sa.Uuid()),
        sa.column("seq", sa.BigInteger()),
        sa.column("channel", sa.Integer()),
        sa.column("t_us", sa.BigInteger()),
        sa.column("value", sa.Float()),
    )


def _block_table() -> None:
    op.create_table(
        "sample_block",
        sa.Column("raw_file_id", sa.Uuid(), nullable=False),
        sa.Column("block", sa.Integer(), autoincrement=False, nullable=False),
        sa.Column("first_seq", sa.BigInteger(), nullable=False),
        sa.Column("n", sa.Integer(), nullable=False),
        sa.Column("t_us", sa.LargeBinary(), nullable=False),
        sa.Column("channel", sa.LargeBinary(), nullable=False),
        sa.Column("value", sa.LargeBinary(), nullable=False),
        sa.Column("sha256", sa.String(length=64), nullable=False),
        sa.ForeignKeyConstraint(["raw_file_id"], ["raw_file.id"]),
        sa.PrimaryKeyConstraint("raw_file_id", "block"),
    )


def upgrade() -> None:
    import numpy as np

    bind = op.get_bind()
    _block_table()
    sample = _sample_table()
    blocks = sa.table(
        "sample_block",
        *(
            sa.column(name, kind)
            for name, kind in (
                ("raw_file_id", sa.Uuid()),
                ("block", sa.Integer()),
                ("first_seq", sa.BigInteger()),
                ("n", sa.Integer()),
                ("t_us", sa.LargeBinary()),
                ("channel", sa.LargeBinary()),
                ("value", sa.LargeBinary()),
                ("sha256", sa.String()),
            )
        ),
    )
    files = [r[0] for r in bind.execute(sa.select(sample.c.raw_file_id).distinct())]
    for file_id in files:
        rows = bind.execute(
            sa.select(sample.c.t_us, sample.c.channel, sample.c.value)
            .where(sample.c.raw_file_id == file_id)
            .order_by(sample.c.seq)
        ).all()
        data = np.array(rows, dtype=object)
        t = data[:, 0].astype(np.int64)
        c = data[:, 1].astype(np.int32)
        v = data[:, 2].astype(np.float64)
        for start in range(0, len(t), BLOCK):
            stop = min(start + BLOCK, len(t))
            bt, bc, bv = t[start:stop], c[start:stop], v[start:stop]
            bind.execute(
                blocks.insert().values(
                    raw_file_id=file_id,
                    block=start // BLOCK,
                    first_seq=start,
                    n=stop - start,
                    t_us=bt.astype("<i8").tobytes(),
                    channel=bc.astype("<i4").tobytes(),
                    value=bv.astype("<f8").tobytes(),
                    sha256=_digest(bt, bc, bv),
                )
            )
    op.drop_table("sample")
    if bind.dialect.name == "postgresql":
        op.execute(GUARD.replace("{samples}", "sample_block"))
        op.execute(
            "CREATE TRIGGER sample_block_locked BEFORE UPDATE OR DELETE ON sample_block "
            "FOR EACH ROW EXECUTE FUNCTION testplan_guard_locked()"
        )


def downgrade() -> None:
    import numpy as np

    bind = op.get_bind()
    suffix = " WITHOUT ROWID" if bind.dialect.name == "sqlite" else ""
    id_type = "CHAR(32)" if bind.dialect.name == "sqlite" else "UUID"
    op.execute(
        f"CREATE TABLE sample (raw_file_id {id_type} NOT NULL, seq BIGINT NOT NULL, "
        "channel INTEGER NOT NULL, t_us BIGINT NOT NULL, value FLOAT NOT NULL, "
        "PRIMARY KEY (raw_file_id, seq), FOREIGN KEY(raw_file_id) REFERENCES raw_file (id))"
        + suffix
    )
    sample = _sample_table()
    for file_id, first, t, c, v in bind.execute(
        sa.text(
            "SELECT raw_file_id, first_seq, t_us, channel, value FROM sample_block "
            "ORDER BY raw_file_id, block"
        ).columns(raw_file_id=sa.Uuid())
    ):
        tt = np.frombuffer(bytes(t), dtype="<i8")
        cc = np.frombuffer(bytes(c), dtype="<i4")
        vv = np.frombuffer(bytes(v), dtype="<f8")
        bind.execute(
            sample.insert(),
            [
                {"raw_file_id": file_id, "seq": first + i, "channel": ci, "t_us": ti, "value": vi}
                for i, (ti, ci, vi) in enumerate(
                    zip(tt.tolist(), cc.tolist(), vv.tolist(), strict=True)
                )
            ],
        )
    op.drop_table("sample_block")
    if bind.dialect.name == "postgresql":
        op.execute(GUARD.replace("{samples}", "sample"))
        op.execute(
            "CREATE TRIGGER sample_locked BEFORE UPDATE OR DELETE ON sample "
            "FOR EACH ROW EXECUTE FUNCTION testplan_guard_locked()"
        )
