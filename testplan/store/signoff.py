"""Sign-off: the campaign manifest, signatures, the lock, amendments, issued PDFs, verify.

The manifest lists every record of a campaign as ``(kind, id, label, hash)``, each hash over
the record's canonical JSON (raw files and photos over their actual bytes, samples in
chunks of CHUNK_ROWS rows), and a SHA-256 root over the sorted items. It reads the same
on SQLite and PostgreSQL. Signatures cover the root, the role, the signer and the time;
they do not depend on any PDF.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import uuid
from collections.abc import Iterator
from dataclasses import dataclass
from typing import Any

import sqlalchemy as sa
from sqlmodel import Session, col, select

from testplan import keys
from testplan.errors import CriteriaFailedError, RecordError
from testplan.store import audit
from testplan.store.identity import (
    Signer,
    Trust,
    actor_of,
    find_person,
    require_role,
    signature_problem,
    signer_key,
    store_anchor,
)
from testplan.store.lock import approved_manifest as approved_manifest  # re-exported
from testplan.store.lock import ensure_open as ensure_open  # re-exported
from testplan.store.records import act_problems, find_campaign
from testplan.store.tables import (
    Amendment,
    Attachment,
    Calibration,
    CampaignRecord,
    CriterionRecord,
    Deviation,
    Equipment,
    Judgement,
    LoggerChannel,
    Manifest,
    Observation,
    Person,
    PersonKey,
    PlanRevision,
    ProcedureRecord,
    RawFile,
    ReportIssue,
    RunEquipment,
    RunRecord,
    RunSpecimen,
    Signature,
    SpecimenRecord,
    VerdictRecord,
    utc_now,
)

CHUNK_ROWS = 100_000
ROLES = {"prepared": "preparer", "reviewed": "reviewer", "approved": "approver"}
ORDER = ("prepared", "reviewed", "approved")


def _h(value: Any) -> str:
    return hashlib.sha256(audit.canonical(value).encode()).hexdigest()


# Columns added after records were first signed: left out of a record's hash while empty,
# so a report signed before they existed still verifies after the upgrade.
LATER_COLUMNS = frozenset(
    {
        "check_key_id",
        "check_signature",
        "approval_key_id",
        "approval_signature",
        "criterion_key",
        "invalid_reason",
        "repeat_of_id",
        "title",
    }
)


def _row(obj: Any, *skip: str) -> dict[str, Any]:
    """A record's columns as plain values (bytes become their SHA-256)."""
    out = {}
    for column in obj.__table__.columns:
        if column.name in skip:
            continue
        value = getattr(obj, column.name)
        if value is None and column.name in LATER_COLUMNS:
            continue  # a record signed before the column existed hashes as it did then
        out[column.name] = value
    return out


def _person_body(person: Person) -> dict[str, Any]:
    """A person's record as the manifest and signatures cover it: name and initials. Roles
    are dated grants of their own, checked at the time of each act."""
    return _row(person, "public_key")


@dataclass(frozen=True)
class Item:
    kind: str
    id: str
    label: str
    hash: str

    def to_json(self) -> list[str]:
        return [self.kind, self.id, self.label, self.hash]


def _sample_chunks(session: Session, raw: RawFile) -> list[Item]:
    from testplan.store.samples import digest_arrays, read_samples

    data = read_samples(session, raw.id)
    items = []
    for n, start in enumerate(range(0, max(len(data), 1), CHUNK_ROWS)):
        stop = min(start + CHUNK_ROWS, len(data))
        digest = digest_arrays(
            data.t_us[start:stop], data.channel[start:stop], data.value[start:stop]
        )
        first, last = (start, stop - 1) if stop > start else (0, -1)
        items.append(
            Item(
                "sample_chunk",
                f"{raw.id}:{n}",
                f"samples of {raw.name}, chunk {n + 1} (rows {first + 1} to {last + 1})",
                _h([digest, first, last, stop - start]),
            )
        )
    return items


def run_body(session: Session, run: RunRecord) -> dict[str, Any]:
    """A run's record as the manifest hashes it: its columns and its specimens' ids."""
    members = sorted(
        str(link.specimen_id)
        for link in session.exec(select(RunSpecimen).where(RunSpecimen.run_id == run.id))
    )
    return {**_row(run), "specimens": members}


