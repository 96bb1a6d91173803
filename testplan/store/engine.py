"""Opening the store: URL resolution, the engine factory, schema checks and write units.

The store is named by ``--db``, else ``TESTPLAN_DB``, else ``./testplan.db`` (SQLite). A
bare path is an SQLite file. Every write command names the store it writes to.

SQLite runs in WAL mode with foreign keys on, a busy timeout, and ``BEGIN IMMEDIATE``
for every transaction so writers queue instead of failing half-way. A write unit, or the
opening of a store, that still meets a busy store is retried with back-off, then reported
in one line. Read-only commands open SQLite read-only (immutable when the folder cannot
be written) with deferred transactions.
"""

from __future__ import annotations

import os
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path
from typing import Any, TypeVar

import sqlalchemy as sa
from sqlalchemy import event
from sqlalchemy.engine import URL, Engine, make_url
from sqlalchemy.exc import ArgumentError, DBAPIError, OperationalError
from sqlmodel import Session

from testplan.errors import StoreError

T = TypeVar("T")

ENV_VAR = "TESTPLAN_DB"
# The newest migration in db/versions; tests/store/test_open_and_migrate.py checks it, so a
# store already at it opens without loading the migration machinery.
HEAD = "0018"
DEFAULT_FILE = "testplan.db"
BUSY_TIMEOUT_MS = 10_000
RETRY_DELAYS_S = (0.2, 0.5, 1.0, 2.0, 4.0)


def resolve_url(option: str | None) -> str:
    """The store URL from ``--db``, ``TESTPLAN_DB`` or the default file; a path means SQLite."""
    text = option or os.environ.get(ENV_VAR) or DEFAULT_FILE
    if "://" not in text:
        return f"sqlite:///{Path(text).expanduser().resolve()}"
    return text


def _parse(url: str) -> URL:
    try:
        parsed = make_url(url)
    except ArgumentError as err:
        raise StoreError(f"cannot read the store URL {url!r}", key="--db") from err
    if parsed.get_backend_name() not in ("sqlite", "postgresql"):
        raise StoreError(
            f"unsupported store {parsed.get_backend_name()!r}",
            key="--db",
            fix="use an SQLite file or a postgresql+psycopg:// URL",
        )
    if parsed.get_backend_name() == "postgresql" and parsed.get_driver_name() != "psycopg":
        parsed = parsed.set(drivername="postgresql+psycopg")
    return parsed


def shown_url(url: str) -> str:
    """The URL as printed: SQLite as its absolute file path, passwords hidden."""
    parsed = make_url(url)
    if parsed.get_backend_name() == "sqlite":
        return str(Path(parsed.database or "").resolve())
    return parsed.render_as_string(hide_password=True)


def _sqlite_pragmas(dbapi_connection: Any, _record: Any) -> None:
    # We issue BEGIN ourselves (below), so the driver must not.
    dbapi_connection.isolation_level = None
    cur = dbapi_connection.cursor()
    cur.execute("PRAGMA journal_mode=WAL")
    cur.execute("PRAGMA foreign_keys=ON")
    cur.execute(f"PRAGMA busy_timeout={BUSY_TIMEOUT_MS}")
    cur.execute("PRAGMA synchronous=NORMAL")
    cur.close()


def _sqlite_read_pragmas(dbapi_connection: Any, _record: Any) -> None:
    # A reader changes nothing, not even the journal mode: the file may be on read-only media.
    dbapi_connection.isolation_level = None
    cur = dbapi_connection.cursor()
    cur.execute("PRAGMA foreign_keys=ON")
    cur.execute(f"PRAGMA busy_timeout={BUSY_TIMEOUT_MS}")
    cur.execute("PRAGMA query_only=ON")
    cur.close()


READ_ONLY = "testplan_read_only"


def _sqlite_begin(conn: sa.Connection) -> None:
    # A reading session begins deferred: in WAL mode it reads a snapshot without taking the
    # write lock, so pages and reports read while another bench writes.
    deferred = conn.get_execution_options().get(READ_ONLY, False)
    conn.exec_driver_sql("BEGIN" if deferred else "BEGIN IMMEDIATE")


def _sqlite_begin_deferred(conn: sa.Connection) -> None:
    conn.exec_driver_sql("BEGIN DEFERRED")


def folder_writable(folder: Path) -> bool:
    """Whether this process may create files in ``folder`` (SQLite's -wal and -shm)."""
    return os.access(folder, os.W_OK)


def _sqlite_read_only(parsed: URL) -> URL:
    """The file opened read-only (``mode=ro``), or as immutable when its folder cannot be
    written (an archived copy on read-only media), so no -wal, -shm or journal file is made
    beside it."""
    from urllib.parse import quote

    path = Path(parsed.database or "").resolve()
    mode = {"mode": "ro"} if folder_writable(path.parent) else {"immutable": "1"}
    return parsed.set(database=f"file:{quote(str(path))}", query={**mode, "uri": "true"})


