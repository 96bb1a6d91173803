"""Query and record functions of the bench store (verb_noun, session keyword-only).

Every change goes through here and appends to the audit trail in the same transaction.
The caller owns the transaction (``Store.write``); nothing here commits.
"""

from __future__ import annotations

import datetime as dt
import getpass
import hashlib
import json
import uuid
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from difflib import get_close_matches
from typing import TYPE_CHECKING, Any
from zoneinfo import ZoneInfo

from sqlmodel import Session, col, select

from testplan import __version__
from testplan.errors import RecordError
from testplan.store import audit
from testplan.store.tables import (
    Attachment,
    Calibration,
    CampaignRecord,
    CriterionRecord,
    Deviation,
    Equipment,
    LoggerChannel,
    Observation,
    Person,
    PersonRole,
    PlanRevision,
    ProcedureRecord,
    RawFile,
    RunEquipment,
    RunRecord,
    RunSpecimen,
    SpecimenRecord,
    utc_now,
)

if TYPE_CHECKING:  # pragma: no cover
    from testplan.domain.plan import Plan
    from testplan.importers.logger_csv import LoggerData
    from testplan.reader import LoadedCampaign

ROLES = ("operator", "checker", "preparer", "reviewer", "approver")
RUN_STATES = ("planned", "running", "finished", "checked", "withdrawn")


def _near(word: str, options: Sequence[str]) -> str | None:
    hit = get_close_matches(word, list(options), n=1)
    return f"did you mean {hit[0]!r}?" if hit else None


def os_actor() -> str:
    """Who is at the keyboard when no registered person is named."""
    try:
        return f"os:{getpass.getuser()}"
    except (KeyError, OSError):
        return "os:unknown"


# --- people -----------------------------------------------------------------------------


def find_person(session: Session, initials: str, *, key: str = "--by") -> Person:
    person = session.exec(select(Person).where(Person.initials == initials)).first()
    if person is None:
        known = list(session.exec(select(Person.initials)).all())
        raise RecordError(
            f"no person {initials!r} in the people register",
            key=key,
            fix=_near(initials, known) or "add them with `testplan people add`",
        )
    return person


def roles_of(session: Session, person: Person) -> set[str]:
    rows = session.exec(select(PersonRole.role).where(PersonRole.person_id == person.id))
    return set(rows.all())


def require_role(session: Session, initials: str, role: str, *, key: str = "--by") -> Person:
    """The person, if registered and authorised for ``role``; else RecordError."""
    person = find_person(session, initials, key=key)
    if role not in roles_of(session, person):
        raise RecordError(
            f"{person.name} ({person.initials}) is not authorised as {role}",
            key=key,
            fix=f"authorise them with `testplan people authorise {initials} --role {role}`",
        )
    return person


def actor_for(session: Session, initials: str | None) -> str:
    """The audit actor: a registered person's initials, or the OS user."""
    if initials is None:
        return os_actor()
    return find_person(session, initials).initials


def add_person(
    session: Session,
    *,
    initials: str,
    name: str,
    roles: Sequence[str],
    actor: str,
    title: str | None = None,
) -> Person:
    if session.exec(select(Person).where(Person.initials == initials)).first():
        raise RecordError(f"{initials!r} is already in the people register", key="INITIALS")
    for role in roles:
        _check_role(role)
    person = Person(initials=initials, name=name, title=title)
    session.add(person)
    session.flush()
    for role in sorted(set(roles)):
        session.add(PersonRole(person_id=person.id, role=role))
    audit.append(
        session,
        actor=actor,
        action="person.add",
        entity="person",
        entity_id=person.id,
        new={"initials": initials, "name": name, "roles": sorted(set(roles)), "title": title},
    )
    return person


def _check_role(role: str) -> None:
    if role not in ROLES:
        raise RecordError(
            f"unknown role {role!r}; roles are {', '.join(ROLES)}",
            key="--role",
            fix=_near(role, ROLES),
        )


def authorise_person(
    session: Session, *, initials: str, roles: Sequence[str], actor: str, why: str | None
) -> Person:
    person = find_person(session, initials, key="INITIALS")
    before = sorted(roles_of(session, person))
    for role in roles:
        _check_role(role)
        if role not in before:
            session.add(PersonRole(person_id=person.id, role=role))
    audit.append(
        session,
        actor=actor,
        action="person.authorise",
        entity="person",
        entity_id=person.id,
        why=why,
        old={"roles": before},
        new={"roles": sorted(set(before) | set(roles))},
    )
    return person


