"""Options shared by the store commands, and small helpers to print what was done.

Kept light: nothing here imports SQLAlchemy, pandas or pint at module level.
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path
from typing import TYPE_CHECKING, Annotated

import typer
from typer.core import TyperGroup

from testplan.errors import RecordError

if TYPE_CHECKING:  # pragma: no cover
    from typer._click import Context
    from typer.core import TyperOption

    from testplan.store.engine import Store
    from testplan.store.identity import Signer

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


def open_for_reading(db: str | None, *, read_only: bool = False) -> Store:
    """Open the store for a command that reads; ``read_only`` for one that never writes
    (an archived SQLite copy on read-only media opens too)."""
    from testplan.store.engine import open_store

    store = open_store(db, read_only=read_only)
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


PASS_ENV = "TESTPLAN_KEY_PASSPHRASE"
KEY_ENV = "TESTPLAN_KEY"

KeyOption = Annotated[
    Path | None,
    typer.Option(
        "--key",
        help="Private key file of the person named (default: $TESTPLAN_KEY); its passphrase "
        "is asked for, or taken from $TESTPLAN_KEY_PASSPHRASE.",
        show_default=False,
    ),
]


def passphrase(confirm: bool) -> str:
    """The key passphrase from $TESTPLAN_KEY_PASSPHRASE, else asked for (not echoed)."""
    import os

    value = os.environ.get(PASS_ENV)
    if value:
        return value
    text: str = typer.prompt(
        "Key passphrase", hide_input=True, confirmation_prompt=confirm, err=True
    )
    return text


def load_signer(initials: str, key: Path | None, *, option: str = "--by") -> Signer:
    """The person named by ``option`` with their private key (--key, else $TESTPLAN_KEY);
    one error line when neither is given or the file cannot be opened."""
    import os

    from testplan.keys import load_private
    from testplan.store.identity import Signer

    path = (
        key if key is not None else (Path(os.environ[KEY_ENV]) if os.environ.get(KEY_ENV) else None)
    )
    if path is None:
        raise RecordError(
            f"{initials} signs this with their own key",
            key="--key",
            fix=f"give --key FILE (or set ${KEY_ENV})",
        )
    return Signer(initials, load_private(path, passphrase(confirm=False)), option)
