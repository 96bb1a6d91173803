"""Sign-off: ``testplan sign``, ``amend`` and ``verify``."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Annotated

import typer

from testplan.cli.common import (
    DbOption,
    KeyOption,
    QuietOption,
    load_signer,
    open_for_reading,
    open_for_writing,
)
from testplan.cli.errors import reports_errors

if TYPE_CHECKING:  # pragma: no cover
    from sqlmodel import Session

    from testplan.store.signoff import Signed, Verification
    from testplan.store.tables import Amendment

ROLE_HELP = "prepared, reviewed or approved (three different people, in that order)."


@reports_errors
def sign_command(
    campaign: Annotated[str, typer.Argument(help="Campaign reference.")],
    role: Annotated[str, typer.Option("--role", help=ROLE_HELP)],
    as_: Annotated[str, typer.Option("--as", help="Initials of the signer.")],
    key: KeyOption = None,
    templates: Annotated[
        Path | None,
        typer.Option(
            "--templates",
            help="With --role approved: the lab's registered template set the report is to "
            "be printed with (default: testplan's own).",
        ),
    ] = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Sign the campaign's records (a manifest of every record, with its SHA-256 root).

    Once approved the campaign is locked: changes go through `testplan amend`.

    Example: testplan sign QC-2027-014 --role prepared --as RP --key ~/keys/rp.pem
    """
    from testplan.store import signoff

    signer = load_signer(as_, key, option="--as")
    from testplan import __version__
    from testplan.report.render import templates_sha256

    printing = {"tool_version": __version__, "templates_sha256": templates_sha256(templates)}
    store = open_for_writing(db, quiet=quiet)

    def unit(session: Session) -> Signed:
        if templates is not None:
            from testplan.store.templates import require_registered

            require_registered(session, printing["templates_sha256"], doing=f"sign {role}")
        return signoff.sign(session, campaign=campaign, role=role, signer=signer, printing=printing)

    done = store.write(unit)
    locked = "; the campaign is now locked" if done.role == "approved" else ""
    typer.echo(
        f"{campaign}: {done.role} by {done.initials} (key {done.fingerprint[:16]}), manifest "
        f"root {done.root} over {done.manifest_items} records{locked}"
    )


@reports_errors
def amend_command(
    campaign: Annotated[str, typer.Argument(help="Campaign reference.")],
    why: Annotated[str, typer.Option("--why", help="The reason for the amendment.")],
    by: Annotated[str, typer.Option("--by", help="Initials of who asks for it.")],
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Reopen an approved campaign for a recorded reason; the original stays, the next report
    is a new revision and must be signed again.

    Example: testplan amend QC-2027-014 --why "leak test of S02 repeated with a calibrated gauge" --by MO
    """
    from testplan.store import signoff

    store = open_for_writing(db, quiet=quiet)

    def unit(session: Session) -> tuple[Amendment, int]:
        row = signoff.amend(session, campaign=campaign, why=why, by=by)
        return row, signoff.report_revision(session, row.campaign_id)

    row, revision = store.write(unit)
    typer.echo(f"{campaign}: reopened for revision {revision}: {row.reason}")


@reports_errors
def verify_command(
    report: Annotated[Path, typer.Argument(help="An issued report PDF.")],
    trust: Annotated[
        Path | None,
        typer.Option(
            "--trust",
            help="Trust file from `testplan keys trust`: every signing key must be enrolled "
            "through these manager keys.",
        ),
    ] = None,
    db: DbOption = None,
) -> None:
    """Check a report PDF against the store: its issue record, every signature, and every
    record (each run, sample chunk, observation, verdict, calibration) it was signed over.

    Exit 3 and one line per difference when anything does not match.

    Example: testplan verify demo-out/report.pdf --trust ~/lab-trust.json
    """
    import hashlib

    from testplan.report.pdf import read_claims
    from testplan.store import identity, signoff

    anchor = identity.parse_trust(_read(trust).decode("utf-8", "replace")) if trust else None
    content = _read(report)
    claims = read_claims(content, report)
    store = open_for_reading(db, read_only=True)
    with store.reading() as session:
        result: Verification = signoff.verify(
            session,
            pdf_sha256=hashlib.sha256(content).hexdigest(),
            claimed=claims,
            trust=anchor,
        )
    for line in result.lines:
        typer.echo(line, err=line.startswith("problem: "))
    signoff.raise_if_failed(result)
    typer.echo(f"verified: {report}")


def _read(path: Path) -> bytes:
    from testplan.errors import TestplanError

    try:
        return path.read_bytes()
    except FileNotFoundError:
        raise TestplanError("no such file", file=path) from None
    except OSError as err:
        raise TestplanError(f"cannot read: {err.strerror}", file=path) from None
