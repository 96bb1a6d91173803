"""Query and record functions of the bench store (verb_noun, session keyword-only).

Every change goes through here and appends to the audit trail in the same transaction.
The caller owns the transaction (``Store.write``); nothing here commits.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import uuid
from collections.abc import Sequence
from dataclasses import dataclass
from difflib import get_close_matches
from typing import TYPE_CHECKING, Any
from zoneinfo import ZoneInfo

from sqlmodel import Session, col, select

from testplan.errors import RecordError
from testplan.store import audit
from testplan.store.identity import (
    Signer,
    Trust,
    act_message,
    actor_of,
    clean_text,
    find_person,
    require_role,
    sign_act,
    signature_problem,
)
from testplan.store.identity import actor_for as actor_for  # re-exported for the CLI
from testplan.store.identity import os_actor as os_actor  # re-exported for the CLI
from testplan.store.lock import ensure_open
from testplan.store.tables import (
    Attachment,
    Calibration,
    CampaignRecord,
    CriterionRecord,
    Deviation,
    Equipment,
    Observation,
    Person,
    PersonKey,
    PlanRevision,
    ProcedureRecord,
    RunEquipment,
    RunRecord,
    RunSpecimen,
    SpecimenRecord,
    utc_now,
)

if TYPE_CHECKING:  # pragma: no cover
    from testplan.domain.plan import Plan
    from testplan.reader import LoadedCampaign

RUN_STATES = ("planned", "running", "finished", "checked", "withdrawn")


def _near(word: str, options: Sequence[str]) -> str | None:
    hit = get_close_matches(word, list(options), n=1)
    return f"did you mean {hit[0]!r}?" if hit else None


# --- equipment --------------------------------------------------------------------------


def find_equipment(session: Session, tag: str, *, key: str = "--equipment") -> Equipment:
    item = session.exec(select(Equipment).where(Equipment.tag == tag)).first()
    if item is None:
        known = list(session.exec(select(Equipment.tag)).all())
        raise RecordError(
            f"no equipment {tag!r} in the register",
            key=key,
            fix=_near(tag, known) or "add it with `testplan equipment add`",
        )
    return item


def add_equipment(session: Session, *, item: Equipment, actor: str) -> Equipment:
    if session.exec(select(Equipment).where(Equipment.tag == item.tag)).first():
        raise RecordError(f"{item.tag!r} is already in the equipment register", key="TAG")
    session.add(item)
    session.flush()
    audit.append(
        session,
        actor=actor,
        action="equipment.add",
        entity="equipment",
        entity_id=item.id,
        new=audit.values_of(item, "tag", "description", "maker", "model", "serial"),
    )
    return item


def add_calibration(
    session: Session, *, tag: str, calibration: Calibration, actor: str
) -> Calibration:
    from testplan.domain.channels import CHANNELS

    item = find_equipment(session, tag, key="TAG")
    if calibration.channel not in CHANNELS:
        raise RecordError(
            f"unknown channel {calibration.channel!r}",
            key="--channel",
            fix=_near(calibration.channel, list(CHANNELS)) or "see `testplan equipment --help`",
        )
    if calibration.due_on <= calibration.calibrated_on:
        raise RecordError("the due date must be after the calibration date", key="--due")
    if calibration.uncertainty < 0 or calibration.coverage_k <= 0:
        raise RecordError("uncertainty must be >= 0 and k > 0", key="--uncertainty")
    if (
        calibration.range_min is not None
        and calibration.range_max is not None
        and calibration.range_min >= calibration.range_max
    ):
        raise RecordError("the range's low end must be below its high end", key="--range")
    calibration.equipment_id = item.id
    session.add(calibration)
    session.flush()
    audit.append(
        session,
        actor=actor,
        action="equipment.calibrate",
        entity="calibration",
        entity_id=calibration.id,
        new=audit.values_of(
            calibration,
            "equipment_id",
            "channel",
            "unit",
            "certificate",
            "provider",
            "calibrated_on",
            "due_on",
            "gain",
            "offset",
            "uncertainty",
            "coverage_k",
            "range_min",
            "range_max",
        ),
    )
    return calibration


def calibrations_in_force(
    session: Session, equipment: Equipment, on: dt.date
) -> dict[str, Calibration]:
    """The latest calibration per channel made on or before ``on``."""
    rows = session.exec(
        select(Calibration)
        .where(Calibration.equipment_id == equipment.id, col(Calibration.calibrated_on) <= on)
        .order_by(col(Calibration.calibrated_on), col(Calibration.created_at))
    ).all()
    latest: dict[str, Calibration] = {}
    for c in rows:
        latest[c.channel] = c
    return latest


def calibrations_valid(
    session: Session, item: Equipment, starts: dt.datetime, ends: dt.datetime
) -> dict[str, Calibration]:
    """The calibrations in force at ``starts``, when every one is valid through ``ends``.

    Raises RecordError (key ``--equipment``) naming why the item is out of service.
    """
    tag = item.tag
    cals = calibrations_in_force(session, item, starts.date())
    if not cals:
        raise RecordError(
            f"{tag} has no calibration on record made by {starts.date()}; it is out of service",
            key="--equipment",
            fix=f"record one with `testplan equipment calibrate {tag}`",
        )
    for channel, cal in sorted(cals.items()):
        if cal.due_on < ends.date():
            raise RecordError(
                f"{tag} is out of service for this run: its {channel} calibration "
                f"({cal.certificate}) was due {cal.due_on}, and the run is planned to end "
                f"{ends.date()}",
                key="--equipment",
                fix="recalibrate it or use other equipment",
            )
    return cals


def equipment_for_run(
    session: Session, starts: dt.datetime, ends: dt.datetime
) -> list[tuple[Equipment, str | None]]:
    """Every instrument with None when it may be used from ``starts`` to ``ends``, else why not."""
    out: list[tuple[Equipment, str | None]] = []
    for item in session.exec(select(Equipment).order_by(col(Equipment.tag))).all():
        try:
            calibrations_valid(session, item, starts, ends)
            out.append((item, None))
        except RecordError as err:
            out.append((item, str(err.args[0]) if err.args else "out of service"))
    return out


def list_equipment(session: Session) -> list[tuple[Equipment, list[Calibration]]]:
    items = session.exec(select(Equipment).order_by(col(Equipment.tag))).all()
    out = []
    for item in items:
        cals = session.exec(
            select(Calibration)
            .where(Calibration.equipment_id == item.id)
            .order_by(col(Calibration.channel), col(Calibration.calibrated_on))
        ).all()
        out.append((item, list(cals)))
    return out


# --- campaigns and plan revisions -------------------------------------------------------


@dataclass(frozen=True)
class StoredPlan:
    campaign: CampaignRecord
    revision: PlanRevision
    outcome: str  # "created", "revised" or "unchanged"
    runs_added: int = 0
    runs_moved: int = 0
    runs_kept: int = 0
    runs_withdrawn: int = 0


def _local(text: str, zone: ZoneInfo) -> dt.datetime:
    return dt.datetime.fromisoformat(text).replace(tzinfo=zone).astimezone(dt.UTC)


def store_campaign(
    session: Session,
    *,
    loaded: LoadedCampaign,
    plan: Plan,
    actor: str,
    why: str | None,
) -> StoredPlan:
    """Store a campaign's plan: a new campaign, a new revision, or nothing if unchanged."""
    info = loaded.campaign.info
    plan_json = audit.canonical(plan.to_json())
    plan_sha = hashlib.sha256(plan_json.encode()).hexdigest()
    source_sha = hashlib.sha256(loaded.text.encode()).hexdigest()
    campaign = session.exec(
        select(CampaignRecord).where(CampaignRecord.reference == info.reference)
    ).first()
    last: PlanRevision | None = None
    if campaign is None:
        campaign = CampaignRecord(
            reference=info.reference,
            title=info.title,
            client=info.client,
            laboratory=info.laboratory,
            location=info.location,
        )
        session.add(campaign)
        session.flush()
        audit.append(
            session,
            actor=actor,
            action="campaign.create",
            entity="campaign",
            entity_id=campaign.id,
            campaign_id=campaign.id,
            why=why,
            new=audit.values_of(campaign, "reference", "title", "client", "laboratory", "location"),
        )
    else:
        last = session.exec(
            select(PlanRevision)
            .where(PlanRevision.campaign_id == campaign.id)
            .order_by(col(PlanRevision.number).desc())
        ).first()
        if last is not None and last.plan_sha256 == plan_sha and last.source_sha256 == source_sha:
            return StoredPlan(campaign, last, "unchanged")
        _open(session, campaign.id)
        old = audit.values_of(campaign, "title", "client", "laboratory", "location")
        campaign.title, campaign.client = info.title, info.client
        campaign.laboratory, campaign.location = info.laboratory, info.location
        new = audit.values_of(campaign, "title", "client", "laboratory", "location")
        if old != new:
            session.add(campaign)
            audit.append(
                session,
                actor=actor,
                action="campaign.update",
                entity="campaign",
                entity_id=campaign.id,
                campaign_id=campaign.id,
                why=why,
                old=old,
                new=new,
            )
    revision = PlanRevision(
        campaign_id=campaign.id,
        number=(last.number + 1) if last else 1,
        source_name=str(loaded.path.name),
        source_sha256=source_sha,
        source_text=loaded.text,
        plan_json=plan_json,
        plan_sha256=plan_sha,
        reason=why,
        created_by=actor,
    )
    session.add(revision)
    session.flush()
    for proc in plan.procedures:
        body = proc.to_json()
        row = ProcedureRecord(
            revision_id=revision.id,
            key=proc.id,
            family=proc.family,
            code=proc.code,
            title=proc.title,
            standard=proc.standard,
            edition=proc.edition,
            clause=proc.clause,
            status=proc.status,
            duration_h=proc.duration_h,
            body_json=audit.canonical(body),
        )
        session.add(row)
        session.flush()
        for c in proc.criteria:
            session.add(
                CriterionRecord(
                    procedure_id=row.id,
                    key=c.id,
                    quantity=c.quantity,
                    comparison=c.comparison,
                    evaluated=c.when,
                    unit=c.unit,
                    min=c.min,
                    max=c.max,
                    text=c.text,
                )
            )
    audit.append(
        session,
        actor=actor,
        action="plan.revise" if last else "plan.create",
        entity="plan_revision",
        entity_id=revision.id,
        campaign_id=campaign.id,
        why=why,
        old={"revision": last.number, "plan_sha256": last.plan_sha256} if last else None,
        new={"revision": revision.number, "plan_sha256": plan_sha, "source_sha256": source_sha},
    )
    counts = _store_runs(session, campaign, revision, plan, actor)
    return StoredPlan(campaign, revision, "revised" if last else "created", *counts)


