"""A lab's own report template sets: registered once by a manager (signed, audited), so an
approval may name one and an issued report may be printed with it."""

from __future__ import annotations

import datetime as dt

from sqlmodel import Session, select

from testplan.errors import RecordError
from testplan.store import audit, identity
from testplan.store.tables import TemplateSet, utc_now


def register_message(sha256: str, name: str, initials: str, at: dt.datetime) -> bytes:
    """What the manager signs to register a template set."""
    return identity.act_message(
        "template_set.register",
        {"sha256": sha256, "name": name, "by": initials, "at": at.astimezone(dt.UTC).isoformat()},
    )


def register_templates(
    session: Session, *, sha256: str, name: str, by: identity.Signer
) -> TemplateSet:
    """Register the template set with SHA-256 ``sha256`` under ``name``, signed by a manager
    holding an active key. Raises RecordError for a non-manager or a set already there."""
    name = identity.clean_text(name, key="--name", limit=120, single_line=True)
    found = registered(session, sha256)
    if found is not None:
        raise RecordError(
            f"this template set (SHA-256 {sha256[:16]}) is already registered as {found.name!r}",
            key="DIR",
        )
    at = utc_now()
    person, key, signature = identity.sign_act(
        session,
        by,
        role="manager",
        at=at,
        message=lambda p: register_message(sha256, name, p.initials, at),
    )
    row = TemplateSet(
        sha256=sha256, name=name, person_id=person.id, key_id=key.id, at=at, signature=signature
    )
    session.add(row)
    session.flush()
    audit.append(
        session,
        actor=f"{person.initials} key {key.fingerprint[:16]}",
        action="templates.register",
        entity="template_set",
        entity_id=row.id,
        new={"sha256": sha256, "name": name, "at": at},
    )
    return row


def registered(session: Session, sha256: str) -> TemplateSet | None:
    """The registration of the template set with this SHA-256, if any."""
    return session.exec(select(TemplateSet).where(TemplateSet.sha256 == sha256)).first()


def require_registered(session: Session, sha256: str, *, doing: str) -> TemplateSet:
    """The registration of a lab's template set, or one line saying it is not registered."""
    found = registered(session, sha256)
    if found is None:
        raise RecordError(
            f"{doing}: the template set given (SHA-256 {sha256[:16]}) is not registered",
            key="--templates",
            fix="a manager registers it once with `testplan store templates DIR`",
        )
    return found
