"""sign-off keys manifests signatures amendments issued reports

Revision ID: 0005
Revises: 0004
Create Date: 2026-12-02 00:09:43.699317
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0005"
down_revision = "0004"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "manifest",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("campaign_id", sa.Uuid(), nullable=False),
        sa.Column("root", sa.String(length=64), nullable=False),
        sa.Column("body_json", sa.Text(), nullable=False),
        sa.Column("created_by", sa.String(), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.ForeignKeyConstraint(
            ["campaign_id"],
            ["campaign.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
    )
    with op.batch_alter_table("manifest", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_manifest_campaign_id"), ["campaign_id"], unique=False)

    op.create_table(
        "person_key",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("person_id", sa.Uuid(), nullable=False),
        sa.Column("public_key", sa.String(length=64), nullable=False),
        sa.Column("fingerprint", sa.String(length=64), nullable=False),
        sa.Column("registered_by", sa.String(), nullable=False),
        sa.Column("registered_at", sa.DateTime(timezone=True), nullable=False),
        sa.ForeignKeyConstraint(
            ["person_id"],
            ["person.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("fingerprint"),
    )
    with op.batch_alter_table("person_key", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_person_key_person_id"), ["person_id"], unique=False)

    op.create_table(
        "amendment",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("campaign_id", sa.Uuid(), nullable=False),
        sa.Column("supersedes_manifest_id", sa.Uuid(), nullable=False),
        sa.Column("reason", sa.String(), nullable=False),
        sa.Column("requested_by", sa.String(), nullable=False),
        sa.Column("at", sa.DateTime(timezone=True), nullable=False),
        sa.ForeignKeyConstraint(
            ["campaign_id"],
            ["campaign.id"],
        ),
        sa.ForeignKeyConstraint(
            ["supersedes_manifest_id"],
            ["manifest.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
    )
    with op.batch_alter_table("amendment", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_amendment_campaign_id"), ["campaign_id"], unique=False)

    op.create_table(
        "report_issue",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("campaign_id", sa.Uuid(), nullable=False),
        sa.Column("manifest_id", sa.Uuid(), nullable=False),
        sa.Column("report_number", sa.String(), nullable=False),
        sa.Column("revision", sa.Integer(), nullable=False),
        sa.Column("pdf_sha256", sa.String(length=64), nullable=False),
        sa.Column("issued_by", sa.String(), nullable=False),
        sa.Column("issued_at", sa.DateTime(timezone=True), nullable=False),
        sa.ForeignKeyConstraint(
            ["campaign_id"],
            ["campaign.id"],
        ),
        sa.ForeignKeyConstraint(
            ["manifest_id"],
            ["manifest.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("pdf_sha256"),
    )
    with op.batch_alter_table("report_issue", schema=None) as batch_op:
        batch_op.create_index(
            batch_op.f("ix_report_issue_campaign_id"), ["campaign_id"], unique=False
        )

    op.create_table(
        "signature",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("manifest_id", sa.Uuid(), nullable=False),
        sa.Column("role", sa.String(length=16), nullable=False),
        sa.Column("person_id", sa.Uuid(), nullable=False),
        sa.Column("key_id", sa.Uuid(), nullable=False),
        sa.Column("signed_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("signature", sa.String(length=128), nullable=False),
        sa.ForeignKeyConstraint(
            ["key_id"],
            ["person_key.id"],
        ),
        sa.ForeignKeyConstraint(
            ["manifest_id"],
            ["manifest.id"],
        ),
        sa.ForeignKeyConstraint(
            ["person_id"],
            ["person.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("manifest_id", "role"),
    )
    with op.batch_alter_table("signature", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_signature_manifest_id"), ["manifest_id"], unique=False)


def downgrade() -> None:
    with op.batch_alter_table("signature", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_signature_manifest_id"))

    op.drop_table("signature")
    with op.batch_alter_table("report_issue", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_report_issue_campaign_id"))

    op.drop_table("report_issue")
    with op.batch_alter_table("amendment", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_amendment_campaign_id"))

    op.drop_table("amendment")
    with op.batch_alter_table("person_key", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_person_key_person_id"))

    op.drop_table("person_key")
    with op.batch_alter_table("manifest", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_manifest_campaign_id"))

    op.drop_table("manifest")
