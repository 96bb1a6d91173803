"""Bench-page logins: argon2id password hashes set by a manager, and back-off after failures.

The password is never stored, only its argon2id hash (argon2-cffi). Failed logins are rows,
so the back-off holds across restarts and across several servers on one PostgreSQL store.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
from typing import TYPE_CHECKING

from sqlmodel import Session, col, delete, select

from testplan import keys
from testplan.errors import RecordError, TestplanError
from testplan.store import audit
from testplan.store.identity import (
    MANAGER,
    Signer,
    Trust,
    act_message,
    actor_of,
    find_person,
    key_active_at,
    key_problem,
    require_role,
    signature_problem,
    signer_key,
)
from testplan.store.tables import (
    AuditEntry,
    LoginFailure,
    Person,
    PersonKey,
    PersonPassword,
    utc_now,
)

if TYPE_CHECKING:  # pragma: no cover
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey


MIN_PASSWORD = 10
# Failures within this window count; from the third on, each waits twice as long.
FAILURE_WINDOW = dt.timedelta(minutes=15)
FREE_FAILURES = 2
MAX_WAIT_S = 300.0
PASSWORD_ACT = "person.password"


def password_message(
    person: str, hash_sha256: str, at: dt.datetime, by: str, by_key: str, *, own: bool = False
) -> bytes:
    """What a manager signs to set a person's password, or the person to change their own
    (``own``): the SHA-256 of its argon2id hash."""
    return act_message(
        "person.password.own" if own else "person.password",
        {
            "person": person,
            "hash_sha256": hash_sha256,
            "at": at.astimezone(dt.UTC).isoformat(),
            "by": by,
            "by_key": by_key,
        },
    )


def set_password(session: Session, *, initials: str, password: str, by: Signer) -> Person:
    """Set ``initials``' password (argon2id hash), signed with the key of a person who is a
    manager now.

    The audit entry carries the signature over the hash's SHA-256, and ``log_in`` accepts a
    hash only with that signature standing, so a hash written into the store behind the
    tool logs nobody in. Raises RecordError when ``by`` is not a manager now or the key is
    not their own active one, the person is unknown, or the password is
    shorter than MIN_PASSWORD characters.
    """
    from argon2 import PasswordHasher

    person = find_person(session, initials, key="INITIALS")
    _check_length(password)
    at = utc_now()
    hashed = PasswordHasher().hash(password)
    digest = hashlib.sha256(hashed.encode()).hexdigest()
    require_role(session, by.initials, MANAGER, key=by.option)
    setter, key = signer_key(session, by)
    message = password_message(person.initials, digest, at, setter.initials, key.fingerprint)
    signature = keys.sign(by.private_key, message)
    _store(session, person, hashed, at, setter, key, signature, own=False)
    return person


def change_own_password(session: Session, *, signer: Signer, old: str, new: str) -> Person:
    """Change the signer's own password: they give the old one and sign the new hash with
    their own active key (so the change stands at login like a manager's).

    Raises RecordError when the old password is wrong (key "old_password"), the new one is
    shorter than MIN_PASSWORD, or the key is not the signer's own active key.
    """
    from argon2 import PasswordHasher
    from argon2.exceptions import InvalidHashError, VerificationError

    person = find_person(session, signer.initials, key=signer.option)
    row = session.get(PersonPassword, person.id)
    try:
        known = row is not None and PasswordHasher().verify(row.hash, old)
    except (VerificationError, InvalidHashError):
        known = False
    if not known:
        raise RecordError("that is not your present password", key="old_password")
    _check_length(new)
    person, key = signer_key(session, signer)
    at = utc_now()
    hashed = PasswordHasher().hash(new)
    digest = hashlib.sha256(hashed.encode()).hexdigest()
    message = password_message(person.initials, digest, at, person.initials, key.fingerprint,
                               own=True)  # fmt: skip
    _store(
        session, person, hashed, at, person, key, keys.sign(signer.private_key, message), own=True
    )
    return person


def _check_length(password: str) -> None:
    if len(password) < MIN_PASSWORD:
        raise RecordError(
            f"the password has {len(password)} characters; at least {MIN_PASSWORD} are needed",
            key="password",
        )


def _store(
    session: Session,
    person: Person,
    hashed: str,
    at: dt.datetime,
    setter: Person,
    key: PersonKey,
    signature: str,
    *,
    own: bool,
) -> None:
    """Keep the hash and its signed audit entry (what ``password_problem`` checks)."""
    row = session.get(PersonPassword, person.id)
    replaced = row is not None
    if row is None:
        row = PersonPassword(person_id=person.id, hash="", set_by=setter.initials)
    row.hash = hashed
    row.set_by, row.set_at = setter.initials, at
    session.add(row)
    audit.append(
        session,
        actor=actor_of(setter, key),
        action=PASSWORD_ACT,
        entity="person",
        entity_id=person.id,
        new={
            "initials": person.initials,
            "replaced": replaced,
            "own": own,
            "hash_sha256": hashlib.sha256(hashed.encode()).hexdigest(),
            "at": at.astimezone(dt.UTC).isoformat(),
            "by": setter.initials,
            "fingerprint": key.fingerprint,
            "signature": signature,
        },
    )


def password_problem(session: Session, person: Person, row: PersonPassword) -> str | None:
    """Why ``row`` is not a password set by a manager or changed by the person (None when
    it is): the latest password entry in the audit trail must name this hash and carry a
    standing signature, a manager's or, for an own change, the person's."""
    entry = session.exec(
        select(AuditEntry)
        .where(
            AuditEntry.action == PASSWORD_ACT,
            AuditEntry.entity == "person",
            AuditEntry.entity_id == str(person.id),
        )
        .order_by(col(AuditEntry.at).desc(), col(AuditEntry.seq).desc())
    ).first()
    signed = json.loads(entry.new_json or "{}") if entry is not None else {}
    if "signature" not in signed:
        return "its password was set without a manager's signature"
    if signed.get("hash_sha256") != hashlib.sha256(row.hash.encode()).hexdigest():
        return "its stored password is not the one signed for it"
    setter = session.exec(select(Person).where(Person.initials == signed["by"])).first()
    key = session.exec(
        select(PersonKey).where(PersonKey.fingerprint == signed["fingerprint"])
    ).first()
    if setter is None or key is None:
        return "its password's signer is not in the store"
    at = dt.datetime.fromisoformat(signed["at"])
    own = bool(signed.get("own"))
    message = password_message(person.initials, signed["hash_sha256"], at, setter.initials,
                               key.fingerprint, own=own)  # fmt: skip
    if own:  # the person's own change: their own key, active then, enrolled through managers
        if setter.id != person.id or key.person_id != person.id:
            return "its password's change is not signed by the person"
        if not keys.verify(key.public_key, message, signed["signature"]):
            return "its password's signature does not verify"
        if not key_active_at(session, key, at):
            return "its password was changed with a key not active then"
        return key_problem(session, key, Trust(None))
    return signature_problem(
        session,
        person=setter,
        key=key,
        role=MANAGER,
        at=at,
        message=message,
        signature=signed["signature"],
        trust=Trust(None),
    )


def wait_seconds(session: Session, initials: str, now: dt.datetime | None = None) -> float:
    """Seconds before ``initials`` may try to log in again (0 when free to try)."""
    now = now or utc_now()
    times = session.exec(
        select(LoginFailure.at)
        .where(LoginFailure.initials == initials, col(LoginFailure.at) > now - FAILURE_WINDOW)
        .order_by(col(LoginFailure.at))
    ).all()
    if len(times) <= FREE_FAILURES:
        return 0.0
    wait = min(2.0 ** (len(times) - FREE_FAILURES), MAX_WAIT_S)
    left = wait - (now - times[-1]).total_seconds()
    return max(left, 0.0)


def log_in(session: Session, *, initials: str, password: str) -> Person | str:
    """The person whose password this is, or the refusal to show (a failure is recorded).

    Returns a message rather than raising, so the caller's unit of work commits the failure
    row that the back-off counts. Unknown initials and a wrong password read the same.
    """
    from argon2 import PasswordHasher
    from argon2.exceptions import InvalidHashError, VerificationError

    wait = wait_seconds(session, initials)
    if wait > 0:
        return f"too many failed logins; try again in {wait:.0f} s"
    found = session.exec(select(Person).where(Person.initials == initials)).first()
    row = session.get(PersonPassword, found.id) if found is not None else None
    ok = False
    if row is not None:
        try:
            ok = PasswordHasher().verify(row.hash, password)
        except (VerificationError, InvalidHashError):
            ok = False
    if not ok or found is None or row is None:
        session.add(LoginFailure(initials=initials[:16]))
        return "unknown initials or wrong password"
    problem = password_problem(session, found, row)
    if problem is not None:
        session.add(LoginFailure(initials=initials[:16]))
        return f"{found.initials} cannot log in by password: {problem}; a manager sets it again"
    session.exec(delete(LoginFailure).where(col(LoginFailure.initials) == initials))
    return found


def log_in_with_key(
    session: Session, *, initials: str, key: Ed25519PrivateKey | None
) -> Person | str:
    """Like ``log_in``, with an opened private key (None: it did not open) for the password."""
    wait = wait_seconds(session, initials)
    if wait > 0:
        return f"too many failed logins; try again in {wait:.0f} s"
    found = session.exec(select(Person).where(Person.initials == initials)).first()
    if found is None or key is None or not _owns(session, found, key):
        session.add(LoginFailure(initials=initials[:16]))
        return "unknown initials, or not their key or passphrase"
    session.exec(delete(LoginFailure).where(col(LoginFailure.initials) == initials))
    return found


def _owns(session: Session, person: Person, key: Ed25519PrivateKey) -> bool:
    """Whether ``key`` is the person's own enrolled key, active now (not revoked)."""
    try:
        signer_key(session, Signer(person.initials, key))
    except TestplanError:
        return False
    return True
