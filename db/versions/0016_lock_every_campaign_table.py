"""the approved-campaign lock on every table a manifest covers, on SQLite and PostgreSQL

Revision ID: 0016
Revises: 0015
Create Date: 2026-12-02

Once a campaign's latest manifest carries an approved signature (and no amendment has
superseded it), UPDATE and DELETE are refused on its rows and on every row its manifest
covers: the procedures and criteria of its plan revisions, the instruments, calibrations
and photos its runs used, and the person records of everyone who acted on it or signed
it (all columns but the current public key, which a new enrolment changes). An UPDATE is
also refused when it would move a row into a locked campaign. The sign-off and identity
records (manifest, signature, report_issue, amendment, person_key, role_grant,
key_revocation, store_meta) are append-only, and so is the new ``template_set``: a lab's
own report template set, registered once by a manager (its SHA-256, a name, the
manager's signature).

PostgreSQL had this lock for some tables since 0006; each table now has a trigger function
of its own, written from the same rule as SQLite's triggers. SQLite gets the lock for the
first time: someone holding the file can drop a trigger, so there it stops a plain
database client, and `verify` / `store check` still find what changed.
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0016"
down_revision = "0015"
branch_labels = None
depends_on = None

# The campaigns a row belongs to, as a subquery on the row ``{row}`` (OLD or NEW).
VIA_RUN = "SELECT campaign_id FROM run WHERE id = {row}.run_id"
VIA_RAW = (
    "SELECT u.campaign_id FROM raw_file f JOIN run u ON u.id = f.run_id "
    "WHERE f.id = {row}.raw_file_id"
)
CAMPAIGNS = {
    "campaign": "SELECT {row}.id",
    "plan_revision": "SELECT {row}.campaign_id",
    "specimen": "SELECT {row}.campaign_id",
    "run": "SELECT {row}.campaign_id",
    "procedure": "SELECT campaign_id FROM plan_revision WHERE id = {row}.revision_id",
    "criterion": (
        "SELECT r.campaign_id FROM procedure p JOIN plan_revision r ON r.id = p.revision_id "
        "WHERE p.id = {row}.procedure_id"
    ),
    "run_specimen": VIA_RUN,
    "run_equipment": VIA_RUN,
    "deviation": VIA_RUN,
    "raw_file": VIA_RUN,
    "observation": VIA_RUN,
    "judgement": VIA_RUN,
    "logger_channel": VIA_RAW,
    "sample_block": VIA_RAW,
    "verdict": (
        "SELECT u.campaign_id FROM judgement j JOIN run u ON u.id = j.run_id "
        "WHERE j.id = {row}.judgement_id"
    ),
    "calibration": (
        "SELECT u.campaign_id FROM run_equipment e JOIN run u ON u.id = e.run_id "
        "WHERE e.calibration_id = {row}.id "
        "UNION SELECT u.campaign_id FROM logger_channel c JOIN raw_file f "
        "ON f.id = c.raw_file_id JOIN run u ON u.id = f.run_id WHERE c.calibration_id = {row}.id"
    ),
    "equipment": (
        "SELECT u.campaign_id FROM run_equipment e JOIN run u ON u.id = e.run_id "
        "WHERE e.equipment_id = {row}.id "
        "UNION SELECT u.campaign_id FROM logger_channel c JOIN raw_file f "
        "ON f.id = c.raw_file_id JOIN run u ON u.id = f.run_id WHERE c.equipment_id = {row}.id"
    ),
    "attachment": (
        "SELECT u.campaign_id FROM observation o JOIN run u ON u.id = o.run_id "
        "WHERE o.attachment_id = {row}.id"
    ),
    "person": (
        "SELECT campaign_id FROM run WHERE operator_id = {row}.id OR checker_id = {row}.id "
        "UNION SELECT u.campaign_id FROM deviation d JOIN run u ON u.id = d.run_id "
        "WHERE d.approved_by_id = {row}.id OR d.recorded_by_id = {row}.id "
        "UNION SELECT u.campaign_id FROM raw_file f JOIN run u ON u.id = f.run_id "
        "WHERE f.operator_id = {row}.id "
        "UNION SELECT u.campaign_id FROM observation o JOIN run u ON u.id = o.run_id "
        "WHERE o.recorded_by_id = {row}.id "
        "UNION SELECT m.campaign_id FROM signature s JOIN manifest m ON m.id = s.manifest_id "
        "WHERE s.person_id = {row}.id"
    ),
}
# person.public_key follows the holder's current key: enrolling a new one changes it
UPDATE_OF = {"person": "id, initials, name, title, created_at"}
APPEND_ONLY = (
    "manifest", "signature", "report_issue", "amendment", "person_key", "role_grant",
    "key_revocation", "store_meta", "template_set",
)  # fmt: skip
# what 0014 left on PostgreSQL, restored by the downgrade
OLD_LOCKED = (
    "campaign", "plan_revision", "specimen", "run", "run_specimen", "run_equipment",
    "deviation", "raw_file", "logger_channel", "sample_block", "observation", "judgement",
    "verdict", "calibration",
)  # fmt: skip


def locked(table: str, row: str) -> str:
    """An SQL condition: the row ``row`` belongs to a campaign that is approved and locked."""
    return (
        "EXISTS (SELECT 1 FROM manifest m JOIN signature s ON s.manifest_id = m.id "
        "AND s.role = 'approved' WHERE m.campaign_id IN ("
        + CAMPAIGNS[table].format(row=row)
        + ") AND NOT EXISTS (SELECT 1 FROM amendment a WHERE a.supersedes_manifest_id = m.id))"
    )


def refusal(table: str) -> str:
    return f"testplan: {table} belongs to an approved campaign and is locked; use testplan amend"


def _sqlite_upgrade() -> None:
    for table in CAMPAIGNS:
        of = f" OF {UPDATE_OF[table]}" if table in UPDATE_OF else ""
        op.execute(
            f"CREATE TRIGGER {table}_locked_update BEFORE UPDATE{of} ON {table} "
            f"WHEN {locked(table, 'OLD')} OR {locked(table, 'NEW')} "
            f"BEGIN SELECT RAISE(ABORT, '{refusal(table)}'); END"
        )
        op.execute(
            f"CREATE TRIGGER {table}_locked_delete BEFORE DELETE ON {table} "
            f"WHEN {locked(table, 'OLD')} BEGIN SELECT RAISE(ABORT, '{refusal(table)}'); END"
        )
    for table in APPEND_ONLY:
        for verb in ("UPDATE", "DELETE"):
            op.execute(
                f"CREATE TRIGGER {table}_no_{verb.lower()} BEFORE {verb} ON {table} BEGIN "
                f"SELECT RAISE(ABORT, 'testplan: {table} records are append-only'); END"
            )


def _sqlite_downgrade() -> None:
    for table in CAMPAIGNS:
        op.execute(f"DROP TRIGGER {table}_locked_update")
        op.execute(f"DROP TRIGGER {table}_locked_delete")
    for table in APPEND_ONLY:
        op.execute(f"DROP TRIGGER {table}_no_update")
        op.execute(f"DROP TRIGGER {table}_no_delete")


def _postgres_upgrade() -> None:
    for table in CAMPAIGNS:
        op.execute(f'DROP TRIGGER IF EXISTS {table}_locked ON "{table}"')
        op.execute(
            f"CREATE FUNCTION testplan_lock_{table}() RETURNS trigger LANGUAGE plpgsql AS $$\n"
            f"BEGIN\n"
            f"  IF (TG_OP IN ('UPDATE', 'DELETE') AND {locked(table, 'OLD')})\n"
            f"     OR (TG_OP = 'UPDATE' AND {locked(table, 'NEW')}) THEN\n"
            f"    RAISE EXCEPTION '{refusal(table)}';\n"
            f"  END IF;\n"
            f"  RETURN CASE WHEN TG_OP = 'DELETE' THEN OLD ELSE NEW END;\n"
            f"END $$"
        )
        of = f" OF {UPDATE_OF[table]}" if table in UPDATE_OF else ""
        op.execute(
            f'CREATE TRIGGER {table}_locked BEFORE UPDATE{of} OR DELETE ON "{table}" '
            f"FOR EACH ROW EXECUTE FUNCTION testplan_lock_{table}()"
        )
    for table in ("store_meta", "template_set"):
        op.execute(
            f"CREATE TRIGGER {table}_append_only BEFORE UPDATE OR DELETE ON {table} "
            "FOR EACH ROW EXECUTE FUNCTION testplan_append_only()"
        )
    op.execute(
        "CREATE TRIGGER template_set_no_truncate BEFORE TRUNCATE ON template_set "
        "FOR EACH STATEMENT EXECUTE FUNCTION testplan_refuse_truncate()"
    )


def _postgres_downgrade() -> None:
    op.execute("DROP TRIGGER store_meta_append_only ON store_meta")
    for table in CAMPAIGNS:
        op.execute(f'DROP TRIGGER {table}_locked ON "{table}"')
        op.execute(f"DROP FUNCTION testplan_lock_{table}()")
    for table in OLD_LOCKED:
        op.execute(
            f'CREATE TRIGGER {table}_locked BEFORE UPDATE OR DELETE ON "{table}" '
            "FOR EACH ROW EXECUTE FUNCTION testplan_guard_locked()"
        )


def upgrade() -> None:
    op.create_table(
        "template_set",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("sha256", sa.String(length=64), nullable=False),
        sa.Column("name", sa.String(length=120), nullable=False),
        sa.Column("person_id", sa.Uuid(), nullable=False),
        sa.Column("key_id", sa.Uuid(), nullable=False),
        sa.Column("at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("signature", sa.String(length=128), nullable=False),
        sa.ForeignKeyConstraint(["key_id"], ["person_key.id"]),
        sa.ForeignKeyConstraint(["person_id"], ["person.id"]),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("sha256"),
    )
    if op.get_bind().dialect.name == "postgresql":
        _postgres_upgrade()
    else:
        _sqlite_upgrade()


def downgrade() -> None:
    if op.get_bind().dialect.name == "postgresql":
        _postgres_downgrade()
    else:
        _sqlite_downgrade()
    op.drop_table("template_set")
