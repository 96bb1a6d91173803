"""Specimen legs, facility capacity, dependencies and the due date."""

from __future__ import annotations

import datetime as dt
import tomllib
from pathlib import Path
from typing import Any

import pytest
from typer.testing import CliRunner

from testplan.cli import app
from testplan.domain.plan import Plan
from testplan.domain.planner import build_plan
from testplan.errors import PlanningError
from testplan.reader import campaign_from_dict, read_campaign
from tests.conftest import BASE

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_campaign/flood-gauge-node.toml"


def laid_out(
    target: dict[str, Any],
    legs: list[dict[str, Any]],
    facilities: list[dict[str, Any]],
    **calendar: Any,
) -> Plan:
    data = tomllib.loads(BASE)
    data["target"].update(target)
    data["leg"] = legs
    data["facility"] = facilities
    data["calendar"] = {"start": dt.date(2027, 1, 11), **calendar}
    return build_plan(campaign_from_dict(data))


def two_in_one_tank(**calendar: Any) -> Plan:
    """Two specimens through a 72 h IPX8 immersion in a tank holding one at a time."""
    return laid_out(
        {"code": "IPX8", "immersion_depth": "2 m", "immersion_duration": "72 h"},
        [{"name": "ip", "specimens": 2, "tests": ["water"]}],
        [{"name": "tank", "serves": ["water"], "capacity": 1}],
        **calendar,
    )


def when(iso: str) -> dt.datetime:
    return dt.datetime.fromisoformat(iso)


def test_hand_worked_due_date_chamber_time_runs_on() -> None:
    # Two specimens, one tank, IPX8 for 72 h, start Mon 2027-01-11 08:00: the second start
    # (Thu 08:00) is a workday, and its 72 h run on through the weekend.
    p = two_in_one_tank()
    assert p.schedule == two_in_one_tank().schedule  # deterministic
    sched = p.schedule
    assert sched is not None
    assert [(r["start"], r["end"]) for r in sched["runs"]] == [
        ("2027-01-11T08:00", "2027-01-14T08:00"),
        ("2027-01-14T08:00", "2027-01-17T08:00"),
    ]
    assert sched["due"] == "2027-01-17T08:00"


def test_hand_worked_weekend_start_rule() -> None:
    p = two_in_one_tank(start=dt.date(2027, 1, 13))
    sched = p.schedule
    assert sched is not None
    # Wed 13th 08:00 -> Sat 16th 08:00; the next start waits for Mon 18th 08:00 -> Thu 21st
    assert [(r["start"], r["end"]) for r in sched["runs"]] == [
        ("2027-01-13T08:00", "2027-01-16T08:00"),
        ("2027-01-18T08:00", "2027-01-21T08:00"),
    ]
    assert sched["due"] == "2027-01-21T08:00"
    assert sched["critical_path"] == ["water-8@ip-1", "water-8@ip-2"]
    assert sched["facilities"] == [{"name": "tank", "capacity": 1, "busy_h": 144.0, "idle_h": 48.0}]


def test_between_tests_step_delays_the_next_test() -> None:
    # IP67 on one specimen: dust 8 h from Mon 08:00 to 16:00, then 4 h handling must start
    # in working hours: 16:00 -> 20:00; the immersion starts Tue 08:00 and ends 08:30.
    p = laid_out(
        {"code": "IP67"},
        [{"name": "ip", "specimens": 1, "tests": ["dust", "water"]}],
        [
            {"name": "chamber", "serves": ["dust"], "capacity": 1},
            {"name": "tank", "serves": ["water"], "capacity": 1},
        ],
    )
    sched = p.schedule
    assert sched is not None
    runs = {r["procedure"]: r for r in sched["runs"]}
    assert (runs["dust-6"]["start"], runs["dust-6"]["end"]) == (
        "2027-01-11T08:00",
        "2027-01-11T16:00",
    )
    assert (runs["water-7"]["start"], runs["water-7"]["end"]) == (
        "2027-01-12T08:00",
        "2027-01-12T08:30",
    )
    assert runs["water-7"]["after"] == [runs["dust-6"]["id"]]
    assert p.specimens is not None
    assert p.specimens[0]["serial"] == "T-001-S01"
    assert "inspect, dry and re-seal (4 h)" in p.specimens[0]["steps"][0]


