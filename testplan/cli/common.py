"""Options shared by the store commands, and small helpers to print what was done.

Kept light: nothing here imports SQLAlchemy, pandas or pint at module level.
"""

from __future__ import annotations

import datetime as dt
from typing import TYPE_CHECKING, Annotated

import typer

from testplan.errors import RecordError

if TYPE_CHECKING:  # pragma: no cover
    from testplan.store.engine import Store

DbOption = Annotated[
    str | None,
    typer.Option(
        "--db",
        help="Store: an SQLite file or a postgresql:// URL. Default: $TESTPLAN_DB, "
        "else ./testplan.db.",
        show_default=False,
    ),
]
CampaignOption = Annotated[
    str | None,
    typer.Option(
        "--campaign", help="Campaign reference; needed only when the store holds several."
    ),
]
QuietOption = Annotated[bool, typer.Option("--quiet", "-q", help="No progress or notes.")]


_OPEN: list[Store] = []


def track(store: Store) -> Store:
    """Remember an opened store so it is closed when the command ends."""
    _OPEN.append(store)
    return store


def close_stores() -> None:
    """Dispose of every store a command opened (called when any command ends)."""
    while _OPEN:
        _OPEN.pop().dispose()


def say(text: str, *, quiet: bool = False) -> None:
    """A note for the person at the bench, on stderr."""
    if not quiet:
        typer.echo(text, err=True)


def open_for_writing(db: str | None, *, create: bool = False, quiet: bool = False) -> Store:
    """Open the store for a write command and name it, so nobody writes somewhere unseen."""
    from testplan.store.engine import open_store

    store = open_store(db, create=create)
    _OPEN.append(store)
    say(f"store: {store.name}", quiet=quiet)
    return store


def open_for_reading(db: str | None) -> Store:
    from testplan.store.engine import open_store

    store = open_store(db)
    _OPEN.append(store)
    return store


def parse_at(text: str | None, key: str = "--at") -> dt.datetime | None:
    """An ISO 8601 time with its zone (``2027-01-12T08:05+00:00``), or None for now."""
    if text is None:
        return None
    try:
        value = dt.datetime.fromisoformat(text)
    except ValueError:
        raise RecordError(
            f"cannot read {text!r} as an ISO 8601 time",
            key=key,
            fix="e.g. 2027-01-12T08:05+00:00",
        ) from None
    if value.tzinfo is None:
        raise RecordError(
            f"{text!r} has no time zone", key=key, fix="add Z or an offset such as +01:00"
        )
    return value.astimezone(dt.UTC)


def parse_date(text: str, key: str) -> dt.date:
    try:
        return dt.date.fromisoformat(text)
    except ValueError:
        raise RecordError(
            f"cannot read {text!r} as a date", key=key, fix="e.g. 2026-10-01"
        ) from None