def compute_items(session: Session, campaign: CampaignRecord) -> list[Item]:
    """Every record of the campaign, hashed. The same data gives the same items anywhere."""
    items: list[Item] = []

    def add(kind: str, obj: Any, label: str, body: dict[str, Any]) -> None:
        items.append(Item(kind, str(obj.id), label, _h(body)))

    add("campaign", campaign, f"campaign {campaign.reference}", _row(campaign))
    for rev in session.exec(select(PlanRevision).where(PlanRevision.campaign_id == campaign.id)):
        add("plan_revision", rev, f"plan revision {rev.number}", _row(rev))
        for proc in session.exec(
            select(ProcedureRecord).where(ProcedureRecord.revision_id == rev.id)
        ):
            where = f"{proc.key} of plan revision {rev.number}"
            add("procedure", proc, f"procedure {where}", _row(proc))
            for crit in session.exec(
                select(CriterionRecord).where(CriterionRecord.procedure_id == proc.id)
            ):
                add("criterion", crit, f"criterion {crit.key} of {where}", _row(crit))
    specimens = {
        s.id: s
        for s in session.exec(
            select(SpecimenRecord).where(SpecimenRecord.campaign_id == campaign.id)
        )
    }
    for s in specimens.values():
        add("specimen", s, f"specimen {s.serial}", _row(s))
    runs = session.exec(select(RunRecord).where(RunRecord.campaign_id == campaign.id)).all()
    people: set[uuid.UUID] = set()
    calibrations: set[uuid.UUID] = set()
    instruments: set[uuid.UUID] = set()
    for run in runs:
        add("run", run, f"run {run.key}", run_body(session, run))
        people.update(p for p in (run.operator_id, run.checker_id) if p)
        for use in session.exec(select(RunEquipment).where(RunEquipment.run_id == run.id)):
            add("run_equipment", use, f"equipment used on {run.key}", _row(use))
            calibrations.add(use.calibration_id)
            instruments.add(use.equipment_id)
        for d in session.exec(select(Deviation).where(Deviation.run_id == run.id)):
            add("deviation", d, f"deviation on {run.key}: {d.description[:40]}", _row(d))
            people.update((d.approved_by_id, d.recorded_by_id))
        for raw in session.exec(select(RawFile).where(RawFile.run_id == run.id)):
            body = _row(raw, "content")
            body["content_sha256"] = audit.content_sha256(raw.content, f"raw file {raw.name}")
            add("raw_file", raw, f"raw file {raw.name} of {run.key}", body)
            people.add(raw.operator_id)
            for ch in session.exec(
                select(LoggerChannel).where(LoggerChannel.raw_file_id == raw.id)
            ):
                add("logger_channel", ch, f"channel {ch.source} of {raw.name}", _row(ch))
                if ch.calibration_id:
                    calibrations.add(ch.calibration_id)
            items.extend(_sample_chunks(session, raw))
        for o in session.exec(select(Observation).where(Observation.run_id == run.id)):
            serial = specimens[o.specimen_id].serial if o.specimen_id in specimens else "run"
            add("observation", o, f"observation {o.kind} on {serial} in {run.key}", _row(o))
            people.add(o.recorded_by_id)
            att = session.get(Attachment, o.attachment_id) if o.attachment_id else None
            if att is not None:  # a missing one shows as deleted
                body = _row(att, "content")
                body["content_sha256"] = audit.content_sha256(att.content, f"photo {att.name}")
                add("attachment", att, f"photo {att.name}", body)
        for j in session.exec(select(Judgement).where(Judgement.run_id == run.id)):
            add("judgement", j, f"judgement of {run.key}", _row(j))
            for v in session.exec(select(VerdictRecord).where(VerdictRecord.judgement_id == j.id)):
                who = specimens[v.specimen_id].serial if v.specimen_id in specimens else "all"
                add("verdict", v, f"verdict {v.criterion_key} ({who}) of {run.key}", _row(v))
    # Records referred to but no longer there are left out: verify names them as deleted.
    for cid in calibrations:
        cal = session.get(Calibration, cid)
        eq = session.get(Equipment, cal.equipment_id) if cal is not None else None
        if cal is None or eq is None:
            continue
        add(
            "calibration",
            cal,
            f"calibration {cal.certificate} of {eq.tag} ({cal.channel})",
            {**_row(cal), "equipment": _row(eq)},
        )
    for eid in instruments:
        eq = session.get(Equipment, eid)
        if eq is not None:
            add("equipment", eq, f"equipment {eq.tag}", _row(eq))
    for pid in people:
        person = session.get(Person, pid)
        if person is None:
            continue
        add("person", person, f"person {person.initials}", _person_body(person))
    items.sort(key=lambda i: (i.kind, i.id))
    return items


