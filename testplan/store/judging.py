"""Load a run's evidence for judging, keep each judgement, and roll verdicts up.

A judgement is kept with a SHA-256 over every input it used (the criteria, the rule, the
run's times, each logged channel's sample digest and calibration, each observation), so
judging the same evidence again adds nothing, and any change shows as a new judgement.
"""

from __future__ import annotations

import hashlib
import json
import uuid
from collections import defaultdict
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

from sqlmodel import Session, col, select

from testplan import __version__
from testplan.domain import judge as J
from testplan.errors import RecordError
from testplan.store import audit
from testplan.store.identity import clean_text, require_role
from testplan.store.records import (
    _open,
    _state,
    calibrations_in_force,
    find_campaign,
    find_equipment,
    find_run,
    run_procedure,
    run_specimens,
)
from testplan.store.samples import read_samples
from testplan.store.tables import (
    Calibration,
    CampaignRecord,
    Deviation,
    Judgement,
    LoggerChannel,
    Observation,
    PlanRevision,
    RawFile,
    RunRecord,
    RunSpecimen,
    SpecimenRecord,
    VerdictRecord,
)

# An invalid run is judged again as its evidence changes (a later retest, say): the report
# prints its verdicts and sign-off refuses a stale judgement, though it counts as invalid.
JUDGEABLE = ("finished", "checked", "invalid")
RETESTS = ("seal_ingress_retest", "ingress_retest")


def _plan(session: Session, run: RunRecord) -> dict[str, Any]:
    rev = session.get(PlanRevision, run.revision_id)
    assert rev is not None
    plan: dict[str, Any] = json.loads(rev.plan_json)
    return plan


def rule_of(plan: dict[str, Any]) -> J.Rule:
    d = plan["campaign"].get("decision_rule") or {}
    return J.Rule(d.get("rule", "simple"), float(d.get("guard_factor", 1.0)), d.get("agreement"))


def _series(session: Session, run: RunRecord) -> list[J.Series]:
    out = []
    raws = session.exec(
        select(RawFile)
        .where(RawFile.run_id == run.id, col(RawFile.withdrawn_at).is_(None))
        .order_by(col(RawFile.imported_at))
    ).all()
    serials = {s.id: s.serial for s in run_specimens(session, run)}
    for raw in raws:
        data = read_samples(session, raw.id)
        ch, t, v = data.channel, data.t_us, data.value
        channels = session.exec(
            select(LoggerChannel).where(LoggerChannel.raw_file_id == raw.id)
        ).all()
        for c in channels:
            pick = ch == c.number
            cal = session.get(Calibration, c.calibration_id) if c.calibration_id else None
            value = v[pick] * (cal.gain if cal else 1.0) + (cal.offset if cal else 0.0)
            cal_id = str(cal.id) if cal else "uncalibrated"
            out.append(
                J.Series(
                    quantity=c.quantity,
                    specimen=serials.get(c.specimen_id) if c.specimen_id else None,
                    t_us=t[pick],
                    value=value,
                    unit=c.unit,
                    uncertainty=cal.uncertainty if cal else None,
                    coverage_k=cal.coverage_k if cal else None,
                    range_min=cal.range_min if cal else None,
                    range_max=cal.range_max if cal else None,
                    source=f"samples:{raw.samples_sha256}:{c.number}:{c.quantity}:{cal_id}",
                )
            )
    return out


