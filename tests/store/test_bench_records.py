"""Registers and runs at the bench: calibration refusal, deviations, checklist, finish, check."""

from __future__ import annotations

import json

import pytest

from .conftest import START, Bench

AT = "2027-01-16T09:00Z"  # a data check after the run finished
RUN = "water-8@ip-verification-1"  # planned 2027-01-12 16:03 to 2027-01-15 16:03, London


def test_start_records_operator_equipment_ambient_and_checklist(bench: Bench) -> None:
    bench(
        "record",
        "start",
        RUN,
        *START,
        "--precondition",
        "24 h at 23 degC, 50 %RH",
        "--at",
        "2027-01-12T16:05+00:00",
        "--quiet",
    )
    row = bench.sql(
        "SELECT state, started_at, ambient_temperature_c, ambient_humidity_pct, "
        "ambient_pressure_hpa, preconditioning, specimen_state_json FROM run WHERE key = :k",
        k=RUN,
    )[0]
    assert row[0] == "running" and str(row[1]).startswith("2027-01-12 16:05:00")
    assert row[2:6] == (21.0, 45.0, 1012.0, "24 h at 23 degC, 50 %RH")
    checklist = json.loads(row[6])
    assert len(checklist) >= 2 and all(item["as_required"] for item in checklist)
    used = bench.sql(
        "SELECT c.channel, c.certificate FROM run_equipment ue "
        "JOIN calibration c ON c.id = ue.calibration_id JOIN run r ON r.id = ue.run_id "
        "WHERE r.key = :k ORDER BY c.channel",
        k=RUN,
    )
    assert used == [("lowest_point_depth", "VC-2026-118"), ("water_temperature", "VC-2026-118")]


def test_equipment_due_before_the_planned_end_is_out_of_service(bench: Bench) -> None:
    bench(
        "equipment",
        "calibrate",
        "LT-03",
        "--channel",
        "water_temperature",
        "--certificate",
        "VC-2027-009",
        "--provider",
        "Gellimoor Calibration Ltd",
        "--calibrated",
        "2027-01-05",
        "--due",
        "2027-01-14",
        "--uncertainty",
        "0.3",
        "--quiet",
    )
    # The run lasts 72 h: started on the 12th it ends on the 15th, after the due date.
    line = bench.fail("record", "start", RUN, *START, "--at", "2027-01-12T16:05Z")
    assert line == (
        "error: --equipment: LT-03 is out of service for this run: its water_temperature "
        "calibration (VC-2027-009) was due 2027-01-14, and the run is planned to end "
        "2027-01-15 (recalibrate it or use other equipment)"
    )
    assert bench.sql("SELECT state FROM run WHERE key = :k", k=RUN) == [("planned",)]
    assert bench.sql("SELECT count(*) FROM run_equipment") == [(0,)]


def test_equipment_without_a_calibration_is_refused(bench: Bench) -> None:
    bench("equipment", "add", "TT-07", "--description", "thermometer", "--quiet")
    args = [a if a != "LT-03" else "TT-07" for a in START]
    line = bench.fail("record", "start", RUN, *args)
    assert "TT-07 has no calibration on record" in line and "out of service" in line


def test_unknown_equipment_person_and_run_are_named(bench: Bench) -> None:
    args = [a if a != "LT-03" else "PT-3" for a in START]
    assert "no equipment 'PT-3' in the register (did you mean 'LT-03'?)" in bench.fail(
        "record", "start", RUN, *args
    )
    args = [a if a != "AK" else "AX" for a in START]
    assert "error: --operator: no person 'AX' in the people register" in bench.fail(
        "record", "start", RUN, *args
    )
    assert bench.fail("record", "start", "water-8@ip-verification-9", *START) == (
        "error: RUN: no run 'water-8@ip-verification-9' in the store "
        "(did you mean 'water-8@ip-verification-1'?)"
    )


def test_operator_must_be_authorised(bench: Bench) -> None:
    args = [a if a != "AK" else "MO" for a in START]
    line = bench.fail("record", "start", RUN, *args)
    assert line.startswith("error: --operator: Mark Osei (MO) is not authorised as operator")


