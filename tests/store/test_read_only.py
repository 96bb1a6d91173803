"""Read-only and busy stores: `verify`, `store check` and `store info` read an archived
SQLite copy without writing beside it, and a store held locked by another program while
it is opened is retried, then named in one line."""

from __future__ import annotations

import shutil
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest

import testplan.store.engine as engine_mod

from .conftest import PASS, Bench, approve_and_issue, record_and_judge

SIDE_FILES = ("-wal", "-shm", "-journal")


@pytest.fixture
def issued(bench: Bench, monkeypatch: pytest.MonkeyPatch) -> Bench:
    if not bench.url.startswith("sqlite"):
        pytest.skip("SQLite files")
    monkeypatch.setenv("TESTPLAN_KEY_PASSPHRASE", PASS)
    record_and_judge(bench)
    approve_and_issue(bench)
    return bench


def _archive(b: Bench, folder: Path) -> Path:
    """A copy of the store and its report in ``folder``, as on a read-only medium."""
    folder.mkdir()
    shutil.copy(b.folder / "lab.db", folder / "lab.db")
    shutil.copy(b.folder / "report.pdf", folder / "report.pdf")
    return folder / "lab.db"


def test_an_archived_copy_is_read_without_writing_beside_it(
    issued: Bench, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """The folder cannot be written (tests run as root, so the check is stood in for):
    the file is opened immutable and nothing appears beside it."""
    store = _archive(issued, tmp_path / "archive")
    monkeypatch.setattr(engine_mod, "folder_writable", lambda folder: False)
    before = store.read_bytes()
    copy = Bench(f"sqlite:///{store}", tmp_path)
    assert copy("store", "check").stdout.startswith("ok: ")
    assert f"schema {engine_mod.HEAD}" in copy("store", "info").stdout
    assert "verified" in copy("verify", str(store.parent / "report.pdf")).stdout
    assert sorted(p.name for p in store.parent.iterdir()) == ["lab.db", "report.pdf"]
    assert store.read_bytes() == before


def _nobody_runs_python() -> bool:
    if shutil.which("runuser") is None:
        return False
    probe = ["runuser", "-u", "nobody", "--", sys.executable, "-c", "import testplan"]
    return subprocess.run(probe, capture_output=True, check=False).returncode == 0


@pytest.mark.skipif(
    not _nobody_runs_python(), reason="user nobody cannot run this Python (or no runuser)"
)
def test_a_read_only_folder_as_another_user(issued: Bench, tmp_path: Path) -> None:
    """The same, for real: the copy in a folder user nobody can read but not write."""
    import tempfile

    top = Path(tempfile.mkdtemp(prefix="testplan-ro-"))
    try:
        store = _archive(issued, top / "archive")
        for path in (top, store.parent):
            path.chmod(0o755)
        for path in store.parent.iterdir():
            path.chmod(0o444)
        store.parent.chmod(0o555)
        testplan = Path(sys.executable).parent / "testplan"
        for args in (["store", "check"], ["store", "info"]):
            done = subprocess.run(
                ["runuser", "-u", "nobody", "--", str(testplan), *args, "--db", str(store)],
                capture_output=True,
                text=True,
                cwd=top,
                check=False,
            )
            assert done.returncode == 0, done.stderr
        assert not any(Path(f"{store}{s}").exists() for s in SIDE_FILES)
    finally:
        (top / "archive").chmod(0o755)
        shutil.rmtree(top)


def test_a_read_only_command_cannot_write(issued: Bench) -> None:
    """`store check` opens the file read-only even where it could write."""
    store = engine_mod.open_store(issued.url, read_only=True)
    try:
        import sqlalchemy as sa

        with pytest.raises(sa.exc.OperationalError, match="readonly|read-only|query_only"):
            with store.engine.begin() as conn:
                conn.exec_driver_sql("INSERT INTO store_meta (key, value) VALUES ('x', 'y')")
    finally:
        store.dispose()


@pytest.fixture
def held(issued: Bench, monkeypatch: pytest.MonkeyPatch) -> sqlite3.Connection:
    """Another program holding the store's file locked (exclusive locking mode), with the
    busy timeout and the back-off shortened so the test does not wait."""
    monkeypatch.setattr(engine_mod, "BUSY_TIMEOUT_MS", 20)
    monkeypatch.setattr(engine_mod, "RETRY_DELAYS_S", (0.01, 0.01))
    other = sqlite3.connect(issued.folder / "lab.db", isolation_level=None)
    other.execute("PRAGMA locking_mode=EXCLUSIVE")
    other.execute("BEGIN EXCLUSIVE")
    other.execute("INSERT INTO store_meta (key, value) VALUES ('held', 'by another program')")
    other.execute("COMMIT")  # the exclusive lock stays held until the connection closes
    return other


def test_a_store_locked_at_open_is_named_busy_in_one_line(held: sqlite3.Connection) -> None:
    try:
        for args in (("store", "check"), ("store", "info"), ("people", "list")):
            line = Bench(f"sqlite:///{_path(held)}", _path(held).parent).fail(*args)
            assert line == (
                f"error: --db: the store {_path(held)} stayed busy for 0 s while opening it "
                "(another program holds it locked) (try again when the other program has "
                "finished)"
            ), args
    finally:
        held.close()


def test_a_store_locked_at_open_is_retried(
    held: sqlite3.Connection, monkeypatch: pytest.MonkeyPatch
) -> None:
    """The other program lets go during the first back-off: the command then opens it."""
    waits: list[float] = []

    def let_go(delay: float) -> None:
        waits.append(delay)
        held.close()

    monkeypatch.setattr(engine_mod.time, "sleep", let_go)
    path = _path(held)
    assert Bench(f"sqlite:///{path}", path.parent)("store", "check").stdout.startswith("ok: ")
    assert waits == [0.01]


def _path(conn: sqlite3.Connection) -> Path:
    return Path(conn.execute("PRAGMA database_list").fetchone()[2])
