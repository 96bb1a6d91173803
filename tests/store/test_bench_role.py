"""PostgreSQL least privilege: everyday recording as a bench role that cannot truncate,
alter, disable triggers or change append-only records (finding 5)."""

from __future__ import annotations

from pathlib import Path

import pytest
import sqlalchemy as sa

from .conftest import Bench, owned_by_roles, stock


@pytest.mark.parametrize(
    "statement",
    [
        "TRUNCATE sample_block",
        "TRUNCATE audit",
        "ALTER TABLE verdict DISABLE TRIGGER ALL",
        "ALTER TABLE verdict DISABLE TRIGGER verdict_locked",
        "DROP TRIGGER verdict_locked ON verdict",
        "UPDATE audit SET actor = 'XX'",
        "DELETE FROM signature",
        "UPDATE sample_block SET value = t_us",
        "DELETE FROM raw_file",
        "CREATE TABLE scratch (x int)",
        "UPDATE role_grant SET reason = 'x'",
        "DELETE FROM role_grant",
        "UPDATE key_revocation SET reason = 'x'",
        "UPDATE person_key SET public_key = 'x'",
        "ALTER TABLE sample_block DISABLE TRIGGER sample_block_locked",
        "DROP TRIGGER person_locked ON person",
        "DROP FUNCTION testplan_lock_verdict() CASCADE",
        "CREATE SCHEMA scratch",
        "CREATE FUNCTION scratch() RETURNS int LANGUAGE sql AS 'SELECT 1'",
        "ALTER TABLE person OWNER TO CURRENT_USER",
        "DELETE FROM audit WHERE seq > 1",
        "UPDATE verdict SET outcome = 'pass'",
        "UPDATE person SET name = 'Somebody Else' WHERE initials = 'RP'",
        "UPDATE person SET initials = 'XX' WHERE initials = 'AK'",
        "UPDATE procedure SET edition = '1989'",
        "UPDATE criterion SET max = 999 WHERE max IS NOT NULL",
        "UPDATE equipment SET serial = '00000'",
        "UPDATE attachment SET name = 'other.png'",
        "UPDATE run SET state = 'planned'",
        "UPDATE campaign SET title = 'Another'",
        "UPDATE raw_file SET withdrawn_why = 'gone'",
        "UPDATE store_meta SET value = 'x'",
    ],
)
def test_the_bench_role_cannot_get_around_the_record(bench_role: Bench, statement: str) -> None:
    with pytest.raises(sa.exc.DBAPIError) as err:
        bench_role.raw(statement)
    refused = ("permission denied", "must be owner", "is locked; use testplan amend")
    assert any(r in str(err.value.orig) for r in refused), err.value.orig
    assert bench_role("store", "check").stdout.startswith("ok: ")
    assert "verified" in bench_role("verify", str(bench_role.folder / "report.pdf")).stdout


def test_the_bench_role_grants_and_revokes_as_a_manager(bench_role: Bench) -> None:
    # the identity acts are inserts the bench role may make, signed by a manager's key
    bench_role("keys", "revoke", "LV", "--why", "laptop lost", *bench_role.signed("QM"), "--quiet")
    assert bench_role.sql("SELECT reason FROM key_revocation") == [("laptop lost",)]
    assert bench_role("store", "check").stdout.startswith("ok: ")


@pytest.mark.parametrize("table", ["person", "role_grant", "key_revocation", "audit"])
def test_the_owner_cannot_truncate_either(db_url: str, tmp_path: Path, table: str) -> None:
    if not db_url.startswith("postgresql"):
        pytest.skip("PostgreSQL triggers")
    roles, drop = owned_by_roles(db_url)
    try:
        owner = stock(Bench(roles.owner, tmp_path))
        with pytest.raises(sa.exc.DBAPIError, match="cannot be truncated: records are kept"):
            owner.raw(f"TRUNCATE {table} CASCADE")
    finally:
        drop()


def test_grant_bench_on_sqlite_is_one_line(bench: Bench) -> None:
    if not bench.url.startswith("sqlite"):
        pytest.skip("SQLite")
    assert bench.fail("store", "grant-bench", "bench") == (
        "error: --db: roles are a PostgreSQL matter; an SQLite store is a file (protect the "
        "file with the operating system's permissions)"
    )
