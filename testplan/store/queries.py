"""Read-only summaries of the store."""

from __future__ import annotations

import sqlalchemy as sa
from sqlmodel import Session, SQLModel

import testplan.store.tables  # noqa: F401  (registers the tables)


def count_rows(session: Session) -> dict[str, int]:
    """Rows per table, in schema order."""
    out = {}
    for table in SQLModel.metadata.sorted_tables:
        n = session.execute(sa.select(sa.func.count()).select_from(table)).scalar_one()
        out[table.name] = int(n)
    return out
