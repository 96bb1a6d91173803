"""``testplan people``: the register of people and the roles each is authorised for."""

from __future__ import annotations

from typing import TYPE_CHECKING, Annotated

import typer

from testplan.cli.common import (
    DbOption,
    QuietOption,
    command_group,
    open_for_reading,
    open_for_writing,
)
from testplan.cli.errors import reports_errors

if TYPE_CHECKING:  # pragma: no cover
    from sqlmodel import Session

    from testplan.store.tables import Person

ROLE_HELP = "operator, checker, preparer, reviewer or approver; repeat for several."

app = command_group("Register people and the roles they are authorised for.")


@app.command("add")
@reports_errors
def add_command(
    initials: Annotated[str, typer.Argument(help="Short unique initials, e.g. AK.")],
    name: Annotated[str, typer.Option("--name", help="Full name.")],
    role: Annotated[list[str], typer.Option("--role", help=ROLE_HELP)],
    by: Annotated[str | None, typer.Option("--by", help="Initials of who is adding.")] = None,
    title: Annotated[
        str | None, typer.Option("--title", help="Job title, printed beside a signature.")
    ] = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Add a person with the roles they are authorised for.

    Example: testplan people add AK --name "Anna Kowal" --role operator --role checker
    """
    from testplan.store import records

    store = open_for_writing(db, create=True, quiet=quiet)

    def unit(session: Session) -> Person:
        actor = records.actor_for(session, by)
        return records.add_person(
            session, initials=initials, name=name, roles=role, actor=actor, title=title
        )

    person = store.write(unit)
    typer.echo(f"added {person.initials} ({person.name}): {', '.join(sorted(set(role)))}")


@app.command("authorise")
@reports_errors
def authorise_command(
    initials: Annotated[str, typer.Argument(help="Initials of a registered person.")],
    role: Annotated[list[str], typer.Option("--role", help=ROLE_HELP)],
    by: Annotated[str | None, typer.Option("--by", help="Initials of who authorises.")] = None,
    why: Annotated[str | None, typer.Option("--why", help="Reason, for the audit trail.")] = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Authorise a registered person for more roles.

    Example: testplan people authorise AK --role reviewer --by MO --why "trained 2027-01"
    """
    from testplan.store import records

    store = open_for_writing(db, quiet=quiet)

    def unit(session: Session) -> Person:
        actor = records.actor_for(session, by)
        return records.authorise_person(
            session, initials=initials, roles=role, actor=actor, why=why
        )

    person = store.write(unit)
    typer.echo(f"{person.initials} now authorised for {', '.join(sorted(set(role)))}")


@app.command("list")
@reports_errors
def list_command(db: DbOption = None) -> None:
    """List the people register.

    Example: testplan people list --db lab.db
    """
    from testplan.store import records

    store = open_for_reading(db)
    with store.reading() as session:
        for person, roles in records.list_people(session):
            typer.echo(f"{person.initials:<6} {person.name:<28} {', '.join(roles)}")