def test_sample_capacity_never_exceeded_and_order_held() -> None:
    loaded = read_campaign(SAMPLE)
    p = build_plan(loaded.campaign)
    sched = p.schedule
    assert sched is not None and p.specimens is not None
    caps = {f.name: f.capacity for f in loaded.campaign.facilities}
    runs = sched["runs"]
    events = sorted({when(r["start"]) for r in runs})
    for t in events:
        for name, cap in caps.items():
            load = sum(
                len(r["specimens"])
                for r in runs
                if r["facility"] == name and when(r["start"]) <= t < when(r["end"])
            )
            assert load <= cap, (name, t)
    by_id = {r["id"]: r for r in runs}
    for spec in p.specimens:
        mine = [by_id[rid] for rid in spec["runs"]]
        for a, b in zip(mine, mine[1:], strict=False):
            assert when(a["end"]) <= when(b["start"])
    for r in runs:
        start = when(r["start"])
        assert start.weekday() < 5 and 8 <= start.hour < 17
    assert sched["due"] == max(r["end"] for r in runs)
    assert [s["leg"] for s in p.specimens].count("control") == 1


@pytest.mark.parametrize(
    ("legs", "message", "key"),
    [
        (
            [{"name": "x", "specimens": 1, "tests": ["salt_mist"]}],
            "does not produce",
            "leg[1].tests",
        ),
        (
            [{"name": "x", "specimens": 1, "tests": ["water", "dust"]}],
            "dust must come before",
            "leg[1].tests",
        ),
        ([{"name": "x", "specimens": 1, "tests": ["rain"]}], "unknown test", "leg[1].tests"),
        (
            [
                {"name": "x", "specimens": 1, "tests": []},
                {"name": "x", "specimens": 1, "tests": []},
            ],
            "used twice",
            "leg[2].name",
        ),
    ],
)
def test_bad_legs_refused(legs: list[dict[str, Any]], message: str, key: str) -> None:
    with pytest.raises(PlanningError, match=message) as info:
        laid_out({"code": "IP67"}, legs, [])
    assert info.value.key == key


def test_unknown_facility_target_refused() -> None:
    with pytest.raises(PlanningError, match="neither a test") as info:
        laid_out(
            {"code": "IP67"},
            [{"name": "x", "specimens": 1, "tests": ["water"]}],
            [{"name": "tank", "serves": ["water-9"], "capacity": 1}],
        )
    assert info.value.key == "facility[1].serves"


def test_cli_bad_leg_is_one_line(runner: CliRunner, tmp_path: Path) -> None:
    text = SAMPLE.read_text().replace(
        'tests = ["endurance", "salt_mist", "water"]',
        'tests = ["endurance", "salt_mist", "watter"]',
    )
    path = tmp_path / "c.toml"
    path.write_text(text)
    result = runner.invoke(app, ["plan", str(path)])
    assert result.exit_code == 1
    line = next(i for i, t in enumerate(text.splitlines(), 1) if "watter" in t)
    assert result.stderr.startswith(f"error: {path}:{line}: leg[2].tests: unknown test 'watter'")


def test_chart_written(runner: CliRunner, tmp_path: Path) -> None:
    out = tmp_path / "cal.svg"
    result = runner.invoke(app, ["plan", str(SAMPLE), "--chart", str(out)])
    assert result.exit_code == 0, result.stderr
    svg = out.read_text()
    assert svg.startswith("<?xml") and "<svg" in svg
    assert "immersion tank" in svg and "due Thu 28 Jan 08:00" in svg


def test_chart_needs_svg_or_png(runner: CliRunner, tmp_path: Path) -> None:
    result = runner.invoke(app, ["plan", str(SAMPLE), "--chart", str(tmp_path / "c.gif")])
    assert result.exit_code == 2