def _store_runs(
    session: Session,
    campaign: CampaignRecord,
    revision: PlanRevision,
    plan: Plan,
    actor: str,
) -> tuple[int, int, int, int]:
    """Specimens and runs of a revision. Started runs stay on the revision they ran against."""
    if plan.schedule is None or plan.specimens is None:
        return 0, 0, 0, 0
    zone = ZoneInfo(str(plan.schedule.get("timezone", "UTC")))
    specimens = {
        s.serial: s
        for s in session.exec(
            select(SpecimenRecord).where(SpecimenRecord.campaign_id == campaign.id)
        ).all()
    }
    for spec in plan.specimens:
        if spec["serial"] not in specimens:
            srow = SpecimenRecord(campaign_id=campaign.id, serial=spec["serial"], leg=spec["leg"])
            session.add(srow)
            session.flush()
            specimens[srow.serial] = srow
            audit.append(
                session,
                actor=actor,
                action="specimen.add",
                entity="specimen",
                entity_id=srow.id,
                campaign_id=campaign.id,
                new={"serial": srow.serial, "leg": srow.leg},
            )
    existing = {
        r.key: r
        for r in session.exec(select(RunRecord).where(RunRecord.campaign_id == campaign.id)).all()
    }
    added = moved = kept = withdrawn = 0
    planned_keys = set()
    for run in plan.schedule["runs"]:
        planned_keys.add(run["id"])
        start, end = _local(run["start"], zone), _local(run["end"], zone)
        row = existing.get(run["id"])
        if row is not None and row.state not in ("planned", "withdrawn"):
            kept += 1
            continue
        if row is None:
            row = RunRecord(
                campaign_id=campaign.id,
                revision_id=revision.id,
                key=run["id"],
                procedure_key=run["procedure"],
                leg=run["leg"],
                facility=run["facility"],
                planned_start=start,
                planned_end=end,
            )
            session.add(row)
            session.flush()
            added += 1
            action = "run.plan"
        else:
            row.revision_id, row.procedure_key, row.leg = revision.id, run["procedure"], run["leg"]
            row.facility, row.planned_start, row.planned_end = run["facility"], start, end
            row.state = "planned"
            session.add(row)
            moved += 1
            action = "run.replan"
            for link in session.exec(select(RunSpecimen).where(RunSpecimen.run_id == row.id)):
                session.delete(link)
            session.flush()
        for serial in run["specimens"]:
            session.add(RunSpecimen(run_id=row.id, specimen_id=specimens[serial].id))
        audit.append(
            session,
            actor=actor,
            action=action,
            entity="run",
            entity_id=row.id,
            campaign_id=campaign.id,
            new={
                "key": row.key,
                "revision": revision.number,
                "planned_start": start,
                "planned_end": end,
                "specimens": list(run["specimens"]),
            },
        )
    for key, row in existing.items():
        if key not in planned_keys and row.state == "planned":
            row.state = "withdrawn"
            session.add(row)
            withdrawn += 1
            audit.append(
                session,
                actor=actor,
                action="run.withdraw",
                entity="run",
                entity_id=row.id,
                campaign_id=campaign.id,
                old={"state": "planned"},
                new={"state": "withdrawn", "revision": revision.number},
            )
    session.flush()
    return added, moved, kept, withdrawn


