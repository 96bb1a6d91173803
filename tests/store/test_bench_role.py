"""PostgreSQL least privilege: everyday recording as a bench role that cannot truncate,
alter, disable triggers or change append-only records (finding 5)."""

from __future__ import annotations

import uuid
from pathlib import Path

import pytest
import sqlalchemy as sa
from sqlalchemy.engine import make_url

from .conftest import PASS, Bench, approve_and_issue, record_and_judge, stock


@pytest.fixture
def bench_role(db_url: str, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Bench:
    """The store made by the owner; the campaign recorded and issued as a bench role."""
    if not db_url.startswith("postgresql"):
        pytest.skip("roles are a PostgreSQL matter")
    monkeypatch.setenv("TESTPLAN_KEY_PASSPHRASE", PASS)
    owner = stock(Bench(db_url, tmp_path))
    role = "bench_" + uuid.uuid4().hex[:8]
    owner.raw(f"CREATE ROLE {role} LOGIN")
    result = owner("store", "grant-bench", role)
    assert result.stdout.startswith(f"{role}: bench privileges granted")
    url = make_url(db_url).set(username=role, password=None)
    b = Bench(url.render_as_string(hide_password=False), tmp_path)
    record_and_judge(b)
    approve_and_issue(b)
    return b


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
    ],
)
def test_the_bench_role_cannot_get_around_the_record(bench_role: Bench, statement: str) -> None:
    with pytest.raises(sa.exc.DBAPIError) as err:
        bench_role.raw(statement)
    assert "permission denied" in str(err.value.orig) or "must be owner" in str(err.value.orig)
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
    owner = stock(Bench(db_url, tmp_path))
    with pytest.raises(sa.exc.DBAPIError, match="cannot be truncated: records are kept"):
        owner.raw(f"TRUNCATE {table} CASCADE")


def test_grant_bench_on_sqlite_is_one_line(bench: Bench) -> None:
    if not bench.url.startswith("sqlite"):
        pytest.skip("SQLite")
    assert bench.fail("store", "grant-bench", "bench") == (
        "error: --db: roles are a PostgreSQL matter; an SQLite store is a file (protect the "
        "file with the operating system's permissions)"
    )