def _observations(session: Session, run: RunRecord) -> list[J.Obs]:
    serials = {s.id: s.serial for s in run_specimens(session, run)}
    out = []
    rows = session.exec(
        select(Observation)
        .where(Observation.run_id == run.id)
        .order_by(col(Observation.recorded_at))
    ).all()
    for o in rows:
        data = json.loads(o.data_json)
        u = k = None
        tag, channel = {
            "insulation": (data.get("meter"), "insulation_resistance"),
            "leak_test": (data.get("gauge"), "test_pressure"),
        }.get(o.kind, (None, ""))
        cal_id = ""
        if tag:
            cal = calibrations_in_force(
                session, find_equipment(session, tag), o.recorded_at.date()
            ).get(channel)
            if cal is not None and cal.due_on >= o.recorded_at.date():
                u, k, cal_id = cal.uncertainty, cal.coverage_k, str(cal.id)
        digest = hashlib.sha256(o.data_json.encode()).hexdigest()
        out.append(
            J.Obs(
                kind=o.kind,
                specimen=serials.get(o.specimen_id) if o.specimen_id else None,
                data=data,
                at=o.recorded_at,
                source=f"observation:{o.id}:{digest}:{cal_id}",
                uncertainty=u,
                coverage_k=k,
            )
        )
    return out


def _later_ingress(session: Session, run: RunRecord) -> dict[str, list[tuple[str, bool]]]:
    """Valid water runs after this one on the same specimens, and whether each found
    ingress."""
    assert run.finished_at is not None
    out: dict[str, list[tuple[str, bool]]] = defaultdict(list)
    for spec in run_specimens(session, run):
        later = session.exec(
            select(RunRecord)
            .join(RunSpecimen, col(RunSpecimen.run_id) == col(RunRecord.id))
            .where(
                RunSpecimen.specimen_id == spec.id,
                col(RunRecord.procedure_key).startswith("water-"),
                col(RunRecord.started_at) >= run.finished_at,
                # A run declared invalid is not evidence about the product: its repeat is.
                col(RunRecord.state).not_in(("invalid", "withdrawn")),
            )
            .order_by(col(RunRecord.started_at))
        ).all()
        for other in later:
            obs = session.exec(
                select(Observation)
                .where(
                    Observation.run_id == other.id,
                    Observation.specimen_id == spec.id,
                    Observation.kind == "ingress",
                )
                .order_by(col(Observation.recorded_at).desc())
            ).first()
            if obs is not None:
                out[spec.serial].append((other.key, bool(json.loads(obs.data_json)["found"])))
    return dict(out)


def series_of(session: Session, run: RunRecord) -> list[J.Series]:
    """Every logged channel of a run so far, calibration applied (a running run too)."""
    return _series(session, run)


def load_run(session: Session, run: RunRecord) -> J.RunData:
    """Everything recorded for a finished run, in plan units, calibrations applied."""
    assert run.started_at is not None and run.finished_at is not None
    plan = _plan(session, run)
    device = plan["campaign"].get("device", {})
    return J.RunData(
        key=run.key,
        procedure=run_procedure(session, run),
        specimens=[s.serial for s in run_specimens(session, run)],
        started_at=run.started_at,
        finished_at=run.finished_at,
        series=_series(session, run),
        observations=_observations(session, run),
        later_ingress=_later_ingress(session, run),
        free_volume_l=device.get("free_volume_l") or device.get("enclosure_volume_l"),
    )


def _hash(parts: Sequence[Any]) -> str:
    return hashlib.sha256(audit.canonical(list(parts)).encode()).hexdigest()


@dataclass
class RunJudgement:
    """A run judged: its verdicts, the run's outcome and any interpretation."""

    run: str
    procedure: str
    leg: str
    specimens: list[str]
    rule: J.Rule
    outcome: str
    verdicts: list[J.Verdict]
    inputs_sha256: str
    new: bool
    interpretation: dict[str, Any] | None = None
    checked: bool = False

    def to_json(self) -> dict[str, Any]:
        return {
            "run": self.run,
            "procedure": self.procedure,
            "leg": self.leg,
            "specimens": self.specimens,
            "outcome": self.outcome,
            "decision_rule": {
                "rule": self.rule.name,
                "guard_factor": self.rule.guard_factor,
                "agreement": self.rule.agreement,
                "text": self.rule.shown(),
            },
            "data_checked": self.checked,
            "inputs_sha256": self.inputs_sha256,
            "verdicts": [v.to_json() for v in self.verdicts],
            "interpretation": self.interpretation,
        }