def find_campaign(session: Session, reference: str | None) -> CampaignRecord:
    """The campaign named, or the only one in the store."""
    if reference is not None:
        found = session.exec(
            select(CampaignRecord).where(CampaignRecord.reference == reference)
        ).first()
        if found is None:
            known = list(session.exec(select(CampaignRecord.reference)).all())
            raise RecordError(
                f"no campaign {reference!r} in the store",
                key="--campaign",
                fix=_near(reference, known),
            )
        return found
    all_ = session.exec(select(CampaignRecord)).all()
    if len(all_) == 1:
        return all_[0]
    if not all_:
        raise RecordError("the store holds no campaign", fix="run `testplan init CAMPAIGN_FILE`")
    raise RecordError(
        "the store holds several campaigns",
        key="--campaign",
        fix="name one with --campaign: " + ", ".join(sorted(c.reference for c in all_)),
    )


def find_run(session: Session, key: str, *, campaign: str | None = None) -> RunRecord:
    """A run by its id (``water-8@aged-1``), in the named or only campaign holding it."""
    stmt = select(RunRecord).where(RunRecord.key == key)
    if campaign is not None:
        stmt = stmt.where(RunRecord.campaign_id == find_campaign(session, campaign).id)
    rows = session.exec(stmt).all()
    if len(rows) == 1:
        return rows[0]
    if not rows:
        known = list(session.exec(select(RunRecord.key)).all())
        raise RecordError(
            f"no run {key!r} in the store",
            key="RUN",
            fix=_near(key, known) or "list runs with `testplan record list`",
        )
    raise RecordError(
        f"run {key!r} is in several campaigns",
        key="--campaign",
        fix="name the campaign with --campaign",
    )


