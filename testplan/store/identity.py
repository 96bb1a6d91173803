"""People, roles, keys and the enrolment chain: who may do what, proved by whose key.

The model (DEVELOPERS.md, "Identity"): the first person added to an empty store is its
founding manager. A manager grants and withdraws roles and enrols and revokes keys, each act
dated, with a reason, and signed with the manager's own enrolled key; nobody grants a role to
themselves. A person holds one active key; its public key file carries a self-signature
(proof of possession) and its enrolment a manager's countersignature. Role checks use the
grants in force at the time of the act, key checks the enrolment and revocations at the time
of the signature. ``verify --trust`` follows each key's enrolment back to the exported
manager keys (the trust anchor).

Signed acts take a ``Signer`` (initials and an already loaded private key), so any caller
(the CLI, a web page) can pass a key it loaded itself.
"""

from __future__ import annotations

import datetime as dt
import getpass
import json
import re
import unicodedata
import uuid
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from difflib import get_close_matches
from typing import TYPE_CHECKING, Any

from sqlmodel import Session, col, select

from testplan import keys
from testplan.errors import RecordError
from testplan.store import audit
from testplan.store.tables import (
    KeyRevocation,
    Person,
    PersonKey,
    RoleGrant,
    StoreMeta,
    utc_now,
)

if TYPE_CHECKING:  # pragma: no cover
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

MANAGER = "manager"
ROLES = ("operator", "checker", "preparer", "reviewer", "approver", MANAGER)
FOUNDING = "founding manager of the store"
LEGACY = "granted before signed grants"
INITIALS = re.compile(r"[A-Za-z0-9-]{1,16}")
NAME_LIMIT = 120
TEXT_LIMIT = 2000
TRUST_FORMAT = 1
SINCE = "identity_signed_from"  # store_meta: keys enrolled before it were not countersigned


# --- register hygiene -----------------------------------------------------------------------


def _near(word: str, options: Sequence[str]) -> str | None:
    hit = get_close_matches(word, list(options), n=1)
    return f"did you mean {hit[0]!r}?" if hit else None


def clean_initials(text: str, *, key: str = "--by") -> str:
    """Initials as the register keeps them: trimmed, NFC, upper case, 1-16 of [A-Za-z0-9-].

    Raises RecordError naming ``key`` otherwise. Upper case makes the comparison
    case-insensitive on every engine.
    """
    value = unicodedata.normalize("NFC", text.strip())
    if not INITIALS.fullmatch(value):
        raise RecordError(
            f"initials {text!r} must be 1 to 16 letters, digits or '-'",
            key=key,
            fix="e.g. AK or J-T",
        )
    return value.upper()


def _bad_character(text: str) -> str | None:
    for ch in text:
        cat = unicodedata.category(ch)
        if ch in "\n\t" and cat == "Cc":
            continue
        if cat in ("Cc", "Cf", "Cs", "Co") or unicodedata.bidirectional(ch) in (
            "LRE",
            "RLE",
            "LRO",
            "RLO",
            "PDF",
            "LRI",
            "RLI",
            "FSI",
            "PDI",
        ):
            return f"U+{ord(ch):04X}"
    return None


def clean_text(text: str, *, key: str, limit: int = TEXT_LIMIT, single_line: bool = False) -> str:
    """Free text (a name, a reason, a note): NFC, trimmed, not empty, at most ``limit``
    characters, no control or bidi-override characters (``single_line``: no line breaks).

    Raises RecordError naming ``key``; the same text is refused on SQLite and PostgreSQL.
    """
    value = unicodedata.normalize("NFC", text.strip())
    if not value:
        raise RecordError("must not be empty", key=key)
    if len(value) > limit:
        raise RecordError(f"is {len(value)} characters; at most {limit}", key=key)
    bad = _bad_character(value)
    if bad is None and single_line and ("\n" in value or "\t" in value):
        bad = "a line break or tab"
    if bad is not None:
        raise RecordError(
            f"contains {bad}, a control or direction-override character",
            key=key,
            fix="type the text plainly",
        )
    return value


