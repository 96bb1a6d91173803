"""PostgreSQL least privilege: the bench role for everyday use.

The owner role (the database's owner) runs migrations (`store upgrade`) and owns every
table and trigger. A bench role gets only what recording needs: SELECT and INSERT
everywhere, UPDATE on the few records the tool updates in place (and only the withdrawal
columns of an import), DELETE only on a run's specimen links (re-planning) and on failed
logins. Not owning the tables, it cannot TRUNCATE, ALTER, DROP or disable a trigger, and it
cannot change the append-only records.
"""

from __future__ import annotations

import sqlalchemy as sa
from sqlmodel import SQLModel

import testplan.store.tables  # noqa: F401  (registers the tables)
from testplan.errors import StoreError

# the records the tool changes in place; every other table is append-only
UPDATED = ("person", "campaign", "run", "specimen", "person_password")
# columns changed in place on otherwise append-only records (an import's withdrawal)
UPDATED_COLUMNS = {"raw_file": ("withdrawn_at", "withdrawn_by", "withdrawn_why")}
# a run's specimen links (re-planning) and a person's failed logins once they log in
DELETED = ("run_specimen", "login_failure")


def grant_bench(engine: sa.Engine, role: str) -> list[str]:
    """Give ``role`` (an existing PostgreSQL role) the bench privileges on this store's
    tables, and nothing more. Returns the statements run."""
    if engine.dialect.name != "postgresql":
        raise StoreError(
            "roles are a PostgreSQL matter; an SQLite store is a file",
            key="--db",
            fix="protect the file with the operating system's permissions",
        )
    quoted = engine.dialect.identifier_preparer.quote(role)
    tables = sorted(SQLModel.metadata.tables) + ["alembic_version"]
    statements = [
        f"REVOKE ALL ON ALL TABLES IN SCHEMA public FROM {quoted}",
        f"GRANT USAGE ON SCHEMA public TO {quoted}",
        *(f'GRANT SELECT, INSERT ON "{t}" TO {quoted}' for t in tables if t != "alembic_version"),
        f'GRANT SELECT ON "alembic_version" TO {quoted}',
        *(f'GRANT UPDATE ON "{t}" TO {quoted}' for t in UPDATED),
        *(
            f'GRANT UPDATE ({", ".join(columns)}) ON "{t}" TO {quoted}'
            for t, columns in UPDATED_COLUMNS.items()
        ),
        *(f'GRANT DELETE ON "{t}" TO {quoted}' for t in DELETED),
    ]
    with engine.begin() as conn:
        exists = conn.execute(sa.text("SELECT 1 FROM pg_roles WHERE rolname = :r"), {"r": role})
        if exists.first() is None:
            raise StoreError(
                f"no PostgreSQL role {role!r}",
                key="ROLE",
                fix=f"create it first: CREATE ROLE {quoted} LOGIN PASSWORD '...'",
            )
        for statement in statements:
            conn.exec_driver_sql(statement)
    return statements