def interpret_endurance(data: J.RunData, verdicts: list[J.Verdict]) -> dict[str, Any] | None:
    """The reliability demonstration at the rated cycles: stated when the plan's assumptions
    held, withheld with the reason otherwise (``stats.reliability_claim``)."""
    from testplan.domain.stats import reliability_claim

    if data.procedure.get("family") != "endurance":
        return None
    params = data.procedure.get("parameters", {})
    reached = next((v.measured for v in verdicts if v.quantity == "cycles_reached"), None)
    if reached is None:
        return None
    fails = [o for o in data.observations if o.kind == "failure"]
    failed_at = {o.specimen: float(o.data["cycles"]) for o in fails if o.specimen}
    # The failure definition counts ingress at the seal retest as a failure (by the end).
    retest = [(v.specimen, v.outcome) for v in verdicts if v.quantity in RETESTS and v.specimen]
    leaked = sorted({s for s, o in retest if o == J.FAIL} - set(failed_at))
    pending = sorted({s for s, o in retest if o in (J.NO_DATA, J.NOT_RUN)} - set(failed_at))
    cycles = {s: min(failed_at.get(s, reached), reached) for s in data.specimens}
    counted = [(o.specimen or "rig", f"failure at {o.data['cycles']} cycles") for o in fails] + [
        (s, "ingress at the seal retest") for s in leaked
    ]
    rated = float(params["rated_cycles"]["value"])
    confidence = float(params["confidence"]["value"])
    shape = float(params["weibull_shape"]["value"])
    claim = reliability_claim(
        cycles=cycles,
        failures=counted,
        pending=pending,
        planned_specimens=int(params["rig_specimens"]["value"]),
        planned_cycles=float(params["test_cycles"]["value"]),
        rated_cycles=rated,
        reliability=float(params["reliability"]["value"]),
        confidence=confidence,
        shape=shape,
        allowed_failures=int(params["allowed_failures"]["value"]),
    )
    return {
        "kind": "interpretation",
        "what": "demonstrated reliability",
        "status": claim.status,
        "reason": claim.reason,
        "reliability": claim.reliability,
        "target_reliability": float(params["reliability"]["value"]),
        "confidence": confidence,
        "rated_cycles": rated,
        "weibull_shape": shape,
        "cycles_per_specimen": list(cycles.values()),
        "failures": claim.failures,
        "retest_failures": leaked,
        "text": claim.text,
    }


def evaluate(session: Session, run: RunRecord) -> tuple[J.RunData, J.Rule, list[J.Verdict], str]:
    """Judge a finished run from its evidence as it is now, without keeping anything:
    the run's data, the rule, the verdicts and the hash of every input."""
    data = load_run(session, run)
    rule = rule_of(_plan(session, run))
    verdicts = J.judge_run(data, rule)
    for v in verdicts:
        v.sources = sorted(set(v.sources))
    base = [
        run.key,
        data.procedure.get("criteria"),
        rule.name,
        rule.guard_factor,
        data.started_at,
        data.finished_at,
        __version__,
        # Later water tests decide a retest criterion: a new one is new evidence.
        sorted([spec, list(map(list, found))] for spec, found in data.later_ingress.items()),
    ]
    return data, rule, verdicts, _hash(base + sorted({s for v in verdicts for s in v.sources}))


def verdict_inputs(rule: J.Rule, verdict: J.Verdict) -> str:
    """The hash of one verdict's inputs, as kept on its verdict record."""
    return _hash([verdict.criterion, rule.name, rule.guard_factor, *verdict.sources])