def root_of(items: list[Item]) -> str:
    return _h([i.to_json() for i in items])


# --- state --------------------------------------------------------------------------------


def _amended(session: Session, manifest: Manifest) -> bool:
    found = session.exec(
        select(Amendment).where(Amendment.supersedes_manifest_id == manifest.id)
    ).first()
    return found is not None


def current_manifest(session: Session, campaign: CampaignRecord) -> Manifest | None:
    return session.exec(
        select(Manifest)
        .where(Manifest.campaign_id == campaign.id)
        .order_by(col(Manifest.created_at).desc())
    ).first()


def signatures_of(session: Session, manifest: Manifest) -> dict[str, Signature]:
    rows = session.exec(select(Signature).where(Signature.manifest_id == manifest.id)).all()
    return {s.role: s for s in rows}


def report_revision(session: Session, campaign_id: uuid.UUID) -> int:
    n = session.exec(
        select(sa.func.count()).select_from(Amendment).where(Amendment.campaign_id == campaign_id)
    ).one()
    return 1 + int(n)


# --- signing ------------------------------------------------------------------------------


def message(
    root: str,
    role: str,
    reference: str,
    initials: str,
    at: dt.datetime,
    context: dict[str, Any] | None = None,
) -> bytes:
    """The bytes a signature is made over. ``context`` (signatures since schema 0014): the
    signer's person-record hash and the audit-chain head when signing."""
    body: dict[str, Any] = {
        "testplan_signoff": 1,
        "root": root,
        "role": role,
        "campaign": reference,
        "signer": initials,
        "signed_at": at.astimezone(dt.UTC).isoformat(),
    }
    if context is not None:
        body = {**body, "testplan_signoff": 2, "context": context}
    return audit.canonical(body).encode()


def signature_context(session: Session, person: Person) -> dict[str, Any]:
    """What a signature covers besides the manifest: the signer's own record (name,
    initials) and the audit-chain head at the moment of signing."""
    return {"signer_sha256": _h(_person_body(person)), "audit_head": audit.head(session)}


def _ready(session: Session, campaign: CampaignRecord) -> None:
    """Every run carried out is finished, checked by a second person and judged on the
    evidence as it is now; else the first thing that blocks sign-off is raised."""
    for problem in blockers(session, campaign):
        raise problem


def blockers(session: Session, campaign: CampaignRecord) -> Iterator[RecordError]:
    """Each thing that blocks signing the campaign now, one RecordError per run (a run not
    finished or checked, not judged, or judged on evidence that has changed since)."""
    from testplan.store.judging import stale_inputs

    runs = session.exec(
        select(RunRecord).where(
            RunRecord.campaign_id == campaign.id, col(RunRecord.started_at).is_not(None)
        )
    ).all()
    if not runs:
        yield RecordError(f"{campaign.reference} has no run carried out to sign for")
    for run in runs:
        if run.state not in ("checked", "invalid"):  # an invalid run is judged when declared
            yield RecordError(
                f"run {run.key} is {run.state}; every run must be finished and its data "
                "checked before sign-off",
                fix=f"`testplan record check {run.key}`",
            )
            continue
        last = session.exec(
            select(Judgement)
            .where(Judgement.run_id == run.id)
            .order_by(col(Judgement.judged_at).desc())
        ).first()
        if last is None:
            yield RecordError(f"run {run.key} is not judged", fix="run `testplan judge`")
            continue
        stale = stale_inputs(session, run, last)
        if stale:
            yield RecordError(
                f"run {run.key} was judged {last.judged_at:%Y-%m-%d %H:%M} UTC on evidence "
                f"that has changed since ({'; '.join(stale[:3])})",
                fix="run `testplan judge` again, then sign",
            )