# --- people -----------------------------------------------------------------------------


def os_actor() -> str:
    """Who is at the keyboard when no registered person is named."""
    try:
        return f"os:{getpass.getuser()}"
    except (KeyError, OSError):
        return "os:unknown"


def find_person(session: Session, initials: str, *, key: str = "--by") -> Person:
    """The registered person with these initials (compared case-insensitively)."""
    value = clean_initials(initials, key=key)
    person = session.exec(select(Person).where(Person.initials == value)).first()
    if person is None:
        known = list(session.exec(select(Person.initials)).all())
        raise RecordError(
            f"no person {value!r} in the people register",
            key=key,
            fix=_near(value, known) or "add them with `testplan people add`",
        )
    return person


def actor_for(session: Session, initials: str | None) -> str:
    """The audit actor: a registered person's initials, or the OS user when none is named."""
    if initials is None:
        return os_actor()
    return find_person(session, initials).initials


def actor_of(person: Person, key: PersonKey | None = None) -> str:
    """The audit actor of an act by ``person``, with the key fingerprint when it was signed."""
    return f"{person.initials} key {key.fingerprint[:16]}" if key else person.initials


def grant_in_force(
    session: Session, person: Person, role: str, at: dt.datetime
) -> RoleGrant | None:
    """The grant of ``role`` to ``person`` in force at ``at`` (None: not authorised then)."""
    last = session.exec(
        select(RoleGrant)
        .where(RoleGrant.person_id == person.id, RoleGrant.role == role, RoleGrant.at <= at)
        .order_by(col(RoleGrant.at).desc())
    ).first()
    return last if last is not None and last.action == "grant" else None


def roles_at(session: Session, person: Person, at: dt.datetime | None = None) -> set[str]:
    """The roles ``person`` holds at ``at`` (now when None)."""
    when = at or utc_now()
    return {r for r in ROLES if grant_in_force(session, person, r, when) is not None}


def roles_of(session: Session, person: Person) -> set[str]:
    """The roles ``person`` holds now."""
    return roles_at(session, person)


def managers(session: Session, at: dt.datetime | None = None) -> list[Person]:
    """Everyone who is a manager at ``at`` (now when None), by initials."""
    people = session.exec(select(Person).order_by(col(Person.initials))).all()
    return [p for p in people if MANAGER in roles_at(session, p, at)]


def _managers_text(session: Session) -> str:
    names = [p.initials for p in managers(session)]
    if not names:
        return "the store has no manager"
    if len(names) == 1:
        return f"{names[0]} is the manager"
    return f"{', '.join(names[:-1])} and {names[-1]} are managers"


def require_role(
    session: Session,
    initials: str,
    role: str,
    *,
    key: str = "--by",
    at: dt.datetime | None = None,
) -> Person:
    """The person, if registered and authorised for ``role`` at ``at`` (now when None)."""
    person = find_person(session, initials, key=key)
    when = at or utc_now()
    if grant_in_force(session, person, role, when) is None:
        then = "" if at is None else f" on {when:%Y-%m-%d %H:%M} UTC"
        raise RecordError(
            f"{person.name} ({person.initials}) is not authorised as {role}{then}",
            key=key,
            fix=f"a manager grants it with `testplan people grant {person.initials} --role {role}`",
        )
    return person


def list_people(session: Session) -> list[tuple[Person, list[str]]]:
    """Every registered person with the roles held now."""
    people = session.exec(select(Person).order_by(col(Person.initials))).all()
    return [(p, sorted(roles_of(session, p))) for p in people]


def _check_role(role: str) -> str:
    if role not in ROLES:
        raise RecordError(
            f"unknown role {role!r}; roles are {', '.join(ROLES)}",
            key="--role",
            fix=_near(role, ROLES),
        )
    return role


# --- keys -------------------------------------------------------------------------------


