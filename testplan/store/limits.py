"""Length limits checked by testplan before either database sees a row.

SQLite stores a string of any length in a ``VARCHAR(16)`` column; PostgreSQL refuses it.
Checking every new or changed row's string columns against their declared length before
each flush makes a record that one engine accepts acceptable to the other, and gives one
line naming the field instead of a driver error.
"""

from __future__ import annotations

from typing import Any

import sqlalchemy as sa
from sqlalchemy.orm import Session

from testplan.errors import RecordError


def check_lengths(session: Session, _context: Any, _instances: Any) -> None:
    """Refuse a new or changed row whose text is longer than its column allows."""
    for obj in (*session.new, *session.dirty):
        table = getattr(obj, "__table__", None)
        if table is None:
            continue
        for column in table.columns:
            length = getattr(column.type, "length", None)
            value = getattr(obj, column.key, None)
            if length and isinstance(value, str) and len(value) > length:
                raise RecordError(
                    f"is {len(value)} characters; at most {length} ({table.name}.{column.name})",
                    key=column.name,
                )


sa.event.listen(Session, "before_flush", check_lengths)