def _check_signing_time(session: Session, campaign: CampaignRecord, at: dt.datetime) -> None:
    """A signature is not dated before any run's data check."""
    checks = [
        (r.checked_at.astimezone(dt.UTC), r.key)
        for r in session.exec(select(RunRecord).where(RunRecord.campaign_id == campaign.id))
        if r.checked_at is not None
    ]
    if checks:
        last, run = max(checks)
        if at < last:
            raise RecordError(
                f"a signature dated {at:%Y-%m-%d %H:%M} UTC would be before the data check "
                f"of run {run} ({last:%Y-%m-%d %H:%M} UTC)",
                key="--at",
                fix=f"give --at {last:%Y-%m-%dT%H:%MZ} or later",
            )


def _differences(stored: list[list[str]], now: list[Item], *, only_stored: bool) -> list[str]:
    """What changed between a stored manifest and the records now, named."""
    before = {(k, i): (label, h) for k, i, label, h in stored}
    after = {(x.kind, x.id): (x.label, x.hash) for x in now}
    out = []
    for key, (label, h) in sorted(before.items()):
        if key not in after:
            out.append(f"{label}: deleted")
        elif after[key][1] != h:
            out.append(f"{label}: changed")
    if not only_stored:
        for key, (label, _) in sorted(after.items()):
            if key not in before:
                out.append(f"{label}: added")
    return out


@dataclass(frozen=True)
class Signed:
    role: str
    root: str
    initials: str
    fingerprint: str
    manifest_items: int


def sign(
    session: Session,
    *,
    campaign: str,
    role: str,
    signer: Signer,
    printing: dict[str, str] | None = None,
    at: dt.datetime | None = None,
) -> Signed:
    """Sign the campaign's records in ``role`` (prepared, reviewed, approved) with the
    signer's own active key, dated ``at`` (now when None); the role and key are checked as
    in force then. The signature may not be dated before any run's data check nor before
    the previous role's signature. The approval also covers ``printing`` (the tool version
    and the SHA-256 of the template set that will print the issued report) and the SHA-256
    of the results the report states (``proof.results``)."""
    if role not in ROLES:
        raise RecordError(
            f"unknown role {role!r}", key="--role", fix="prepared, reviewed or approved"
        )
    camp = find_campaign(session, campaign)
    ensure_open(session, camp.id)
    at = (at or utc_now()).astimezone(dt.UTC)
    person = require_role(session, signer.initials, ROLES[role], key=signer.option, at=at)
    person, key_row = signer_key(session, signer, at=at)
    _ready(session, camp)
    _check_signing_time(session, camp, at)
    items = compute_items(session, camp)
    root = root_of(items)
    manifest = current_manifest(session, camp)
    existing = signatures_of(session, manifest) if manifest else {}
    if manifest is not None and _amended(session, manifest):
        manifest, existing = None, {}  # superseded: sign-off starts again
    if role == "prepared":
        if manifest is not None and existing and manifest.root == root and "prepared" in existing:
            raise RecordError("already prepared; the records have not changed since", key="--role")
        manifest = Manifest(
            campaign_id=camp.id,
            root=root,
            created_by=person.initials,
            body_json=audit.canonical([i.to_json() for i in items]),
        )
        session.add(manifest)
        session.flush()
        existing = {}
    else:
        needed = ORDER[: ORDER.index(role)]
        missing = [r for r in needed if r not in existing]
        if manifest is None or missing:
            raise RecordError(
                f"cannot sign as {role} before the campaign is {' and '.join(missing or needed)}",
                key="--role",
            )
        if role in existing:
            raise RecordError(f"already {role}", key="--role")
        if manifest.root != root:
            changed = _differences(json.loads(manifest.body_json), items, only_stored=False)
            raise RecordError(
                f"the records changed after they were prepared ({'; '.join(changed[:3])}); "
                "the earlier signatures no longer cover them",
                key="--role",
                fix="sign again from --role prepared",
            )
    signers = {s.person_id for s in existing.values()}
    if person.id in signers:
        raise RecordError(
            f"{person.name} ({person.initials}) already signed this campaign in another role; "
            "prepared, reviewed and approved need three different people",
            key="--as",
        )
    for before in ORDER[: ORDER.index(role)]:
        earlier = existing[before].signed_at.astimezone(dt.UTC)
        if at < earlier:
            raise RecordError(
                f"a {role} signature dated {at:%Y-%m-%d %H:%M} UTC would be before the "
                f"{before} one ({earlier:%Y-%m-%d %H:%M} UTC)",
                key="--at",
                fix=f"give --at {earlier:%Y-%m-%dT%H:%MZ} or later",
            )
    context = signature_context(session, person)
    if role == "approved":
        from testplan.store.proof import results, results_sha256

        context["results_sha256"] = results_sha256(results(session, camp))
        if printing is not None:
            context["printing"] = printing
    msg = message(root, role, camp.reference, person.initials, at, context)
    sig = keys.sign(signer.private_key, msg)
    row = Signature(
        manifest_id=manifest.id,
        role=role,
        person_id=person.id,
        key_id=key_row.id,
        signed_at=at,
        signature=sig,
        context_json=audit.canonical(context),
    )
    session.add(row)
    session.flush()
    audit.append(
        session,
        actor=f"{person.initials} key {key_row.fingerprint[:16]}",
        action=f"signoff.{role}",
        entity="signature",
        entity_id=row.id,
        campaign_id=camp.id,
        new={"root": root, "role": role, "fingerprint": key_row.fingerprint},
    )
    return Signed(role, root, person.initials, key_row.fingerprint, len(items))


