"""Everything a report needs, read from the store into plain data (no formatting here)."""

from __future__ import annotations

import datetime as dt
import json
from dataclasses import dataclass, field
from typing import Any

from sqlmodel import Session, col, select

from testplan.domain import judge as J
from testplan.store.judging import load_run, rollup
from testplan.store.records import find_campaign, run_procedure, run_specimens
from testplan.store.tables import (
    Attachment,
    Calibration,
    CampaignRecord,
    Deviation,
    Equipment,
    Judgement,
    Observation,
    Person,
    PlanRevision,
    RawFile,
    RunEquipment,
    RunRecord,
    SpecimenRecord,
    VerdictRecord,
)


@dataclass
class RunRecordData:
    """One run with its people, equipment, files, deviations, verdicts and photos."""

    run: RunRecord
    revision: int
    procedure: dict[str, Any]
    specimens: list[str]
    operator: Person | None
    checker: Person | None
    equipment: list[tuple[Equipment, Calibration]]
    raw_files: list[RawFile]
    deviations: list[tuple[Deviation, Person]]
    judgement: Judgement | None
    verdicts: list[tuple[VerdictRecord, str | None]]
    photos: list[tuple[Observation, Attachment, str | None]]
    evidence: J.RunData | None
    # every observation of the run: (observation, specimen serial, recorder's initials)
    observations: list[tuple[Observation, str | None, str | None]] = field(default_factory=list)


@dataclass
class ReportData:
    signoff: Any
    campaign: CampaignRecord
    revision: PlanRevision
    plan: dict[str, Any]
    specimens: list[SpecimenRecord]
    runs: list[RunRecordData]
    rollup: dict[str, Any]
    rule: J.Rule
    extras: dict[str, Any] = field(default_factory=dict)


def _person(session: Session, pid: Any) -> Person | None:
    return session.get(Person, pid) if pid else None


# Observation fields naming the instrument whose reading (and U) a verdict uses.
INSTRUMENT_FIELDS = {
    "insulation": ("meter", "insulation_resistance"),
    "leak_test": ("gauge", "test_pressure"),
}


def _observation_instruments(
    session: Session, run: RunRecord, known: list[tuple[Equipment, Calibration]]
) -> list[tuple[Equipment, Calibration]]:
    """Instruments named in the run's observations (insulation meter, leak gauge) with the
    calibration in force when they were read, not already among the run's equipment."""
    from testplan.store.records import calibrations_in_force

    have = {(e.id, c.id) for e, c in known}
    out: list[tuple[Equipment, Calibration]] = []
    for o in session.exec(select(Observation).where(Observation.run_id == run.id)).all():
        tag_field, channel = INSTRUMENT_FIELDS.get(o.kind, (None, ""))
        tag = json.loads(o.data_json).get(tag_field) if tag_field else None
        item = session.exec(select(Equipment).where(Equipment.tag == tag)).first() if tag else None
        if item is None:
            continue
        cal = calibrations_in_force(session, item, o.recorded_at.date()).get(channel)
        if cal is not None and (item.id, cal.id) not in have:
            have.add((item.id, cal.id))
            out.append((item, cal))
    return sorted(out, key=lambda ec: ec[0].tag)