def make_engine(url: str, *, read_only: bool = False) -> Engine:
    """One engine per command run, configured for the engine kind. ``read_only``: SQLite
    opens the file read-only (or immutable) with deferred transactions; PostgreSQL
    sessions are read-only transactions."""
    parsed = _parse(url)
    if parsed.get_backend_name() == "sqlite":
        if read_only:
            parsed = _sqlite_read_only(parsed)
        engine = sa.create_engine(parsed, connect_args={"timeout": BUSY_TIMEOUT_MS / 1000})
        event.listen(engine, "connect", _sqlite_read_pragmas if read_only else _sqlite_pragmas)
        event.listen(engine, "begin", _sqlite_begin_deferred if read_only else _sqlite_begin)
        return engine
    if read_only:
        return sa.create_engine(
            parsed, connect_args={"options": "-c default_transaction_read_only=on"}
        )
    return sa.create_engine(parsed, pool_pre_ping=False)


def _is_busy(err: BaseException) -> bool:
    text = str(getattr(err, "orig", err)).lower()
    if "database is locked" in text or "database is busy" in text:
        return True
    orig = getattr(err, "orig", err)
    sqlstate = getattr(orig, "sqlstate", None)
    return sqlstate in ("40001", "40P01", "55P03")


def _driver_errors() -> tuple[type[Exception], ...]:
    """Errors the database drivers raise themselves (COPY goes to psycopg directly)."""
    import sqlite3

    errors: list[type[Exception]] = [sqlite3.Error]
    try:
        import psycopg

        errors.append(psycopg.Error)
    except ImportError:  # pragma: no cover - psycopg is a dependency
        pass
    return tuple(errors)


@dataclass
class Store:
    """An open store: its URL and engine. Create with ``open_store``."""

    url: str
    engine: Engine

    @property
    def name(self) -> str:
        return shown_url(self.url)

    @property
    def dialect(self) -> str:
        return self.engine.dialect.name

    @contextmanager
    def reading(self) -> Iterator[Session]:
        """A session for reading; nothing it does is committed. On SQLite it takes no
        write lock (a snapshot of the WAL), so it neither waits for nor blocks a writer."""
        bind = self.engine.execution_options(**{READ_ONLY: True})
        with Session(bind) as session:
            yield session

    def write(self, unit: Callable[[Session], T]) -> T:
        """Run ``unit`` in one transaction: all of it is stored, or none.

        A busy store (another bench holding the lock, a serialisation conflict) is
        retried with back-off; after that the user gets one line, not a traceback.
        """

        def attempt() -> T:
            with Session(self.engine, expire_on_commit=False) as session:
                with session.begin():
                    result = unit(session)
                return result

        try:
            return _retry_busy(attempt)
        except _StillBusy as busy:
            raise StoreError(
                f"the store {self.name} stayed busy for {busy.waited:.0f} s "
                "(another bench is writing); nothing was stored",
                fix="try again in a moment",
            ) from None
        except Exception as err:
            if not isinstance(err, (OperationalError, DBAPIError, *_driver_errors())):
                raise
            raise _store_error(self, err) from err

    def dispose(self) -> None:
        self.engine.dispose()


class _StillBusy(Exception):
    def __init__(self, waited: float) -> None:
        self.waited = waited


def _retry_busy(attempt: Callable[[], T]) -> T:
    """Run ``attempt``; while the store is busy, again after each of RETRY_DELAYS_S. Raises
    _StillBusy (with the seconds waited) when it stays busy; other errors pass through."""
    waited = 0.0
    for delay in (*RETRY_DELAYS_S, None):
        try:
            return attempt()
        except Exception as err:
            if not isinstance(err, (OperationalError, DBAPIError, *_driver_errors())):
                raise
            if not _is_busy(err):
                raise
            if delay is None:
                raise _StillBusy(waited + BUSY_TIMEOUT_MS / 1000) from err
            time.sleep(delay)
            waited += delay
    raise AssertionError("unreachable")  # pragma: no cover


def _store_error(store: Store, err: BaseException) -> StoreError:
    first = str(getattr(err, "orig", err)).strip().splitlines()[0]
    return StoreError(f"the store {store.name} refused the change: {first}")


# --- schema revisions -------------------------------------------------------------------


def migrations_dir() -> Path:
    """The Alembic folder: inside the installed package, else the checkout's db/."""
    here = Path(__file__).resolve().parent.parent
    packaged = here / "db"
    if (packaged / "env.py").is_file():
        return packaged
    return here.parent / "db"


