"""Opening, creating and upgrading stores; the schema the migrations make matches the tables."""

from __future__ import annotations

from pathlib import Path

import pytest
import sqlalchemy as sa
from alembic.autogenerate import compare_metadata
from alembic.runtime.migration import MigrationContext
from sqlmodel import SQLModel

import testplan.store.tables  # noqa: F401
from testplan.store.engine import head_revision, known_revisions, make_engine, migrate

from .conftest import SAMPLE, Bench


def test_migrations_make_exactly_the_declared_tables(db_url: str) -> None:
    engine = make_engine(db_url)
    try:
        migrate(engine)
        with engine.connect() as conn:
            diff = compare_metadata(MigrationContext.configure(conn), SQLModel.metadata)
    finally:
        engine.dispose()
    assert diff == []


def test_init_creates_the_store_and_names_it(db_url: str, tmp_path: Path) -> None:
    bench = Bench(db_url, tmp_path)
    result = bench("init", str(SAMPLE))
    assert result.stdout.strip() == "QC-2027-014: stored at plan revision 1 with 15 runs"
    assert result.stderr.startswith("store: ")
    assert bench.sql("SELECT version_num FROM alembic_version")[0][0] == head_revision()


def test_reading_a_missing_store_does_not_create_it(tmp_path: Path) -> None:
    bench = Bench(str(tmp_path / "nowhere.db"), tmp_path)
    line = bench.fail("record", "list")
    assert line.startswith(f"error: --db: no store at {tmp_path / 'nowhere.db'}")
    assert not (tmp_path / "nowhere.db").exists()


def test_a_file_that_is_not_a_database_is_named(tmp_path: Path) -> None:
    junk = tmp_path / "notes.db"
    junk.write_text("this is not a database\n" * 200)
    line = Bench(str(junk), tmp_path).fail("record", "list")
    assert "cannot open the store" in line and "not a database" in line


def test_a_database_of_something_else_is_refused(tmp_path: Path) -> None:
    other = tmp_path / "other.db"
    engine = sa.create_engine(f"sqlite:///{other}")
    with engine.begin() as conn:
        conn.exec_driver_sql("CREATE TABLE customers (id INTEGER)")
    engine.dispose()
    line = Bench(str(other), tmp_path).fail("init", str(SAMPLE))
    assert line.endswith("holds tables but is not a testplan store")


def test_sqlite_runs_in_wal_mode_with_foreign_keys(tmp_path: Path) -> None:
    bench = Bench(str(tmp_path / "lab.db"), tmp_path)
    bench("init", str(SAMPLE), "--quiet")
    engine = make_engine(f"sqlite:///{tmp_path / 'lab.db'}")
    try:
        with engine.connect() as conn:
            assert conn.exec_driver_sql("PRAGMA journal_mode").scalar() == "wal"
            assert conn.exec_driver_sql("PRAGMA foreign_keys").scalar() == 1
            assert conn.exec_driver_sql("PRAGMA busy_timeout").scalar() == 10000
    finally:
        engine.dispose()


def test_an_older_store_is_refused_then_upgraded_keeping_its_records(
    db_url: str, tmp_path: Path
) -> None:
    first = known_revisions()[0]
    assert first != head_revision()
    engine = make_engine(db_url)
    try:
        migrate(engine, first)
    finally:
        engine.dispose()
    bench = Bench(db_url, tmp_path)
    # Records a bench made with the older schema.
    bench.raw(
        "INSERT INTO person (id, initials, name, created_at) VALUES (:id, 'AK', 'Anna Kowal', :at)",
        id="5f0e8a62c1b04c0fa8c9d1a2b3c4d5e6",
        at="2026-11-02 09:00:00",
    )
    line = bench.fail("people", "list")
    assert f"is at schema {first}; this testplan needs {head_revision()}" in line
    assert "back it up, then run `testplan store upgrade`" in line
    result = bench("store", "upgrade")
    assert result.stdout.strip() == f"upgraded the store from schema {first} to {head_revision()}"
    assert bench("people", "list").stdout.split()[:3] == ["AK", "Anna", "Kowal"]
    assert bench("store", "upgrade").stdout.strip() == (
        f"already at schema {head_revision()}; nothing to do"
    )
    assert bench.sql("SELECT count(*) FROM raw_file")[0][0] == 0


def test_a_store_from_a_newer_testplan_is_refused(db_url: str, tmp_path: Path) -> None:
    bench = Bench(db_url, tmp_path)
    bench("init", str(SAMPLE), "--quiet")
    bench.raw("UPDATE alembic_version SET version_num = '0999'")
    line = bench.fail("people", "list")
    assert "is at schema 0999, newer than this testplan knows" in line


@pytest.mark.parametrize("url", ["mysql://lab/store", "::not a url::/x"])
def test_unsupported_store_urls(url: str, tmp_path: Path) -> None:
    line = Bench(url, tmp_path).fail("people", "list")
    assert line.startswith("error: --db: ")


def test_the_quick_head_check_names_the_newest_migration() -> None:
    from testplan.store.engine import HEAD

    assert HEAD == head_revision() == known_revisions()[-1]