def amend(session: Session, *, campaign: str, why: str, by: str) -> Amendment:
    camp = find_campaign(session, campaign)
    manifest = approved_manifest(session, camp.id)
    if manifest is None:
        raise RecordError(
            f"{camp.reference} is not approved; nothing to amend",
            fix="change it directly; amendments are for approved campaigns",
        )
    if not why.strip():
        raise RecordError("give the reason for the amendment", key="--why")
    person = find_person(session, by)
    row = Amendment(
        campaign_id=camp.id,
        supersedes_manifest_id=manifest.id,
        reason=why,
        requested_by=person.initials,
    )
    session.add(row)
    session.flush()
    audit.append(
        session,
        actor=person.initials,
        action="campaign.amend",
        entity="amendment",
        entity_id=row.id,
        campaign_id=camp.id,
        why=why,
        old={"manifest": manifest.root},
        new={"revision": report_revision(session, camp.id)},
    )
    return row


# --- issuing and verifying ----------------------------------------------------------------


@dataclass
class SignOffState:
    """What a report prints about sign-off."""

    manifest_root: str | None
    signers: list[tuple[str, str, str, str]]  # role, name (initials), signed at, fingerprint
    approved: bool
    revision: int
    replaces: str | None


def signoff_state(session: Session, campaign: CampaignRecord) -> SignOffState:
    manifest = current_manifest(session, campaign)
    revision = report_revision(session, campaign.id)
    replaces = None
    last_amend = session.exec(
        select(Amendment)
        .where(Amendment.campaign_id == campaign.id)
        .order_by(col(Amendment.at).desc())
    ).first()
    if last_amend is not None:
        replaces = (
            f"revision {revision - 1} (amended {last_amend.at:%Y-%m-%d}: {last_amend.reason})"
        )
    if manifest is None or (last_amend and last_amend.supersedes_manifest_id == manifest.id):
        return SignOffState(None, [], False, revision, replaces)
    sigs = signatures_of(session, manifest)
    signers = []
    for role in ORDER:
        if role in sigs:
            s = sigs[role]
            p = session.get(Person, s.person_id)
            k = session.get(PersonKey, s.key_id)
            assert p is not None and k is not None
            signers.append(
                (
                    role,
                    f"{p.name} ({p.initials})",
                    f"{s.signed_at:%Y-%m-%d %H:%M UTC}",
                    k.fingerprint,
                )
            )
    return SignOffState(manifest.root, signers, "approved" in sigs, revision, replaces)


def issued_date(session: Session, campaign: CampaignRecord) -> dt.date | None:
    """The date of issue kept for the campaign's current approved revision, if issued."""
    manifest = approved_manifest(session, campaign.id)
    if manifest is None:
        return None
    row = session.exec(
        select(ReportIssue)
        .where(ReportIssue.manifest_id == manifest.id)
        .order_by(col(ReportIssue.issued_at))
    ).first()
    return row.issue_date if row is not None else None