@dataclass(frozen=True)
class Signer:
    """Who claims to act, and the private key that proves it (already loaded)."""

    initials: str
    private_key: Ed25519PrivateKey
    option: str = "--by"  # the option that named the person, for messages


def revocation_of(session: Session, key: PersonKey) -> KeyRevocation | None:
    """The earliest revocation of ``key``, if any."""
    return session.exec(
        select(KeyRevocation)
        .where(KeyRevocation.key_id == key.id)
        .order_by(col(KeyRevocation.effective_at))
    ).first()


def key_active_at(session: Session, key: PersonKey, at: dt.datetime) -> bool:
    """Whether ``key`` was enrolled and not yet revoked at ``at``."""
    if key.registered_at > at:
        return False
    revoked = revocation_of(session, key)
    return revoked is None or at < revoked.effective_at


def active_key(session: Session, person: Person, at: dt.datetime | None = None) -> PersonKey | None:
    """The person's key active at ``at`` (now when None)."""
    when = at or utc_now()
    rows = session.exec(select(PersonKey).where(PersonKey.person_id == person.id)).all()
    live = [k for k in rows if key_active_at(session, k, when)]
    return live[-1] if live else None


def signer_key(
    session: Session, signer: Signer, *, at: dt.datetime | None = None
) -> tuple[Person, PersonKey]:
    """The person named by ``signer`` and their key, if the private key is theirs and active.

    Raises RecordError naming whose key it is when it belongs to someone else.
    """
    person = find_person(session, signer.initials, key=signer.option)
    fp = keys.fingerprint(keys.public_of(signer.private_key))
    row = session.exec(select(PersonKey).where(PersonKey.fingerprint == fp)).first()
    if row is None:
        raise RecordError(
            f"key {fp[:16]} is not enrolled for anyone; {person.initials} signs with their own "
            "enrolled key",
            key="--key",
            fix=f"a manager enrols it with `testplan keys register {person.initials}`",
        )
    if row.person_id != person.id:
        owner = session.get(Person, row.person_id)
        whose = f"{owner.name} ({owner.initials})" if owner else "someone else"
        raise RecordError(
            f"key {fp[:16]} is the key of {whose}, not of {person.name} ({person.initials})",
            key="--key",
            fix=f"use {person.initials}'s own key file",
        )
    when = at or utc_now()
    if not key_active_at(session, row, when):
        revoked = revocation_of(session, row)
        state = (
            f"revoked from {revoked.effective_at:%Y-%m-%d %H:%M} UTC"
            if revoked
            else f"enrolled only from {row.registered_at:%Y-%m-%d %H:%M} UTC"
        )
        raise RecordError(
            f"key {fp[:16]} of {person.initials} is {state}",
            key="--key",
            fix=f"sign with {person.initials}'s active key",
        )
    return person, row


def _message(kind: str, body: dict[str, Any]) -> bytes:
    return audit.canonical({"testplan_act": kind, **body}).encode()


def grant_message(grant: RoleGrant, person: str, by: str, by_key: str) -> bytes:
    """What a manager signs to grant or withdraw a role."""
    return _message(
        "role." + grant.action,
        {
            "person": person,
            "role": grant.role,
            "at": grant.at.astimezone(dt.UTC).isoformat(),
            "reason": grant.reason,
            "by": by,
            "by_key": by_key,
        },
    )


def enrol_message(key: PersonKey, person: str, by: str, by_key: str) -> bytes:
    """What a manager signs to enrol a key."""
    return _message(
        "key.enrol",
        {
            "person": person,
            "fingerprint": key.fingerprint,
            "from": key.registered_at.astimezone(dt.UTC).isoformat(),
            "by": by,
            "by_key": by_key,
        },
    )


def revoke_message(
    row: KeyRevocation, fingerprint: str, person: str, by: str, by_key: str
) -> bytes:
    """What a manager signs to revoke a key."""
    return _message(
        "key.revoke",
        {
            "person": person,
            "fingerprint": fingerprint,
            "from": row.effective_at.astimezone(dt.UTC).isoformat(),
            "reason": row.reason,
            "by": by,
            "by_key": by_key,
        },
    )


