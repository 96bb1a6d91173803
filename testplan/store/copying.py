"""Copy a whole store into an empty one, or merge a bench's store into the lab's
(SQLite <-> PostgreSQL), and back up a live SQLite store.

UUID keys make a copy identical: the same records, the same audit chains, the same
manifest roots. Rows go table by table in foreign-key order, in batches, in one
transaction on the destination; the audit chains are checked at the end.
"""

from __future__ import annotations

import uuid
from collections import defaultdict
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any

import sqlalchemy as sa
from sqlmodel import Session, SQLModel

import testplan.store.tables  # noqa: F401  (registers the tables)
from testplan.errors import IntegrityError, StoreError
from testplan.store.engine import Store

BATCH = 20_000


@dataclass
class Copied:
    """What a copy or merge did."""

    inserted: dict[str, int] = field(default_factory=dict)
    identical: int = 0
    updated: list[str] = field(default_factory=list)
    kept: list[str] = field(default_factory=list)
    audit_entries: int = 0


SIGN_OFF = ("manifest", "signature", "amendment", "report_issue")


def _label(table: sa.Table, row: Mapping[str, Any]) -> str:
    for name in ("key", "reference", "serial", "initials", "tag", "name"):
        if name in row and row[name] is not None:
            return f"{table.name} {row[name]}"
    return f"{table.name} {row.get('id', '')}"


def _audit_ids(conn: sa.Connection) -> dict[str, set[str]]:
    out: dict[str, set[str]] = defaultdict(set)
    for entity_id, entry_id in conn.execute(sa.text("SELECT entity_id, id FROM audit")):
        # SQLite keeps a UUID as 32 hex digits, PostgreSQL as a uuid: compare them as UUIDs
        out[str(entity_id)].add(str(uuid.UUID(str(entry_id))))
    return out


def copy_store(
    source: Store, target: Store, *, progress: Callable[[str, int], None] | None = None
) -> Copied:
    """Copy ``source`` into ``target``: a whole store into an empty one, or a bench's store
    into the lab's (merge). All of it or none of it, in one transaction on ``target``.

    Rows are matched by their UUID keys. A row in both stores that is the same is left; one
    that differs is taken from the store whose audit trail for it includes more than the
    other's (the later version); if each store changed it independently, or it differs with
    the same audit history (changed outside testplan), the merge stops and names it.
    """
    from testplan.store.audit import check_chain

    done = Copied()
    tables = [
        t for t in SQLModel.metadata.sorted_tables if t.name not in ("store_meta", "sample_block")
    ]
    # The sign-off records go last: an approval locks its campaign against new rows
    # (migration 0018), so the campaign's own rows must be in the target before it.
    tables.sort(key=lambda t: t.name in SIGN_OFF)
    try:
        _copy_rows(source, target, tables, done, progress)
    except sa.exc.DBAPIError as err:
        first = str(err.orig).strip().splitlines()[0]
        raise StoreError(f"{target.name} refused the copy: {first}; nothing was copied") from err
    with Session(target.engine) as session:
        entries, findings = check_chain(session)
    if findings:
        raise IntegrityError(
            f"the audit chains do not check out after the copy: {findings[0].line()}"
        )
    done.audit_entries = entries
    return done


def _copy_rows(
    source: Store,
    target: Store,
    tables: list[sa.Table],
    done: Copied,
    progress: Callable[[str, int], None] | None,
) -> None:
    new_files: list[Any] = []
    with source.engine.connect() as src, target.engine.begin() as dst:
        src_audit, dst_audit = _audit_ids(src), _audit_ids(dst)
        for table in tables:
            pk = [c.name for c in table.primary_key.columns]
            existing = {
                tuple(row[k] for k in pk): dict(row)
                for row in dst.execute(sa.select(table)).mappings()
            }
            batch = []
            for mapping in src.execute(sa.select(table)).mappings():
                row = dict(mapping)
                key = tuple(row[k] for k in pk)
                have = existing.get(key)
                if have is None:
                    batch.append(row)
                    continue
                if have == row:
                    done.identical += 1
                    continue
                entity = str(row.get("id", ""))
                s_ids, d_ids = src_audit.get(entity, set()), dst_audit.get(entity, set())
                if table.name != "audit" and s_ids == d_ids:
                    raise StoreError(
                        f"{_label(table, row)} differs between the stores while its audit "
                        "history is the same: it was changed outside testplan; nothing was "
                        "copied",
                        key="--from",
                        fix="run `testplan store check` and `testplan verify` on both stores",
                    )
                if table.name != "audit" and d_ids <= s_ids:
                    cond = sa.and_(*(table.c[k] == row[k] for k in pk))
                    dst.execute(table.update().where(cond).values(**row))
                    done.updated.append(_label(table, row))
                elif table.name != "audit" and s_ids <= d_ids:
                    done.kept.append(_label(table, row))
                else:
                    raise StoreError(
                        f"{_label(table, row)} was changed in both stores; nothing was copied",
                        key="--from",
                        fix="settle which record is right in one store, then copy again",
                    )
            for start in range(0, len(batch), BATCH):
                dst.execute(table.insert(), batch[start : start + BATCH])
            done.inserted[table.name] = len(batch)
            if table.name == "raw_file":
                new_files = [row["id"] for row in batch]
            if progress is not None:
                progress(table.name, len(batch))
        blocks = SQLModel.metadata.tables["sample_block"]
        n = 0
        for file_id in new_files:
            # a block is up to 65,536 samples (about 1 MB): copied a few at a time
            result = src.execution_options(stream_results=True).execute(
                sa.select(blocks).where(blocks.c.raw_file_id == file_id)
            )
            while rows := result.fetchmany(8):
                dst.execute(blocks.insert(), [dict(r._mapping) for r in rows])
                n += len(rows)
        done.inserted["sample_block"] = n


def backup_sqlite(store: Store, path: str) -> int:
    """A consistent copy of a live SQLite store through SQLite's online backup API, written
    beside ``path`` and renamed into place. Returns the number of pages copied."""
    import os
    import sqlite3
    import tempfile
    from pathlib import Path

    target = Path(path)
    if target.exists():
        raise StoreError("a file is already there; backups are never overwritten", file=target)
    if not target.parent.is_dir():
        raise StoreError("no such folder for the backup", file=target)
    source_file = store.engine.url.database or ""
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=target.parent)
    os.close(fd)
    pages = 0

    def count(_status: int, remaining: int, total: int) -> None:
        nonlocal pages
        pages = total - remaining

    try:
        src = sqlite3.connect(f"file:{source_file}?mode=ro", uri=True)
        dst = sqlite3.connect(tmp)
        try:
            with dst:
                src.backup(dst, pages=1024, progress=count)
            dst.execute("PRAGMA journal_mode=DELETE")
        finally:
            dst.close()
            src.close()
        os.replace(tmp, target)
    except (OSError, sqlite3.Error) as err:
        Path(tmp).unlink(missing_ok=True)
        raise StoreError(f"the backup failed: {err}", file=target) from err
    return pages