def _alembic_config(connection: sa.Connection | None = None) -> Any:
    from alembic.config import Config

    cfg = Config()
    cfg.set_main_option("script_location", str(migrations_dir()))
    if connection is not None:
        cfg.attributes["connection"] = connection
    return cfg


@lru_cache(maxsize=1)
def head_revision() -> str:
    """The newest schema revision this version of testplan knows."""
    from alembic.script import ScriptDirectory

    head = ScriptDirectory.from_config(_alembic_config()).get_current_head()
    assert head is not None
    return head


@lru_cache(maxsize=1)
def known_revisions() -> tuple[str, ...]:
    """All schema revisions, oldest first."""
    from alembic.script import ScriptDirectory

    script = ScriptDirectory.from_config(_alembic_config())
    return tuple(r.revision for r in reversed(list(script.walk_revisions())))


def current_revision(engine: Engine) -> str | None:
    """The store's schema revision, None for an empty database."""
    from alembic.runtime.migration import MigrationContext

    with engine.connect() as conn:
        return MigrationContext.configure(conn).get_current_revision()


def migrate(engine: Engine, target: str = "head") -> None:
    """Upgrade the schema to ``target`` in one transaction."""
    from alembic import command

    with engine.begin() as conn:
        command.upgrade(_alembic_config(conn), target)


def _at_head(engine: Engine) -> bool:
    """Quick check (no Alembic import) that the store is at this version's schema."""
    try:
        with engine.connect() as conn:
            version = conn.exec_driver_sql("SELECT version_num FROM alembic_version").scalar()
    except (OperationalError, DBAPIError) as err:
        if _is_busy(err):
            raise
        return False
    return version == HEAD


def _has_tables(engine: Engine) -> bool:
    return bool(sa.inspect(engine).get_table_names())


def open_store(
    option: str | None, *, create: bool = False, upgrade: bool = False, read_only: bool = False
) -> Store:
    """Open the store named by ``option`` / ``TESTPLAN_DB`` / the default file.

    ``create``: make a new store if there is none (write commands that start a store).
    ``upgrade``: the caller will upgrade, so an older schema is not an error.
    ``read_only``: for commands that only read (verify, store check, store info); an SQLite
    file is opened read-only, or immutable when its folder cannot be written.
    Otherwise the store must exist and be at this version's schema revision. A store kept
    busy by another writer while it is opened is retried, then named in one line.
    """
    try:
        return _retry_busy(lambda: _open(option, create, upgrade, read_only))
    except _StillBusy as busy:
        raise StoreError(
            f"the store {shown_url(resolve_url(option))} stayed busy for {busy.waited:.0f} s "
            "while opening it (another program holds it locked)",
            key="--db",
            fix="try again when the other program has finished",
        ) from None


def _open(option: str | None, create: bool, upgrade: bool, read_only: bool) -> Store:
    url = resolve_url(option)
    parsed = _parse(url)
    shown = shown_url(url)
    if parsed.get_backend_name() == "sqlite":
        path = Path(parsed.database or "")
        if not path.exists() and not create:
            raise StoreError(
                f"no store at {shown}",
                key="--db",
                fix="create one with `testplan init CAMPAIGN_FILE`, or name it with --db "
                f"or {ENV_VAR}",
            )
        if not path.parent.is_dir():
            raise StoreError(f"no such folder {path.parent} for the store", key="--db")
    engine = make_engine(url, read_only=read_only and not (create or upgrade))
    store = Store(url, engine)
    try:
        if not create and not upgrade and _at_head(engine):
            return store
        current = current_revision(engine)
        has_tables = current is not None or _has_tables(engine)
    except (OperationalError, DBAPIError) as err:
        engine.dispose()
        if _is_busy(err):
            raise
        first = str(getattr(err, "orig", err)).strip().splitlines()[0]
        raise StoreError(f"cannot open the store {shown}: {first}", key="--db") from err
    if current is None:
        if has_tables:
            engine.dispose()
            raise StoreError(f"{shown} holds tables but is not a testplan store", key="--db")
        if not create and not upgrade:
            engine.dispose()
            raise StoreError(
                f"the store {shown} is empty",
                key="--db",
                fix="create it with `testplan init CAMPAIGN_FILE`",
            )
        migrate(engine)
        return store
    head = head_revision()
    if current == head or upgrade:
        if current not in known_revisions():
            engine.dispose()
            raise StoreError(
                f"the store {shown} is at schema {current}, newer than this testplan knows "
                f"({head})",
                fix="upgrade testplan",
            )
        return store
    engine.dispose()
    if current in known_revisions():
        raise StoreError(
            f"the store {shown} is at schema {current}; this testplan needs {head}",
            fix="back it up, then run `testplan store upgrade`",
        )
    raise StoreError(
        f"the store {shown} is at schema {current}, newer than this testplan knows ({head})",
        fix="upgrade testplan",
    )