def _check_issue_date(
    session: Session, campaign: CampaignRecord, manifest: Manifest, day: dt.date
) -> None:
    """The date of issue is not before the approval nor before any run's data check."""
    approval = signatures_of(session, manifest)["approved"].signed_at.astimezone(dt.UTC)
    checks = [
        r.checked_at.astimezone(dt.UTC)
        for r in session.exec(select(RunRecord).where(RunRecord.campaign_id == campaign.id))
        if r.checked_at is not None
    ]
    for what, when in (("approved", approval), ("last data check", max(checks, default=None))):
        if when is not None and day < when.date():
            raise RecordError(
                f"date of issue {day:%Y-%m-%d} is before the campaign's {what} "
                f"({when:%Y-%m-%d %H:%M} UTC); nothing was issued",
                key="--issue-date",
                fix=f"give --issue-date {when:%Y-%m-%d} or later",
            )


@dataclass(frozen=True)
class IssuePlan:
    """What an issue will be: its proof (embedded in the PDF before it is signed), who
    issues it with which key, and the time of issue it will be signed with."""

    proof: dict[str, Any]
    person: Person
    key: PersonKey
    issued_at: dt.datetime


def plan_issue(
    session: Session,
    *,
    campaign: CampaignRecord,
    signer: Signer,
    report_number: str,
    issue_date: dt.date,
) -> IssuePlan:
    """The proof for issuing the approved campaign, by ``signer``, who must hold the approver
    role (as granted at the time of issue) and sign with their own active key. Printing an
    issued revision again keeps its time of issue, so the same signer gets the same bytes."""
    from testplan.store import proof

    manifest = approved_manifest(session, campaign.id)
    if manifest is None:
        raise RecordError(f"{campaign.reference} is not approved; drafts are not issued")
    revision = report_revision(session, campaign.id)
    earlier = session.exec(
        select(ReportIssue).where(
            ReportIssue.manifest_id == manifest.id, ReportIssue.revision == revision
        )
    ).first()
    at = earlier.issued_at if earlier is not None else utc_now().replace(microsecond=0)
    require_role(session, signer.initials, "approver", key=signer.option, at=at)
    person, key_row = signer_key(session, signer, at=at)
    _check_issue_date(session, campaign, manifest, issue_date)
    body = proof.build(
        session,
        campaign=campaign,
        manifest=manifest,
        report_number=report_number,
        revision=revision,
        issue_date=issue_date,
        issuer=person,
        issuer_key=key_row,
        issued_at=at,
    )
    return IssuePlan(body, person, key_row, at)


