"""the approved-campaign lock refuses new rows too

Revision ID: 0018
Revises: 0017
Create Date: 2026-12-02

0016 refused UPDATE and DELETE on an approved campaign's rows; a plain INSERT (a made-up
observation, judgement, verdict, deviation, run or sample block added after approval) was
only found afterwards by `verify`. Every table whose rows belong to one campaign through
their own keys now refuses an INSERT into a campaign whose latest manifest is approved and
not superseded by an amendment, on both engines. Sample blocks are left out: a copy
between stores offers every block again and lets the engine skip those it holds, which a
row trigger would refuse; an added block is named by `store check` and `verify`.
Registers shared between campaigns (equipment, calibration, attachment, person) take
new rows as before: a new row there belongs to no locked campaign until a campaign row
names it, and that row is refused.
"""

from __future__ import annotations

from alembic import op

revision = "0018"
down_revision = "0017"
branch_labels = None
depends_on = None


# The campaigns a new row belongs to, as 0016 states them (NEW side only).
VIA_RUN = "SELECT campaign_id FROM run WHERE id = NEW.run_id"
VIA_RAW = (
    "SELECT u.campaign_id FROM raw_file f JOIN run u ON u.id = f.run_id "
    "WHERE f.id = NEW.raw_file_id"
)
CAMPAIGNS = {
    "plan_revision": "SELECT NEW.campaign_id",
    "specimen": "SELECT NEW.campaign_id",
    "run": "SELECT NEW.campaign_id",
    "procedure": "SELECT campaign_id FROM plan_revision WHERE id = NEW.revision_id",
    "criterion": (
        "SELECT r.campaign_id FROM procedure p JOIN plan_revision r ON r.id = p.revision_id "
        "WHERE p.id = NEW.procedure_id"
    ),
    "run_specimen": VIA_RUN,
    "run_equipment": VIA_RUN,
    "deviation": VIA_RUN,
    "raw_file": VIA_RUN,
    "observation": VIA_RUN,
    "judgement": VIA_RUN,
    "logger_channel": VIA_RAW,
    "verdict": (
        "SELECT u.campaign_id FROM judgement j JOIN run u ON u.id = j.run_id "
        "WHERE j.id = NEW.judgement_id"
    ),
}


def locked(table: str) -> str:
    """An SQL condition: the new row belongs to an approved, locked campaign."""
    return (
        "EXISTS (SELECT 1 FROM manifest m JOIN signature s ON s.manifest_id = m.id "
        "AND s.role = 'approved' WHERE m.campaign_id IN ("
        + CAMPAIGNS[table]
        + ") AND NOT EXISTS (SELECT 1 FROM amendment a WHERE a.supersedes_manifest_id = m.id))"
    )


def refusal(table: str) -> str:
    return (
        f"testplan: a new {table} row would join an approved campaign, which is locked; "
        "use testplan amend"
    )


def upgrade() -> None:
    postgres = op.get_bind().dialect.name == "postgresql"
    for table in CAMPAIGNS:
        if postgres:
            op.execute(
                f"CREATE FUNCTION testplan_lock_insert_{table}() RETURNS trigger "
                f"LANGUAGE plpgsql AS $$\nBEGIN\n  IF {locked(table)} THEN\n"
                f"    RAISE EXCEPTION '{refusal(table)}';\n  END IF;\n  RETURN NEW;\nEND $$"
            )
            op.execute(
                f'CREATE TRIGGER {table}_locked_insert BEFORE INSERT ON "{table}" '
                f"FOR EACH ROW EXECUTE FUNCTION testplan_lock_insert_{table}()"
            )
        else:
            op.execute(
                f"CREATE TRIGGER {table}_locked_insert BEFORE INSERT ON {table} "
                f"WHEN {locked(table)} BEGIN SELECT RAISE(ABORT, '{refusal(table)}'); END"
            )


def downgrade() -> None:
    postgres = op.get_bind().dialect.name == "postgresql"
    for table in CAMPAIGNS:
        if postgres:
            op.execute(f'DROP TRIGGER {table}_locked_insert ON "{table}"')
            op.execute(f"DROP FUNCTION testplan_lock_insert_{table}()")
        else:
            op.execute(f"DROP TRIGGER {table}_locked_insert")
