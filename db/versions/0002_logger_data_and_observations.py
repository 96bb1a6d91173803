"""logger raw files, channels and samples; observations and attachments

Revision ID: 0002
Revises: 0001
Create Date: 2026-12-01 23:10:40.336524
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0002"
down_revision = "0001"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "attachment",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("sha256", sa.String(length=64), nullable=False),
        sa.Column("name", sa.String(), nullable=False),
        sa.Column("media_type", sa.String(), nullable=False),
        sa.Column("size", sa.Integer(), nullable=False),
        sa.Column("content", sa.LargeBinary(), nullable=False),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("sha256"),
    )
    op.create_table(
        "observation",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("run_id", sa.Uuid(), nullable=False),
        sa.Column("specimen_id", sa.Uuid(), nullable=True),
        sa.Column("kind", sa.String(length=32), nullable=False),
        sa.Column("checkpoint", sa.String(), nullable=True),
        sa.Column("data_json", sa.Text(), nullable=False),
        sa.Column("attachment_id", sa.Uuid(), nullable=True),
        sa.Column("recorded_by_id", sa.Uuid(), nullable=False),
        sa.Column("recorded_at", sa.DateTime(timezone=True), nullable=False),
        sa.ForeignKeyConstraint(
            ["attachment_id"],
            ["attachment.id"],
        ),
        sa.ForeignKeyConstraint(
            ["recorded_by_id"],
            ["person.id"],
        ),
        sa.ForeignKeyConstraint(
            ["run_id"],
            ["run.id"],
        ),
        sa.ForeignKeyConstraint(
            ["specimen_id"],
            ["specimen.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
    )
    with op.batch_alter_table("observation", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_observation_run_id"), ["run_id"], unique=False)

    op.create_table(
        "raw_file",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("run_id", sa.Uuid(), nullable=False),
        sa.Column("name", sa.String(), nullable=False),
        sa.Column("sha256", sa.String(length=64), nullable=False),
        sa.Column("size", sa.Integer(), nullable=False),
        sa.Column("content", sa.LargeBinary(), nullable=False),
        sa.Column("layout", sa.String(length=8), nullable=False),
        sa.Column("timezone", sa.String(), nullable=False),
        sa.Column("read_options_json", sa.Text(), nullable=False),
        sa.Column("tool_version", sa.String(), nullable=False),
        sa.Column("operator_id", sa.Uuid(), nullable=False),
        sa.Column("imported_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("samples", sa.Integer(), nullable=False),
        sa.Column("first_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("last_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("samples_sha256", sa.String(length=64), nullable=False),
        sa.ForeignKeyConstraint(
            ["operator_id"],
            ["person.id"],
        ),
        sa.ForeignKeyConstraint(
            ["run_id"],
            ["run.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
    )
    with op.batch_alter_table("raw_file", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_raw_file_run_id"), ["run_id"], unique=False)

    op.create_table(
        "logger_channel",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("raw_file_id", sa.Uuid(), nullable=False),
        sa.Column("number", sa.Integer(), nullable=False),
        sa.Column("quantity", sa.String(), nullable=False),
        sa.Column("source", sa.String(), nullable=False),
        sa.Column("source_unit", sa.String(), nullable=False),
        sa.Column("unit", sa.String(), nullable=False),
        sa.Column("scale", sa.Float(), nullable=False),
        sa.Column("offset", sa.Float(), nullable=False),
        sa.Column("equipment_id", sa.Uuid(), nullable=True),
        sa.Column("calibration_id", sa.Uuid(), nullable=True),
        sa.Column("specimen_id", sa.Uuid(), nullable=True),
        sa.ForeignKeyConstraint(
            ["calibration_id"],
            ["calibration.id"],
        ),
        sa.ForeignKeyConstraint(
            ["equipment_id"],
            ["equipment.id"],
        ),
        sa.ForeignKeyConstraint(
            ["raw_file_id"],
            ["raw_file.id"],
        ),
        sa.ForeignKeyConstraint(
            ["specimen_id"],
            ["specimen.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("raw_file_id", "number"),
    )
    with op.batch_alter_table("logger_channel", schema=None) as batch_op:
        batch_op.create_index(
            batch_op.f("ix_logger_channel_raw_file_id"), ["raw_file_id"], unique=False
        )

    op.create_table(
        "sample",
        sa.Column("raw_file_id", sa.Uuid(), nullable=False),
        sa.Column("seq", sa.BigInteger(), autoincrement=False, nullable=False),
        sa.Column("channel", sa.Integer(), nullable=False),
        sa.Column("t_us", sa.BigInteger(), nullable=False),
        sa.Column("value", sa.Float(), nullable=False),
        sa.ForeignKeyConstraint(
            ["raw_file_id"],
            ["raw_file.id"],
        ),
        sa.PrimaryKeyConstraint("raw_file_id", "seq"),
    )


def downgrade() -> None:
    op.drop_table("sample")
    with op.batch_alter_table("logger_channel", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_logger_channel_raw_file_id"))

    op.drop_table("logger_channel")
    with op.batch_alter_table("raw_file", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_raw_file_run_id"))

    op.drop_table("raw_file")
    with op.batch_alter_table("observation", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_observation_run_id"))

    op.drop_table("observation")
    op.drop_table("attachment")
