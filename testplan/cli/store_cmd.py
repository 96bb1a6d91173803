"""``testplan store``: upgrade the schema of an older store, check its integrity, describe it."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from testplan.cli.common import DbOption, KeyOption, QuietOption, command_group, say, track
from testplan.cli.errors import reports_errors
from testplan.errors import IntegrityError

app = command_group("Look after the store: schema upgrades and integrity checks.")


@app.command("upgrade")
@reports_errors
def upgrade_command(db: DbOption = None, quiet: QuietOption = False) -> None:
    """Upgrade an older store to this version's schema, keeping every record.

    Back the store up first. A store already up to date is left as it is.

    Example: testplan store upgrade --db lab.db
    """
    from testplan.store.engine import current_revision, head_revision, migrate, open_store

    store = open_store(db, upgrade=True)
    track(store)
    say(f"store: {store.name}", quiet=quiet)
    before = current_revision(store.engine)
    head = head_revision()
    if before == head:
        typer.echo(f"already at schema {head}; nothing to do")
        return
    migrate(store.engine)
    typer.echo(f"upgraded the store from schema {before} to {head}")


@app.command("grant-bench")
@reports_errors
def grant_bench_command(
    role: Annotated[str, typer.Argument(help="An existing PostgreSQL role, e.g. bench.")],
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Give a PostgreSQL role the bench privileges: read and record, nothing more (no
    TRUNCATE, no DDL, no trigger control, no change to append-only records). Run it as the
    database's owner, after `store upgrade`.

    Example: testplan store grant-bench bench --db postgresql://owner@lab/testplan
    """
    from testplan.store.engine import open_store
    from testplan.store.privileges import grant_bench

    store = open_store(db)
    track(store)
    say(f"store: {store.name}", quiet=quiet)
    statements = grant_bench(store.engine, role)
    typer.echo(f"{role}: bench privileges granted ({len(statements)} statements)")


@app.command("templates")
@reports_errors
def templates_command(
    folder: Annotated[Path, typer.Argument(help="The lab's template folder.", metavar="DIR")],
    name: Annotated[str, typer.Option("--name", help="A name for the set.")],
    by: Annotated[str, typer.Option("--by", help="Initials of the manager registering it.")],
    key: KeyOption = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Register a lab's own report template set, once, signed by a manager: an approval
    may then name it (`sign --templates DIR`) and the issued report is printed with it.

    Example: testplan store templates lab-templates/ --name "lab letterhead 2027" --by QM
    """
    from testplan.cli.common import load_signer, open_for_writing
    from testplan.report.render import templates_sha256
    from testplan.store.templates import register_templates

    signer = load_signer(by, key)
    sha = templates_sha256(folder)
    store = open_for_writing(db, quiet=quiet)
    row = store.write(lambda s: register_templates(s, sha256=sha, name=name, by=signer))
    typer.echo(f"template set {row.name!r} registered: SHA-256 {row.sha256}")


@app.command("check")
@reports_errors
def check_command(db: DbOption = None) -> None:
    """Verify the audit chain, every raw file's SHA-256 and every import's samples.

    Exit 3 and one line per problem when something was changed behind the tool's back.

    Example: testplan store check --db lab.db
    """
    from testplan.cli.common import open_for_reading
    from testplan.store.audit import (
        check_attachments,
        check_audited,
        check_chain,
        check_raw_files,
    )

    store = open_for_reading(db, read_only=True)
    with store.reading() as session:
        entries, chain = check_chain(session)
        files, raw = check_raw_files(session)
        photos, attached = check_attachments(session)
        audited, unaudited = check_audited(session)
    problems = chain + raw + attached + unaudited
    for p in problems:
        typer.echo(f"problem: {p.line()}", err=True)
    if problems:
        raise IntegrityError(
            f"{len(problems)} problem(s) in {store.name}: the evidence does not check out"
        )
    typer.echo(
        f"ok: {entries} audit entries chained, {files} raw files and their samples, "
        f"{photos} attachments match their hashes, {audited} audited records as audited"
    )


@app.command("info")
@reports_errors
def info_command(
    db: DbOption = None,
    as_json: Annotated[bool, typer.Option("--json", help="Print as JSON.")] = False,
) -> None:
    """Say which store this is, its schema revision and what it holds.

    Example: testplan store info --db lab.db
    """
    import json

    from testplan.cli.common import open_for_reading
    from testplan.store.engine import current_revision
    from testplan.store.queries import count_rows

    store = open_for_reading(db, read_only=True)
    with store.reading() as session:
        counts = count_rows(session)
    info = {
        "store": store.name,
        "engine": store.dialect,
        "schema": current_revision(store.engine),
        "rows": counts,
    }
    if as_json:
        typer.echo(json.dumps(info, indent=2))
        return
    typer.echo(f"store:  {info['store']} ({info['engine']}, schema {info['schema']})")
    for name, n in counts.items():
        typer.echo(f"  {name:<16} {n}")


@app.command("copy")
@reports_errors
def copy_command(
    from_: Annotated[str, typer.Option("--from", help="Store to copy (file or URL).")],
    to: Annotated[str, typer.Option("--to", help="New, empty store (file or URL).")],
    quiet: QuietOption = False,
) -> None:
    """Copy a whole store into a new one, or merge a bench's store into the lab's (SQLite or
    PostgreSQL); then check the audit chains. On a record changed in both, nothing is copied.

    Example: testplan store copy --from lab.db --to postgresql://lab@dbhost/testplan
    """
    from testplan.store.copying import copy_store
    from testplan.store.engine import open_store

    source = track(open_store(from_))
    target = track(open_store(to, create=True))
    say(f"copying {source.name} -> {target.name}", quiet=quiet)
    done = copy_store(source, target)
    for label in done.updated:
        say(f"taken from the source (later there): {label}", quiet=quiet)
    for label in done.kept:
        say(f"kept in the destination (later there): {label}", quiet=quiet)
    total = sum(done.inserted.values())
    typer.echo(
        f"copied {total} rows ({done.identical} already there, {len(done.updated)} updated); "
        f"audit chains of {done.audit_entries} entries check out"
    )


@app.command("backup")
@reports_errors
def backup_command(
    path: Annotated[Path, typer.Argument(help="Backup file to write (must not exist).")],
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Make a consistent copy of a live SQLite store (benches may go on writing). For a
    PostgreSQL store it says how to back it up with pg_dump.

    Example: testplan store backup backups/lab-2027-02-01.db --db lab.db
    """
    from testplan.errors import StoreError
    from testplan.store.copying import backup_sqlite
    from testplan.store.engine import open_store

    store = track(open_store(db))
    if store.dialect != "sqlite":
        url = store.engine.url
        raise StoreError(
            f"{store.name} is PostgreSQL: back it up with its own tool, e.g. "
            f"`pg_dump --format=custom --file={path} --host={url.host or url.query.get('host', '')} "
            f"--username={url.username or ''} {url.database}`; restore with `pg_restore --dbname=NEW`"
        )
    pages = backup_sqlite(store, str(path))
    say(f"{pages} pages copied from {store.name}", quiet=quiet)
    typer.echo(f"backed up to {path}")
