"""What each bench page shows, read from the store (no formatting beyond plain values)."""

from __future__ import annotations

import datetime as dt
import json
from typing import Any

from sqlmodel import Session, col, select

from testplan.store import records
from testplan.store.tables import (
    Calibration,
    CampaignRecord,
    Equipment,
    Judgement,
    Observation,
    Person,
    RawFile,
    RunEquipment,
    RunRecord,
    VerdictRecord,
    utc_now,
)


def _name(session: Session, pid: Any) -> str | None:
    person = session.get(Person, pid) if pid is not None else None
    return person.initials if person else None


def today(session: Session, now: dt.datetime | None = None) -> dict[str, Any]:
    """Runs due by the end of today, running, waiting for a data check; overdue calibrations."""
    now = now or utc_now()
    end_of_day = dt.datetime.combine(now.date(), dt.time.max, tzinfo=dt.UTC)
    runs = session.exec(select(RunRecord).order_by(col(RunRecord.planned_start))).all()
    due = [r for r in runs if r.state == "planned" and r.planned_start <= end_of_day]
    later = [r for r in runs if r.state == "planned" and r.planned_start > end_of_day][:10]
    overdue = []
    for item, cals in records.list_equipment(session):
        latest: dict[str, Calibration] = {}
        for c in cals:
            latest[c.channel] = c
        for c in latest.values():
            if c.due_on < now.date():
                overdue.append({"tag": item.tag, "channel": c.channel, "due_on": c.due_on})
    return {
        "due": due,
        "later": later,
        "running": [r for r in runs if r.state == "running"],
        "waiting": [r for r in runs if r.state == "finished"],
        "overdue": overdue,
        "campaigns": session.exec(
            select(CampaignRecord).order_by(col(CampaignRecord.reference))
        ).all(),
        "now": now,
    }


def run(session: Session, key: str) -> dict[str, Any]:
    """A run with its checklist, equipment to pick from, imports and observations."""
    row = records.find_run(session, key)
    proc = records.run_procedure(session, row)
    starts = utc_now() if row.state == "planned" else (row.started_at or row.planned_start)
    ends = starts + (row.planned_end - row.planned_start)
    imports = session.exec(
        select(RawFile).where(RawFile.run_id == row.id).order_by(col(RawFile.imported_at))
    ).all()
    observations = session.exec(select(Observation).where(Observation.run_id == row.id)).all()
    return {
        "run": row,
        "title": proc.get("title", row.procedure_key),
        "checklist": list(proc.get("specimen_state", [])),
        "specimens": [s.serial for s in records.run_specimens(session, row)],
        "equipment": records.equipment_for_run(session, starts, ends),
        "planned_end": ends,
        "used": run_equipment_tags(session, key),
        "imports": imports,
        "observations": [(o.kind, json.loads(o.data_json)) for o in observations],
        "operator": _name(session, row.operator_id),
        "checker": _name(session, row.checker_id),
        "kinds": _kinds(),
    }


def _kinds() -> list[tuple[str, list[Any]]]:
    from testplan.domain.observations import KINDS

    return [(k, list(v)) for k, v in KINDS.items() if k != "photo"]


def run_equipment_tags(session: Session, key: str) -> list[str]:
    """Tags of the equipment recorded when the run started."""
    row = records.find_run(session, key)
    tags = session.exec(
        select(Equipment.tag)
        .join(RunEquipment, col(RunEquipment.equipment_id) == col(Equipment.id))
        .where(RunEquipment.run_id == row.id)
    ).all()
    return sorted(set(tags))


def run_serials(session: Session, key: str) -> list[str]:
    """Serials of the specimens on a run."""
    return [s.serial for s in records.run_specimens(session, records.find_run(session, key))]


def results(session: Session, key: str) -> dict[str, Any]:
    """The latest judgement's verdicts and the report's plots (SVG text) for a run."""
    from testplan.report.plots import Figure, run_figures
    from testplan.store.judging import load_run

    row = records.find_run(session, key)
    judgement = session.exec(
        select(Judgement)
        .where(Judgement.run_id == row.id)
        .order_by(col(Judgement.judged_at).desc())
    ).first()
    verdicts = (
        session.exec(select(VerdictRecord).where(VerdictRecord.judgement_id == judgement.id)).all()
        if judgement
        else []
    )
    plots: list[Figure] = []
    if row.started_at is not None and row.finished_at is not None:
        plots = run_figures(load_run(session, row))
    return {"run": row, "judgement": judgement, "verdicts": verdicts, "plots": plots}


def live(session: Session, key: str, now: dt.datetime | None = None) -> dict[str, Any]:
    """Latest imported reading per channel against its criterion band, and the time left."""
    from testplan.domain.judge import Criterion
    from testplan.store.judging import series_of

    now = now or utc_now()
    row = records.find_run(session, key)
    proc = records.run_procedure(session, row)
    bands: dict[str, Criterion] = {}
    for raw in proc.get("criteria", []):
        c = Criterion.from_json(raw)
        if c.min is not None or c.max is not None:
            bands.setdefault(c.quantity, c)
    readings = []
    if row.started_at is not None:
        for s in series_of(session, row):
            if len(s.value) == 0:
                continue
            value = float(s.value[-1])
            at = dt.datetime.fromtimestamp(int(s.t_us[-1]) / 1e6, dt.UTC)
            band = bands.get(s.quantity)
            inside = None
            if band is not None:
                inside = (band.min is None or value >= band.min) and (
                    band.max is None or value <= band.max
                )
            readings.append(
                {
                    "quantity": s.quantity,
                    "specimen": s.specimen,
                    "value": value,
                    "unit": s.unit,
                    "at": at,
                    "band": band,
                    "inside": inside,
                }
            )
    ends = None
    if row.started_at is not None:
        ends = row.started_at + (row.planned_end - row.planned_start)
    left = max(ends - now, dt.timedelta(0)) if ends else None
    return {"run": row, "readings": readings, "ends": ends, "left": _span(left)}


def _span(left: dt.timedelta | None) -> str | None:
    if left is None:
        return None
    minutes = int(left.total_seconds() // 60)
    days, rest = divmod(minutes, 24 * 60)
    return (f"{days} d " if days else "") + f"{rest // 60} h {rest % 60:02d} min"


def signoff(session: Session, reference: str) -> dict[str, Any]:
    """A campaign's sign-off: who signed in which role and when, the manifest root, the
    role to sign next, and what blocks signing now (the checks ``sign`` makes)."""
    from testplan.store import signoff as signing

    camp = records.find_campaign(session, reference)
    state = signing.signoff_state(session, camp)
    done = {role for role, *_ in state.signers}
    after = [r for r in signing.ORDER if r not in done]
    problems = [] if state.approved else list(signing.blockers(session, camp))
    return {
        "campaign": camp,
        "state": state,
        "next_role": after[0] if after and not state.approved else None,
        "blockers": [(p.message, p.fix) for p in problems],
        "signing_roles": signing.ROLES,
    }


def people(session: Session) -> dict[str, Any]:
    """The people register with the roles held now and whether a password is set."""
    from testplan.store.identity import list_people
    from testplan.store.tables import PersonPassword

    with_password = {str(p) for p in session.exec(select(PersonPassword.person_id)).all()}
    return {
        "people": [
            {
                "initials": p.initials,
                "name": p.name,
                "roles": roles,
                "password": str(p.id) in with_password,
            }  # fmt: skip
            for p, roles in list_people(session)
        ]
    }