def act_message(kind: str, body: dict[str, Any]) -> bytes:
    """What a person signs for an attributed act (a data check, a deviation approval)."""
    return _message(kind, body)


def sign_act(
    session: Session,
    signer: Signer,
    *,
    role: str,
    at: dt.datetime,
    message: Callable[[Person], bytes],
) -> tuple[Person, PersonKey, str]:
    """Sign an attributed act: the signer's own active key, holding ``role`` at ``at``.

    ``message`` gives the bytes to sign for the person found. Returns the person, the key
    row and the signature.
    """
    person = require_role(session, signer.initials, role, key=signer.option, at=at)
    person, key = signer_key(session, signer)
    return person, key, keys.sign(signer.private_key, message(person))


def _manager(session: Session, signer: Signer | None, doing: str) -> tuple[Person, PersonKey]:
    """The signer, if a manager now holding an active key; else one line naming managers."""
    if signer is None:
        raise RecordError(
            f"{doing}: needs a manager's key (--by, --key); {_managers_text(session)}",
            key="--by",
        )
    person = find_person(session, signer.initials, key="--by")
    if MANAGER not in roles_of(session, person):
        raise RecordError(
            f"{doing}: {person.initials} is not a manager; {_managers_text(session)}",
            key="--by",
            fix="sign with a manager's key (--by, --key)",
        )
    return signer_key(session, signer)


def _founding(session: Session) -> bool:
    return session.exec(select(Person)).first() is None


def add_person(
    session: Session,
    *,
    initials: str,
    name: str,
    roles: Sequence[str],
    by: Signer | None,
    why: str | None = None,
    title: str | None = None,
) -> Person:
    """Register a person. The first person of an empty store becomes its founding manager
    (no signer); after that a manager adds people and signs the roles granted with them.
    ``title`` is the job title printed beside their signatures."""
    value = clean_initials(initials, key="INITIALS")
    clean = clean_text(name, key="--name", limit=NAME_LIMIT, single_line=True)
    job = (
        clean_text(title, key="--title", limit=NAME_LIMIT, single_line=True)
        if title is not None
        else None
    )
    wanted = sorted({_check_role(r) for r in roles})
    if session.exec(select(Person).where(Person.initials == value)).first():
        raise RecordError(f"{value!r} is already in the people register", key="INITIALS")
    founding = _founding(session)
    if founding:
        if set(wanted) - {MANAGER}:
            raise RecordError(
                f"the first person of a store is its founding manager; {value} cannot also "
                f"take {', '.join(r for r in wanted if r != MANAGER)}",
                key="--role",
                fix="add them with --role manager; another manager grants further roles",
            )
        person = Person(initials=value, name=clean, title=job)
        session.add(person)
        session.flush()
        at = utc_now()
        session.add(
            RoleGrant(person_id=person.id, role=MANAGER, action="grant", at=at, reason=FOUNDING)
        )
        audit.append(
            session,
            actor=value,
            action="store.found",
            entity="person",
            entity_id=person.id,
            why=FOUNDING,
            new={
                "initials": value,
                "name": clean,
                "roles": [MANAGER],
                **({"title": job} if job else {}),
            },
        )
        return person
    manager, key = _manager(session, by, f"people add {value}")
    assert by is not None
    person = Person(initials=value, name=clean, title=job)
    session.add(person)
    session.flush()
    reason = clean_text(why or f"added by {manager.initials}", key="--why")
    audit.append(
        session,
        actor=actor_of(manager, key),
        action="person.add",
        entity="person",
        entity_id=person.id,
        why=reason,
        new={"initials": value, "name": clean, "roles": wanted, **({"title": job} if job else {})},
    )
    for role in wanted:
        _grant(session, person, role, "grant", reason, manager, key, by)
    return person


