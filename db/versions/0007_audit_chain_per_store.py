"""Each store keeps its own audit chain, so stores from several benches can be merged

Revision ID: 0007
Revises: 0006
Create Date: 2026-12-02

A store gets a ``store_id`` (store_meta); audit entries carry the chain they were written
in, and sequence numbers are unique per chain. Existing entries join the store's own chain.
The chain is not part of an entry's hash, so existing hashes still hold.
"""

from __future__ import annotations

import uuid

import sqlalchemy as sa
from alembic import op

revision = "0007"
down_revision = "0006"
branch_labels = None
depends_on = None


def _triggers(create: bool) -> None:
    if op.get_bind().dialect.name == "sqlite":
        for verb in ("UPDATE", "DELETE"):
            if create:
                op.execute(
                    f"CREATE TRIGGER audit_no_{verb.lower()} BEFORE {verb} ON audit "
                    "BEGIN SELECT RAISE(ABORT, 'audit entries are append-only'); END"
                )
            else:
                op.execute(f"DROP TRIGGER audit_no_{verb.lower()}")
    else:
        op.execute(
            f"ALTER TABLE audit {'ENABLE' if create else 'DISABLE'} TRIGGER audit_append_only"
        )


def upgrade() -> None:
    op.create_table(
        "store_meta",
        sa.Column("key", sa.String(length=32), nullable=False),
        sa.Column("value", sa.String(), nullable=False),
        sa.PrimaryKeyConstraint("key"),
    )
    store_id = str(uuid.uuid4())
    op.execute(
        sa.text("INSERT INTO store_meta (key, value) VALUES ('store_id', :v)").bindparams(
            v=store_id
        )
    )
    _triggers(create=False)
    with op.batch_alter_table("audit", schema=None) as batch_op:
        batch_op.add_column(sa.Column("chain", sa.String(length=36), nullable=True))
    op.execute(sa.text("UPDATE audit SET chain = :v").bindparams(v=store_id))
    # SQLite's constraint on seq has no name: name it by convention so batch mode can drop it.
    naming = {"uq": "uq_%(table_name)s_%(column_0_name)s"}
    with op.batch_alter_table("audit", schema=None, naming_convention=naming) as batch_op:
        batch_op.alter_column("chain", existing_type=sa.String(length=36), nullable=False)
        batch_op.drop_constraint(_seq_constraint(), type_="unique")
        batch_op.create_unique_constraint("uq_audit_chain_seq", ["chain", "seq"])
        batch_op.create_index("ix_audit_chain", ["chain"], unique=False)
    _triggers(create=True)


def _seq_constraint() -> str:
    insp = sa.inspect(op.get_bind())
    for uc in insp.get_unique_constraints("audit"):
        if uc["column_names"] == ["seq"]:
            return str(uc["name"] or "uq_audit_seq")
    raise RuntimeError("no unique constraint on audit.seq")


def downgrade() -> None:
    _triggers(create=False)
    with op.batch_alter_table("audit", schema=None) as batch_op:
        batch_op.drop_index("ix_audit_chain")
        batch_op.drop_constraint("uq_audit_chain_seq", type_="unique")
        batch_op.create_unique_constraint("uq_audit_seq", ["seq"])
        batch_op.drop_column("chain")
    _triggers(create=True)
    op.drop_table("store_meta")