def stale_inputs(session: Session, run: RunRecord, last: Judgement) -> list[str] | None:
    """None when the run's latest judgement matches its evidence now; else what differs
    (criteria whose inputs changed, and records made after the judging)."""
    _, rule, verdicts, inputs = evaluate(session, run)
    if inputs == last.inputs_sha256:
        return None
    kept = {
        (v.criterion_key, v.inputs_sha256)
        for v in session.exec(select(VerdictRecord).where(VerdictRecord.judgement_id == last.id))
    }
    changed = sorted(
        {v.criterion for v in verdicts if (v.criterion, verdict_inputs(rule, v)) not in kept}
    )
    out = [f"inputs of {c} changed" for c in changed]
    for o in session.exec(select(Observation).where(Observation.run_id == run.id)):
        if o.recorded_at > last.judged_at:
            out.append(f"observation {o.kind} recorded {o.recorded_at:%Y-%m-%d %H:%M} UTC")
    if last.tool_version != __version__:
        out.append(f"judged by testplan {last.tool_version}, this is {__version__}")
    return out or ["the evidence differs from what was judged"]


def judge_one(session: Session, run: RunRecord, actor: str) -> RunJudgement:
    """Judge a finished run and keep the judgement unless the same inputs were judged before."""
    data, rule, verdicts, inputs = evaluate(session, run)
    outcome = J.worst([v.outcome for v in verdicts])
    interpretation = interpret_endurance(data, verdicts)
    last = session.exec(
        select(Judgement)
        .where(Judgement.run_id == run.id)
        .order_by(col(Judgement.judged_at).desc())
    ).first()
    new = last is None or last.inputs_sha256 != inputs
    if new:
        from testplan.store.signoff import ensure_open

        ensure_open(session, run.campaign_id)
        j = Judgement(
            run_id=run.id,
            revision_id=run.revision_id,
            rule=rule.name,
            guard_factor=rule.guard_factor,
            rule_agreement=rule.agreement,
            outcome=outcome,
            interpretation_json=audit.canonical(interpretation) if interpretation else None,
            tool_version=__version__,
            inputs_sha256=inputs,
            judged_by=actor,
        )
        session.add(j)
        session.flush()
        serial_ids = {s.serial: s.id for s in run_specimens(session, run)}
        for v in verdicts:
            session.add(
                VerdictRecord(
                    judgement_id=j.id,
                    criterion_key=v.criterion,
                    quantity=v.quantity,
                    specimen_id=serial_ids.get(v.specimen) if v.specimen else None,
                    outcome=v.outcome,
                    measured=v.measured,
                    unit=v.unit,
                    limit_min=v.limit_min,
                    limit_max=v.limit_max,
                    accept_min=v.accept_min,
                    accept_max=v.accept_max,
                    margin=v.margin,
                    uncertainty=v.uncertainty,
                    coverage_k=v.coverage_k,
                    window_start=v.window_start,
                    window_end=v.window_end,
                    detail=v.detail,
                    flags_json=audit.canonical(v.flags),
                    inputs_sha256=verdict_inputs(rule, v),
                )
            )
        session.flush()
        audit.append(
            session,
            actor=actor,
            action="run.judge",
            entity="judgement",
            entity_id=j.id,
            campaign_id=run.campaign_id,
            old={"judgement": str(last.id), "outcome": last.outcome} if last else None,
            new={
                "run": run.key,
                "outcome": outcome,
                "rule": rule.name,
                "inputs_sha256": inputs,
                "tool_version": __version__,
            },
        )
    return RunJudgement(
        run=run.key,
        procedure=run.procedure_key,
        leg=run.leg,
        specimens=data.specimens,
        rule=rule,
        outcome=outcome,
        verdicts=verdicts,
        inputs_sha256=inputs,
        new=new,
        interpretation=interpretation,
        checked=run.state == "checked",
    )


