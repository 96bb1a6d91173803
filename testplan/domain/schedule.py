"""Lay a campaign out: specimen legs, runs on shared facilities, and a calendar.

A greedy list scheduler: legs in file order, each specimen's tests in the leg's order,
runs of one procedure batched up to the facility's capacity. Hands-on steps (starting a
run, between-test handling) start only on workdays within the working hours; chamber time
runs on through nights and weekends. Times are naive local datetimes of the lab.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field
from typing import Any

from testplan.domain.campaign import Calendar, Campaign, Facility
from testplan.domain.plan import Procedure
from testplan.errors import PlanningError

GROUPS = ("probe", "dust", "water", "salt_mist", "endurance")
SALT_RECOVERY_H = 2.0  # upper end of the 1-2 h recovery at standard atmosphere


@dataclass
class Run:
    """One run: a procedure on a batch of specimens in one facility."""

    id: str
    procedure: str
    specimens: list[str]
    leg: str
    facility: str | None
    start: dt.datetime
    end: dt.datetime
    after: list[str] = field(default_factory=list)
    driver: str | None = None

    def to_json(self) -> dict[str, Any]:
        return {
            "id": self.id,
            "procedure": self.procedure,
            "specimens": list(self.specimens),
            "leg": self.leg,
            "facility": self.facility,
            "start": self.start.isoformat(timespec="minutes"),
            "end": self.end.isoformat(timespec="minutes"),
            "after": list(self.after),
        }


@dataclass
class Specimen:
    """A specimen with its serial, leg, ordered runs and between-test steps."""

    serial: str
    leg: str
    runs: list[str] = field(default_factory=list)
    steps: list[str] = field(default_factory=list)

    def to_json(self) -> dict[str, Any]:
        return {
            "serial": self.serial,
            "leg": self.leg,
            "runs": list(self.runs),
            "steps": list(self.steps),
        }


@dataclass
class Schedule:
    """The laid-out campaign: specimens, runs, due date, critical path, facility use."""

    start: dt.datetime
    specimens: list[Specimen]
    runs: list[Run]
    critical_path: list[str]
    facility_use: list[dict[str, Any]]
    unallocated: list[str]
    timezone: str = "UTC"

    @property
    def due(self) -> dt.datetime:
        """When the last result is due: the end of the last run."""
        return max((r.end for r in self.runs), default=self.start)

    def to_json(self) -> dict[str, Any]:
        return {
            "start": self.start.date().isoformat(),
            "timezone": self.timezone,
            "due": self.due.isoformat(timespec="minutes"),
            "runs": [r.to_json() for r in self.runs],
            "critical_path": list(self.critical_path),
            "facilities": self.facility_use,
        }


class _Clock:
    """Working-time rules: when a hands-on step may start."""

    def __init__(self, cal: Calendar) -> None:
        self.workdays = set(cal.workdays)
        self.open = dt.time(cal.day_start_h, 0)
        self.close = dt.time(cal.day_end_h, 0)

    def hands_on(self, t: dt.datetime) -> dt.datetime:
        """The first moment at or after ``t`` when a hands-on step may start."""
        for _ in range(3700):
            if t.weekday() in self.workdays and self.open <= t.time() < self.close:
                return t
            if t.weekday() in self.workdays and t.time() < self.open:
                return dt.datetime.combine(t.date(), self.open)
            t = dt.datetime.combine(t.date() + dt.timedelta(days=1), self.open)
        raise PlanningError("no workday found within ten years", key="calendar.workdays")


@dataclass
class _Usage:
    start: dt.datetime
    end: dt.datetime
    count: int
    run: str


def _facility_for(proc: Procedure, facilities: tuple[Facility, ...]) -> Facility | None:
    """The facility serving this procedure by id, else one serving its group, else None."""
    for f in facilities:
        if proc.id in f.serves:
            return f
    for f in facilities:
        if proc.group in f.serves:
            return f
    return None


def _fits(
    usage: list[_Usage], start: dt.datetime, end: dt.datetime, count: int, capacity: int
) -> bool:
    # Occupancy only rises at the start of an interval: check at our start and at each
    # overlapping start.
    points = [start] + [u.start for u in usage if start < u.start < end]
    for p in points:
        load = sum(u.count for u in usage if u.start <= p < u.end)
        if load + count > capacity:
            return False
    return True


def _procedures_by_group(procs: list[Procedure]) -> dict[str, list[Procedure]]:
    out: dict[str, list[Procedure]] = {g: [] for g in GROUPS}
    for p in procs:
        if p.status == "planned":
            out[p.group].append(p)
    for g in out:
        out[g].sort(key=lambda p: (p.order, p.id))
    return out


def check_legs(campaign: Campaign, procs: list[Procedure]) -> None:
    """Refuse legs naming a test group the target does not produce, or too few specimens."""
    by_group = _procedures_by_group(procs)
    for i, leg in enumerate(campaign.legs, start=1):
        for test in leg.tests:
            if test not in GROUPS:
                raise PlanningError(
                    f"unknown test {test!r}; use {', '.join(GROUPS)}", key=f"leg[{i}].tests"
                )
            if not by_group[test]:
                raise PlanningError(
                    f"leg {leg.name!r} asks for {test!r}, which this campaign does not produce",
                    key=f"leg[{i}].tests",
                )
        if len(set(leg.tests)) != len(leg.tests):
            raise PlanningError(f"leg {leg.name!r} names a test twice", key=f"leg[{i}].tests")
        if "endurance" in leg.tests:
            for p in by_group["endurance"]:
                n = int(p.parameter("rig_specimens").value or 0)
                if leg.specimens < n:
                    raise PlanningError(
                        f"leg {leg.name!r} has {leg.specimens} specimens but {p.id} needs {n} "
                        "for its statistics",
                        key=f"leg[{i}].specimens",
                    )
    seen: set[str] = set()
    for i, leg in enumerate(campaign.legs, start=1):
        if leg.name in seen:
            raise PlanningError(f"leg name {leg.name!r} is used twice", key=f"leg[{i}].name")
        seen.add(leg.name)
        if "dust" in leg.tests and "water" in leg.tests:
            if leg.tests.index("dust") > leg.tests.index("water"):
                raise PlanningError(
                    f"leg {leg.name!r}: dust must come before water on one specimen",
                    key=f"leg[{i}].tests",
                )
    ids = {p.id for p in procs if p.status == "planned"}
    for i, f in enumerate(campaign.facilities, start=1):
        for s in f.serves:
            if s not in GROUPS and s not in ids:
                raise PlanningError(
                    f"{s!r} is neither a test ({', '.join(GROUPS)}) nor a planned procedure id",
                    key=f"facility[{i}].serves",
                )


def _between(group: str, next_group: str | None, between_h: float) -> tuple[str, float] | None:
    if group == "salt_mist":
        return ("rinse and recover at standard atmosphere", SALT_RECOVERY_H)
    if group in ("dust", "water") and next_group is not None:
        return ("inspect, dry and re-seal", between_h)
    return None


# No run is scheduled that lasts longer than this (ten years): a value is wrong.
MAX_RUN_H = 10 * 365.25 * 24


def lay_out(campaign: Campaign, procs: list[Procedure]) -> Schedule | None:
    """Allocate specimens to legs and schedule every run; None when the file has no legs.

    Raises PlanningError (naming the key) for a leg the target cannot serve.
    """
    if not campaign.legs:
        return None
    if campaign.calendar is None:
        raise PlanningError(
            "legs need a [calendar] with a start date",
            key="leg[1]",
            fix="add [calendar] start = 2027-01-11",
        )
    check_legs(campaign, procs)
    for i, leg in enumerate(campaign.legs, start=1):
        too_long = [p for p in procs if p.group in leg.tests and p.duration_h > MAX_RUN_H]
        if too_long:
            raise PlanningError(
                f"{too_long[0].id} would take {too_long[0].duration_h:.3g} h, more than ten years",
                key=f"leg[{i}].tests",
                fix="check the rate, cycle count or duration that sets it",
            )
    cal = campaign.calendar
    clock = _Clock(cal)
    start = clock.hands_on(dt.datetime.combine(cal.start, dt.time(cal.day_start_h, 0)))
    by_group = _procedures_by_group(procs)
    usage: dict[str, list[_Usage]] = {f.name: [] for f in campaign.facilities}
    runs: list[Run] = []
    specimens: list[Specimen] = []
    serial_no = 0
    for leg in campaign.legs:
        leg_specs: list[Specimen] = []
        for _ in range(leg.specimens):
            serial_no += 1
            spec = Specimen(f"{campaign.info.reference}-S{serial_no:02d}", leg.name)
            leg_specs.append(spec)
        specimens += leg_specs
        ready = {s.serial: start for s in leg_specs}
        last_run: dict[str, str | None] = {s.serial: None for s in leg_specs}
        sequence = [(g, p) for g in leg.tests for p in by_group[g]]
        for idx, (group, proc) in enumerate(sequence):
            facility = _facility_for(proc, campaign.facilities)
            capacity = facility.capacity if facility else len(leg_specs)
            batch_size = max(1, min(capacity, len(leg_specs)))
            duration = dt.timedelta(hours=proc.duration_h)
            for b in range(0, len(leg_specs), batch_size):
                batch = leg_specs[b : b + batch_size]
                earliest = max(ready[s.serial] for s in batch)
                driver = max(batch, key=lambda s: ready[s.serial])
                driver_run = last_run[driver.serial]
                t = clock.hands_on(earliest)
                if facility is not None:
                    use = usage[facility.name]
                    candidates = sorted({t, *[u.end for u in use if u.end > t]})
                    for cand in candidates:
                        cand = clock.hands_on(cand)
                        if _fits(use, cand, cand + duration, len(batch), capacity):
                            if cand > t:
                                blockers = [u for u in use if u.end <= cand and u.end > earliest]
                                if blockers:
                                    driver_run = max(blockers, key=lambda u: u.end).run
                            t = cand
                            break
                    else:  # pragma: no cover - the last end always fits
                        raise PlanningError("could not place a run", key=f"leg.{leg.name}")
                run_id = f"{proc.id}@{leg.name}-{b // batch_size + 1}"
                run = Run(
                    run_id,
                    proc.id,
                    [s.serial for s in batch],
                    leg.name,
                    facility.name if facility else None,
                    t,
                    t + duration,
                    after=sorted({r for s in batch if (r := last_run[s.serial])}),
                    driver=driver_run,
                )
                runs.append(run)
                if facility is not None:
                    usage[facility.name].append(_Usage(run.start, run.end, len(batch), run_id))
                next_group = sequence[idx + 1][0] if idx + 1 < len(sequence) else None
                step = _between(group, next_group, cal.between_tests_h)
                for s in batch:
                    s.runs.append(run_id)
                    end = run.end
                    if step is not None:
                        s.steps.append(f"after {proc.id}: {step[0]} ({step[1]:g} h)")
                        end = clock.hands_on(end) + dt.timedelta(hours=step[1])
                    ready[s.serial] = end
                    last_run[s.serial] = run_id
        for s in leg_specs:
            if not leg.tests:
                s.steps.append("kept unexposed as a control")
    used_groups = {g for leg in campaign.legs for g in leg.tests}
    unallocated = [p.id for g, ps in by_group.items() if g not in used_groups for p in ps]
    return Schedule(
        start=start,
        specimens=specimens,
        runs=runs,
        critical_path=_critical_path(runs),
        facility_use=_facility_use(campaign.facilities, runs, start),
        unallocated=unallocated,
        timezone=cal.timezone,
    )


def _critical_path(runs: list[Run]) -> list[str]:
    if not runs:
        return []
    by_id = {r.id: r for r in runs}
    current: Run | None = max(runs, key=lambda r: (r.end, r.id))
    path: list[str] = []
    while current is not None and current.id not in path:
        path.append(current.id)
        current = by_id.get(current.driver) if current.driver else None
    return list(reversed(path))


def _facility_use(
    facilities: tuple[Facility, ...], runs: list[Run], start: dt.datetime
) -> list[dict[str, Any]]:
    due = max((r.end for r in runs), default=start)
    span_h = (due - start).total_seconds() / 3600.0
    out = []
    for f in facilities:
        intervals = sorted((r.start, r.end) for r in runs if r.facility == f.name)
        busy = 0.0
        cur_s: dt.datetime | None = None
        cur_e: dt.datetime | None = None
        for s, e in intervals:
            if cur_e is None or s > cur_e:
                if cur_s is not None and cur_e is not None:
                    busy += (cur_e - cur_s).total_seconds()
                cur_s, cur_e = s, e
            else:
                cur_e = max(cur_e, e)
        if cur_s is not None and cur_e is not None:
            busy += (cur_e - cur_s).total_seconds()
        busy_h = busy / 3600.0
        out.append(
            {
                "name": f.name,
                "capacity": f.capacity,
                "busy_h": round(busy_h, 3),
                "idle_h": round(max(0.0, span_h - busy_h), 3),
            }
        )
    return out