def _grant(
    session: Session,
    person: Person,
    role: str,
    action: str,
    reason: str,
    manager: Person,
    key: PersonKey,
    by: Signer,
) -> RoleGrant:
    if person.id == manager.id:
        raise RecordError(
            f"{manager.initials} cannot {action} a role of their own; {_managers_text(session)}",
            key="--by",
            fix="another manager signs it",
        )
    row = RoleGrant(
        person_id=person.id,
        role=role,
        action=action,
        at=utc_now(),
        reason=reason,
        by_person_id=manager.id,
        by_key_id=key.id,
    )
    row.signature = keys.sign(
        by.private_key, grant_message(row, person.initials, manager.initials, key.fingerprint)
    )
    session.add(row)
    session.flush()
    audit.append(
        session,
        actor=actor_of(manager, key),
        action=f"role.{action}",
        entity="role_grant",
        entity_id=row.id,
        why=reason,
        new={"person": person.initials, "role": role, "at": row.at},
    )
    return row


def change_roles(
    session: Session,
    *,
    initials: str,
    roles: Sequence[str],
    action: str,
    by: Signer | None,
    why: str,
) -> Person:
    """Grant (``action`` "grant") or withdraw ("withdraw") roles, signed by a manager."""
    person = find_person(session, initials, key="PERSON")
    reason = clean_text(why, key="--why")
    manager, key = _manager(session, by, f"people {action} {person.initials}")
    assert by is not None
    held = roles_of(session, person)
    for role in sorted({_check_role(r) for r in roles}):
        if action == "grant" and role in held:
            raise RecordError(f"{person.initials} already holds {role}", key="--role")
        if action == "withdraw" and role not in held:
            raise RecordError(f"{person.initials} does not hold {role}", key="--role")
        _grant(session, person, role, action, reason, manager, key, by)
    return person


def enrol_key(
    session: Session,
    *,
    initials: str,
    public: keys.PublicKeyFile,
    by: Signer | None,
) -> PersonKey:
    """Enrol a person's key: checks the self-signature, one active key per person, and
    countersigns with the manager's key. A founding manager's first key, when the store
    holds no key yet, is enrolled by itself (``by`` signs with that same key)."""
    person = find_person(session, initials, key="PERSON")
    if clean_initials(public.person, key="--public") != person.initials:
        raise RecordError(
            f"this public key file was made for {public.person}, not {person.initials}",
            key="--public",
            fix=f"make {person.initials}'s own with `testplan keys new {person.initials}`",
        )
    if not public.proves_possession():
        raise RecordError(
            "the public key file's self-signature does not verify (changed, or not made by "
            "`testplan keys new`)",
            key="--public",
        )
    fp = keys.fingerprint(public.public_key)
    if session.exec(select(PersonKey).where(PersonKey.fingerprint == fp)).first():
        raise RecordError(f"key {fp[:16]} is already enrolled", key="--public")
    current = active_key(session, person)
    if current is not None:
        raise RecordError(
            f"{person.initials} already holds active key {current.fingerprint[:16]}; one "
            "active key per person",
            key="PERSON",
            fix=f"revoke it first with `testplan keys revoke {person.initials}`",
        )
    if by is None:
        _manager(session, by, f"keys register {person.initials}")
    assert by is not None
    by_fp = keys.fingerprint(keys.public_of(by.private_key))
    first_key = session.exec(select(PersonKey)).first() is None
    row = PersonKey(
        id=uuid.uuid4(),
        person_id=person.id,
        public_key=public.public_key,
        fingerprint=fp,
        registered_by="",
        registered_at=utc_now(),
        proof=public.proof,
    )
    if by_fp == fp:  # a key enrolling itself: only the founding manager's first key
        manager = find_person(session, by.initials, key="--by")
        founder = session.exec(
            select(RoleGrant).where(RoleGrant.person_id == person.id, RoleGrant.reason == FOUNDING)
        ).first()
        if not (first_key and founder is not None and manager.id == person.id):
            raise RecordError(
                f"keys register {person.initials}: needs a manager's key (--by, --key); "
                f"{_managers_text(session)}",
                key="--by",
            )
        manager_key = row
    else:
        manager, manager_key = _manager(session, by, f"keys register {person.initials}")
    row.enrolled_by_key_id = manager_key.id
    row.registered_by = actor_of(manager, manager_key if manager_key is not row else None)
    row.enrolment_signature = keys.sign(
        by.private_key,
        enrol_message(row, person.initials, manager.initials, manager_key.fingerprint),
    )
    session.add(row)
    person.public_key = public.public_key
    session.add(person)
    session.flush()
    audit.append(
        session,
        actor=f"{manager.initials} key {manager_key.fingerprint[:16]}",
        action="key.register",
        entity="person_key",
        entity_id=row.id,
        new={"person": person.initials, "fingerprint": fp, "from": row.registered_at},
    )
    return row


