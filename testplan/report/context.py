"""The report's content as one typed context: everything the template prints, already
worded and formatted, so the template only lays it out.

The checklist is ISO/IEC 17025:2017 cl. 7.8.2.1 (a to p) with 7.8.2.2 (customer-supplied
information), 7.8.3.1 (conditions, uncertainty, conformity), 7.8.6 (decision rule) and
7.8.7 (opinions and interpretations).
"""

from __future__ import annotations

import base64
import datetime as dt
import json
import re
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from testplan import __version__
from testplan.domain import judge as J
from testplan.domain.plan import cite
from testplan.report.names import criterion_words
from testplan.report.typography import si_text

if TYPE_CHECKING:  # pragma: no cover
    from testplan.store.reporting import ReportData, RunRecordData

RESULTS_ONLY = (
    "The results in this report relate only to the items tested, as received. The items "
    "were supplied by the client; the laboratory did not sample them."
)
NOT_IN_PART = (
    "This report shall not be reproduced except in full without the written approval of the "
    "laboratory."
)
CUSTOMER_DATA = (
    "Information marked 'supplied by the client' (geometry, declared depth and duration, "
    "reliability targets, Weibull shape, friction coefficients and the like) was provided by "
    "the client. The laboratory is not responsible for it; where it affects the validity of "
    "the results, the results apply to the values as supplied."
)
INTERPRETATIONS = (
    "Statements marked 'Interpretation' are opinions of the laboratory drawn from the results "
    "(such as a demonstrated reliability); they are not measured results."
)
READER_GUIDANCE = (
    "For anyone reusing the methods described here: the current edition of the governing "
    "standard (with its amendments), the product standard, local codes and accredited or "
    "licensed practice take precedence over any value or wording here. The summaries of "
    "methods in this report describe what was done; they do not replace the standards."
)
OUTCOME_TEXT = {
    J.PASS: "pass",
    J.COND_PASS: "conditional pass",
    J.COND_FAIL: "conditional fail",
    J.FAIL: "fail",
    J.NO_DATA: "no data",
    J.NOT_RUN: "not run",
    J.LOGGED_NO_BAND: "logged, no band",
}


@dataclass
class Row:
    cells: list[str]
    outcome: str | None = None


@dataclass
class Figure:
    number: int
    caption: str
    svg: str


@dataclass
class Photo:
    number: int
    caption: str
    data_uri: str
    sha256: str


@dataclass
class RunSection:
    key: str
    heading: str
    method: str
    outcome: str
    facts: list[tuple[str, str]]
    checklist: list[tuple[str, str]]
    deviations: list[Row]
    equipment: list[Row]
    files: list[Row]
    verdicts: list[Row]
    interpretation: str | None
    figures: list[Figure]
    photos: list[Photo]
    notes: list[str]
    observations: list[Row] = field(default_factory=list)


@dataclass
class ReportContext:
    title: str
    report_number: str
    revision: int
    issue_date: str
    draft: bool
    paper: str
    laboratory: str
    laboratory_address: str | None
    location: str | None
    client: str
    client_contact: str | None
    item: list[tuple[str, str]]
    specimens: list[Row]
    test_dates: str
    decision_rule: str
    summary_legs: list[Row]
    summary_specimens: list[Row]
    summary_runs: list[Row]
    campaign_outcome: str
    runs: list[RunSection]
    standards: list[Row]
    customer_data: list[Row]
    cautions: list[tuple[str, list[str]]]
    external: list[str]
    statements: list[str]
    reader_guidance: str
    calendar_svg: str | None
    signatures: list[Row]
    conformity: list[Row] = field(default_factory=list)
    signed_by: list[Row] = field(default_factory=list)
    not_performed: list[str] = field(default_factory=list)
    deviations: list[str] = field(default_factory=list)
    decision_explained: str = ""
    replaces: str | None = None
    tool_version: str = __version__
    manifest_root: str | None = None
    figure_count: int = 0
    notes: list[str] = field(default_factory=list)
    keep_whole: list[str] = field(default_factory=list)  # serials and run keys
    amendment: str | None = None
    changes: list[str] = field(default_factory=list)
    as_run_svg: str | None = None


