"""The lock of an approved campaign: which manifest holds it, and the refusal every
recording function makes before changing a locked campaign's records."""

from __future__ import annotations

import uuid

from sqlmodel import Session, col, select

from testplan.errors import RecordError
from testplan.store.tables import Amendment, CampaignRecord, Manifest, Signature


def approved_manifest(session: Session, campaign_id: uuid.UUID) -> Manifest | None:
    """The manifest that locks the campaign: approved and not amended since."""
    manifest = session.exec(
        select(Manifest)
        .join(Signature, col(Signature.manifest_id) == col(Manifest.id))
        .where(Manifest.campaign_id == campaign_id, Signature.role == "approved")
        .order_by(col(Manifest.created_at).desc())
    ).first()
    if manifest is None:
        return None
    amended = session.exec(
        select(Amendment).where(Amendment.supersedes_manifest_id == manifest.id)
    ).first()
    return None if amended else manifest


def ensure_open(session: Session, campaign_id: uuid.UUID) -> None:
    """Refuse a change to an approved campaign (called by every recording function)."""
    if approved_manifest(session, campaign_id) is not None:
        camp = session.get(CampaignRecord, campaign_id)
        ref = camp.reference if camp else "the campaign"
        raise RecordError(
            f"{ref} is approved and locked; its records cannot change",
            fix=f"record the reason with `testplan amend {ref} --why ...`, then sign again",
        )