def revoke_key(
    session: Session,
    *,
    initials: str,
    by: Signer | None,
    why: str,
    effective: dt.datetime | None = None,
) -> KeyRevocation:
    """Revoke the person's active key from ``effective`` (now when None), signed by a
    manager. Signatures made with it from that time on no longer verify."""
    person = find_person(session, initials, key="PERSON")
    reason = clean_text(why, key="--why")
    when = effective or utc_now()
    rows = session.exec(select(PersonKey).where(PersonKey.person_id == person.id)).all()
    live = [k for k in rows if revocation_of(session, k) is None]
    if not live:
        raise RecordError(f"{person.initials} holds no key to revoke", key="PERSON")
    manager, key = _manager(session, by, f"keys revoke {person.initials}")
    assert by is not None
    target = live[-1]
    row = KeyRevocation(
        key_id=target.id,
        effective_at=when,
        reason=reason,
        by_person_id=manager.id,
        by_key_id=key.id,
        signature="",
    )
    row.signature = keys.sign(
        by.private_key,
        revoke_message(row, target.fingerprint, person.initials, manager.initials, key.fingerprint),
    )
    session.add(row)
    session.flush()
    audit.append(
        session,
        actor=actor_of(manager, key),
        action="key.revoke",
        entity="key_revocation",
        entity_id=row.id,
        why=reason,
        new={"person": person.initials, "fingerprint": target.fingerprint, "from": when},
    )
    return row


# --- the enrolment chain and the trust anchor --------------------------------------------


@dataclass(frozen=True)
class ChainLink:
    """One key in an enrolment chain: whose it is and who countersigned its enrolment."""

    person: str
    fingerprint: str
    public_key: str
    enrolled_at: dt.datetime
    enrolled_by: str | None  # initials of the enrolling manager (None: self-enrolled founder)
    enrolled_by_key: str | None
    proof: str | None
    enrolment_signature: str | None


@dataclass
class Trust:
    """The keys a verification starts from: an exported anchor, or the store's own founder."""

    fingerprints: set[str] | None  # None: the founding manager's key found in the store
    seen: set[str] = field(default_factory=set)


def enrolment_chain(session: Session, key: PersonKey) -> list[ChainLink]:
    """The key, the manager key that enrolled it, and so on up to a self-enrolled key
    (the founding manager's) or a key whose enrolment is missing. For a proof to carry."""
    out: list[ChainLink] = []
    seen: set[uuid.UUID] = set()
    current: PersonKey | None = key
    while current is not None and current.id not in seen:
        seen.add(current.id)
        owner = session.get(Person, current.person_id)
        parent = (
            session.get(PersonKey, current.enrolled_by_key_id)
            if current.enrolled_by_key_id
            else None
        )
        parent_owner = session.get(Person, parent.person_id) if parent else None
        out.append(
            ChainLink(
                owner.initials if owner else "?",
                current.fingerprint,
                current.public_key,
                current.registered_at,
                parent_owner.initials
                if parent_owner and parent and parent.id != current.id
                else None,
                parent.fingerprint if parent and parent.id != current.id else None,
                current.proof,
                current.enrolment_signature,
            )
        )
        current = parent if parent is not None and parent.id != current.id else None
    return out


