"""``testplan report``: the campaign's test report as a PDF."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Annotated

import typer

from testplan.cli.common import (
    DbOption,
    KeyOption,
    QuietOption,
    load_signer,
    open_for_writing,
    parse_date,
    say,
)
from testplan.cli.errors import reports_errors
from testplan.errors import TestplanError

if TYPE_CHECKING:  # pragma: no cover
    import datetime as dt

    from sqlmodel import Session


@reports_errors
def report_command(
    campaign: Annotated[str, typer.Argument(help="Campaign reference, e.g. QC-2027-014.")],
    output: Annotated[Path, typer.Option("--output", "-o", help="PDF file to write.")],
    paper: Annotated[str, typer.Option("--paper", help="a4 or letter.")] = "a4",
    issue_date: Annotated[
        str | None, typer.Option("--issue-date", help="Date of issue, ISO (default: today).")
    ] = None,
    html: Annotated[
        Path | None, typer.Option("--html", help="Also write the HTML that was printed.")
    ] = None,
    templates: Annotated[
        Path | None, typer.Option("--templates", help="Folder of templates overriding ours.")
    ] = None,
    by: Annotated[
        str | None,
        typer.Option("--by", help="Initials of who issues it (an approver); approved campaigns."),
    ] = None,
    key: KeyOption = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Render the campaign's test report as a PDF (A4 or letter).

    An approved campaign's report is issued: signed by the approver issuing it (--by, --key),
    with the proof of its sign-off embedded. The PDF is written to a temporary file and
    renamed, so a half-written report never sits under the final name.

    Example: testplan report QC-2027-014 -o report.pdf --by MO --key ~/keys/mo.pem
    """
    import datetime as dt

    from testplan import __version__
    from testplan.output import write_atomically
    from testplan.report.context import build
    from testplan.report.pdf import report_html, report_pdf
    from testplan.report.render import templates_sha256
    from testplan.store.reporting import load_report

    sizes = {"a4": "A4", "letter": "letter"}
    if paper.lower() not in sizes:
        raise TestplanError(f"unknown paper {paper!r}", key="--paper", fix="a4 or letter")
    if output.suffix.lower() != ".pdf":
        raise TestplanError("the report file must end in .pdf", file=output, key="--output")
    import hashlib

    from testplan.store import records, signoff
    from testplan.store.proof import PROOF_NAME, proof_bytes

    store = open_for_writing(db, quiet=quiet)
    with store.reading() as session:
        data = load_report(session, campaign)
        kept = _issue_terms(session, campaign, templates)
    given = parse_date(issue_date, "--issue-date") if issue_date else None
    day = given or kept or dt.datetime.now(dt.UTC).date()
    say(f"loaded {len(data.runs)} run(s); drawing plots", quiet=quiet)
    ctx = build(
        data,
        issue_date=day,
        paper=sizes[paper.lower()],
        progress=lambda n, key: say(f"run {n} of {len(data.runs)} drawn: {key}", quiet=quiet),
    )
    say("printing the PDF", quiet=quiet)
    if ctx.draft:
        pdf = report_pdf(ctx, templates)
    else:
        if by is None:
            raise TestplanError(
                f"{campaign} is approved: its report is issued, signed by an approver",
                key="--by",
                fix="give --by INITIALS --key FILE of an approver",
            )
        signer = load_signer(by, key)
        with store.reading() as session:
            camp = records.find_campaign(session, campaign)
            plan = signoff.plan_issue(
                session,
                campaign=camp,
                signer=signer,
                report_number=ctx.report_number,
                issue_date=day,
            )
        base = report_pdf(ctx, templates, proof_bytes(plan.proof), PROOF_NAME)

        def unit(session: Session) -> bytes:
            camp = records.find_campaign(session, campaign)
            return signoff.record_issue(
                session,
                campaign=camp,
                plan=plan,
                base=base,
                signer=signer,
                printing={
                    "tool_version": __version__,
                    "templates_sha256": templates_sha256(templates),
                },
            )

        pdf = store.write(unit)
        sha = hashlib.sha256(pdf).hexdigest()
        say(
            f"issued {ctx.report_number} revision {ctx.revision} by {plan.person.initials}, "
            f"PDF SHA-256 {sha}",
            quiet=quiet,
        )
    if html is not None:
        write_atomically(html, report_html(ctx, templates).encode())
    write_atomically(output, pdf)
    say(f"{ctx.figure_count} figure(s), {len(ctx.runs)} run section(s)", quiet=quiet)
    typer.echo(f"wrote {output}")


def _issue_terms(session: Session, campaign: str, templates: Path | None) -> dt.date | None:
    """For an approved campaign: refuse a template set no manager registered (it could
    print any verdict; `record_issue` then holds it to the set the approval names), and
    give the date of issue kept for its revision if it was issued."""
    from testplan.store import records, signoff

    camp = records.find_campaign(session, campaign)
    if signoff.approved_manifest(session, camp.id) is None:
        return None  # a draft: any templates, any date
    if templates is not None:  # a lab's own set: registered, and the one the approval names
        from testplan.report.render import templates_sha256
        from testplan.store.templates import require_registered

        require_registered(session, templates_sha256(templates), doing=f"issue {camp.reference}")
    return signoff.issued_date(session, camp)