def load_report(session: Session, campaign: str | None) -> ReportData:
    """The campaign as of its latest plan revision, with every run that was carried out."""
    from testplan.store.judging import rule_of

    camp = find_campaign(session, campaign)
    revision = session.exec(
        select(PlanRevision)
        .where(PlanRevision.campaign_id == camp.id)
        .order_by(col(PlanRevision.number).desc())
    ).first()
    assert revision is not None
    plan: dict[str, Any] = json.loads(revision.plan_json)
    numbers = {
        r.id: r.number
        for r in session.exec(select(PlanRevision).where(PlanRevision.campaign_id == camp.id))
    }
    specimens = list(
        session.exec(
            select(SpecimenRecord)
            .where(SpecimenRecord.campaign_id == camp.id)
            .order_by(col(SpecimenRecord.serial))
        ).all()
    )
    runs = []
    rows = session.exec(
        select(RunRecord)
        .where(RunRecord.campaign_id == camp.id, col(RunRecord.started_at).is_not(None))
        .order_by(col(RunRecord.started_at), col(RunRecord.key))
    ).all()
    initials = {p.id: p.initials for p in session.exec(select(Person)).all()}
    for run in rows:
        serial_of = {s.id: s.serial for s in run_specimens(session, run)}
        equipment = [
            (e, c)
            for e, c in session.exec(
                select(Equipment, Calibration)
                .join(RunEquipment, col(RunEquipment.equipment_id) == col(Equipment.id))
                .join(Calibration, col(Calibration.id) == col(RunEquipment.calibration_id))
                .where(RunEquipment.run_id == run.id)
                .order_by(col(Equipment.tag), col(Calibration.channel))
            ).all()
        ]
        equipment += _observation_instruments(session, run, equipment)
        judgement = session.exec(
            select(Judgement)
            .where(Judgement.run_id == run.id)
            .order_by(col(Judgement.judged_at).desc())
        ).first()
        verdicts = []
        if judgement is not None:
            for v in session.exec(
                select(VerdictRecord)
                .where(VerdictRecord.judgement_id == judgement.id)
                .order_by(col(VerdictRecord.criterion_key))
            ).all():
                verdicts.append((v, serial_of.get(v.specimen_id) if v.specimen_id else None))
        photos = []
        for o, a in session.exec(
            select(Observation, Attachment)
            .join(Attachment, col(Attachment.id) == col(Observation.attachment_id))
            .where(Observation.run_id == run.id)
            .order_by(col(Observation.recorded_at))
        ).all():
            photos.append((o, a, serial_of.get(o.specimen_id) if o.specimen_id else None))
        deviations = [
            (d, p)
            for d, p in session.exec(
                select(Deviation, Person)
                .join(Person, col(Person.id) == col(Deviation.approved_by_id))
                .where(Deviation.run_id == run.id)
                .order_by(col(Deviation.recorded_at))
            ).all()
        ]
        observations = [
            (
                o,
                serial_of.get(o.specimen_id) if o.specimen_id else None,
                initials.get(o.recorded_by_id),
            )
            for o in session.exec(
                select(Observation)
                .where(Observation.run_id == run.id)
                .order_by(col(Observation.recorded_at), col(Observation.kind))
            ).all()
        ]
        finished = run.state in ("finished", "checked", "invalid")
        runs.append(
            RunRecordData(
                run=run,
                revision=numbers[run.revision_id],
                procedure=run_procedure(session, run),
                specimens=sorted(serial_of.values()),
                operator=_person(session, run.operator_id),
                checker=_person(session, run.checker_id),
                equipment=equipment,
                raw_files=list(
                    session.exec(
                        select(RawFile)
                        .where(RawFile.run_id == run.id)
                        .order_by(col(RawFile.imported_at))
                    ).all()
                ),
                deviations=deviations,
                judgement=judgement,
                verdicts=verdicts,
                photos=photos,
                evidence=load_run(session, run) if finished else None,
                observations=observations,
            )
        )
    from testplan.store.changes import revision_changes
    from testplan.store.signoff import signoff_state

    titles = {p.initials: p.title for p in session.exec(select(Person)).all() if p.title}
    return ReportData(
        signoff=signoff_state(session, camp),
        campaign=camp,
        revision=revision,
        plan=plan,
        specimens=specimens,
        runs=runs,
        rollup=rollup(session, camp).to_json(),
        rule=rule_of(plan),
        extras={
            "generated": dt.datetime.now(dt.UTC),
            "titles": titles,
            "changes": revision_changes(session, camp),
        },
    )