def judge_campaign(
    session: Session, *, campaign: str | None, runs: Sequence[str], actor: str
) -> tuple[CampaignRecord, list[RunJudgement]]:
    """Judge the named runs, or every finished run of the campaign."""
    camp = find_campaign(session, campaign)
    if runs:
        rows = [find_run(session, key, campaign=camp.reference) for key in runs]
        for row in rows:
            if row.state not in JUDGEABLE:
                raise RecordError(
                    f"cannot judge run {row.key}: it is {row.state}",
                    key="RUN",
                    fix="finish it first with `testplan record finish`",
                )
    else:
        rows = list(
            session.exec(
                select(RunRecord)
                .where(
                    RunRecord.campaign_id == camp.id,
                    col(RunRecord.state).in_(JUDGEABLE),
                )
                .order_by(col(RunRecord.started_at), col(RunRecord.key))
            ).all()
        )
    return camp, [judge_one(session, row, actor) for row in rows]


def _covered(session: Session, run: RunRecord) -> set[str]:
    """Criteria of the run that a deviation accepted by an authorised approver covers."""
    rows = session.exec(select(Deviation).where(Deviation.run_id == run.id)).all()
    return {d.criterion_key for d in rows if d.criterion_key}


def require_disposition(session: Session, run: RunRecord, actor: str) -> None:
    """Refuse a data check while a failed condition is neither covered by an accepted
    deviation nor the run invalidated, or while a run with outcome criteria has no
    observation. Called in the data check's unit of work, so a refusal undoes it."""
    procedure = run_procedure(session, run)
    outcomes = [c["id"] for c in procedure.get("criteria", []) if c["when"] == "outcome"]
    if (
        outcomes
        and not session.exec(select(Observation.id).where(Observation.run_id == run.id)).first()
    ):
        raise RecordError(
            f"run {run.key} has no observation, and its outcome criteria "
            f"({', '.join(outcomes)}) need one",
            key="RUN",
            fix="record them with `testplan record observe` first",
        )
    judged = judge_one(session, run, actor)
    open_ = J.uncovered_conditions(
        [(v.criterion, v.quantity, v.outcome) for v in judged.verdicts],
        _covered(session, run),
    )
    if open_:
        raise RecordError(
            f"run {run.key}: condition {open_[0]} failed and is not dispositioned",
            key="RUN",
            fix="record an approved deviation covering it (`testplan record deviation "
            f"--covers {open_[0]}`) or invalidate the run (`testplan record invalidate`)",
        )


def invalidate_run(session: Session, *, run: RunRecord, by: str, reason: str) -> RunRecord:
    """Declare a finished run invalid (its test conditions were not met) and plan its repeat
    as a new run of the same procedure on the same specimens. Returns the repeat."""
    _open(session, run.campaign_id)
    _state(run, ("finished",), "invalidate")
    if not reason.strip():
        raise RecordError("invalidating a run needs a reason", key="--reason")
    reason = clean_text(reason, key="--reason")
    person = require_role(session, by, "approver")
    assert run.finished_at is not None
    judge_one(session, run, person.initials)  # the evidence the invalidation rests on
    n = 2
    while session.exec(
        select(RunRecord.id).where(
            RunRecord.campaign_id == run.campaign_id, RunRecord.key == f"{run.key}-repeat{n}"
        )
    ).first():
        n += 1
    repeat = RunRecord(
        campaign_id=run.campaign_id,
        revision_id=run.revision_id,
        key=f"{run.key}-repeat{n}",
        procedure_key=run.procedure_key,
        leg=run.leg,
        facility=run.facility,
        planned_start=run.finished_at,
        planned_end=run.finished_at + (run.planned_end - run.planned_start),
        repeat_of_id=run.id,
    )
    run.state, run.invalid_reason = "invalid", reason
    session.add(run)
    session.add(repeat)
    session.flush()
    for spec in run_specimens(session, run):
        session.add(RunSpecimen(run_id=repeat.id, specimen_id=spec.id))
    session.flush()
    audit.append(
        session,
        actor=person.initials,
        action="run.invalidate",
        entity="run",
        entity_id=run.id,
        campaign_id=run.campaign_id,
        why=reason,
        old={"state": "finished"},
        new={"state": "invalid", "repeat": repeat.key},
    )
    audit.append(
        session,
        actor=person.initials,
        action="run.plan_repeat",
        entity="run",
        entity_id=repeat.id,
        campaign_id=run.campaign_id,
        why=f"repeat of invalid run {run.key}",
        new=audit.values_of(repeat, "key", "procedure_key", "planned_start", "planned_end"),
    )
    return repeat