def run_procedure(session: Session, run: RunRecord) -> dict[str, Any]:
    """The procedure body (plan JSON) of a run, from the revision it is linked to."""
    row = session.exec(
        select(ProcedureRecord).where(
            ProcedureRecord.revision_id == run.revision_id, ProcedureRecord.key == run.procedure_key
        )
    ).one()
    body: dict[str, Any] = json.loads(row.body_json)
    return body


def run_specimens(session: Session, run: RunRecord) -> list[SpecimenRecord]:
    return list(
        session.exec(
            select(SpecimenRecord)
            .join(RunSpecimen, col(RunSpecimen.specimen_id) == col(SpecimenRecord.id))
            .where(RunSpecimen.run_id == run.id)
            .order_by(col(SpecimenRecord.serial))
        ).all()
    )


def list_runs(session: Session, campaign: str | None) -> list[RunRecord]:
    c = find_campaign(session, campaign)
    return list(
        session.exec(
            select(RunRecord)
            .where(RunRecord.campaign_id == c.id)
            .order_by(col(RunRecord.planned_start), col(RunRecord.key))
        ).all()
    )


# --- bench records ----------------------------------------------------------------------


def _open(session: Session, campaign_id: uuid.UUID) -> None:
    """Refuse changes to an approved (locked) campaign."""
    ensure_open(session, campaign_id)