def _date(t: dt.datetime | dt.date | None) -> str:
    if t is None:
        return "-"
    if isinstance(t, dt.datetime):
        return t.astimezone(dt.UTC).strftime("%Y-%m-%d %H:%M UTC")
    return t.isoformat()


def _param(d: dict[str, Any]) -> str:
    unit = f" {d['unit']}" if d.get("unit") else ""
    if "value" in d:
        core = f"{d['value']}{unit}"
    elif "min" in d and "max" in d:
        core = f"{d['min']} to {d['max']}{unit}"
    else:
        core = ""
    if d.get("text"):
        core = f"{core}; {d['text']}" if core else d["text"]
    return core


def _method(proc: dict[str, Any]) -> str:
    std = proc["standard"]
    name = f"{std['name']}:{std['edition']}" if std.get("edition") else std["name"]
    return name + (f", {cite(proc['clause'])}" if proc["clause"] else "")


def _heading(key: str, proc: dict[str, Any]) -> str:
    """A run section's heading: the run, the procedure's title and, in brackets, its code
    (IPX6, 20000 cycles) unless the title already says part of it (the salt-mist method's
    "Kb method 2"); the standard itself is on the method line."""
    title, code = proc["title"], proc["code"] or ""
    said = {w.lower() for w in re.findall(r"\w+", title)}
    shown = code and not said & {w.lower() for w in re.findall(r"\w+", code)}
    return f"{key}: {title}" + (f" ({code})" if shown else "")


def _run_section(r: RunRecordData, figure_no: int, photo_no: int) -> RunSection:
    from testplan.report.evidence import observation_rows
    from testplan.report.plots import run_figures

    run, proc = r.run, r.procedure
    outcome = (
        r.judgement.outcome
        if r.judgement
        else (J.NOT_RUN if run.state not in ("finished", "checked") else J.NO_DATA)
    )
    ambient = "-"
    if run.ambient_temperature_c is not None:
        ambient = (
            f"{run.ambient_temperature_c:g} degC, {run.ambient_humidity_pct:g} %RH, "
            f"{run.ambient_pressure_hpa:g} hPa at the start"
        )
    facts = [
        ("Specimens", ", ".join(r.specimens)),
        ("Plan revision", str(r.revision)),
        ("Facility", run.facility or "-"),
        ("Started / finished", f"{_date(run.started_at)} / {_date(run.finished_at)}"),
        ("Operator", f"{r.operator.name} ({r.operator.initials})" if r.operator else "-"),
        (
            "Data checked by",
            f"{r.checker.name} ({r.checker.initials}), {_date(run.checked_at)}"
            if r.checker
            else "not checked: the run was declared invalid"
            if run.state == "invalid"
            else "not yet checked",
        ),
        ("Lab ambient", ambient),
        ("Pre-conditioning", run.preconditioning or "-"),
    ]
    if run.external_provider:
        facts.append(("Carried out by", f"{run.external_provider} (external provider)"))
    checklist = []
    for item in json.loads(run.specimen_state_json or "[]"):
        status = "as required" if item["as_required"] else f"differs: {item['note']}"
        checklist.append((item["item"], status))
    deviations = [
        Row([d.description, d.reason, f"{p.name} ({p.initials})", _date(d.recorded_at)])
        for d, p in r.deviations
    ]
    finished = run.finished_at.date() if run.finished_at else None
    equipment = []
    for e, c in r.equipment:
        valid = finished is None or c.due_on >= finished
        rng = (
            f"{J.fmt(c.range_min)} to {J.fmt(c.range_max, c.unit)}"
            if c.range_min is not None and c.range_max is not None
            else "-"
        )
        equipment.append(
            Row(
                [
                    f"{e.tag}: {e.description}" + (f" (serial {e.serial})" if e.serial else ""),
                    c.channel,
                    f"{c.certificate}, {c.provider}",
                    f"{c.calibrated_on} to {c.due_on}: "
                    + ("valid for the run" if valid else "EXPIRED"),
                    f"{J.fmt(c.uncertainty, c.unit)} (k = {c.coverage_k:g})",
                    rng,
                ]
            )
        )
    files = [
        Row([f.name, f.sha256, str(f.samples), f"{_date(f.first_at)} to {_date(f.last_at)}"])
        for f in r.raw_files
    ]
    verdicts = []
    for v, serial in r.verdicts:
        u = J.shown_uncertainty(v.uncertainty, v.coverage_k, v.unit)
        verdicts.append(
            Row(
                [
                    criterion_words(v.criterion_key, v.quantity),
                    serial or "all",
                    J.fmt(v.measured, v.unit),
                    J.shown_limits(v.limit_min, v.limit_max, v.unit),
                    J.shown_limits(v.accept_min, v.accept_max, v.unit),
                    u,
                    J.fmt(J.acceptance_margin(v.measured, v.accept_min, v.accept_max), v.unit),
                    OUTCOME_TEXT[v.outcome],
                    _basis(v.detail),
                ],
                outcome=v.outcome,
            )
        )
    interpretation = None
    if r.judgement and r.judgement.interpretation_json:
        interpretation = json.loads(r.judgement.interpretation_json)["text"]
    figures = []
    if r.evidence is not None:
        for i, f in enumerate(run_figures(r.evidence)):
            figures.append(Figure(figure_no + i, f.caption, f.svg))
    photos = []
    for i, (o, a, serial) in enumerate(r.photos):
        data = json.loads(o.data_json)
        caption = data.get("caption") or a.name
        where = ", ".join(x for x in (serial, o.checkpoint) if x)
        photos.append(
            Photo(
                photo_no + i,
                f"{caption}" + (f" ({where})" if where else ""),
                f"data:{a.media_type};base64,{base64.b64encode(a.content).decode()}",
                a.sha256,
            )
        )
    notes = []
    if r.judgement is None and run.state in ("finished", "checked"):
        notes.append("Not yet judged: run `testplan judge`.")
    if run.state == "running":
        notes.append("Still running: no results yet.")
    return RunSection(
        key=run.key,
        heading=_heading(run.key, proc),
        method=_method(proc),
        outcome=(
            f"invalid, repeated as a new run ({run.invalid_reason}); the product is not "
            "judged on it"
            if run.state == "invalid"
            else OUTCOME_TEXT[outcome]
        ),
        facts=facts,
        checklist=checklist,
        deviations=deviations,
        equipment=equipment,
        files=files,
        verdicts=verdicts,
        interpretation=interpretation,
        figures=figures,
        photos=photos,
        notes=notes,
        observations=[Row(cells) for cells in observation_rows(r.observations)],
    )


