"""``testplan init``: store a campaign, its plan, specimens and runs (or a new revision)."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Annotated

import typer

from testplan.cli.common import DbOption, QuietOption, open_for_writing, say
from testplan.cli.errors import reports_errors

if TYPE_CHECKING:  # pragma: no cover
    from sqlmodel import Session

    from testplan.store.records import StoredPlan


@reports_errors
def init_command(
    campaign_file: Annotated[
        Path, typer.Argument(help="Campaign file (TOML).", show_default=False)
    ],
    db: DbOption = None,
    by: Annotated[
        str | None, typer.Option("--by", help="Initials of the person storing the plan.")
    ] = None,
    why: Annotated[
        str | None, typer.Option("--why", help="Reason for a new plan revision (audit trail).")
    ] = None,
    quiet: QuietOption = False,
) -> None:
    """Store a campaign's plan; a changed file later makes a new plan revision.

    Creates the store if there is none. Runs already started stay linked to the
    revision they ran against; runs not started move to the new revision.

    Example: testplan init sample_campaign/flood-gauge-node.toml --by AK
    """
    from testplan.domain.planner import build_plan
    from testplan.reader import read_campaign, with_location
    from testplan.store import records

    loaded = read_campaign(campaign_file)
    plan = with_location(loaded, lambda: build_plan(loaded.campaign))
    store = open_for_writing(db, create=True, quiet=quiet)

    def unit(session: Session) -> StoredPlan:
        actor = records.actor_for(session, by)
        return records.store_campaign(session, loaded=loaded, plan=plan, actor=actor, why=why)

    stored = store.write(unit)
    ref, number = stored.campaign.reference, stored.revision.number
    if stored.outcome == "unchanged":
        typer.echo(f"{ref}: unchanged, still at plan revision {number}")
    elif stored.outcome == "created":
        typer.echo(f"{ref}: stored at plan revision 1 with {stored.runs_added} runs")
    else:
        typer.echo(
            f"{ref}: plan revision {number}: {stored.runs_added} runs added, "
            f"{stored.runs_moved} moved to it, {stored.runs_kept} kept on the revision they "
            f"ran against, {stored.runs_withdrawn} withdrawn"
        )
    if stored.outcome == "revised" and not why:
        say("note: no --why given for this revision", quiet=quiet)