def test_checklist_must_be_confirmed_or_differences_described(bench: Bench) -> None:
    args = [a for a in START if a != "--state-ok"]
    line = bench.fail("record", "start", RUN, *args)
    assert line.startswith("error: --state-ok: specimen state item 1 not confirmed: ")
    differs = [
        "--state-differs",
        "1: powered to log during the test",
        "--state-differs",
        "2: gland torque 2.3 N*m, tool limit",
    ]
    line = bench.fail("record", "start", RUN, *args, *differs)
    assert line.startswith("error: --state-ok: specimen state item 3 not confirmed: ")
    assert "error: --state-differs: checklist item 9 does not exist" in bench.fail(
        "record", "start", RUN, *START, "--state-differs", "9: extra"
    )
    bench("record", "start", RUN, *START, *differs, "--quiet")
    checklist = json.loads(
        bench.sql("SELECT specimen_state_json FROM run WHERE key = :k", k=RUN)[0][0]
    )
    assert [item["as_required"] for item in checklist[:3]] == [False, False, True]
    assert checklist[0]["note"] == "powered to log during the test"


def test_a_deviation_needs_an_authorised_approver_and_a_reason(bench: Bench) -> None:
    dev = ["--deviation", "depth held at 1.95 m for 10 min while the tank was topped up"]
    line = bench.fail("record", "start", RUN, *START, *dev)
    assert line.startswith("error: --deviation: a deviation needs a reason and an authorised")
    line = bench.fail(
        "record",
        "start",
        RUN,
        *START,
        *dev,
        "--deviation-reason",
        "valve leak",
        "--approved-by",
        "JT",
        "--key",
        bench.key("JT"),
    )
    assert line.startswith("error: --approved-by: Jo Tran (JT) is not authorised as approver")
    assert bench.sql("SELECT state FROM run WHERE key = :k", k=RUN) == [("planned",)]
    bench(
        "record",
        "start",
        RUN,
        *START,
        *dev,
        "--deviation-reason",
        "valve leak",
        "--approved-by",
        "MO",
        "--key",
        bench.key("MO"),
        "--quiet",
    )
    rows = bench.sql(
        "SELECT d.description, d.reason, p.initials FROM deviation d "
        "JOIN person p ON p.id = d.approved_by_id"
    )
    assert rows == [(dev[1], "valve leak", "MO")]
    bench(
        "record",
        "deviation",
        RUN,
        "--description",
        "water at 14 degC, specimen at 21 degC",
        "--reason",
        "chiller fault",
        "--approved-by",
        "MO",
        "--key",
        bench.key("MO"),
        "--by",
        "AK",
        "--quiet",
    )
    assert bench.sql("SELECT count(*) FROM deviation") == [(2,)]


