"""Fixtures for trying to break testplan: a signed campaign built once per engine and
cloned for each test (an SQLite file copy, or a PostgreSQL database made from a template)."""

from __future__ import annotations

import shutil
import uuid
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pytest
import sqlalchemy as sa
from sqlalchemy.engine import make_url

from tests.store.conftest import (  # noqa: F401  (bench and db_url are fixtures)
    NO_PG,
    PASS,
    PG_URL,
    Bench,
    Roles,
    approve_and_issue,
    bench,
    db_url,
    fresh_postgres_database,
    owned_by_roles,
    record_and_judge,
    stock,
)


@dataclass(frozen=True)
class Signed:
    """A store holding a recorded, judged, signed and issued campaign, and its PDF."""

    bench: Bench
    pdf: Path


def _sqlite_files(path: Path) -> list[Path]:
    return [Path(f"{path}{s}") for s in ("", "-wal", "-shm") if Path(f"{path}{s}").exists()]


@pytest.fixture(
    scope="module", params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)]
)
def signed_template(
    request: pytest.FixtureRequest, tmp_path_factory: pytest.TempPathFactory
) -> Iterator[tuple[str, Path, Roles | None]]:
    """Build the signed campaign once: returns its URL, the issued PDF and, on PostgreSQL,
    the roles (the owner made the store, the bench role recorded and signed it)."""
    folder = tmp_path_factory.mktemp("signed")
    drop = None
    roles = None
    if request.param == "sqlite":
        url = f"sqlite:///{folder / 'lab.db'}"
    else:
        if not PG_URL:
            pytest.skip(NO_PG)
        url, admin, _ = fresh_postgres_database()
        admin.dispose()
        roles, drop = owned_by_roles(url)
    try:
        with pytest.MonkeyPatch.context() as env:
            env.setenv("TESTPLAN_KEY_PASSPHRASE", PASS)
            if roles is None:
                bench = stock(Bench(url, folder))
            else:
                stock(Bench(roles.owner, folder))("store", "grant-bench", roles.bench_role)
                bench = Bench(roles.bench, folder)
            pdf = approve_and_issue(record_and_judge(bench, deviation=True))
        yield url, pdf, roles
    finally:
        if drop is not None:
            drop()


@pytest.fixture
def signed(signed_template: tuple[str, Path, Roles | None], tmp_path: Path) -> Iterator[Signed]:
    """A private copy of the signed campaign for one test; on PostgreSQL it is used as the
    bench role, as a bench's own database user would."""
    url, pdf, roles = signed_template
    shutil.copy(pdf, tmp_path / pdf.name)
    for key in pdf.parent.glob("*.pem*"):  # the signers' key files, to issue again
        shutil.copy(key, tmp_path / key.name)
    if roles is None:
        source = Path(make_url(url).database or "")
        for f in _sqlite_files(source):
            shutil.copy(f, tmp_path / f.name)
        yield Signed(Bench(f"sqlite:///{tmp_path / source.name}", tmp_path), tmp_path / pdf.name)
        return
    assert PG_URL is not None
    name = "tp_" + uuid.uuid4().hex[:16]
    owner = make_url(roles.owner).username
    admin = sa.create_engine(PG_URL, isolation_level="AUTOCOMMIT")
    with admin.connect() as conn:
        conn.exec_driver_sql(
            f'CREATE DATABASE "{name}" TEMPLATE "{make_url(url).database}" OWNER {owner}'
        )
    try:
        copy = make_url(roles.bench).set(database=name).render_as_string(hide_password=False)
        yield Signed(Bench(copy, tmp_path), tmp_path / pdf.name)
    finally:
        with admin.connect() as conn:
            conn.exec_driver_sql(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')
        admin.dispose()


def clone_row(b: Bench, table: str, where: str, **changes: Any) -> uuid.UUID | None:
    """Insert a copy of the first row of ``table`` matching ``where`` (SQL), with a new id
    and ``changes``, through a plain connection: an insertion behind the tool's back."""
    from sqlmodel import SQLModel

    import testplan.store.tables  # noqa: F401

    t = SQLModel.metadata.tables[table]
    with b.file_holder() as conn:
        row = dict(conn.execute(sa.select(t).where(sa.text(where)).limit(1)).mappings().one())
        new_id = None
        if "id" in row:
            new_id = row["id"] = uuid.uuid4()
        row.update(changes)
        conn.execute(t.insert().values(**row))
        return new_id


def as_param(b: Bench, value: uuid.UUID) -> str:
    """A UUID as a plain SQL parameter: hex text on SQLite, canonical text on PostgreSQL."""
    return value.hex if b.url.startswith("sqlite") else str(value)