def _amendment_open(session: Session, run: RunRecord) -> bool:
    """An open amendment lets observations be added to runs already checked (every run is
    checked before sign-off, so an amendment always follows the checks)."""
    from testplan.store.tables import Amendment

    found = session.exec(select(Amendment).where(Amendment.campaign_id == run.campaign_id)).first()
    return found is not None


def _state(run: RunRecord, allowed: Sequence[str], doing: str) -> None:
    if run.state not in allowed:
        told = {
            "planned": "it has not been started (`testplan record start`)",
            "running": "it is still running (`testplan record finish`)",
            "finished": "it is finished",
            "checked": "it is finished and its data checked",
            "withdrawn": "it was withdrawn from the plan",
            "invalid": "it was declared invalid and a repeat planned",
        }[run.state]
        raise RecordError(f"cannot {doing} run {run.key}: {told}", key="RUN")


@dataclass(frozen=True)
class StartSheet:
    """What ``record start`` records, already parsed to plan units."""

    operator: str
    equipment: tuple[str, ...]
    ambient_temperature_c: float
    ambient_humidity_pct: float
    ambient_pressure_hpa: float
    state_ok: bool
    state_notes: tuple[tuple[int, str], ...] = ()
    preconditioning: str | None = None
    at: dt.datetime | None = None
    deviation: str | None = None
    deviation_reason: str | None = None
    deviation_approver: Signer | None = None
    external_provider: str | None = None


def start_run(session: Session, *, run: RunRecord, sheet: StartSheet) -> list[str]:
    """Start a run; returns warnings (e.g. lab ambient outside the usual band)."""
    _open(session, run.campaign_id)
    _state(run, ("planned",), "start")
    operator = require_role(session, sheet.operator, "operator", key="--operator")
    started = sheet.at or utc_now()
    planned = run.planned_end - run.planned_start
    ends = started + planned
    proc = run_procedure(session, run)
    checklist: list[str] = list(proc.get("specimen_state", []))
    notes = dict(sheet.state_notes)
    for n in notes:
        if not 1 <= n <= len(checklist):
            raise RecordError(
                f"checklist item {n} does not exist (the list has {len(checklist)})",
                key="--state-differs",
            )
    if not sheet.state_ok:
        open_items = [i for i in range(1, len(checklist) + 1) if i not in notes]
        if open_items:
            i = open_items[0]
            raise RecordError(
                f"specimen state item {i} not confirmed: {checklist[i - 1]!r}",
                key="--state-ok",
                fix="confirm the checklist with --state-ok, or describe a difference with "
                f"--state-differs '{i}: ...'",
            )
    if not sheet.equipment:
        raise RecordError("name the equipment used with --equipment", key="--equipment")
    used: list[tuple[Equipment, Calibration]] = []
    for tag in sheet.equipment:
        item = find_equipment(session, tag)
        cals = calibrations_valid(session, item, started, ends)
        used.extend((item, cal) for _, cal in sorted(cals.items()))
    warnings = []
    if not 15 <= sheet.ambient_temperature_c <= 35 or not 25 <= sheet.ambient_humidity_pct <= 75:
        warnings.append("lab ambient outside 15-35 degC / 25-75 %RH; recorded as given")
    if not 860 <= sheet.ambient_pressure_hpa <= 1060:
        warnings.append("barometric pressure outside 860-1060 hPa; recorded as given")
    if sheet.deviation is not None:
        if not sheet.deviation_reason or not sheet.deviation_approver:
            raise RecordError(
                "a deviation needs a reason and an authorised approver",
                key="--deviation",
                fix="add --deviation-reason '...' and --approved-by INITIALS --key FILE",
            )
    old = audit.values_of(run, "state")
    run.state = "running"
    run.operator_id = operator.id
    run.started_at = started
    run.ambient_temperature_c = sheet.ambient_temperature_c
    run.ambient_humidity_pct = sheet.ambient_humidity_pct
    run.ambient_pressure_hpa = sheet.ambient_pressure_hpa
    run.preconditioning = sheet.preconditioning
    run.external_provider = sheet.external_provider
    run.specimen_state_json = audit.canonical(
        [
            {"item": text, "as_required": (i + 1) not in notes, "note": notes.get(i + 1)}
            for i, text in enumerate(checklist)
        ]
    )
    session.add(run)
    for item, cal in used:
        session.add(RunEquipment(run_id=run.id, equipment_id=item.id, calibration_id=cal.id))
    session.flush()
    audit.append(
        session,
        actor=operator.initials,
        action="run.start",
        entity="run",
        entity_id=run.id,
        campaign_id=run.campaign_id,
        old=old,
        new={
            **audit.values_of(
                run,
                "state",
                "started_at",
                "ambient_temperature_c",
                "ambient_humidity_pct",
                "ambient_pressure_hpa",
                "preconditioning",
                "specimen_state_json",
                "external_provider",
            ),
            "calibrations": [str(c.id) for _, c in used],
        },
    )
    if sheet.deviation is not None:
        assert sheet.deviation_reason is not None and sheet.deviation_approver is not None
        add_deviation(
            session,
            run=run,
            description=sheet.deviation,
            reason=sheet.deviation_reason,
            approver=sheet.deviation_approver,
            recorded_by=operator.initials,
        )
    return warnings