def test_finish_then_check_by_a_second_person(bench: Bench) -> None:
    assert "has not been started" in bench.fail("record", "finish", RUN, "--by", "AK")
    bench("record", "start", RUN, *START, "--at", "2027-01-12T16:05Z", "--quiet")
    line = bench.fail("record", "finish", RUN, "--by", "AK", "--at", "2027-01-12T16:00Z")
    assert "is not after the start" in line
    assert "has no time zone" in bench.fail(
        "record", "finish", RUN, "--by", "AK", "--at", "2027-01-15T16:10"
    )
    bench("record", "finish", RUN, "--by", "AK", "--at", "2027-01-15T16:10Z", "--quiet")
    bench.enrol("AK")
    line = bench.fail("record", "check", RUN, *bench.signed("AK"), "--at", AT)
    assert line.startswith("error: --by: Anna Kowal (AK) is not authorised as checker on ")
    assert line.endswith("(a manager grants it with `testplan people grant AK --role checker`)")
    bench("people", "grant", "AK", "--role", "checker", "--why", "trained",
          *bench.signed("QM"), "--quiet")  # fmt: skip
    assert bench.fail("record", "check", RUN, *bench.signed("AK"), "--at", AT) == (
        "error: --by: AK ran this run; the data check needs a second person"
    )
    # Nothing observed and nothing logged: refused until observed, then until each condition
    # without data is dispositioned (here by approved deviations).
    checked_at = ("--at", "2027-01-16T09:00Z")
    line = bench.fail("record", "check", RUN, *bench.signed("JT"), *checked_at)
    assert "has no observation" in line
    bench("record", "observe", RUN, "--note", "tank log lost", "--by", "AK", "--quiet")
    for criterion in ("water-8.depth", "water-8.temperature"):
        assert f"condition {criterion} failed" in bench.fail(
            "record", "check", RUN, *bench.signed("JT"), "--at", "2027-01-16T09:00Z"
        )
        bench(
            *("record", "deviation", RUN, "--description", "log lost", "--reason", "logger"),
            *("--approved-by", "MO", "--key", bench.key("MO"), "--by", "AK"),
            *("--covers", criterion, "--quiet"),
        )
    bench("record", "check", RUN, *bench.signed("JT"), "--note", "logs complete",
          "--at", "2027-01-16T09:00Z", "--quiet")  # fmt: skip
    assert bench.sql("SELECT state, check_note FROM run WHERE key = :k", k=RUN) == [
        ("checked", "logs complete")
    ]
    assert "is finished and its data checked" in bench.fail(
        "record", "observe", RUN, "--note", "late", "--by", "AK"
    )


@pytest.mark.parametrize(
    ("args", "expected"),
    [
        (
            ["ZZ", "--role", "tester"],
            "error: --role: unknown role 'tester'; roles are operator, "
            "checker, preparer, reviewer, approver, manager",
        ),
        (["AK", "--role", "operator"], "error: INITIALS: 'AK' is already in the people register"),
    ],
)
def test_people_register_refusals(bench: Bench, args: list[str], expected: str) -> None:
    line = bench.fail("people", "add", *args, "--name", "Someone", *bench.signed("QM"))
    assert line.startswith(expected)


def test_calibration_refusals(bench: Bench) -> None:
    base = [
        "equipment",
        "calibrate",
        "LT-03",
        "--certificate",
        "X",
        "--provider",
        "Y",
        "--uncertainty",
        "1",
    ]
    assert "unknown channel 'depth'" in bench.fail(
        *base, "--channel", "depth", "--calibrated", "2026-01-01", "--due", "2027-01-01"
    )
    assert "the due date must be after the calibration date" in bench.fail(
        *base, "--channel", "torque", "--calibrated", "2027-01-01", "--due", "2026-01-01"
    )
    assert "cannot read '2027-13-01' as a date" in bench.fail(
        *base, "--channel", "torque", "--calibrated", "2027-13-01", "--due", "2028-01-01"
    )
    assert "no equipment 'PT-99'" in bench.fail(
        "equipment",
        "calibrate",
        "PT-99",
        "--channel",
        "torque",
        "--certificate",
        "X",
        "--provider",
        "Y",
        "--uncertainty",
        "1",
        "--calibrated",
        "2026-01-01",
        "--due",
        "2027-01-01",
    )


def test_calibration_values_with_units_are_converted_to_the_plan_unit(bench: Bench) -> None:
    bench(
        "equipment",
        "calibrate",
        "LT-03",
        "--channel",
        "lowest_point_depth",
        "--certificate",
        "VC-2027-010",
        "--provider",
        "Gellimoor Calibration Ltd",
        "--calibrated",
        "2026-12-01",
        "--due",
        "2027-12-01",
        "--uncertainty",
        "0.4 cm",
        "--offset",
        "-0.2 cm",
        "--range",
        "0 m",
        "3 m",
        "--quiet",
    )
    row = bench.sql(
        'SELECT uncertainty, coverage_k, "offset", range_min, range_max FROM calibration '
        "WHERE certificate = 'VC-2027-010'"
    )
    assert row == [(4.0, 2.0, -2.0, 0.0, 3000.0)]
