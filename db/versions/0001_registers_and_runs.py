"""registers, campaigns, plan revisions, runs, deviations and the audit trail

Revision ID: 0001
Revises:
Create Date: 2026-12-01 23:10:40.336524
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0001"
down_revision = None
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "audit",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("seq", sa.Integer(), nullable=False),
        sa.Column("at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("actor", sa.String(), nullable=False),
        sa.Column("action", sa.String(length=64), nullable=False),
        sa.Column("entity", sa.String(length=64), nullable=False),
        sa.Column("entity_id", sa.String(length=64), nullable=False),
        sa.Column("campaign_id", sa.Uuid(), nullable=True),
        sa.Column("why", sa.String(), nullable=True),
        sa.Column("old_json", sa.Text(), nullable=True),
        sa.Column("new_json", sa.Text(), nullable=True),
        sa.Column("prev_hash", sa.String(length=64), nullable=False),
        sa.Column("hash", sa.String(length=64), nullable=False),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("seq"),
    )
    with op.batch_alter_table("audit", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_audit_campaign_id"), ["campaign_id"], unique=False)

    op.create_table(
        "campaign",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("reference", sa.String(length=64), nullable=False),
        sa.Column("title", sa.String(), nullable=False),
        sa.Column("client", sa.String(), nullable=False),
        sa.Column("laboratory", sa.String(), nullable=False),
        sa.Column("location", sa.String(), nullable=True),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("reference"),
    )
    op.create_table(
        "equipment",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("tag", sa.String(length=64), nullable=False),
        sa.Column("description", sa.String(), nullable=False),
        sa.Column("maker", sa.String(), nullable=True),
        sa.Column("model", sa.String(), nullable=True),
        sa.Column("serial", sa.String(), nullable=True),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("tag"),
    )
    op.create_table(
        "person",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("initials", sa.String(length=16), nullable=False),
        sa.Column("name", sa.String(), nullable=False),
        sa.Column("public_key", sa.String(), nullable=True),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("initials"),
    )
    op.create_table(
        "calibration",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("equipment_id", sa.Uuid(), nullable=False),
        sa.Column("channel", sa.String(length=64), nullable=False),
        sa.Column("unit", sa.String(length=32), nullable=False),
        sa.Column("certificate", sa.String(), nullable=False),
        sa.Column("provider", sa.String(), nullable=False),
        sa.Column("calibrated_on", sa.Date(), nullable=False),
        sa.Column("due_on", sa.Date(), nullable=False),
        sa.Column("gain", sa.Float(), nullable=False),
        sa.Column("offset", sa.Float(), nullable=False),
        sa.Column("uncertainty", sa.Float(), nullable=False),
        sa.Column("coverage_k", sa.Float(), nullable=False),
        sa.Column("range_min", sa.Float(), nullable=True),
        sa.Column("range_max", sa.Float(), nullable=True),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.ForeignKeyConstraint(
            ["equipment_id"],
            ["equipment.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
    )
    with op.batch_alter_table("calibration", schema=None) as batch_op:
        batch_op.create_index(
            batch_op.f("ix_calibration_equipment_id"), ["equipment_id"], unique=False
        )

    op.create_table(
        "person_role",
        sa.Column("person_id", sa.Uuid(), nullable=False),
        sa.Column("role", sa.String(length=16), nullable=False),
        sa.ForeignKeyConstraint(
            ["person_id"],
            ["person.id"],
        ),
        sa.PrimaryKeyConstraint("person_id", "role"),
    )
    op.create_table(
        "plan_revision",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("campaign_id", sa.Uuid(), nullable=False),
        sa.Column("number", sa.Integer(), nullable=False),
        sa.Column("source_name", sa.String(), nullable=False),
        sa.Column("source_sha256", sa.String(length=64), nullable=False),
        sa.Column("source_text", sa.Text(), nullable=False),
        sa.Column("plan_json", sa.Text(), nullable=False),
        sa.Column("plan_sha256", sa.String(length=64), nullable=False),
        sa.Column("reason", sa.String(), nullable=True),
        sa.Column("created_by", sa.String(), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.ForeignKeyConstraint(
            ["campaign_id"],
            ["campaign.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("campaign_id", "number"),
    )
    with op.batch_alter_table("plan_revision", schema=None) as batch_op:
        batch_op.create_index(
            batch_op.f("ix_plan_revision_campaign_id"), ["campaign_id"], unique=False
        )

    op.create_table(
        "specimen",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("campaign_id", sa.Uuid(), nullable=False),
        sa.Column("serial", sa.String(length=64), nullable=False),
        sa.Column("leg", sa.String(), nullable=False),
        sa.Column("received_on", sa.Date(), nullable=True),
        sa.Column("receipt_condition", sa.String(), nullable=True),
        sa.ForeignKeyConstraint(
            ["campaign_id"],
            ["campaign.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("campaign_id", "serial"),
    )
    with op.batch_alter_table("specimen", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_specimen_campaign_id"), ["campaign_id"], unique=False)

    op.create_table(
        "procedure",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("revision_id", sa.Uuid(), nullable=False),
        sa.Column("key", sa.String(length=64), nullable=False),
        sa.Column("family", sa.String(), nullable=False),
        sa.Column("code", sa.String(), nullable=False),
        sa.Column("title", sa.String(), nullable=False),
        sa.Column("standard", sa.String(), nullable=False),
        sa.Column("edition", sa.String(), nullable=False),
        sa.Column("clause", sa.String(), nullable=False),
        sa.Column("status", sa.String(), nullable=False),
        sa.Column("duration_h", sa.Float(), nullable=False),
        sa.Column("body_json", sa.Text(), nullable=False),
        sa.ForeignKeyConstraint(
            ["revision_id"],
            ["plan_revision.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("revision_id", "key"),
    )
    with op.batch_alter_table("procedure", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_procedure_revision_id"), ["revision_id"], unique=False)

    op.create_table(
        "run",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("campaign_id", sa.Uuid(), nullable=False),
        sa.Column("revision_id", sa.Uuid(), nullable=False),
        sa.Column("key", sa.String(length=160), nullable=False),
        sa.Column("procedure_key", sa.String(length=64), nullable=False),
        sa.Column("leg", sa.String(), nullable=False),
        sa.Column("facility", sa.String(), nullable=True),
        sa.Column("planned_start", sa.DateTime(timezone=True), nullable=False),
        sa.Column("planned_end", sa.DateTime(timezone=True), nullable=False),
        sa.Column("state", sa.String(length=16), nullable=False),
        sa.Column("operator_id", sa.Uuid(), nullable=True),
        sa.Column("started_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("ambient_temperature_c", sa.Float(), nullable=True),
        sa.Column("ambient_humidity_pct", sa.Float(), nullable=True),
        sa.Column("ambient_pressure_hpa", sa.Float(), nullable=True),
        sa.Column("preconditioning", sa.String(), nullable=True),
        sa.Column("specimen_state_json", sa.Text(), nullable=True),
        sa.Column("finished_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("finish_note", sa.String(), nullable=True),
        sa.Column("checker_id", sa.Uuid(), nullable=True),
        sa.Column("checked_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("check_note", sa.String(), nullable=True),
        sa.ForeignKeyConstraint(
            ["campaign_id"],
            ["campaign.id"],
        ),
        sa.ForeignKeyConstraint(
            ["checker_id"],
            ["person.id"],
        ),
        sa.ForeignKeyConstraint(
            ["operator_id"],
            ["person.id"],
        ),
        sa.ForeignKeyConstraint(
            ["revision_id"],
            ["plan_revision.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("campaign_id", "key"),
    )
    with op.batch_alter_table("run", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_run_campaign_id"), ["campaign_id"], unique=False)

    op.create_table(
        "criterion",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("procedure_id", sa.Uuid(), nullable=False),
        sa.Column("key", sa.String(length=128), nullable=False),
        sa.Column("quantity", sa.String(), nullable=False),
        sa.Column("comparison", sa.String(), nullable=False),
        sa.Column("evaluated", sa.String(), nullable=False),
        sa.Column("unit", sa.String(), nullable=True),
        sa.Column("min", sa.Float(), nullable=True),
        sa.Column("max", sa.Float(), nullable=True),
        sa.Column("text", sa.String(), nullable=True),
        sa.ForeignKeyConstraint(
            ["procedure_id"],
            ["procedure.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
    )
    with op.batch_alter_table("criterion", schema=None) as batch_op:
        batch_op.create_index(
            batch_op.f("ix_criterion_procedure_id"), ["procedure_id"], unique=False
        )

    op.create_table(
        "deviation",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("run_id", sa.Uuid(), nullable=False),
        sa.Column("description", sa.String(), nullable=False),
        sa.Column("reason", sa.String(), nullable=False),
        sa.Column("approved_by_id", sa.Uuid(), nullable=False),
        sa.Column("recorded_by_id", sa.Uuid(), nullable=False),
        sa.Column("recorded_at", sa.DateTime(timezone=True), nullable=False),
        sa.ForeignKeyConstraint(
            ["approved_by_id"],
            ["person.id"],
        ),
        sa.ForeignKeyConstraint(
            ["recorded_by_id"],
            ["person.id"],
        ),
        sa.ForeignKeyConstraint(
            ["run_id"],
            ["run.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
    )
    with op.batch_alter_table("deviation", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_deviation_run_id"), ["run_id"], unique=False)

    op.create_table(
        "run_equipment",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("run_id", sa.Uuid(), nullable=False),
        sa.Column("equipment_id", sa.Uuid(), nullable=False),
        sa.Column("calibration_id", sa.Uuid(), nullable=False),
        sa.ForeignKeyConstraint(
            ["calibration_id"],
            ["calibration.id"],
        ),
        sa.ForeignKeyConstraint(
            ["equipment_id"],
            ["equipment.id"],
        ),
        sa.ForeignKeyConstraint(
            ["run_id"],
            ["run.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
    )
    with op.batch_alter_table("run_equipment", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_run_equipment_run_id"), ["run_id"], unique=False)

    op.create_table(
        "run_specimen",
        sa.Column("run_id", sa.Uuid(), nullable=False),
        sa.Column("specimen_id", sa.Uuid(), nullable=False),
        sa.ForeignKeyConstraint(
            ["run_id"],
            ["run.id"],
        ),
        sa.ForeignKeyConstraint(
            ["specimen_id"],
            ["specimen.id"],
        ),
        sa.PrimaryKeyConstraint("run_id", "specimen_id"),
    )
    _append_only_audit()


def _append_only_audit() -> None:
    """The audit table refuses UPDATE and DELETE in the database itself."""
    if op.get_bind().dialect.name == "sqlite":
        for verb in ("UPDATE", "DELETE"):
            op.execute(
                f"CREATE TRIGGER audit_no_{verb.lower()} BEFORE {verb} ON audit "
                "BEGIN SELECT RAISE(ABORT, 'audit entries are append-only'); END"
            )
    else:
        op.execute(
            "CREATE FUNCTION audit_append_only() RETURNS trigger LANGUAGE plpgsql AS $$ "
            "BEGIN RAISE EXCEPTION 'audit entries are append-only'; END $$"
        )
        op.execute(
            "CREATE TRIGGER audit_append_only BEFORE UPDATE OR DELETE ON audit "
            "FOR EACH ROW EXECUTE FUNCTION audit_append_only()"
        )


def downgrade() -> None:
    if op.get_bind().dialect.name == "sqlite":
        op.execute("DROP TRIGGER audit_no_update")
        op.execute("DROP TRIGGER audit_no_delete")
    else:
        op.execute("DROP TRIGGER audit_append_only ON audit")
        op.execute("DROP FUNCTION audit_append_only()")
    op.drop_table("run_specimen")
    with op.batch_alter_table("run_equipment", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_run_equipment_run_id"))

    op.drop_table("run_equipment")
    with op.batch_alter_table("deviation", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_deviation_run_id"))

    op.drop_table("deviation")
    with op.batch_alter_table("criterion", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_criterion_procedure_id"))

    op.drop_table("criterion")
    with op.batch_alter_table("run", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_run_campaign_id"))

    op.drop_table("run")
    with op.batch_alter_table("procedure", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_procedure_revision_id"))

    op.drop_table("procedure")
    with op.batch_alter_table("specimen", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_specimen_campaign_id"))

    op.drop_table("specimen")
    with op.batch_alter_table("plan_revision", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_plan_revision_campaign_id"))

    op.drop_table("plan_revision")
    op.drop_table("person_role")
    with op.batch_alter_table("calibration", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_calibration_equipment_id"))

    op.drop_table("calibration")
    op.drop_table("person")
    op.drop_table("equipment")
    op.drop_table("campaign")
    with op.batch_alter_table("audit", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_audit_campaign_id"))

    op.drop_table("audit")
