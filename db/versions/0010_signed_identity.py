"""signed identity: dated role grants, key enrolment proofs and countersignatures, key
revocations, signed data checks and deviation approvals

Revision ID: 0010
Revises: 0009
Create Date: 2026-12-02

``person_role`` becomes ``role_grant``: each existing role is carried over as a grant dated
when the person was added, unsigned (reason "granted before signed grants"); such grants
count for acts at the bench but not under ``verify --trust``. Keys registered before this
revision have no enrolment signature and fail ``verify --trust`` until enrolled again.
On PostgreSQL the new register tables are append-only, like ``person_key``.
"""

from __future__ import annotations

import datetime as dt
import uuid

import sqlalchemy as sa
from alembic import op

revision = "0010"
down_revision = "0009"
branch_labels = None
depends_on = None

APPEND_ONLY = ("role_grant", "key_revocation")
SINCE = "identity_signed_from"  # keys enrolled before this were not countersigned


def upgrade() -> None:
    op.create_table(
        "role_grant",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("person_id", sa.Uuid(), nullable=False),
        sa.Column("role", sa.String(length=16), nullable=False),
        sa.Column("action", sa.String(length=16), nullable=False),
        sa.Column("at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("reason", sa.String(), nullable=False),
        sa.Column("by_person_id", sa.Uuid(), nullable=True),
        sa.Column("by_key_id", sa.Uuid(), nullable=True),
        sa.Column("signature", sa.String(length=128), nullable=True),
        sa.ForeignKeyConstraint(["by_key_id"], ["person_key.id"]),
        sa.ForeignKeyConstraint(["by_person_id"], ["person.id"]),
        sa.ForeignKeyConstraint(["person_id"], ["person.id"]),
        sa.PrimaryKeyConstraint("id"),
    )
    with op.batch_alter_table("role_grant", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_role_grant_person_id"), ["person_id"], unique=False)
    op.create_table(
        "key_revocation",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("key_id", sa.Uuid(), nullable=False),
        sa.Column("effective_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("reason", sa.String(), nullable=False),
        sa.Column("by_person_id", sa.Uuid(), nullable=False),
        sa.Column("by_key_id", sa.Uuid(), nullable=False),
        sa.Column("signature", sa.String(length=128), nullable=False),
        sa.Column("recorded_at", sa.DateTime(timezone=True), nullable=False),
        sa.ForeignKeyConstraint(["by_key_id"], ["person_key.id"]),
        sa.ForeignKeyConstraint(["by_person_id"], ["person.id"]),
        sa.ForeignKeyConstraint(["key_id"], ["person_key.id"]),
        sa.PrimaryKeyConstraint("id"),
    )
    with op.batch_alter_table("key_revocation", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_key_revocation_key_id"), ["key_id"], unique=False)
    with op.batch_alter_table("person_key", schema=None) as batch_op:
        batch_op.add_column(sa.Column("proof", sa.String(length=128), nullable=True))
        batch_op.add_column(sa.Column("enrolled_by_key_id", sa.Uuid(), nullable=True))
        batch_op.add_column(sa.Column("enrolment_signature", sa.String(length=128), nullable=True))
    with op.batch_alter_table("run", schema=None) as batch_op:
        batch_op.add_column(sa.Column("check_key_id", sa.Uuid(), nullable=True))
        batch_op.add_column(sa.Column("check_signature", sa.String(length=128), nullable=True))
    with op.batch_alter_table("deviation", schema=None) as batch_op:
        batch_op.add_column(sa.Column("approval_key_id", sa.Uuid(), nullable=True))
        batch_op.add_column(sa.Column("approval_signature", sa.String(length=128), nullable=True))
    bind = op.get_bind()
    rows = bind.execute(
        sa.text(
            "SELECT r.person_id, r.role, p.created_at FROM person_role r "
            "JOIN person p ON p.id = r.person_id"
        )
    ).all()
    grant = sa.table(
        "role_grant",
        sa.column("id", sa.Uuid()),
        sa.column("person_id", sa.Uuid()),
        sa.column("role", sa.String()),
        sa.column("action", sa.String()),
        sa.column("at", sa.DateTime(timezone=True)),
        sa.column("reason", sa.String()),
    )
    for person_id, role, created_at in rows:
        bind.execute(
            grant.insert().values(
                id=uuid.uuid4(),
                person_id=uuid.UUID(str(person_id)),
                role=role,
                action="grant",
                at=created_at
                if isinstance(created_at, dt.datetime)
                else dt.datetime.fromisoformat(str(created_at)),
                reason="granted before signed grants",
            )
        )
    op.drop_table("person_role")
    bind.execute(
        sa.text("INSERT INTO store_meta (key, value) VALUES (:k, :v)").bindparams(
            k=SINCE, v=dt.datetime.now(dt.UTC).isoformat()
        )
    )
    if bind.dialect.name == "postgresql":
        for table in APPEND_ONLY:
            op.execute(
                f"CREATE TRIGGER {table}_append_only BEFORE UPDATE OR DELETE ON {table} "
                "FOR EACH ROW EXECUTE FUNCTION testplan_append_only()"
            )


def downgrade() -> None:
    bind = op.get_bind()
    if bind.dialect.name == "postgresql":
        for table in APPEND_ONLY:
            op.execute(f"DROP TRIGGER {table}_append_only ON {table}")
    op.create_table(
        "person_role",
        sa.Column("person_id", sa.Uuid(), nullable=False),
        sa.Column("role", sa.String(length=16), nullable=False),
        sa.ForeignKeyConstraint(["person_id"], ["person.id"]),
        sa.PrimaryKeyConstraint("person_id", "role"),
    )
    # the roles held at the downgrade, as the older schema kept them
    held: dict[tuple[str, str], str] = {}
    for person_id, role, action in bind.execute(
        sa.text("SELECT person_id, role, action FROM role_grant ORDER BY at")
    ).all():
        held[(str(person_id), role)] = action
    for (person_id, role), action in held.items():
        if action == "grant":
            bind.execute(
                sa.text("INSERT INTO person_role (person_id, role) VALUES (:p, :r)").bindparams(
                    sa.bindparam("p", type_=sa.Uuid()), r=role
                ),
                {"p": uuid.UUID(person_id)},
            )
    bind.execute(sa.text("DELETE FROM store_meta WHERE key = :k").bindparams(k=SINCE))
    # plain DROP COLUMN (SQLite 3.35+): a batch copy of run would break its references
    for table, column in (
        ("deviation", "approval_signature"),
        ("deviation", "approval_key_id"),
        ("run", "check_signature"),
        ("run", "check_key_id"),
        ("person_key", "enrolment_signature"),
        ("person_key", "enrolled_by_key_id"),
        ("person_key", "proof"),
    ):
        op.drop_column(table, column)
    op.drop_table("key_revocation")
    op.drop_table("role_grant")
