"""Copy a whole store into an empty one (SQLite <-> PostgreSQL), row for row.

UUID keys make the copy identical: the same records, the same audit chain, the same
manifest roots. Rows go table by table in foreign-key order, in batches, in one
transaction on the destination; the counts and the audit chain are checked at the end.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import sqlalchemy as sa
from sqlmodel import Session, SQLModel

import testplan.store.tables  # noqa: F401  (registers the tables)
from testplan.errors import IntegrityError, StoreError
from testplan.store.engine import Store

BATCH = 20_000


@dataclass(frozen=True)
class Copied:
    rows: dict[str, int]
    audit_entries: int


def copy_store(
    source: Store, target: Store, *, progress: Callable[[str, int], None] | None = None
) -> Copied:
    """Copy every row of ``source`` into the empty store ``target``."""
    from testplan.store.audit import check_chain
    from testplan.store.queries import count_rows

    with Session(target.engine) as session:
        if any(count_rows(session).values()):
            raise StoreError(
                f"the destination {target.name} already holds records",
                key="--to",
                fix="copy into a new, empty store",
            )
    tables = SQLModel.metadata.sorted_tables
    counts: dict[str, int] = {}
    with source.engine.connect() as src, target.engine.begin() as dst:
        for table in tables:
            n = 0
            result = src.execution_options(stream_results=True).execute(sa.select(table))
            while batch := result.fetchmany(BATCH):
                dst.execute(table.insert(), [dict(row._mapping) for row in batch])
                n += len(batch)
            counts[table.name] = n
            if progress is not None:
                progress(table.name, n)
    with Session(target.engine) as session:
        landed = count_rows(session)
        entries, findings = check_chain(session)
    short = {t: (counts[t], landed[t]) for t in counts if counts[t] != landed[t]}
    if short:
        raise IntegrityError(f"the copy is incomplete: {short}")
    if findings:
        raise IntegrityError(f"the copied audit chain does not check out: {findings[0].line()}")
    return Copied(counts, entries)
