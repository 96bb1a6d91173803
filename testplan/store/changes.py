"""What changed in a campaign's records since the revision an amendment superseded.

The superseded manifest keeps every record as ``(kind, id, label, hash)``; the records as
they are now give the same list (``signoff.compute_items``). Comparing the two names each
record added, changed or removed; the records themselves (old judgements and calibrations
stay in the store) give the words: a verdict that went from pass to fail, a calibration
replaced by another certificate. ISO/IEC 17025 cl. 7.8.8.2 asks an amended report to say
what changed and why.
"""

from __future__ import annotations

import json
import uuid
from dataclasses import dataclass
from typing import Any

from sqlmodel import Session, col, select

from testplan.store.tables import (
    Amendment,
    Calibration,
    CampaignRecord,
    Deviation,
    Equipment,
    Judgement,
    Manifest,
    Observation,
    RawFile,
    RunRecord,
    SpecimenRecord,
    VerdictRecord,
)

# Kinds whose changes another line already states (a raw file's samples and channels go
# with the file, a photo with its observation, criteria and procedures with the plan).
FOLLOWERS = frozenset({"sample_chunk", "logger_channel", "attachment", "procedure", "criterion"})


@dataclass
class RevisionChanges:
    """The amendment that opened this revision and what changed in the records since."""

    revision: int  # the revision these changes lead to
    reason: str
    requested_by: str
    at: str
    lines: list[str]


def _uuid(text: str) -> uuid.UUID | None:
    try:
        return uuid.UUID(text)
    except ValueError:
        return None


def _get(session: Session, table: Any, text: str) -> Any:
    key = _uuid(text)
    return session.get(table, key) if key is not None else None


def _outcomes(session: Session, judgement_ids: list[uuid.UUID]) -> dict[tuple[str, str], str]:
    """(criterion, specimen) -> outcome of the given judgements' verdicts."""
    out: dict[tuple[str, str], str] = {}
    for v in session.exec(
        select(VerdictRecord).where(col(VerdictRecord.judgement_id).in_(judgement_ids))
    ).all():
        spec = session.get(SpecimenRecord, v.specimen_id) if v.specimen_id else None
        out[(v.criterion_key.split(".", 1)[-1], spec.serial if spec else "all")] = v.outcome
    return out


def _latest(session: Session, ids: list[str]) -> dict[uuid.UUID, Judgement]:
    """The latest of the given judgements, per run."""
    latest: dict[uuid.UUID, Judgement] = {}
    for text in ids:
        j = _get(session, Judgement, text)
        if j is not None and (j.run_id not in latest or j.judged_at > latest[j.run_id].judged_at):
            latest[j.run_id] = j
    return latest


def _judgement_lines(
    session: Session, before: set[tuple[str, str]], after: set[tuple[str, str]]
) -> list[str]:
    """A line per run judged again, and one per verdict whose outcome changed."""
    old = _latest(session, [i for k, i in before if k == "judgement"])
    new = _latest(session, [i for k, i in after if k == "judgement" and (k, i) not in before])
    lines = []
    for run_id, j in sorted(new.items(), key=lambda kv: kv[1].judged_at):
        run = session.get(RunRecord, run_id)
        key = run.key if run is not None else str(run_id)
        prev = old.get(run_id)
        if prev is None:
            lines.append(f"{key}: judged, {j.outcome}")
            continue
        was, now = _outcomes(session, [prev.id]), _outcomes(session, [j.id])
        changed = [
            f"verdict {crit} ({who}) changed from {was[(crit, who)]} to {outcome}"
            for (crit, who), outcome in sorted(now.items())
            if (crit, who) in was and was[(crit, who)] != outcome
        ]
        changed += [
            f"verdict {crit} ({who}) added: {outcome}"
            for (crit, who), outcome in sorted(now.items())
            if (crit, who) not in was
        ]
        changed += [f"verdict {crit} ({who}) dropped" for crit, who in sorted(set(was) - set(now))]
        summary = (
            f"run verdict changed from {prev.outcome} to {j.outcome}"
            if prev.outcome != j.outcome
            else f"run verdict still {j.outcome}"
        )
        lines.append(
            f"{key}: judgement redone ({summary}); " + ("; ".join(changed) or "no verdict changed")
        )
    return lines


def _calibration_lines(
    session: Session, before: set[tuple[str, str]], added: list[str]
) -> list[str]:
    """A calibration added for an instrument channel that had one before is a replacement."""
    old: dict[tuple[uuid.UUID, str], Calibration] = {}
    for k, i in before:
        cal = _get(session, Calibration, i) if k == "calibration" else None
        if cal is not None:
            old[(cal.equipment_id, cal.channel)] = cal
    lines = []
    for text in added:
        cal = _get(session, Calibration, text)
        if cal is None:
            continue
        eq = session.get(Equipment, cal.equipment_id)
        tag = eq.tag if eq is not None else "?"
        prev = old.get((cal.equipment_id, cal.channel))
        if prev is not None and prev.id != cal.id:
            lines.append(
                f"calibration of {tag} ({cal.channel}) replaced: certificate {prev.certificate} "
                f"by {cal.certificate} (due {cal.due_on})"
            )
        else:
            lines.append(f"calibration {cal.certificate} of {tag} ({cal.channel}) now used")
    return lines