DECISION_EXPLAINED = (
    "How to read the verdicts. A test condition (depth, flow, temperature, duration and the "
    "like) that is not held makes the run invalid for the specimens in it: the test is "
    "repeated as a new run, and the product is not judged on it, unless a deviation accepted "
    "by an authorised approver covers it. A product criterion (ingress, function, insulation, "
    "leak, corrosion, failures) that is not met fails that specimen only. A claim is met when "
    "every run it rests on passed, not met when one of its specimens failed, and not "
    "evaluated otherwise. Under guarded acceptance the acceptance limit lies inside the "
    "specification limit by w = r x U, U the expanded uncertainty for a coverage probability "
    "of about 95 % (k = 2 unless stated): inside the acceptance limit is a pass; between the "
    "acceptance and specification limits a conditional pass (compliance likely but not shown "
    "with that probability); beyond the specification limit by up to w a conditional fail; "
    "further a fail."
)


def _conformity(roll: dict[str, Any]) -> list[Row]:
    """One row per declared claim: claim, statement, the runs it rests on or why not."""
    return [
        Row(
            [c["claim"], c["status"], ", ".join(c["runs"]) or "-", c["reason"] or "-"],
            outcome=c["status"],
        )
        for c in roll.get("claims", [])
    ]


def _deviation_lines(data: ReportData) -> list[str]:
    """Every deviation of the campaign, one line each, and each invalidated run."""
    out = []
    for r in data.runs:
        for d, who in r.deviations:
            covers = f"; accepts {d.criterion_key}" if d.criterion_key else ""
            out.append(
                f"{r.run.key}: {d.description} (reason: {d.reason}; approved by "
                f"{who.initials}{covers})"
            )
        if r.run.invalid_reason:
            out.append(f"{r.run.key}: invalid, {r.run.invalid_reason}")
    return out


