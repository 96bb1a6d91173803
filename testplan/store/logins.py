"""Bench-page logins: argon2id password hashes set by a manager, and back-off after failures.

The password is never stored, only its argon2id hash (argon2-cffi). Failed logins are rows,
so the back-off holds across restarts and across several servers on one PostgreSQL store.
"""

from __future__ import annotations

import datetime as dt
from typing import TYPE_CHECKING

from sqlmodel import Session, col, delete, select

from testplan.errors import RecordError, TestplanError
from testplan.store import audit
from testplan.store.identity import MANAGER, Signer, find_person, require_role, signer_key
from testplan.store.tables import LoginFailure, Person, PersonPassword, utc_now

if TYPE_CHECKING:  # pragma: no cover
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey


MIN_PASSWORD = 10
# Failures within this window count; from the third on, each waits twice as long.
FAILURE_WINDOW = dt.timedelta(minutes=15)
FREE_FAILURES = 2
MAX_WAIT_S = 300.0


def set_password(session: Session, *, initials: str, password: str, by: str) -> Person:
    """Set ``initials``' password (argon2id hash) on the word of a person who is a manager now.

    Raises RecordError when ``by`` lacks the manager role, the person is unknown, or the
    password is shorter than MIN_PASSWORD characters.
    """
    from argon2 import PasswordHasher

    setter = require_role(session, by, MANAGER, key="--by")
    person = find_person(session, initials, key="INITIALS")
    if len(password) < MIN_PASSWORD:
        raise RecordError(
            f"the password has {len(password)} characters; at least {MIN_PASSWORD} are needed",
            key="password",
        )
    row = session.get(PersonPassword, person.id)
    replaced = row is not None
    if row is None:
        row = PersonPassword(person_id=person.id, hash="", set_by=setter.initials)
    row.hash = PasswordHasher().hash(password)
    row.set_by, row.set_at = setter.initials, utc_now()
    session.add(row)
    audit.append(
        session,
        actor=setter.initials,
        action="person.password",
        entity="person",
        entity_id=person.id,
        new={"initials": person.initials, "replaced": replaced},
    )
    return person


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
    if not ok or found is None:
        session.add(LoginFailure(initials=initials[:16]))
        return "unknown initials or wrong password"
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