def _first_founding(session: Session) -> RoleGrant | None:
    return session.exec(
        select(RoleGrant).where(RoleGrant.reason == FOUNDING).order_by(col(RoleGrant.at))
    ).first()


def _legacy(session: Session, key: PersonKey) -> bool:
    """Registered before this store countersigned enrolments (schema 0010)."""
    since = session.get(StoreMeta, SINCE)
    return since is not None and key.registered_at < dt.datetime.fromisoformat(since.value)


def store_anchor(session: Session) -> str:
    """The founding manager's self-enrolled key in this store, named for verify's output."""
    founding = _first_founding(session)
    person = session.get(Person, founding.person_id) if founding else None
    if person is None:
        return "no founding manager in this store"
    for key in session.exec(select(PersonKey).where(PersonKey.person_id == person.id)):
        if key.enrolled_by_key_id == key.id:
            return f"{person.initials}'s key {key.fingerprint[:16]}"
    return f"{person.initials}, who holds no self-enrolled key"


def key_problem(session: Session, key: PersonKey, trust: Trust) -> str | None:
    """Why ``key``'s enrolment does not chain back to the trusted keys, or None."""
    owner = session.get(Person, key.person_id)
    who = f"key {key.fingerprint[:16]} of {owner.initials if owner else '?'}"
    if trust.fingerprints is not None and key.fingerprint in trust.fingerprints:
        return None
    if key.fingerprint in trust.seen:
        return f"{who}: its enrolment chain loops"
    trust.seen.add(key.fingerprint)
    if owner is None:
        return f"{who}: no such person"
    if key.proof is None and trust.fingerprints is None and _legacy(session, key):
        return None
    if key.proof is None or not keys.verify(
        key.public_key, keys.proof_message(owner.initials, key.public_key), key.proof
    ):
        return f"{who}: no proof that its holder made it"
    enroller = session.get(PersonKey, key.enrolled_by_key_id) if key.enrolled_by_key_id else None
    if enroller is None or key.enrolment_signature is None:
        if trust.fingerprints is None and _legacy(session, key):
            return None
        return f"{who}: no enrolment signed by a trusted manager"
    boss = session.get(Person, enroller.person_id)
    if boss is None or not keys.verify(
        enroller.public_key,
        enrol_message(key, owner.initials, boss.initials, enroller.fingerprint),
        key.enrolment_signature,
    ):
        return f"{who}: its enrolment signature does not verify"
    if enroller.id == key.id:
        founding = _first_founding(session)
        if trust.fingerprints is None and founding is not None and founding.person_id == owner.id:
            return None
        return f"{who}: no enrolment signed by a trusted manager (self-enrolled, not in the anchor)"
    if not key_active_at(session, enroller, key.registered_at):
        return f"{who}: enrolled with manager key {enroller.fingerprint[:16]} not active then"
    problem = authority_problem(session, boss, MANAGER, key.registered_at, trust)
    if problem is not None:
        return f"{who}: enrolled by {boss.initials}, {problem}"
    return key_problem(session, enroller, trust)