@dataclass
class Claim:
    """One declared claim and the statement of conformity for it."""

    claim: str
    status: str
    runs: list[str]
    reason: str = ""


@dataclass
class Rollup:
    """Outcome per run, specimen, leg, claim and campaign from each run's latest
    judgement; test validity kept apart from product verdicts."""

    runs: dict[str, str] = field(default_factory=dict)
    specimens: dict[str, str] = field(default_factory=dict)
    specimen_text: dict[str, str] = field(default_factory=dict)
    legs: dict[str, str] = field(default_factory=dict)
    claims: list[Claim] = field(default_factory=list)
    not_performed: list[tuple[str, list[str]]] = field(default_factory=list)
    campaign: str = J.NOT_STARTED

    def to_json(self) -> dict[str, Any]:
        return {
            "runs": self.runs,
            "specimens": self.specimens,
            "specimen_text": self.specimen_text,
            "legs": self.legs,
            "claims": [
                {"claim": c.claim, "status": c.status, "runs": c.runs, "reason": c.reason}
                for c in self.claims
            ],
            "not_performed": [{"run": k, "specimens": s} for k, s in self.not_performed],
            "campaign": self.campaign,
        }


def _claims(plan: dict[str, Any]) -> list[tuple[str, list[str]]]:
    """Each declared claim with the planned procedures it rests on."""
    target = plan["campaign"]["target"]
    planned = [p for p in plan["procedures"] if p["status"] == "planned"]
    out: list[tuple[str, list[str]]] = []
    for part in str(target["code"]).split("/"):
        first, second = part[2:3], part[3:4]
        if first not in ("", "X") and not any(c.startswith(f"IP{first}X") for c, _ in out):
            ids = [p["id"] for p in planned if p.get("group") in ("dust", "probe")]
            out.append((f"IP{first}X", ids))
        if second not in ("", "X"):
            name = f"IPX{second}"
            if second in ("8", "9") and target.get("immersion_depth_m"):
                name += (
                    f" at {target['immersion_depth_m']:g} m for "
                    f"{target['immersion_duration_h']:g} h"
                )
            out.append((name, [p["id"] for p in planned if p["id"] == f"water-{second}"]))
    for p in planned:
        if p.get("family") == "salt_mist":
            out.append((f"salt mist, {p['standard']['name']}", [p["id"]]))
        elif p.get("family") == "endurance":
            title = str(p["title"]).removeprefix("Cycle endurance: ")
            out.append((f"endurance: {title}", [p["id"]]))
    return out