def _of_run(session: Session, table: Any, text: str) -> tuple[Any, RunRecord] | None:
    """A run's record by id, with its run; None when either is gone."""
    obj = _get(session, table, text)
    run = session.get(RunRecord, obj.run_id) if obj is not None else None
    return (obj, run) if run is not None else None


def _added(session: Session, kind: str, text: str, label: str) -> str | None:
    """Plain words for one record added since the superseded revision."""
    if kind == "run_equipment":
        return None  # said with the run or its calibration
    if kind == "run":
        run = _get(session, RunRecord, text)
        if run is None:
            return f"{label}: added"
        repeats = session.get(RunRecord, run.repeat_of_id) if run.repeat_of_id else None
        verb = f"added, repeating {repeats.key}" if repeats is not None else "added"
        return f"run {run.key} {verb} ({run.state})"
    table = {"observation": Observation, "deviation": Deviation, "raw_file": RawFile}.get(kind)
    found = _of_run(session, table, text) if table is not None else None
    if found is None:
        return f"{label}: added"
    obj, run = found
    if kind == "observation":
        spec = session.get(SpecimenRecord, obj.specimen_id) if obj.specimen_id else None
        on = f" on {spec.serial}" if spec is not None else ""
        return f"{run.key}: {obj.kind.replace('_', ' ')} observation added{on}"
    if kind == "deviation":
        return f"{run.key}: deviation added: {obj.description} (reason: {obj.reason})"
    return f"{run.key}: logger file {obj.name} imported"


def _changed(session: Session, kind: str, text: str, label: str) -> str:
    """Plain words for one record whose content changed since the superseded revision."""
    if kind == "run":
        run = _get(session, RunRecord, text)
        if run is not None and run.state == "invalid":
            return f"run {run.key} declared invalid: {run.invalid_reason or 'no reason given'}"
        if run is not None:
            return f"run {run.key} changed; now {run.state}"
    if kind == "raw_file":
        raw = _get(session, RawFile, text)
        if raw is not None and raw.withdrawn_at is not None:
            return f"{label} withdrawn: {raw.withdrawn_why}"
    return f"{label}: changed"


def compare(session: Session, stored: list[list[str]], now: list[Any]) -> list[str]:
    """The changes from a stored manifest body to the items now, one plain line each."""
    before = {(k, i): (label, h) for k, i, label, h in stored}
    after = {(x.kind, x.id): (x.label, x.hash) for x in now}
    lines: list[str] = []
    for (kind, i), (label, h) in sorted(after.items(), key=lambda kv: kv[1][0]):
        if kind in FOLLOWERS or kind in ("judgement", "verdict", "calibration"):
            continue
        if (kind, i) not in before:
            line = _added(session, kind, i, label)
            if line is not None:
                lines.append(line)
        elif before[(kind, i)][1] != h:
            lines.append(_changed(session, kind, i, label))
    for key, (label, _) in sorted(before.items(), key=lambda kv: kv[1][0]):
        if key not in after and key[0] not in FOLLOWERS and key[0] != "verdict":
            lines.append(f"{label}: removed")
    lines += _judgement_lines(session, set(before), set(after))
    lines += _calibration_lines(
        session, set(before), [i for k, i in after if k == "calibration" and (k, i) not in before]
    )
    return lines


def revision_changes(session: Session, campaign: CampaignRecord) -> RevisionChanges | None:
    """For a revision after the first: the latest amendment's reason and what changed in
    the records since the manifest it superseded. None for a first revision."""
    from testplan.store.signoff import _h, compute_items, report_revision

    amendment = session.exec(
        select(Amendment)
        .where(Amendment.campaign_id == campaign.id)
        .order_by(col(Amendment.at).desc())
    ).first()
    if amendment is None:
        return None
    manifest = session.get(Manifest, amendment.supersedes_manifest_id)
    assert manifest is not None  # a foreign key
    stored = json.loads(manifest.body_json)
    if _h(stored) != manifest.root:
        # Edited behind the tool (the SQLite file; PostgreSQL refuses it by trigger): its
        # items are no longer what was signed, so no list is drawn from them.
        lines = [
            f"the manifest of revision {report_revision(session, campaign.id) - 1} no longer "
            "matches its signed root: the changes cannot be listed (run `testplan verify`)"
        ]
    else:
        lines = compare(session, stored, compute_items(session, campaign))
    return RevisionChanges(
        revision=report_revision(session, campaign.id),
        reason=amendment.reason,
        requested_by=amendment.requested_by,
        at=f"{amendment.at:%Y-%m-%d}",
        lines=lines,
    )
