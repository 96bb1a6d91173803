"""``testplan keys``: make a key pair, enrol or revoke a key, export the trust anchor."""

from __future__ import annotations

from pathlib import Path
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
    parse_at,
    passphrase,
)
from testplan.cli.errors import reports_errors

if TYPE_CHECKING:  # pragma: no cover
    from sqlmodel import Session

    from testplan.store.tables import KeyRevocation, PersonKey

app = command_group("Signing keys: make a key pair, enrol or revoke a key, export the anchor.")

ManagerOption = Annotated[
    str | None, typer.Option("--by", help="Initials of the manager who signs this act.")
]


@app.command("new")
@reports_errors
def keys_new_command(
    person: Annotated[str, typer.Argument(help="Initials of the key's owner.")],
    out: Annotated[Path, typer.Option("--out", help="Private key file to write (PEM).")],
) -> None:
    """Make an Ed25519 key pair: the private key in a passphrase-protected file (mode 0600
    from its first byte), and FILE.pub with the public key and a self-signature proving
    that its holder has the private key.

    The passphrase is asked for, or taken from $TESTPLAN_KEY_PASSPHRASE.

    Example: testplan keys new RP --out ~/keys/rp.pem
    """
    from testplan.errors import TestplanError
    from testplan.keys import fingerprint, load_private_bytes, new_private_pem, public_file
    from testplan.output import write_atomically
    from testplan.store.identity import clean_initials

    initials = clean_initials(person, key="PERSON")
    pub = out.with_name(out.name + ".pub")
    for path in (out, pub):
        if path.exists():
            raise TestplanError("a file is already there; keys are never overwritten", file=path)
    secret = passphrase(confirm=True)
    pem, public = new_private_pem(secret)
    record = public_file(load_private_bytes(pem, secret), initials)
    write_atomically(out, pem, private=True)
    write_atomically(pub, record.to_text().encode())
    typer.echo(f"{initials}: key {fingerprint(public)[:16]} written to {out} (keep it) and {pub}")


@app.command("register")
@reports_errors
def keys_register_command(
    person: Annotated[str, typer.Argument(help="Initials of a registered person.")],
    public: Annotated[Path, typer.Option("--public", help="Public key file (FILE.pub).")],
    by: ManagerOption = None,
    key: KeyOption = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Enrol a person's key: checks its self-signature and countersigns it with a manager's
    key. One active key per person. The founding manager enrols their own first key with
    that same key.

    Example: testplan keys register RP --public ~/keys/rp.pem.pub --by MO --key ~/keys/mo.pem
    """
    from testplan.keys import read_public
    from testplan.store import identity

    found = read_public(public)
    signer = load_signer(by, key) if by is not None else None
    store = open_for_writing(db, quiet=quiet)

    def unit(session: Session) -> PersonKey:
        return identity.enrol_key(session, initials=person, public=found, by=signer)

    row = store.write(unit)
    typer.echo(
        f"{person.strip().upper()}: key {row.fingerprint[:16]} enrolled by {row.registered_by}"
    )


@app.command("revoke")
@reports_errors
def keys_revoke_command(
    person: Annotated[str, typer.Argument(help="Initials of the key's owner.")],
    why: Annotated[str, typer.Option("--why", help="Why the key is withdrawn.")],
    by: ManagerOption = None,
    effective: Annotated[
        str | None,
        typer.Option("--from", help="Revoked from this time (ISO 8601; default now)."),
    ] = None,
    key: KeyOption = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Revoke a person's active key from a stated time, signed by a manager. Signatures made
    with it from then on no longer verify; earlier ones still do.

    Example: testplan keys revoke RP --by MO --key ~/keys/mo.pem --why "laptop lost" --from 2027-02-03T08:00Z
    """
    from testplan.store import identity

    when = parse_at(effective, "--from")
    signer = load_signer(by, key) if by is not None else None
    store = open_for_writing(db, quiet=quiet)

    def unit(session: Session) -> KeyRevocation:
        return identity.revoke_key(session, initials=person, by=signer, why=why, effective=when)

    row = store.write(unit)
    typer.echo(f"{person.strip().upper()}: key revoked from {row.effective_at:%Y-%m-%d %H:%M} UTC")


@app.command("trust")
@reports_errors
def keys_trust_command(
    out: Annotated[Path, typer.Option("--out", help="Trust file to write (JSON).")],
    db: DbOption = None,
) -> None:
    """Write the trust anchor: the manager keys that founded and run the store's register.
    Keep it away from the store; `testplan verify REPORT --trust FILE` checks every
    signature's enrolment back to it.

    Example: testplan keys trust --out ~/lab-trust.json
    """
    import json

    from testplan.output import write_atomically
    from testplan.store import identity

    store = open_for_reading(db)
    with store.reading() as session:
        anchor = identity.trust_anchor(session)
    write_atomically(out, (json.dumps(anchor, indent=1, sort_keys=True) + "\n").encode())
    names = ", ".join(f"{m['person']} {m['fingerprint'][:16]}" for m in anchor["managers"])
    typer.echo(f"trust anchor written to {out}: {names}")
