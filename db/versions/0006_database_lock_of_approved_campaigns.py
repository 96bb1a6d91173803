"""PostgreSQL refuses changes to the records of an approved campaign, and to sign-off records

Revision ID: 0006
Revises: 0005
Create Date: 2026-12-02

Once a campaign's latest manifest carries an approved signature (and no amendment has
superseded it), UPDATE and DELETE on its records are refused by the database, whichever
program connects. Signatures, manifests, issued reports, amendments and registered keys
are append-only. SQLite has no such guard that a file's owner cannot remove; there,
`testplan verify` and `testplan store check` find what changed.
"""

from __future__ import annotations

from alembic import op

revision = "0006"
down_revision = "0005"
branch_labels = None
depends_on = None

# Tables whose rows belong to a campaign, and how to find it from the old row.
CAMPAIGN_TABLES = (
    "campaign", "plan_revision", "specimen", "run", "run_specimen", "run_equipment",
    "deviation", "raw_file", "logger_channel", "sample", "observation", "judgement",
    "verdict", "calibration",
)  # fmt: skip
APPEND_ONLY = ("manifest", "signature", "report_issue", "amendment", "person_key")

LOCKED = """
CREATE FUNCTION testplan_campaign_locked(cid uuid) RETURNS boolean LANGUAGE sql STABLE AS $$
  SELECT EXISTS (
    SELECT 1 FROM manifest m JOIN signature s ON s.manifest_id = m.id AND s.role = 'approved'
    WHERE m.campaign_id = cid
      AND NOT EXISTS (SELECT 1 FROM amendment a WHERE a.supersedes_manifest_id = m.id))
$$
"""

GUARD = """
CREATE FUNCTION testplan_guard_locked() RETURNS trigger LANGUAGE plpgsql AS $$
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
  ELSIF TG_TABLE_NAME IN ('logger_channel', 'sample') THEN
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

FROZEN = """
CREATE FUNCTION testplan_append_only() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
  RAISE EXCEPTION 'testplan: % records are append-only', TG_TABLE_NAME;
END $$
"""


def upgrade() -> None:
    if op.get_bind().dialect.name != "postgresql":
        return
    op.execute(LOCKED)
    op.execute(GUARD)
    op.execute(FROZEN)
    for table in CAMPAIGN_TABLES:
        op.execute(
            f"CREATE TRIGGER {table}_locked BEFORE UPDATE OR DELETE ON {table} "
            "FOR EACH ROW EXECUTE FUNCTION testplan_guard_locked()"
        )
    for table in APPEND_ONLY:
        op.execute(
            f"CREATE TRIGGER {table}_append_only BEFORE UPDATE OR DELETE ON {table} "
            "FOR EACH ROW EXECUTE FUNCTION testplan_append_only()"
        )


def downgrade() -> None:
    if op.get_bind().dialect.name != "postgresql":
        return
    for table in APPEND_ONLY:
        op.execute(f"DROP TRIGGER {table}_append_only ON {table}")
    for table in CAMPAIGN_TABLES:
        op.execute(f"DROP TRIGGER {table}_locked ON {table}")
    op.execute("DROP FUNCTION testplan_append_only()")
    op.execute("DROP FUNCTION testplan_guard_locked()")
    op.execute("DROP FUNCTION testplan_campaign_locked(uuid)")
