"""Options shared by the store commands, and small helpers to print what was done.

Kept light: nothing here imports SQLAlchemy, pandas or pint at module level.
"""

from __future__ import annotations

import datetime as dt
from typing import TYPE_CHECKING, Annotated

import typer
from typer.core import TyperGroup

from testplan.errors import RecordError

if TYPE_CHECKING:  # pragma: no cover
    from typer._click import Context
    from typer.core import TyperOption

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


class _Group(TyperGroup):
    """A command group whose own --help flag needs no value coercion.

    typer coerces every parameter a group parses through pydantic, and the group's
    --help flag (None when not given) is the only one ours have: that costs the import
    of pydantic, half the start-up of any subcommand. A flag that is absent needs no
    coercion, so it gets typer's pass-through coercion. tests/test_startup.py checks
    that a subcommand's --help still does not import pydantic.
    """

    def get_help_option(self, ctx: Context) -> TyperOption | None:
        option = super().get_help_option(ctx)
        if option is not None and getattr(option, "_runtime_param", True) is None:
            from typer._coercion import PassThroughRuntimeParam

            option._runtime_param = PassThroughRuntimeParam(
                parameter_info=option.type_descriptor.parameter_info, annotation=bool
            )
        return option


def command_group(help_text: str, **kwargs: object) -> typer.Typer:
    """A typer app whose help is plain text: rich help formatting costs a third of a
    second at every start, far more than the command table it draws."""
    return typer.Typer(
        help=help_text,
        cls=_Group,
        no_args_is_help=True,
        rich_markup_mode=None,
        pretty_exceptions_enable=False,
        add_completion=False,
        **kwargs,  # type: ignore[arg-type]
    )


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
