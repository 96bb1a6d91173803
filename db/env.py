"""Alembic environment for the testplan store.

testplan runs migrations itself (``testplan store upgrade``, or on first write), passing
an open connection in ``config.attributes["connection"]``. Developers can also run
``alembic -c db/alembic.ini -x url=sqlite:///testplan.db upgrade head``.
SQLite gets batch mode, so table changes work there as on PostgreSQL.
"""

from __future__ import annotations

from alembic import context
from sqlalchemy import create_engine

from testplan.store.tables import SQLModel

config = context.config
target_metadata = SQLModel.metadata


def _run(connection) -> None:  # type: ignore[no-untyped-def]
    context.configure(
        connection=connection,
        target_metadata=target_metadata,
        render_as_batch=connection.dialect.name == "sqlite",
        compare_type=True,
    )
    with context.begin_transaction():
        context.run_migrations()


connection = config.attributes.get("connection")
if connection is not None:
    _run(connection)
else:
    url = context.get_x_argument(as_dictionary=True).get("url") or config.get_main_option(
        "sqlalchemy.url"
    )
    engine = create_engine(url)
    with engine.begin() as conn:
        _run(conn)
