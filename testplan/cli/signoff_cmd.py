"""Sign-off: ``testplan keys``, ``sign``, ``amend`` and ``verify``."""

from __future__ import annotations

import os
from pathlib import Path
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

    from testplan.store.signoff import Signed, Verification
    from testplan.store.tables import Amendment, PersonKey

PASS_ENV = "TESTPLAN_KEY_PASSPHRASE"

keys_app = command_group("Signing keys: make a key pair, register a public key.")


def _passphrase(confirm: bool) -> str:
    """The key passphrase from $TESTPLAN_KEY_PASSPHRASE, else asked for (not echoed)."""
    value = os.environ.get(PASS_ENV)
    if value:
        return value
    text: str = typer.prompt(
        "Key passphrase", hide_input=True, confirmation_prompt=confirm, err=True
    )
    return text


@keys_app.command("new")
@reports_errors
def keys_new_command(
    person: Annotated[str, typer.Argument(help="Initials of the key's owner.")],
    out: Annotated[Path, typer.Option("--out", help="Private key file to write (PEM).")],
) -> None:
    """Make an Ed25519 key pair: the private key in a passphrase-protected file, the public
    key beside it as FILE.pub.

    The passphrase is asked for, or taken from $TESTPLAN_KEY_PASSPHRASE.

    Example: testplan keys new RP --out ~/keys/rp.pem
    """
    from testplan.errors import TestplanError
    from testplan.keys import fingerprint, new_private_pem
    from testplan.output import write_atomically

    if out.exists():
        raise TestplanError("a file is already there; keys are never overwritten", file=out)
    pem, public = new_private_pem(_passphrase(confirm=True))
    write_atomically(out, pem)
    out.chmod(0o600)
    pub = out.with_name(out.name + ".pub")
    write_atomically(pub, (public + "\n").encode())
    typer.echo(f"{person}: key {fingerprint(public)[:16]} written to {out} (keep it) and {pub}")


@keys_app.command("register")
@reports_errors
def keys_register_command(
    person: Annotated[str, typer.Argument(help="Initials of a registered person.")],
    public: Annotated[Path, typer.Option("--public", help="Public key file (FILE.pub).")],
    by: Annotated[str | None, typer.Option("--by", help="Initials of who registers it.")] = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Register a person's public key in the people register.

    Example: testplan keys register RP --public ~/keys/rp.pem.pub --by MO
    """
    from testplan.keys import read_public
    from testplan.store import records, signoff

    key = read_public(public)
    store = open_for_writing(db, quiet=quiet)

    def unit(session: Session) -> PersonKey:
        actor = records.actor_for(session, by)
        return signoff.register_key(session, initials=person, public_b64=key, actor=actor)

    row = store.write(unit)
    typer.echo(f"{person}: key {row.fingerprint[:16]} registered")


ROLE_HELP = "prepared, reviewed or approved (three different people, in that order)."


@reports_errors
def sign_command(
    campaign: Annotated[str, typer.Argument(help="Campaign reference.")],
    role: Annotated[str, typer.Option("--role", help=ROLE_HELP)],
    as_: Annotated[str, typer.Option("--as", help="Initials of the signer.")],
    key: Annotated[Path, typer.Option("--key", help="The signer's private key file.")],
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Sign the campaign's records (a manifest of every record, with its SHA-256 root).

    Once approved the campaign is locked: changes go through `testplan amend`.

    Example: testplan sign QC-2027-014 --role prepared --as RP --key ~/keys/rp.pem
    """
    from testplan.keys import load_private
    from testplan.store import signoff

    private = load_private(key, _passphrase(confirm=False))
    from testplan import __version__
    from testplan.report.render import templates_sha256

    printing = {"tool_version": __version__, "templates_sha256": templates_sha256()}
    store = open_for_writing(db, quiet=quiet)

    def unit(session: Session) -> Signed:
        return signoff.sign(
            session,
            campaign=campaign,
            role=role,
            initials=as_,
            private_key=private,
            printing=printing,
        )

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
    db: DbOption = None,
) -> None:
    """Check a report PDF against the store: its issue record, every signature, and every
    record (each run, sample chunk, observation, verdict, calibration) it was signed over.

    Exit 3 and one line per difference when anything does not match.

    Example: testplan verify demo-out/report.pdf
    """
    import hashlib

    from testplan.report.pdf import read_claims
    from testplan.store import signoff

    content = _read(report)
    claims = read_claims(content, report)
    store = open_for_reading(db)
    with store.reading() as session:
        result: Verification = signoff.verify(
            session, pdf_sha256=hashlib.sha256(content).hexdigest(), claimed=claims
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
