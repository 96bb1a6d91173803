"""The approved-campaign lock in the database itself (migration 0016): a plain database
client, on the SQLite file or as the PostgreSQL database user, cannot change or delete
the rows of an approved campaign, nor the rows its manifest covers; amend reopens."""

from __future__ import annotations

import pytest
import sqlalchemy as sa
from sqlmodel import SQLModel

import testplan.store.tables  # noqa: F401  (registers the tables)

from .conftest import PASS, Bench, approve_and_issue, record_and_judge

LOCKED = "belongs to an approved campaign and is locked; use testplan amend"
APPEND_ONLY = "records are append-only"

# one change and one deletion of a row of each table the approved campaign's manifest covers
CHANGES = {
    "campaign": "UPDATE campaign SET title = 'Another title'",
    "plan_revision": "UPDATE plan_revision SET reason = 'rewritten'",
    "procedure": "UPDATE procedure SET edition = '1989', clause = '99'",
    "criterion": "UPDATE criterion SET max = 999 WHERE max IS NOT NULL",
    "specimen": "UPDATE specimen SET receipt_condition = 'dented'",
    "run": "UPDATE run SET ambient_temperature_c = 30",
    "run_specimen": "UPDATE run_specimen SET run_id = run_id",
    "run_equipment": "UPDATE run_equipment SET run_id = run_id",
    "deviation": "UPDATE deviation SET reason = 'none'",
    "raw_file": "UPDATE raw_file SET withdrawn_why = 'gone'",
    "logger_channel": "UPDATE logger_channel SET source = 'other'",
    "sample_block": "UPDATE sample_block SET value = t_us",
    "observation": "UPDATE observation SET data_json = replace(data_json, 'false', 'true')",
    "attachment": "UPDATE attachment SET name = 'other.png'",
    "judgement": "UPDATE judgement SET outcome = 'pass'",
    "verdict": "UPDATE verdict SET outcome = 'pass'",
    "calibration": "UPDATE calibration SET due_on = '2028-06-01'",
    "equipment": "UPDATE equipment SET serial = '00000'",
    "person": "UPDATE person SET name = 'Somebody Else' WHERE initials = 'RP'",
}
APPEND_ONLY_TABLES = (
    "manifest", "signature", "report_issue", "person_key", "role_grant", "store_meta",
)  # fmt: skip
# tables that are neither a campaign's nor append-only: passwords and failed logins change
NOT_LOCKED = {"person_password", "login_failure"}


@pytest.fixture
def approved(bench: Bench, monkeypatch: pytest.MonkeyPatch) -> Bench:
    monkeypatch.setenv("TESTPLAN_KEY_PASSPHRASE", PASS)
    record_and_judge(bench, photo=True)
    approve_and_issue(bench)
    return bench


def refused(b: Bench, statement: str) -> str:
    with pytest.raises(sa.exc.DBAPIError) as err:
        b.raw(statement)
    return str(err.value.orig)


def test_every_row_the_approval_covers_refuses_change_and_deletion(approved: Bench) -> None:
    for table, statement in CHANGES.items():
        assert approved.sql(f"SELECT count(*) FROM {table}")[0][0] > 0, table
        assert LOCKED in refused(approved, statement), statement
        assert f"testplan: {table} {LOCKED}" in refused(approved, f"DELETE FROM {table}"), table
    for table in APPEND_ONLY_TABLES:
        assert approved.sql(f"SELECT count(*) FROM {table}")[0][0] > 0, table
        for statement in (f"UPDATE {table} SET {_any_column(table)}", f"DELETE FROM {table}"):
            assert f"testplan: {table} {APPEND_ONLY}" in refused(approved, statement), statement
    # nothing went through: the issued report still verifies and the store checks out
    assert "verified" in approved("verify", str(approved.folder / "report.pdf")).stdout
    assert approved("store", "check").stdout.startswith("ok: ")


def _any_column(table: str) -> str:
    column = next(c.name for c in SQLModel.metadata.tables[table].columns if not c.primary_key)
    return f"{column} = {column}"