def deviation_message(row: Deviation, run: RunRecord, approver: str) -> bytes:
    """What the approver signs: the deviation, its run, reason and time."""
    return act_message(
        "deviation.approve",
        {
            "deviation": str(row.id),
            "run": str(run.id),
            "run_key": run.key,
            "description": row.description,
            "reason": row.reason,
            "approver": approver,
            "at": row.recorded_at.astimezone(dt.UTC).isoformat(),
            # Only when set: a deviation approved before --covers existed verifies as signed.
            **({"covers": row.criterion_key} if row.criterion_key is not None else {}),
        },
    )


def add_deviation(
    session: Session,
    *,
    run: RunRecord,
    description: str,
    reason: str,
    approver: Signer,
    recorded_by: str,
    covers: str | None = None,
    at: dt.datetime | None = None,
) -> Deviation:
    """A departure from the method, allowed only with a reason and the approval of an
    authorised approver signed with their own key; ``covers`` names the condition
    criterion whose failure it accepts (signed with it)."""
    _open(session, run.campaign_id)
    _state(run, ("planned", "running", "finished"), "record a deviation on")
    if not description.strip() or not reason.strip():
        raise RecordError("a deviation needs a description and a reason", key="--reason")
    description = clean_text(description, key="--description")
    reason = clean_text(reason, key="--reason")
    if covers is not None:
        known = [c["id"] for c in run_procedure(session, run).get("criteria", [])]
        if covers not in known:
            raise RecordError(
                f"run {run.key} has no criterion {covers!r}",
                key="--covers",
                fix=f"one of: {', '.join(known)}",
            )
    by = find_person(session, recorded_by)
    recorded = _not_before_start(run, at, "deviation")
    row = Deviation(
        id=uuid.uuid4(),
        run_id=run.id,
        description=description,
        reason=reason,
        approved_by_id=find_person(session, approver.initials, key=approver.option).id,
        recorded_by_id=by.id,
        recorded_at=recorded,
        criterion_key=covers,
    )
    approved, key, signature = sign_act(
        session,
        approver,
        role="approver",
        at=row.recorded_at,
        message=lambda person: deviation_message(row, run, person.initials),
    )
    row.approved_by_id = approved.id
    row.approval_key_id = key.id
    row.approval_signature = signature
    session.add(row)
    session.flush()
    audit.append(
        session,
        actor=by.initials,
        action="run.deviation",
        entity="deviation",
        entity_id=row.id,
        campaign_id=run.campaign_id,
        why=reason,
        new={
            "run": run.key,
            "description": description,
            "approved_by": approved.initials,
            "approval_key": key.fingerprint,
            "covers": covers,
        },
    )
    return row


def finish_run(
    session: Session, *, run: RunRecord, by: str, at: dt.datetime | None, note: str | None
) -> RunRecord:
    _open(session, run.campaign_id)
    _state(run, ("running",), "finish")
    person = require_role(session, by, "operator")
    finished = at or utc_now()
    assert run.started_at is not None
    if finished <= run.started_at:
        raise RecordError(
            f"finish time {finished.isoformat()} is not after the start "
            f"{run.started_at.isoformat()}",
            key="--at",
        )
    run.state, run.finished_at, run.finish_note = "finished", finished, note
    session.add(run)
    audit.append(
        session,
        actor=person.initials,
        action="run.finish",
        entity="run",
        entity_id=run.id,
        campaign_id=run.campaign_id,
        old={"state": "running"},
        new=audit.values_of(run, "state", "finished_at", "finish_note"),
    )
    return run