def list_people(session: Session) -> list[tuple[Person, list[str]]]:
    people = session.exec(select(Person).order_by(col(Person.initials))).all()
    return [(p, sorted(roles_of(session, p))) for p in people]


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
    from testplan.store.signoff import ensure_open

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
    deviation_approver: str | None = None
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
        cals = calibrations_in_force(session, item, started.date())
        if not cals:
            raise RecordError(
                f"{tag} has no calibration on record made by {started.date()}; it is out of "
                "service",
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
            used.append((item, cal))
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
                fix="add --deviation-reason '...' and --approved-by INITIALS",
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


def add_deviation(
    session: Session,
    *,
    run: RunRecord,
    description: str,
    reason: str,
    approver: str,
    recorded_by: str,
    covers: str | None = None,
) -> Deviation:
    """A departure from the method, allowed only with an authorised approver and a reason;
    ``covers`` names the condition criterion whose failure it accepts."""
    _open(session, run.campaign_id)
    _state(run, ("planned", "running", "finished"), "record a deviation on")
    if not description.strip() or not reason.strip():
        raise RecordError("a deviation needs a description and a reason", key="--reason")
    if covers is not None:
        known = [c["id"] for c in run_procedure(session, run).get("criteria", [])]
        if covers not in known:
            raise RecordError(
                f"run {run.key} has no criterion {covers!r}",
                key="--covers",
                fix=f"one of: {', '.join(known)}",
            )
    by = find_person(session, recorded_by)
    approved = require_role(session, approver, "approver", key="--approved-by")
    row = Deviation(
        run_id=run.id,
        description=description,
        reason=reason,
        approved_by_id=approved.id,
        recorded_by_id=by.id,
        criterion_key=covers,
    )
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


def check_run(
    session: Session,
    *,
    run: RunRecord,
    by: str,
    note: str | None,
    at: dt.datetime | None = None,
) -> RunRecord:
    """The data check by a second authorised person (not the operator)."""
    _open(session, run.campaign_id)
    _state(run, ("finished",), "check")
    checker = require_role(session, by, "checker")
    if checker.id == run.operator_id:
        raise RecordError(
            f"{checker.initials} ran this run; the data check needs a second person",
            key="--by",
        )
    checked = at or utc_now()
    assert run.finished_at is not None
    if at is not None and checked < run.finished_at:
        raise RecordError(
            f"check time {checked.isoformat()} is before the run finished "
            f"({run.finished_at.isoformat()})",
            key="--at",
        )
    run.state, run.checker_id, run.checked_at, run.check_note = (
        "checked",
        checker.id,
        checked,
        note,
    )
    session.add(run)
    audit.append(
        session,
        actor=checker.initials,
        action="run.check",
        entity="run",
        entity_id=run.id,
        campaign_id=run.campaign_id,
        old={"state": "finished"},
        new=audit.values_of(run, "state", "checked_at", "check_note"),
    )
    return run


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


def import_logger_data(
    session: Session,
    *,
    run: RunRecord,
    data: LoggerData,
    by: str,
    progress: Callable[[int], None] | None = None,
) -> RawFile:
    """Store a logger file byte for byte, its channel map and its samples, as one unit."""
    from testplan.store.samples import digest_arrays, insert_samples

    _open(session, run.campaign_id)
    _state(run, ("running", "finished"), "import data into")
    operator = require_role(session, by, "operator")
    used = {
        (e.equipment_id, c.channel): c
        for e, c in session.exec(
            select(RunEquipment, Calibration)
            .join(Calibration, col(Calibration.id) == col(RunEquipment.calibration_id))
            .where(RunEquipment.run_id == run.id)
        ).all()
    }
    serials = {s.serial: s.id for s in run_specimens(session, run)}
    channel_rows = []
    for number, m in enumerate(data.channels):
        equipment_id = calibration_id = None
        specimen_id = None
        if m.specimen is not None:
            specimen_id = serials.get(m.specimen)
            if specimen_id is None:
                raise RecordError(
                    f"specimen {m.specimen!r} is not on run {run.key} "
                    f"(it has {', '.join(serials)})",
                    key="--map",
                )
        if m.equipment is not None:
            item = find_equipment(session, m.equipment, key="--map")
            cal = used.get((item.id, m.quantity))
            if cal is None:
                raise RecordError(
                    f"{m.equipment} was not recorded on run {run.key} with a {m.quantity} "
                    "calibration",
                    key="--map",
                    fix="name the equipment when starting the run, or map another instrument",
                )
            equipment_id, calibration_id = item.id, cal.id
        channel_rows.append((number, m, equipment_id, calibration_id, specimen_id))
    first = dt.datetime.fromtimestamp(int(data.t_us.min()) / 1e6, dt.UTC)
    last = dt.datetime.fromtimestamp(int(data.t_us.max()) / 1e6, dt.UTC)
    raw = RawFile(
        run_id=run.id,
        name=data.name,
        sha256=data.sha256,
        size=len(data.content),
        content=data.content,
        layout=data.layout,
        timezone=data.timezone,
        read_options_json=audit.canonical(data.options),
        tool_version=__version__,
        operator_id=operator.id,
        samples=data.count,
        first_at=first,
        last_at=last,
        samples_sha256=digest_arrays(data.t_us, data.channel, data.value),
    )
    session.add(raw)
    session.flush()
    for number, m, equipment_id, calibration_id, specimen_id in channel_rows:
        session.add(
            LoggerChannel(
                raw_file_id=raw.id,
                number=number,
                quantity=m.quantity,
                source=m.source,
                source_unit=m.unit,
                unit=m.plan_unit,
                scale=m.scale,
                offset=m.offset,
                equipment_id=equipment_id,
                calibration_id=calibration_id,
                specimen_id=specimen_id,
            )
        )
    session.flush()
    insert_samples(session, raw.id, data.t_us, data.channel, data.value, progress=progress)
    audit.append(
        session,
        actor=operator.initials,
        action="data.import",
        entity="raw_file",
        entity_id=raw.id,
        campaign_id=run.campaign_id,
        new={
            "run": run.key,
            "name": raw.name,
            "sha256": raw.sha256,
            "samples": raw.samples,
            "samples_sha256": raw.samples_sha256,
            "channels": [m.shown() for m in data.channels],
            "tool_version": __version__,
        },
    )
    return raw


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


def add_observations(
    session: Session, *, run: RunRecord, items: Sequence[ObservationIn], by: str
) -> list[Observation]:
    _open(session, run.campaign_id)
    if not (run.state == "checked" and _amendment_open(session, run)):
        _state(run, ("running", "finished"), "record observations on")
    person = require_role(session, by, "operator")
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