def record_issue(
    session: Session,
    *,
    campaign: CampaignRecord,
    plan: IssuePlan,
    base: bytes,
    signer: Signer,
    printing: dict[str, str] | None = None,
) -> bytes:
    """Sign and record the issue of the approved campaign's report; the issued file's bytes.

    ``base`` is the printed PDF with ``plan.proof`` embedded; the issued file is ``base``
    followed by the tail carrying the issuer's signature (``proof.tail``). Refuses when the
    records differ from the approved manifest (naming them) and when the revision was already
    issued with other bytes: one issued PDF per revision."""
    from testplan.store import proof

    manifest = approved_manifest(session, campaign.id)
    if manifest is None or manifest.root != plan.proof["manifest"]["root"]:
        raise RecordError(
            f"{campaign.reference} is no longer approved as printed; nothing was issued"
        )
    changed = _differences(
        json.loads(manifest.body_json), compute_items(session, campaign), only_stored=False
    )
    if changed:
        raise RecordError(
            f"{campaign.reference}: the records differ from the approved manifest "
            f"({'; '.join(changed[:5])}{'; ...' if len(changed) > 5 else ''}); "
            "nothing was issued",
            fix="run `testplan verify` on the last issued PDF and `testplan store check`",
        )
    report = plan.proof["report"]
    issue_date = dt.date.fromisoformat(report["issue_date"])
    _check_issue_date(session, campaign, manifest, issue_date)
    approval = signatures_of(session, manifest)["approved"]
    approved_printing = json.loads(approval.context_json or "{}").get("printing")
    if printing is not None and approved_printing is not None:
        if approved_printing["templates_sha256"] != printing["templates_sha256"]:
            raise RecordError(
                f"{campaign.reference} was approved for printing with testplan "
                f"{approved_printing['tool_version']}'s templates (SHA-256 "
                f"{approved_printing['templates_sha256'][:16]}); these are "
                f"{printing['templates_sha256'][:16]} (testplan {printing['tool_version']}); "
                "nothing was issued",
                fix=f"issue it with testplan {approved_printing['tool_version']}, or amend "
                "and approve again",
            )
    record, pdf = proof.sign_issue(signer.private_key, plan.proof, base)
    pdf_sha256 = hashlib.sha256(pdf).hexdigest()
    revision = int(report["revision"])
    earlier = session.exec(
        select(ReportIssue).where(
            ReportIssue.manifest_id == manifest.id, ReportIssue.revision == revision
        )
    ).first()
    if earlier is not None:
        if earlier.pdf_sha256 == pdf_sha256:
            return pdf  # the same bytes printed again: one record
        when = earlier.issue_date or earlier.issued_at.date()
        raise RecordError(
            f"{report['number']} revision {revision} was issued on {when:%Y-%m-%d} as PDF "
            f"SHA-256 {earlier.pdf_sha256[:16]}; this print differs, so it was not issued",
            key="--issue-date",
            fix="print it again with the issue date, templates and issuer it was issued "
            f"with, or `testplan amend {campaign.reference} --why ...` for a new revision",
        )
    row = ReportIssue(
        campaign_id=campaign.id,
        manifest_id=manifest.id,
        report_number=report["number"],
        revision=revision,
        pdf_sha256=pdf_sha256,
        issued_by=plan.person.initials,
        issued_at=plan.issued_at,
        issue_date=issue_date,
        person_id=plan.person.id,
        key_id=plan.key.id,
        signature=record["signature"],
        base_sha256=record["base_sha256"],
    )
    session.add(row)
    session.flush()
    audit.append(
        session,
        actor=actor_of(plan.person, plan.key),
        action="report.issue",
        entity="report_issue",
        entity_id=row.id,
        campaign_id=campaign.id,
        new={
            "pdf_sha256": pdf_sha256,
            "revision": row.revision,
            "root": manifest.root,
            "issue_date": issue_date,
            "signature": record["signature"],
        },
    )
    return pdf


@dataclass
class Verification:
    ok: bool
    lines: list[str]