def rollup(session: Session, campaign: CampaignRecord) -> Rollup:
    """Roll the latest verdicts up. A failed condition makes a run invalid for the
    specimens in it (unless an accepted deviation covers it); a failed product criterion
    fails that specimen only. An invalidated run gives way to its repeat."""
    out = Rollup()
    states: dict[uuid.UUID, list[str]] = defaultdict(list)
    per_proc: dict[str, list[tuple[str, str, str]]] = defaultdict(list)
    runs = session.exec(
        select(RunRecord)
        .where(RunRecord.campaign_id == campaign.id, RunRecord.state != "withdrawn")
        .order_by(col(RunRecord.planned_start), col(RunRecord.key))
    ).all()
    repeats = {r.repeat_of_id: r.key for r in runs if r.repeat_of_id}
    for run in runs:
        members = run_specimens(session, run)
        if run.state == "invalid":
            again = repeats.get(run.id)
            out.runs[run.key] = f"invalid, repeated as {again}" if again else J.INVALID
            continue
        j = session.exec(
            select(Judgement)
            .where(Judgement.run_id == run.id)
            .order_by(col(Judgement.judged_at).desc())
        ).first()
        if j is None:
            state = J.NOT_STARTED if run.state == "planned" else J.INCOMPLETE
            if run.state == "planned":
                out.not_performed.append((run.key, [s.serial for s in members]))
            run_state = {s.id: state for s in members}
        else:
            verdicts = session.exec(
                select(VerdictRecord).where(VerdictRecord.judgement_id == j.id)
            ).all()
            invalid = J.uncovered_conditions(
                [(v.criterion_key, v.quantity, v.outcome) for v in verdicts],
                _covered(session, run),
            )
            run_state = {}
            for s in members:
                if invalid:
                    run_state[s.id] = J.INVALID
                    continue
                run_state[s.id] = J.product_outcome(
                    [
                        v.outcome
                        for v in verdicts
                        if J.is_product(v.quantity) and v.specimen_id in (None, s.id)
                    ]
                )
        for s in members:
            states[s.id].append(run_state[s.id])
            per_proc[run.procedure_key].append((run.key, run_state[s.id], s.serial))
        out.runs[run.key] = J.worst_status(list(run_state.values()))
    specimens = session.exec(
        select(SpecimenRecord)
        .where(SpecimenRecord.campaign_id == campaign.id)
        .order_by(col(SpecimenRecord.serial))
    ).all()
    legs: dict[str, list[str]] = defaultdict(list)
    for spec in specimens:
        if spec.id not in states:
            out.specimens[spec.serial] = J.CONTROL
            out.specimen_text[spec.serial] = J.CONTROL
            continue
        status, text = J.specimen_status(states[spec.id])
        out.specimens[spec.serial], out.specimen_text[spec.serial] = status, text
        legs[spec.leg].append(status)
    out.legs = {leg: J.worst_status(v) for leg, v in legs.items()}
    out.campaign = J.worst_status(list(out.legs.values()))
    revision = session.exec(
        select(PlanRevision)
        .where(PlanRevision.campaign_id == campaign.id)
        .order_by(col(PlanRevision.number).desc())
    ).first()
    if revision is not None:
        for name, procs in _claims(json.loads(revision.plan_json)):
            pairs = [p for proc in procs for p in per_proc.get(proc, [])]
            status = J.claim_status([st for _, st, _ in pairs])
            keys = sorted({k for k, _, _ in pairs})
            out.claims.append(Claim(name, status, keys, _claim_reason(status, keys, pairs)))
    return out


def _claim_reason(status: str, keys: list[str], pairs: list[tuple[str, str, str]]) -> str:
    """Why a claim is not met (the specimens that failed, in which runs) or not evaluated
    (how many of its runs passed, and what the others are)."""
    if status == J.MET:
        return ""
    if status == J.NOT_MET:
        failed: dict[str, list[str]] = defaultdict(list)
        for key, st, serial in pairs:
            if st == J.FAILED and serial not in failed[key]:
                failed[key].append(serial)
        if len(keys) == 1:
            return "failed: " + ", ".join(sorted(failed[keys[0]]))
        return "failed: " + "; ".join(
            f"{', '.join(sorted(serials))} in {key}" for key, serials in sorted(failed.items())
        )
    if not keys:
        return "no run planned for it"
    per_run: dict[str, set[str]] = defaultdict(set)
    for key, st, _ in pairs:
        per_run[key].add(st)
    counts: dict[str, int] = defaultdict(int)
    for states in per_run.values():
        if states == {J.PASSED}:
            counts["passed"] += 1
        elif J.NOT_STARTED in states:
            counts["not performed"] += 1
        elif J.INVALID in states:
            counts["invalid"] += 1
        else:
            counts["not complete"] += 1
    parts = [f"{n} {what}" for what, n in counts.items() if what != "passed"]
    return f"{counts.get('passed', 0)} of {len(keys)} runs passed; " + ", ".join(parts)