def check_message(run: RunRecord, checker: str) -> bytes:
    """What the checker signs: the run, when it was checked and the note."""
    assert run.checked_at is not None
    return act_message(
        "run.check",
        {
            "run": str(run.id),
            "run_key": run.key,
            "checker": checker,
            "checked_at": run.checked_at.astimezone(dt.UTC).isoformat(),
            "note": run.check_note,
        },
    )


def check_run(
    session: Session,
    *,
    run: RunRecord,
    by: Signer,
    note: str | None,
    at: dt.datetime | None = None,
) -> RunRecord:
    """The data check by a second authorised person (not the operator), signed with the
    checker's own key; the checker role is checked as granted at the check time."""
    _open(session, run.campaign_id)
    _state(run, ("finished",), "check")
    checked = at or utc_now()
    assert run.finished_at is not None
    if checked < run.finished_at:
        raise RecordError(
            f"check time {checked.isoformat()} is before the run finished "
            f"({run.finished_at.isoformat()})",
            key="--at",
            fix=None if at is not None else "give the time of the data check with --at",
        )
    note = clean_text(note, key="--note") if note is not None else None
    checker = require_role(session, by.initials, "checker", key=by.option, at=checked)
    if checker.id == run.operator_id:
        raise RecordError(
            f"{checker.initials} ran this run; the data check needs a second person",
            key=by.option,
        )
    run.checked_at, run.check_note = checked, note
    checker, key, signature = sign_act(
        session,
        by,
        role="checker",
        at=checked,
        message=lambda person: check_message(run, person.initials),
    )
    run.state, run.checker_id, run.check_key_id, run.check_signature = (
        "checked",
        checker.id,
        key.id,
        signature,
    )
    session.add(run)
    audit.append(
        session,
        actor=actor_of(checker, key),
        action="run.check",
        entity="run",
        entity_id=run.id,
        campaign_id=run.campaign_id,
        old={"state": "finished"},
        new=audit.values_of(run, "state", "checked_at", "check_note"),
    )
    return run


def act_problems(session: Session, campaign_id: uuid.UUID, trust: Trust) -> list[str]:
    """What does not stand among the campaign's signed data checks and deviation approvals:
    each needs its person's key, active then, the role held then, and (``trust``) an
    enrolment back to the anchor. Acts recorded before signed acts existed (schema 0010)
    carry no signature and are named only under an exported anchor."""
    out = []
    runs = session.exec(select(RunRecord).where(RunRecord.campaign_id == campaign_id)).all()
    acts: list[tuple[str, uuid.UUID, uuid.UUID | None, str, dt.datetime, Any, str | None]] = []
    for run in runs:
        if run.checker_id is not None and run.checked_at is not None:
            acts.append(
                (
                    f"data check of {run.key}",
                    run.checker_id,
                    run.check_key_id,
                    "checker",
                    run.checked_at,
                    lambda who, run=run: check_message(run, who),
                    run.check_signature,
                )
            )
        for d in session.exec(select(Deviation).where(Deviation.run_id == run.id)):
            acts.append(
                (
                    f"deviation approval on {run.key}",
                    d.approved_by_id,
                    d.approval_key_id,
                    "approver",
                    d.recorded_at,
                    lambda who, d=d, run=run: deviation_message(d, run, who),
                    d.approval_signature,
                )
            )
    for label, person_id, key_id, role, at, message, signature in acts:
        person = session.get(Person, person_id)
        key = session.get(PersonKey, key_id) if key_id else None
        if person is None:
            out.append(f"{label}: its person is not in the register")
            continue
        if key is None or signature is None:
            if trust.fingerprints is not None:
                out.append(f"{label} by {person.initials}: not signed with a key")
            continue
        problem = signature_problem(
            session,
            person=person,
            key=key,
            role=role,
            at=at,
            message=message(person.initials),
            signature=signature,
            trust=trust,
        )
        if problem is not None:
            out.append(f"{label} by {person.initials}: {problem}")
    return out