def verify(
    session: Session,
    *,
    pdf_sha256: str,
    claimed: dict[str, Any],
    trust: set[str] | None = None,
    content: bytes = b"",
) -> Verification:
    """Check a PDF against the store: issued record, signatures, and the records themselves.

    ``trust``: fingerprints of the exported manager keys (``keys trust``); every signing key
    must chain back to one of them. None: the founding manager's key in the store is the
    anchor, which is only as strong as the store file.
    """
    problems: list[str] = []
    lines: list[str] = []
    anchor = Trust(trust)
    if trust is None:
        lines.append(
            f"trust anchor: the founding manager's key in this store, {store_anchor(session)} "
            "(only as strong as the store file; give --trust FILE from `testplan keys trust`)"
        )
    else:
        lines.append(f"trust anchor: {len(trust)} manager key(s) from --trust")
    issue = session.exec(select(ReportIssue).where(ReportIssue.pdf_sha256 == pdf_sha256)).first()
    root = claimed.get("manifest_root")
    if issue is None:
        problems.append(
            "this PDF is not an issued report of this store: its SHA-256 matches no "
            "issued PDF (changed after issue, or never issued)"
        )
        manifest = (
            session.exec(select(Manifest).where(Manifest.root == root)).first() if root else None
        )
    else:
        manifest = session.get(Manifest, issue.manifest_id)
        lines.append(
            f"PDF: issued {issue.report_number} revision {issue.revision} on "
            f"{issue.issued_at:%Y-%m-%d %H:%M UTC}"
        )
        if audit.entry_of(session, "report_issue", issue.id) is None:
            problems.append("the issue's audit entry is gone (the trail's tail was cut)")
        if issue.signature is not None:
            problems.extend(_issue_signature_problems(session, issue, content, anchor))
    if manifest is None:
        problems.append("no signed manifest in the store matches this report")
        return Verification(False, lines + [f"problem: {p}" for p in problems])
    camp = session.get(CampaignRecord, manifest.campaign_id)
    assert camp is not None
    stored = json.loads(manifest.body_json)
    if _h(stored) != manifest.root:
        problems.append("the stored manifest no longer matches its root (changed behind the tool)")
    sigs = signatures_of(session, manifest)
    for role in ORDER:
        s = sigs.get(role)
        if s is None:
            problems.append(f"no {role} signature")
            continue
        person = session.get(Person, s.person_id)
        key = session.get(PersonKey, s.key_id)
        if person is None or key is None or key.person_id != person.id:
            problems.append(f"{role} signature: its key is not registered for the signer")
            continue
        context = json.loads(s.context_json) if s.context_json else None
        msg = message(manifest.root, role, camp.reference, person.initials, s.signed_at, context)
        problem = signature_problem(
            session,
            person=person,
            key=key,
            role=ROLES[role],
            at=s.signed_at,
            message=msg,
            signature=s.signature,
            trust=anchor,
        )
        if problem is not None:
            problems.append(f"{role} signature of {person.initials}: {problem}")
        elif context is not None and _signature_problems(session, s, person, context):
            problems.extend(
                f"{role} signature of {person.initials}: {p}"
                for p in _signature_problems(session, s, person, context)
            )
        else:
            lines.append(f"{role}: {person.name} ({person.initials}), key {key.fingerprint[:16]}")
    problems.extend(act_problems(session, camp.id, anchor))
    times = [(r, sigs[r].signed_at) for r in ORDER if r in sigs]
    for (before, t0), (after, t1) in zip(times, times[1:], strict=False):
        if t1 < t0:
            problems.append(
                f"{after} signature ({t1:%Y-%m-%d %H:%M} UTC) is dated before the {before} "
                f"one ({t0:%Y-%m-%d %H:%M} UTC)"
            )
    amendment = session.exec(
        select(Amendment).where(Amendment.supersedes_manifest_id == manifest.id)
    ).first()
    now = compute_items(session, camp)
    changed = _differences(stored, now, only_stored=amendment is not None)
    problems.extend(changed)
    if amendment is not None:
        lines.append(
            f"superseded: amended {amendment.at:%Y-%m-%d} ({amendment.reason}); a later "
            "revision replaces this report"
        )
    lines.append(f"manifest root {manifest.root} over {len(stored)} records")
    ok = not problems
    return Verification(ok, lines + [f"problem: {p}" for p in problems])


def _issue_signature_problems(
    session: Session, issue: ReportIssue, content: bytes, trust: Trust
) -> list[str]:
    """The issued file's signed tail against the issue record: the same signature over the
    same base, made by an approver with their own key at the time of issue."""
    from testplan.store import proof

    try:
        base, record = proof.split(content)
        exact = record is not None and base + proof.tail(base, record) == content
    except proof.NotAProofError:
        record, exact = None, False
    if record is None or record.get("signature") != issue.signature:
        return ["the PDF's issue signature is not the one recorded"]
    base_sha = hashlib.sha256(base).hexdigest()
    if not exact or record.get("base_sha256") != base_sha or base_sha != issue.base_sha256:
        return [
            "the PDF was changed or added to after it was issued (its signed tail does not fit)"
        ]
    person = session.get(Person, issue.person_id)
    key = session.get(PersonKey, issue.key_id)
    if person is None or key is None:
        return ["the issue's signer or key is no longer registered"]
    problem = signature_problem(
        session,
        person=person,
        key=key,
        role="approver",
        at=issue.issued_at,
        message=proof.issue_message(record),
        signature=issue.signature,
        trust=Trust(trust.fingerprints),
    )
    return [f"issue signature of {person.initials}: {problem}"] if problem else []


def _signature_problems(
    session: Session, sig: Signature, person: Person, context: dict[str, Any]
) -> list[str]:
    """A signature's context against the store now: the signer's record as signed, the
    audit chain still holding the head it saw and the entry the signing appended."""
    out = []
    if _h(_person_body(person)) != context["signer_sha256"]:
        out.append("the signer's person record (name or initials) changed since signing")
    problem = audit.head_problem(session, context["audit_head"])
    if problem:
        out.append(problem)
    if audit.entry_of(session, "signature", sig.id) is None:
        out.append("its audit entry is gone (the trail's tail was cut)")
    return out


def raise_if_failed(result: Verification) -> None:
    if not result.ok:
        n = sum(1 for ln in result.lines if ln.startswith("problem: "))
        raise CriteriaFailedError(f"verification failed: {n} problem(s)")
