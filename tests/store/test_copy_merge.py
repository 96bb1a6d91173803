"""store copy: a whole store across engines and back, benches merged into the lab's store,
conflicts refused; store backup of a live SQLite store."""

from __future__ import annotations

from pathlib import Path

import pytest

from .conftest import PG_URL, START, Bench, fresh_postgres_database, issue, sign
from .test_signoff import approve_and_issue, judged  # noqa: F401  (fixture)

RUN_A = "water-6@ip-verification-1"
RUN_B = "water-6@ip-verification-2"


def run_at_bench(b: Bench, run: str, start: str, end: str) -> None:
    b("record", "start", run, *START, "--at", start, "--quiet")
    b("record", "observe", run, "--specimen", "QC-2027-014-S0" + run[-1], "--ingress",
      "water:none", "--by", "AK", "--quiet")  # fmt: skip
    b("record", "finish", run, "--by", "AK", "--at", end, "--quiet")


def test_two_bench_stores_merge_into_the_lab_store(bench: Bench, tmp_path: Path) -> None:
    if not bench.url.startswith("sqlite"):
        pytest.skip("the lab store here is SQLite; the PostgreSQL case is the round trip")
    a = Bench(f"sqlite:///{tmp_path / 'bench-a.db'}", tmp_path)
    b = Bench(f"sqlite:///{tmp_path / 'bench-b.db'}", tmp_path)
    for other in (a, b):
        bench.plain("store", "copy", "--from", bench.url, "--to", other.url, "--quiet")
    run_at_bench(a, RUN_A, "2027-01-12T08:05Z", "2027-01-12T08:09Z")
    run_at_bench(b, RUN_B, "2027-01-12T12:05Z", "2027-01-12T12:09Z")
    for other in (a, b):
        result = bench.plain("store", "copy", "--from", other.url, "--to", bench.url)
        assert "audit chains of" in result.stdout
    states = dict(bench.sql("SELECT key, state FROM run WHERE key IN (:a, :b)", a=RUN_A, b=RUN_B))
    assert states == {RUN_A: "finished", RUN_B: "finished"}
    assert bench.sql("SELECT count(*) FROM observation") == [(2,)]
    assert bench.sql("SELECT count(DISTINCT chain) FROM audit") == [(3,)]
    assert bench("store", "check").stdout.startswith("ok: ")
    # Merging the same bench again changes nothing.
    again = bench.plain("store", "copy", "--from", a.url, "--to", bench.url)
    assert again.stdout.startswith("copied 0 rows (")
    # The merged campaign is checked, judged, signed off and its report verifies.
    for run in (RUN_A, RUN_B):
        # No flow was logged at either bench: an approved deviation accepts it.
        bench(
            *("record", "deviation", run, "--description", "flow meter not logged"),
            *("--reason", "logger fault", "--approved-by", "MO", "--key", bench.key("MO")),
            *("--by", "AK"),
            *("--covers", "water-6.flow", "--quiet"),
        )
        bench("record", "check", run, *bench.signed("MO"), "--at", "2027-01-20T09:00Z", "--quiet")
    bench("judge", "--quiet", ok=False)
    sign_off(bench, tmp_path)
    pdf = tmp_path / "merged.pdf"
    issue(bench, pdf)
    assert "verified" in bench("verify", str(pdf)).stdout


def sign_off(b: Bench, folder: Path) -> None:
    """Preparer, reviewer and approver with enrolled keys sign the campaign."""
    for who, role in (("RP", "preparer"), ("LV", "reviewer")):
        b.add(who, who, role)
        b.enrol(who)
    for who, role in (("RP", "prepared"), ("LV", "reviewed"), ("MO", "approved")):
        b(*sign(b, role, who), "--quiet")


def test_a_run_recorded_at_two_benches_is_a_conflict(bench: Bench, tmp_path: Path) -> None:
    if not bench.url.startswith("sqlite"):
        pytest.skip("SQLite benches")
    a = Bench(f"sqlite:///{tmp_path / 'bench-a.db'}", tmp_path)
    b = Bench(f"sqlite:///{tmp_path / 'bench-b.db'}", tmp_path)
    for other in (a, b):
        bench.plain("store", "copy", "--from", bench.url, "--to", other.url, "--quiet")
    run_at_bench(a, RUN_A, "2027-01-12T08:05Z", "2027-01-12T08:09Z")
    run_at_bench(b, RUN_A, "2027-01-12T08:15Z", "2027-01-12T08:19Z")
    bench.plain("store", "copy", "--from", a.url, "--to", bench.url, "--quiet")
    before = bench.sql("SELECT count(*) FROM audit")
    line = bench.fail("store", "copy", "--from", b.url, "--to", bench.url, db=False)
    assert line == (
        f"error: --from: run {RUN_A} was changed in both stores; nothing was copied (settle "
        "which record is right in one store, then copy again)"
    )
    assert bench.sql("SELECT count(*) FROM audit") == before


