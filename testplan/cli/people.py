"""``testplan people``: the register of people and the roles granted to each."""

from __future__ import annotations

from typing import TYPE_CHECKING, Annotated

import typer

from testplan.cli.common import (
    DbOption,
    KeyOption,
    QuietOption,
    command_group,
    load_signer,
    open_for_reading,
    open_for_writing,
)
from testplan.cli.errors import reports_errors

if TYPE_CHECKING:  # pragma: no cover
    from sqlmodel import Session

    from testplan.store.tables import Person

ROLE_HELP = "operator, checker, preparer, reviewer, approver or manager; repeat for several."

app = command_group("Register people and grant or withdraw their roles (a manager signs).")


@app.command("add")
@reports_errors
def add_command(
    initials: Annotated[str, typer.Argument(help="Short unique initials, e.g. AK.")],
    name: Annotated[str, typer.Option("--name", help="Full name.")],
    role: Annotated[list[str] | None, typer.Option("--role", help=ROLE_HELP)] = None,
    by: Annotated[
        str | None, typer.Option("--by", help="Initials of the manager adding them.")
    ] = None,
    key: KeyOption = None,
    title: Annotated[
        str | None, typer.Option("--title", help="Job title, printed beside a signature.")
    ] = None,
    why: Annotated[str | None, typer.Option("--why", help="Reason, for the audit trail.")] = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Add a person and grant them roles, signed by a manager. The first person added to
    an empty store is its founding manager (no --by).

    Example: testplan people add AK --name "Anna Kowal" --role operator --by MO --key mo.pem
    """
    from testplan.store import identity

    signer = load_signer(by, key) if by is not None else None
    store = open_for_writing(db, create=True, quiet=quiet)

    def unit(session: Session) -> tuple[Person, list[str]]:
        person = identity.add_person(
            session,
            initials=initials,
            name=name,
            roles=role or [],
            by=signer,
            why=why,
            title=title,
        )
        return person, sorted(identity.roles_of(session, person))

    person, roles = store.write(unit)
    typer.echo(f"added {person.initials} ({person.name}): {', '.join(roles) or 'no roles'}")


def _change(
    action: str,
    initials: str,
    role: list[str],
    by: str | None,
    key: KeyOption,
    why: str,
    db: str | None,
    quiet: bool,
) -> None:
    from testplan.store import identity

    signer = load_signer(by, key) if by is not None else None
    store = open_for_writing(db, quiet=quiet)

    def unit(session: Session) -> tuple[Person, list[str]]:
        person = identity.change_roles(
            session, initials=initials, roles=role, action=action, by=signer, why=why
        )
        return person, sorted(identity.roles_of(session, person))

    person, roles = store.write(unit)
    typer.echo(f"{person.initials} now holds {', '.join(roles) or 'no roles'}")


ManagerOption = Annotated[
    str | None, typer.Option("--by", help="Initials of the manager who signs.")
]
WhyOption = Annotated[str, typer.Option("--why", help="Reason, for the audit trail.")]


@app.command("grant")
@reports_errors
def grant_command(
    initials: Annotated[str, typer.Argument(help="Initials of a registered person.")],
    role: Annotated[list[str], typer.Option("--role", help=ROLE_HELP)],
    why: WhyOption,
    by: ManagerOption = None,
    key: KeyOption = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Grant roles from now, dated and signed by a manager (never to themselves).

    Example: testplan people grant AK --role reviewer --by MO --key mo.pem --why "trained 2027-01"
    """
    _change("grant", initials, role, by, key, why, db, quiet)


@app.command("withdraw")
@reports_errors
def withdraw_command(
    initials: Annotated[str, typer.Argument(help="Initials of a registered person.")],
    role: Annotated[list[str], typer.Option("--role", help=ROLE_HELP)],
    why: WhyOption,
    by: ManagerOption = None,
    key: KeyOption = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Withdraw roles from now, dated and signed by a manager; earlier acts still stand.

    Example: testplan people withdraw AK --role checker --by MO --key mo.pem --why "left the lab"
    """
    _change("withdraw", initials, role, by, key, why, db, quiet)


@app.command("list")
@reports_errors
def list_command(db: DbOption = None) -> None:
    """List the people register with the roles held now.

    Example: testplan people list --db lab.db
    """
    from testplan.store import identity

    store = open_for_reading(db)
    with store.reading() as session:
        for person, roles in identity.list_people(session):
            typer.echo(f"{person.initials:<6} {person.name:<28} {', '.join(roles)}")


@app.command("password")
@reports_errors
def password_command(
    initials: Annotated[str, typer.Argument(help="Initials of a registered person.")],
    by: Annotated[str, typer.Option("--by", help="Initials of the manager who signs.")],
    key: KeyOption = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Set a person's bench-page password (asked twice, stored as an argon2id hash), signed
    with the manager's own key.

    Reads the password from the terminal, or one line from standard input when piped.

    Example: testplan people password AK --by MO --key mo.pem
    """
    import sys

    from testplan.store import logins

    signer = load_signer(by, key)
    if sys.stdin.isatty():
        password = typer.prompt("password", hide_input=True, confirmation_prompt=True)
    else:
        password = sys.stdin.readline().rstrip("\r\n")
    store = open_for_writing(db, quiet=quiet)
    person = store.write(
        lambda session: logins.set_password(
            session, initials=initials, password=password, by=signer
        )
    )
    typer.echo(f"{person.initials}: bench-page password set, signed by {by}")
