"""``testplan judge``: judge finished runs from their data and roll the verdicts up."""

from __future__ import annotations

from typing import TYPE_CHECKING, Annotated

import typer

from testplan.cli.common import CampaignOption, DbOption, QuietOption, open_for_writing, say
from testplan.cli.errors import reports_errors
from testplan.errors import CriteriaFailedError

if TYPE_CHECKING:  # pragma: no cover
    from sqlmodel import Session

    from testplan.store.judging import Rollup, RunJudgement

MARK = {
    "pass": "PASS",
    "conditional pass": "PASS?",
    "conditional fail": "FAIL?",
    "fail": "FAIL",
    "no data": "NODATA",
    "not run": "-",
    "logged, no band": "NOBAND",
}


def _num(x: float | None, unit: str | None = None) -> str:
    from testplan.domain.judge import fmt

    return fmt(x, unit)


def show(results: list[RunJudgement], roll: Rollup) -> None:
    """The judgement as a person reads it: each run, each criterion, then the roll-up."""
    for r in results:
        state = "" if r.checked else "  (data not yet checked by a second person)"
        typer.echo(f"{r.run}: {r.outcome.upper()}{state}")
        for v in r.verdicts:
            who = f" {v.specimen}" if v.specimen else ""
            u = (
                f"; U = {_num(v.uncertainty, v.unit)} (k = {_num(v.coverage_k)})"
                if v.uncertainty
                else ""
            )
            typer.echo(
                f"  {MARK[v.outcome]:<6} {v.criterion}{who}: {v.detail}{u}"
                + (f" [{'; '.join(v.flags)}]" if v.flags else "")
            )
        if r.interpretation:
            typer.echo(f"  {r.interpretation['text']}")
    if results:
        typer.echo(f"decision rule: {results[0].rule.shown()}")
    typer.echo("specimens: " + ", ".join(f"{s} {o}" for s, o in roll.specimens.items()))
    typer.echo("legs: " + ", ".join(f"{leg} {o}" for leg, o in roll.legs.items()))
    typer.echo(f"campaign: {roll.campaign}")


@reports_errors
def judge_command(
    runs: Annotated[
        list[str] | None,
        typer.Argument(help="Runs to judge; default: every finished run.", show_default=False),
    ] = None,
    campaign: CampaignOption = None,
    by: Annotated[str | None, typer.Option("--by", help="Initials of who judges.")] = None,
    as_json: Annotated[bool, typer.Option("--json", help="Print the verdicts as JSON.")] = False,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Judge each criterion of finished runs from the logged data and observations.

    Every verdict keeps the measured value, limit, margin, uncertainty, decision rule,
    evaluation window and a hash of its inputs. Exit 3 when anything fails or has no data.

    Example: testplan judge --campaign QC-2027-014
    """
    import json

    from testplan.domain.judge import FAILING
    from testplan.store import judging, records

    store = open_for_writing(db, quiet=quiet)

    def unit(session: Session) -> tuple[list[RunJudgement], Rollup]:
        actor = records.actor_for(session, by)
        camp, results = judging.judge_campaign(
            session, campaign=campaign, runs=runs or [], actor=actor
        )
        return results, judging.rollup(session, camp)

    results, roll = store.write(unit)
    if as_json:
        typer.echo(
            json.dumps(
                {"runs": [r.to_json() for r in results], "rollup": roll.to_json()},
                indent=2,
                default=str,
            )
        )
    else:
        show(results, roll)
    kept = sum(r.new for r in results)
    say(f"{len(results)} run(s) judged, {kept} new judgement(s) kept", quiet=quiet)
    failing = [r.run for r in results if r.outcome in FAILING]
    if failing:
        raise CriteriaFailedError(f"{len(failing)} run(s) did not pass: {', '.join(failing)}")