def receive_specimens(
    session: Session,
    *,
    campaign: str | None,
    serials: Sequence[str],
    on: dt.date,
    condition: str,
    by: str,
) -> list[SpecimenRecord]:
    """Record the date of receipt and the condition on receipt of specimens."""
    camp = find_campaign(session, campaign)
    _open(session, camp.id)
    person = find_person(session, by)
    known = {
        s.serial: s
        for s in session.exec(
            select(SpecimenRecord).where(SpecimenRecord.campaign_id == camp.id)
        ).all()
    }
    out = []
    for serial in serials:
        spec = known.get(serial)
        if spec is None:
            raise RecordError(
                f"no specimen {serial!r} in campaign {camp.reference}",
                key="SERIAL",
                fix=_near(serial, list(known)),
            )
        old = audit.values_of(spec, "received_on", "receipt_condition")
        spec.received_on, spec.receipt_condition = on, condition
        session.add(spec)
        audit.append(
            session,
            actor=person.initials,
            action="specimen.receive",
            entity="specimen",
            entity_id=spec.id,
            campaign_id=camp.id,
            old=old,
            new=audit.values_of(spec, "received_on", "receipt_condition"),
        )
        out.append(spec)
    return out


# --- logger data ------------------------------------------------------------------------


# --- observations -----------------------------------------------------------------------


@dataclass(frozen=True)
class ObservationIn:
    """One observation ready to store: kind, data in plan units, optional photo."""

    kind: str
    data: dict[str, Any]
    specimen: str | None = None
    checkpoint: str | None = None
    photo_name: str | None = None
    photo: bytes | None = None


def _not_before_start(run: RunRecord, at: dt.datetime | None, what: str) -> dt.datetime:
    """The time a record is made at: now, or the given time, which is not before its run
    started."""
    if at is None:
        return utc_now()
    when = at.astimezone(dt.UTC)
    if run.started_at is not None and when < run.started_at.astimezone(dt.UTC):
        raise RecordError(
            f"{what} time {when:%Y-%m-%d %H:%M} UTC is before run {run.key} started "
            f"({run.started_at.astimezone(dt.UTC):%Y-%m-%d %H:%M} UTC)",
            key="--at",
        )
    return when


def add_observations(
    session: Session,
    *,
    run: RunRecord,
    items: Sequence[ObservationIn],
    by: str,
    at: dt.datetime | None = None,
) -> list[Observation]:
    _open(session, run.campaign_id)
    if not (run.state == "checked" and _amendment_open(session, run)):
        _state(run, ("running", "finished"), "record observations on")
    person = require_role(session, by, "operator")
    recorded = _not_before_start(run, at, "observation")
    serials = {s.serial: s for s in run_specimens(session, run)}
    out = []
    for item in items:
        specimen_id = None
        if item.specimen is not None:
            spec = serials.get(item.specimen)
            if spec is None:
                raise RecordError(
                    f"specimen {item.specimen!r} is not on run {run.key} "
                    f"(it has {', '.join(serials)})",
                    key="specimen",
                    fix=_near(item.specimen, list(serials)),
                )
            specimen_id = spec.id
        for field_name in ("meter", "gauge"):
            if item.data.get(field_name):
                find_equipment(session, item.data[field_name], key=f"{item.kind}.{field_name}")
        attachment_id = None
        if item.photo is not None:
            attachment_id = _attach(session, item.photo_name or "photo", item.photo)
        obs = Observation(
            run_id=run.id,
            specimen_id=specimen_id,
            kind=item.kind,
            checkpoint=item.checkpoint,
            data_json=audit.canonical(item.data),
            attachment_id=attachment_id,
            recorded_by_id=person.id,
            recorded_at=recorded,
        )
        session.add(obs)
        session.flush()
        audit.append(
            session,
            actor=person.initials,
            action="observation.add",
            entity="observation",
            entity_id=obs.id,
            campaign_id=run.campaign_id,
            new={
                "run": run.key,
                "kind": item.kind,
                "specimen": item.specimen,
                "checkpoint": item.checkpoint,
                "data": item.data,
                "attachment": str(attachment_id) if attachment_id else None,
            },
        )
        out.append(obs)
    return out


def _attach(session: Session, name: str, content: bytes) -> uuid.UUID:
    import mimetypes

    sha = hashlib.sha256(content).hexdigest()
    found = session.exec(select(Attachment).where(Attachment.sha256 == sha)).first()
    if found is not None:
        return found.id
    media = mimetypes.guess_type(name)[0] or "application/octet-stream"
    row = Attachment(sha256=sha, name=name, media_type=media, size=len(content), content=content)
    session.add(row)
    session.flush()
    return row.id