def test_the_lock_also_refuses_moving_a_row_into_the_campaign(
    bench: Bench, monkeypatch: pytest.MonkeyPatch
) -> None:
    """An UPDATE is judged on the row it makes as well as the one it replaces: a second
    campaign's specimen moved into the approved one is refused."""
    monkeypatch.setenv("TESTPLAN_KEY_PASSPHRASE", PASS)
    record_and_judge(bench)
    approve_and_issue(bench)
    bench.raw(
        "INSERT INTO campaign (id, reference, title, client, laboratory, created_at) "
        "SELECT :i, 'QC-OTHER', title, client, laboratory, created_at FROM campaign",
        i="0" * 32 if bench.url.startswith("sqlite") else "00000000-0000-0000-0000-000000000000",
    )
    other = bench.sql("SELECT id FROM campaign WHERE reference = 'QC-OTHER'")[0][0]
    bench.raw(
        "INSERT INTO specimen (id, campaign_id, serial, leg) VALUES (:i, :c, 'X-1', 'ip')",
        i="1" * 32 if bench.url.startswith("sqlite") else "11111111-1111-1111-1111-111111111111",
        c=other,
    )
    bench.raw("UPDATE specimen SET leg = 'moved' WHERE serial = 'X-1'")  # its own: open
    assert LOCKED in refused(
        bench,
        "UPDATE specimen SET campaign_id = (SELECT id FROM campaign WHERE reference = "
        "'QC-2027-014') WHERE serial = 'X-1'",
    )


def test_a_campaign_not_yet_approved_is_not_locked(
    bench: Bench, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setenv("TESTPLAN_KEY_PASSPHRASE", PASS)
    record_and_judge(bench)
    bench.raw("UPDATE equipment SET serial = '88214'")
    bench.raw("UPDATE person SET name = 'Rita P. Pereira' WHERE initials = 'RP'")
    assert bench.sql("SELECT serial FROM equipment") == [("88214",)]


def test_amend_reopens_and_a_new_key_is_still_enrolled(approved: Bench) -> None:
    # enrolling a signer's new key changes only person.public_key, which the lock leaves
    approved("keys", "revoke", "MO", "--why", "laptop lost", *approved.signed("QM"), "--quiet")
    for old in ("MO.pem", "MO.pem.pub"):
        (approved.folder / old).unlink()
    approved.enrol("MO")
    approved("amend", "QC-2027-014", "--why", "function check of S01 added", "--by", "MO")
    approved.raw("UPDATE equipment SET serial = '88214'")
    assert approved.sql("SELECT serial FROM equipment") == [("88214",)]


def test_every_table_has_its_lock(bench: Bench) -> None:
    """A new table must get a lock or append-only trigger (migration 0016 shows how), and
    on PostgreSQL a TRUNCATE trigger."""
    tables = set(SQLModel.metadata.tables) - NOT_LOCKED
    if bench.url.startswith("sqlite"):
        rows = bench.sql("SELECT tbl_name, name FROM sqlite_master WHERE type = 'trigger'")
        wanted = ("_locked_update", "_locked_delete", "_no_update", "_no_delete", "_locked_insert")
    else:
        rows = bench.sql(
            "SELECT c.relname, t.tgname FROM pg_trigger t JOIN pg_class c ON c.oid = t.tgrelid "
            "WHERE NOT t.tgisinternal AND t.tgenabled <> 'D'"
        )
        wanted = ("_locked", "_append_only", "_locked_insert")
        truncate = {t for t, name in rows if name == f"{t}_no_truncate"}
        assert truncate >= set(SQLModel.metadata.tables), sorted(tables - truncate)
    guarded = {t for t, name in rows if any(name == t + w for w in wanted)}
    assert guarded == tables, (sorted(tables - guarded), sorted(guarded - tables))


# one new row of each table whose rows belong to the approved campaign (migration 0018)
INSERTS = {
    "observation": "INSERT INTO observation SELECT * FROM observation LIMIT 1",
    "deviation": "INSERT INTO deviation SELECT * FROM deviation LIMIT 1",
    "judgement": "INSERT INTO judgement SELECT * FROM judgement LIMIT 1",
    "verdict": "INSERT INTO verdict SELECT * FROM verdict LIMIT 1",
    "run_specimen": "INSERT INTO run_specimen SELECT * FROM run_specimen LIMIT 1",
    "specimen": "INSERT INTO specimen SELECT * FROM specimen LIMIT 1",
}


@pytest.mark.parametrize("table", sorted(INSERTS))
def test_a_new_row_cannot_join_an_approved_campaign(approved: Bench, table: str) -> None:
    """A made-up row added to an approved campaign is refused by the database, before any
    key or uniqueness check could be the reason."""
    if not approved.sql(f"SELECT 1 FROM {table} LIMIT 1"):
        pytest.skip(f"the approved campaign has no {table} row to copy")
    assert "would join an approved campaign, which is locked" in refused(approved, INSERTS[table])