@pytest.mark.parametrize(
    ("statement", "named"),
    [
        # an approved verdict from fail to pass, in the bench's file
        ("UPDATE verdict SET outcome = 'pass' WHERE outcome <> 'pass'", "verdict "),
        # an ingress result flipped
        (
            "UPDATE observation SET data_json = replace(data_json, 'false', 'true')",
            "observation ",
        ),
    ],
)
def test_a_bench_store_edited_outside_testplan_does_not_merge(
    judged: Bench,  # noqa: F811
    tmp_path: Path,
    statement: str,
    named: str,
) -> None:
    """Finding 4: the edited rows were "taken from the source" and the lab's check stayed
    clean."""
    if not judged.url.startswith("sqlite"):
        pytest.skip("the edited bench store is an SQLite file")
    approve_and_issue(judged)
    other = Bench(f"sqlite:///{tmp_path / 'bench-x.db'}", tmp_path)
    judged.plain("store", "copy", "--from", judged.url, "--to", other.url, "--quiet")
    for trigger in other.sql("SELECT name FROM sqlite_master WHERE type = 'trigger'"):
        other.raw(f"DROP TRIGGER {trigger[0]}")
    other.raw(statement)
    before = judged.sql("SELECT outcome FROM verdict ORDER BY id")
    line = judged.fail("store", "copy", "--from", other.url, "--to", judged.url, db=False)
    assert line.startswith(f"error: --from: {named}")
    assert (
        "differs between the stores while its audit history is the same: it was changed "
        "outside testplan; nothing was copied" in line
    )
    assert judged.sql("SELECT outcome FROM verdict ORDER BY id") == before


@pytest.mark.postgres
def test_a_bench_store_merges_back_into_postgresql(
    judged: Bench,  # noqa: F811
    tmp_path: Path,
) -> None:
    """Finding 4: bench -> PostgreSQL failed as a false conflict (audit ids written
    differently by the two engines)."""
    if not PG_URL or not judged.url.startswith("sqlite"):
        pytest.skip("needs the SQLite store and a PostgreSQL server")
    url, admin, name = fresh_postgres_database()
    lab = Bench(url, tmp_path)
    try:
        judged.plain("store", "copy", "--from", judged.url, "--to", url, "--quiet")
        bench_store = Bench(f"sqlite:///{tmp_path / 'bench-y.db'}", tmp_path)
        lab.plain("store", "copy", "--from", url, "--to", bench_store.url, "--quiet")
        bench_store.add("ZZ", "Zia Zorn", "operator")
        bench_store("people", "grant", "AK", "--role", "checker", "--why", "trained",
                    *bench_store.signed("QM"), "--quiet")  # fmt: skip
        lab.plain("store", "copy", "--from", bench_store.url, "--to", url, "--quiet")
        assert lab.sql("SELECT name FROM person WHERE initials = 'ZZ'") == [("Zia Zorn",)]
        assert lab("store", "check").stdout.startswith("ok: ")
    finally:
        with admin.connect() as conn:
            conn.exec_driver_sql(f'DROP DATABASE "{name}" WITH (FORCE)')
        admin.dispose()


@pytest.mark.postgres
def test_a_signed_store_to_postgresql_and_back_verifies_unchanged(
    judged: Bench,  # noqa: F811
    tmp_path: Path,
) -> None:
    if not PG_URL or not judged.url.startswith("sqlite"):
        pytest.skip("needs the SQLite store and a PostgreSQL server")
    pdf = approve_and_issue(judged)
    url, admin, name = fresh_postgres_database()
    back = Bench(f"sqlite:///{tmp_path / 'back.db'}", tmp_path)
    try:
        judged.plain("store", "copy", "--from", judged.url, "--to", url, "--quiet")
        judged.plain("store", "copy", "--from", url, "--to", back.url, "--quiet")
    finally:
        with admin.connect() as conn:
            conn.exec_driver_sql(f'DROP DATABASE "{name}" WITH (FORCE)')
        admin.dispose()
    assert "verified" in back("verify", str(pdf)).stdout
    assert back("store", "check").stdout.startswith("ok: ")


def test_backup_of_a_live_sqlite_store_restores_and_verifies(
    judged: Bench,  # noqa: F811
    tmp_path: Path,
) -> None:
    if not judged.url.startswith("sqlite"):
        line = judged.fail("store", "backup", str(tmp_path / "b.dump"))
        assert "back it up with its own tool, e.g. `pg_dump --format=custom" in line
        return
    pdf = approve_and_issue(judged)
    target = tmp_path / "backup.db"
    assert judged("store", "backup", str(target)).stdout.strip() == f"backed up to {target}"
    restored = Bench(f"sqlite:///{target}", tmp_path)
    assert "verified" in restored("verify", str(pdf)).stdout
    assert "backups are never overwritten" in judged.fail("store", "backup", str(target))