def authority_problem(
    session: Session, person: Person, role: str, at: dt.datetime, trust: Trust
) -> str | None:
    """Why ``person`` did not hold ``role`` at ``at`` by a grant chaining back to the trusted
    keys, or None."""
    grant = grant_in_force(session, person, role, at)
    if grant is None:
        return f"{person.initials} was not authorised as {role} on {at:%Y-%m-%d %H:%M} UTC"
    if grant.by_person_id is None or grant.by_key_id is None or grant.signature is None:
        founding = _first_founding(session)
        if grant.reason == FOUNDING and role == MANAGER:
            if trust.fingerprints is None:
                if founding is not None and founding.id == grant.id:
                    return None
                return f"{person.initials}'s {role} grant is not the store's founding act"
            held = session.exec(select(PersonKey).where(PersonKey.person_id == person.id)).all()
            if any(k.fingerprint in trust.fingerprints for k in held):
                return None
            return f"{person.initials}'s founding {role} grant is not in the trust anchor"
        if trust.fingerprints is None and grant.reason == LEGACY:
            return None
        return f"{person.initials}'s {role} grant is not signed by a manager"
    boss = session.get(Person, grant.by_person_id)
    key = session.get(PersonKey, grant.by_key_id)
    if boss is None or key is None or key.person_id != boss.id:
        return f"{person.initials}'s {role} grant names no manager's key"
    if not keys.verify(
        key.public_key,
        grant_message(grant, person.initials, boss.initials, key.fingerprint),
        grant.signature,
    ):
        return f"{person.initials}'s {role} grant: its signature does not verify"
    if boss.id == person.id:
        return f"{person.initials}'s {role} grant is self-granted"
    if not key_active_at(session, key, grant.at):
        return f"{person.initials}'s {role} grant: signed with a key not active then"
    mark = f"grant:{grant.id}"
    if mark in trust.seen:
        return None
    trust.seen.add(mark)
    problem = authority_problem(session, boss, MANAGER, grant.at, trust)
    if problem is not None:
        return f"{person.initials}'s {role} grant by {boss.initials}: {problem}"
    return key_problem(session, key, Trust(trust.fingerprints, set(trust.seen)))


def signature_problem(
    session: Session,
    *,
    person: Person,
    key: PersonKey,
    role: str,
    at: dt.datetime,
    message: bytes,
    signature: str | None,
    trust: Trust,
) -> str | None:
    """Why a signed act does not stand: signature, key active then, role then, chain."""
    if signature is None:
        return "not signed"
    if key.person_id != person.id:
        return f"key {key.fingerprint[:16]} is not {person.initials}'s"
    if not keys.verify(key.public_key, message, signature):
        return f"does not verify with {person.initials}'s key {key.fingerprint[:16]}"
    if not key_active_at(session, key, at):
        revoked = revocation_of(session, key)
        if revoked is not None:
            return (
                f"made with key {key.fingerprint[:16]} of {person.initials}, revoked from "
                f"{revoked.effective_at:%Y-%m-%d %H:%M} UTC"
            )
        return f"made with key {key.fingerprint[:16]} before it was enrolled"
    return authority_problem(session, person, role, at, Trust(trust.fingerprints)) or key_problem(
        session, key, Trust(trust.fingerprints)
    )


def trust_anchor(session: Session) -> dict[str, Any]:
    """The trust file's content: every manager key whose enrolment stands in this store."""
    out = []
    for person in session.exec(select(Person).order_by(col(Person.initials))).all():
        ever = session.exec(
            select(RoleGrant).where(RoleGrant.person_id == person.id, RoleGrant.role == MANAGER)
        ).first()
        if ever is None:
            continue
        for key in session.exec(select(PersonKey).where(PersonKey.person_id == person.id)):
            if key_problem(session, key, Trust(None)) is None:
                out.append(
                    {
                        "person": person.initials,
                        "name": person.name,
                        "fingerprint": key.fingerprint,
                        "public_key": key.public_key,
                    }
                )
    if not out:
        raise RecordError(
            "no manager key is enrolled in this store; nothing to anchor",
            fix="the founding manager enrols their key with `testplan keys register`",
        )
    return {"testplan_trust": TRUST_FORMAT, "managers": out}


def parse_trust(text: str) -> set[str]:
    """The fingerprints of a trust file written by ``keys trust``; RecordError otherwise."""
    try:
        body = json.loads(text)
        if body.get("testplan_trust") != TRUST_FORMAT:
            raise ValueError
        found = set()
        for entry in body["managers"]:
            if keys.fingerprint(entry["public_key"]) != entry["fingerprint"]:
                raise ValueError
            found.add(str(entry["fingerprint"]))
    except (ValueError, KeyError, TypeError, AttributeError):
        raise RecordError(
            "not a trust file written by `testplan keys trust`", key="--trust"
        ) from None
    if not found:
        raise RecordError("the trust file names no manager key", key="--trust")
    return found