NO_EDITION = "no edition: the laboratory's own method, with the statistics the plan states"

# Fields that hold markup or data, never prose.
NOT_TEXT = frozenset({"svg", "data_uri", "calendar_svg", "as_run_svg", "sha256", "keep_whole"})


def _svg(data: bytes) -> str:
    text = data.decode()
    return text[text.index("<svg") :]


def _as_run(data: ReportData) -> str | None:
    """The as-run calendar: every run started, from its real start to its finish."""
    from testplan.report.chart import as_run_chart

    runs = [
        {
            "key": r.run.key,
            "facility": r.run.facility,
            "start": r.run.started_at,
            "end": r.run.finished_at,
        }
        for r in data.runs
        if r.run.started_at is not None
    ]
    if not runs:
        return None
    return _svg(as_run_chart(runs, "Calendar as carried out (real start and finish of each run)"))


def _amendment(data: ReportData) -> tuple[str | None, list[str]]:
    """The amendment that opened this revision, in one line, and what changed since."""
    found = data.extras.get("changes")
    if found is None:
        return None, []
    line = (
        f"Revision {found.revision} amends revision {found.revision - 1}: {found.reason} "
        f"(requested by {found.requested_by} on {found.at})"
    )
    return line, list(found.lines) or ["no record changed"]


def _typeset(value: Any) -> Any:
    """``si_text`` applied to every prose string of a context, in place where it can be."""
    import dataclasses

    if isinstance(value, str):
        return si_text(value)
    if isinstance(value, list):
        return [_typeset(v) for v in value]
    if isinstance(value, tuple):
        return tuple(_typeset(v) for v in value)
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        for f in dataclasses.fields(value):
            if f.name not in NOT_TEXT:
                setattr(value, f.name, _typeset(getattr(value, f.name)))
    return value


def _basis(detail: str) -> str:
    """The verdict's detail without the 'value against limit' its own columns show."""
    head, sep, rest = detail.partition("; ")
    if " against " in head:
        return rest if sep else "-"
    return detail


def build(
    data: ReportData,
    *,
    issue_date: dt.date,
    paper: str,
    progress: Callable[[int, str], None] | None = None,
) -> ReportContext:
    """Shape the loaded campaign into the report's context; ``progress(n, run)`` is called
    as each run's section (with its plots) is done."""
    from testplan.report.chart import calendar_chart

    camp, plan = data.plan["campaign"], data.plan
    device, target = camp["device"], camp["target"]
    procs = {p["id"]: p for p in plan["procedures"]}
    runs, figure_no, photo_no = [], 1, 1
    for r in data.runs:
        section = _run_section(r, figure_no, photo_no)
        figure_no += len(section.figures)
        photo_no += len(section.photos)
        runs.append(section)
        if progress is not None:
            progress(len(runs), section.key)
    run_procs = {r.run.procedure_key for r in data.runs}
    used = [procs[p] for p in procs if p in run_procs] or [
        p for p in plan["procedures"] if p["status"] == "planned"
    ]
    started = [r.run.started_at for r in data.runs if r.run.started_at]
    ended = [r.run.finished_at for r in data.runs if r.run.finished_at]
    test_dates = (
        f"{min(started).date()} to {max(ended).date()}"
        if started and ended
        else "no test carried out yet"
    )
    depth = target.get("immersion_depth_m")
    hours = target.get("immersion_duration_h")
    item = [
        (
            "Item",
            f"{device['name']}, {device.get('maker') or ''} {device.get('model') or ''}".strip(),
        ),
        (
            "Declared protection",
            target["code"]
            + (
                f"; numeral 8 declared as {depth:g} m for {hours:g} h at the "
                f"{target['depth_reference']}"
                f" ({target['service_water']} water) (supplied by the client)"
                if depth and hours
                else ""
            ),
        ),
        ("Height in service position", f"{device['height_mm']:g} mm (supplied by the client)"),
    ]
    receipt = {s.serial: s for s in data.specimens}
    specimens = [
        Row([s.serial, s.leg, _date(s.received_on), s.receipt_condition or "not recorded"])
        for s in receipt.values()
    ]
    roll = data.rollup
    legs = [Row([leg, OUTCOME_TEXT.get(o, o)], outcome=o) for leg, o in roll["legs"].items()]
    spec_text = roll.get("specimen_text", {})
    spec_rows = [
        Row([s, receipt[s].leg if s in receipt else "", spec_text.get(s, o)], outcome=o)
        for s, o in roll["specimens"].items()
    ]
    run_rows = []
    for r in data.runs:
        o = roll["runs"].get(r.run.key, J.NOT_RUN)
        run_rows.append(
            Row(
                [
                    r.run.key,
                    ", ".join(r.specimens),
                    f"{_date(r.run.started_at)[:10]} to {_date(r.run.finished_at)[:10]}",
                    OUTCOME_TEXT.get(o, o),
                ],
                outcome=o,
            )
        )
    standards = sorted(
        {(p["standard"]["name"], p["standard"]["edition"] or NO_EDITION) for p in used}
    )
    customer = []
    for p in used:
        for name, d in p["parameters"].items():
            if d.get("provenance") == "declared":
                customer.append(Row([p["id"], name, _param(d)]))
    # Each caution once, with the procedures it applies to (several share the same line).
    applies: dict[str, list[str]] = {}
    for p in used:
        for line in p["cautions"]:
            applies.setdefault(line, []).append(p["id"])
    cautions = [(line, ids) for line, ids in applies.items()]
    external = [
        f"{r.run.key}: {r.run.external_provider}" for r in data.runs if r.run.external_provider
    ]
    calendar = None
    if plan.get("schedule"):
        calendar = _svg(
            calendar_chart(
                plan["schedule"], f"Calendar as planned, plan revision {data.revision.number}"
            )
        )
    amendment, changes = _amendment(data)
    state = data.signoff
    signatures = [Row([role, who, at, fp]) for role, who, at, fp in state.signers]
    titles = data.extras.get("titles", {})
    signed_by = [
        Row([role, who, titles.get(who.rpartition("(")[2].rstrip(")"), "-"), at])
        for role, who, at, _ in state.signers
    ]
    ctx = ReportContext(
        title=camp["title"],
        report_number=f"TR-{camp['reference']}",
        revision=state.revision,
        issue_date=issue_date.isoformat(),
        draft=not state.approved,
        replaces=state.replaces,
        manifest_root=state.manifest_root,
        paper=paper,
        laboratory=camp["laboratory"],
        laboratory_address=camp.get("laboratory_address"),
        location=camp.get("location"),
        client=camp["client"],
        client_contact=camp.get("client_contact"),
        item=item,
        specimens=specimens,
        test_dates=test_dates,
        decision_rule=data.rule.shown(),
        summary_legs=legs,
        summary_specimens=spec_rows,
        summary_runs=run_rows,
        campaign_outcome=OUTCOME_TEXT.get(roll["campaign"], roll["campaign"]),
        runs=runs,
        standards=[Row([n, e]) for n, e in standards],
        customer_data=customer,
        cautions=cautions,
        external=external,
        statements=[RESULTS_ONLY, CUSTOMER_DATA, INTERPRETATIONS, NOT_IN_PART],
        reader_guidance=READER_GUIDANCE,
        calendar_svg=calendar,
        signatures=signatures,
        conformity=_conformity(roll),
        signed_by=signed_by,
        not_performed=[
            f"{p['run']} ({', '.join(p['specimens'])})" for p in roll.get("not_performed", [])
        ],
        deviations=_deviation_lines(data),
        decision_explained=DECISION_EXPLAINED,
        figure_count=figure_no - 1,
        keep_whole=sorted(
            {
                *receipt,
                *(r.run.key for r in data.runs),
                *(p["run"] for p in roll.get("not_performed", [])),
            }
        ),
        amendment=amendment,
        changes=changes,
        as_run_svg=_as_run(data),
    )
    _typeset(ctx)
    return ctx
