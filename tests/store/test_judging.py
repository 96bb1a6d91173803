"""`testplan judge` on a real store: verdicts kept with their inputs, roll-up, exit codes."""

from __future__ import annotations

import datetime as dt
import json

import pytest

from .conftest import START, Bench

RUN = "water-8@ip-verification-1"

CHECKED = "2027-01-15T17:00Z"  # the data check, after the run finished


def tank_csv(bench: Bench, dip: bool) -> str:
    """Minute readings from 16:05Z: lowered in 3 min, 2100 mm held, raised; water 12 degC."""
    start = dt.datetime(2027, 1, 12, 16, 5, tzinfo=dt.UTC)
    lines = ["time,depth,water"]
    for m in range(4332):
        depth = 2100.0
        if m < 3:
            depth = 700.0 * m
        elif m >= 4329:
            depth = 700.0 * (4331 - m)
        elif dip and m in (600, 601):
            depth = 2000.0
        t = start + dt.timedelta(minutes=m)
        lines.append(f"{t:%Y-%m-%dT%H:%M:%SZ},{depth},12.0")
    return str(bench.write("tank.csv", "\n".join(lines) + "\n"))


def record(bench: Bench, dip: bool) -> None:
    bench("record", "start", RUN, *START, "--at", "2027-01-12T16:05Z", "--quiet")
    bench(
        "record",
        "import",
        RUN,
        tank_csv(bench, dip),
        "--map",
        "depth[mm]=lowest_point_depth@LT-03",
        "--map",
        "water[degC]=water_temperature@LT-03",
        "--by",
        "AK",
        "--quiet",
    )
    for s in ("QC-2027-014-S01", "QC-2027-014-S02"):
        bench(
            "record",
            "observe",
            RUN,
            "--specimen",
            s,
            "--ingress",
            "water:none",
            "--function",
            "pass",
            "--insulation",
            "2 Gohm",
            "--by",
            "AK",
            "--quiet",
        )
    bench("record", "finish", RUN, "--by", "AK", "--at", "2027-01-15T16:40Z", "--quiet")


def test_a_failing_run_exits_3_and_says_why(bench: Bench) -> None:
    record(bench, dip=True)
    result = bench("judge", ok=False)
    assert result.exit_code == 3
    assert f"{RUN}: FAIL  (data not yet checked by a second person)" in result.stdout
    assert (
        "  FAIL   water-8.depth: 2000 mm against >= 2053.7 mm; below the limit for about 2 min "
        "in the exposure, first at 2027-01-13 02:05:00Z; U = 4 mm (k = 2)"
    ) in result.stdout
    assert (
        "decision rule: guarded acceptance, w = 1 x U (ILAC-G8); agreed: client letter "
        "QG-QA-0112 of 2027-01-04" in result.stdout
    )
    assert result.stderr.strip().endswith(f"error: 1 run(s) did not pass: {RUN}")


def test_verdicts_keep_value_limit_margin_uncertainty_window_and_input_hash(bench: Bench) -> None:
    record(bench, dip=True)
    bench("judge", ok=False)
    row = bench.sql(
        "SELECT v.outcome, v.measured, v.limit_min, v.margin, v.uncertainty, v.coverage_k, "
        "v.window_start, v.window_end, v.inputs_sha256, j.rule, j.guard_factor, j.tool_version, "
        "j.rule_agreement FROM verdict v JOIN judgement j ON j.id = v.judgement_id "
        "WHERE v.criterion_key = 'water-8.depth'"
    )[0]
    assert row[:6] == ("fail", 2000.0, 2053.697, pytest.approx(-53.697), 4.0, 2.0)
    assert str(row[6]).startswith("2027-01-12 16:08:00") and str(row[7]).startswith(
        "2027-01-15 16:13"
    )
    assert len(row[8]) == 64
    assert row[9:] == ("guarded", 1.0, "0.1.0", "client letter QG-QA-0112 of 2027-01-04")
    # Judged per specimen where the evidence is per specimen, run-wide where it is not.
    per = bench.sql("SELECT count(*) FROM verdict WHERE criterion_key = 'water-8.ingress'")
    assert per == [(2,)]


def test_the_same_evidence_judged_again_adds_nothing_and_new_evidence_does(bench: Bench) -> None:
    record(bench, dip=False)
    bench("judge", ok=False)  # no leak test recorded yet: no data
    bench("judge", ok=False)
    assert bench.sql("SELECT count(*) FROM judgement") == [(1,)]
    sheet = bench.write(
        "leak.toml",
        """\
[[leak_test]]
specimen = "QC-2027-014-S01"
start_pressure = "1200.00 mbar"
end_pressure = "1199.80 mbar"
duration = "10 min"
start_temperature = "21.4 degC"
end_temperature = "21.4 degC"
barometric_pressure = "1012 mbar"
dead_volume = "45 mL"
""",
    )
    bench("record", "observe", RUN, "--sheet", str(sheet), "--by", "AK", "--quiet")
    bench("judge", ok=False)
    assert bench.sql("SELECT count(*) FROM judgement") == [(2,)]
    actions = [a for (a,) in bench.sql("SELECT action FROM audit WHERE action = 'run.judge'")]
    assert actions == ["run.judge", "run.judge"]


def test_json_output_and_roll_up(bench: Bench) -> None:
    record(bench, dip=True)
    result = bench("judge", "--json", ok=False)
    data = json.loads(result.stdout)
    (run,) = data["runs"]
    assert run["outcome"] == "fail" and run["decision_rule"]["rule"] == "guarded"
    depth = next(v for v in run["verdicts"] if v["criterion"] == "water-8.depth")
    assert depth["limits"] == {"min": 2053.697, "max": None}
    assert depth["acceptance"]["min"] == pytest.approx(2057.697)
    roll = data["rollup"]
    # The depth dip is a test condition: the run is invalid, not the product a failure.
    assert roll["runs"][RUN] == "invalid: repeat"
    assert roll["runs"]["dust-6@ip-verification-1"] == "not started"
    assert roll["specimens"]["QC-2027-014-S01"] == "invalid: repeat"
    assert roll["legs"] == {"ip-verification": "invalid: repeat", "aged": "not started"}
    assert roll["campaign"] == "failed" or roll["campaign"] == "invalid: repeat"


def test_only_finished_runs_are_judged(bench: Bench) -> None:
    bench("record", "start", RUN, *START, "--at", "2027-01-12T16:05Z", "--quiet")
    assert bench.fail("judge", RUN) == (
        f"error: RUN: cannot judge run {RUN}: it is running (finish it first with "
        "`testplan record finish`)"
    )


def test_endurance_reliability_is_an_interpretation(bench: Bench) -> None:
    run = "endurance-mode-selector-knob@aged-1"
    bench("equipment", "add", "TQ-11", "--description", "rig", "--quiet")
    bench(
        "equipment",
        "calibrate",
        "TQ-11",
        "--channel",
        "cycle_count",
        "--certificate",
        "C",
        "--provider",
        "P",
        "--calibrated",
        "2026-08-10",
        "--due",
        "2027-08-10",
        "--uncertainty",
        "0",
        "--k",
        "1",
        "--quiet",
    )
    start = [a if a != "LT-03" else "TQ-11" for a in START]
    bench("record", "start", run, *start, "--at", "2027-01-12T11:00Z", "--quiet")
    t0 = dt.datetime(2027, 1, 12, 11, tzinfo=dt.UTC)
    rows = ["time,cycles"] + [
        f"{t0 + dt.timedelta(minutes=c / 10):%Y-%m-%dT%H:%M:%SZ},{c}"
        for c in range(0, 54_001, 1000)
    ]
    path = bench.write("rig.csv", "\n".join(rows) + "\n")
    bench(
        "record",
        "import",
        run,
        str(path),
        "--map",
        "cycles[cycle]=cycle_count@TQ-11",
        "--by",
        "AK",
        "--quiet",
    )
    bench("record", "finish", run, "--by", "AK", "--at", "2027-01-16T05:05Z", "--quiet")
    data = json.loads(bench("judge", run, "--json", ok=False).stdout)
    interpretation = data["runs"][0]["interpretation"]
    assert interpretation["kind"] == "interpretation"
    # The failure definition counts ingress at the seal retest, which none has had yet: the
    # failures are not all counted, so no claim and no bound.
    assert interpretation["status"] == "withheld"
    assert interpretation["reliability"] is None
    assert interpretation["text"] == (
        "Reliability claim withheld: failures not yet all counted: no seal retest of "
        "QC-2027-014-S03, QC-2027-014-S04, QC-2027-014-S05 yet."
    )


# --- run validity apart from product verdicts ---------------------------------------------


def deviation(bench: Bench, covers: str) -> tuple[str, ...]:
    """`record deviation` on RUN, approved (and signed) by MO, covering one criterion."""
    return (
        *("record", "deviation", RUN, "--description", "level 2000 mm for 2 min at hour 10"),
        *("--reason", "topping up", "--approved-by", "MO", "--key", bench.key("MO")),
        *("--by", "AK", "--covers", covers),
    )


def test_a_failed_condition_blocks_the_data_check_until_dispositioned(bench: Bench) -> None:
    record(bench, dip=True)
    assert bench.fail("record", "check", RUN, *bench.signed("MO"), "--at", CHECKED) == (
        f"error: RUN: run {RUN}: condition water-8.depth failed and is not dispositioned "
        "(record an approved deviation covering it (`testplan record deviation --covers "
        "water-8.depth`) or invalidate the run (`testplan record invalidate`))"
    )
    # A deviation that covers another criterion does not dispose of it.
    bench(*deviation(bench, "water-8.leak"), "--quiet")
    check = ("record", "check", RUN, *bench.signed("MO"), "--at", CHECKED)
    assert "water-8.depth failed" in bench.fail(*check)
    assert bench.fail(*deviation(bench, "water-8.nothing")).startswith(
        f"error: --covers: run {RUN} has no criterion 'water-8.nothing'"
    )
    # Approved deviations covering the dip (it also breaks the held duration) and the
    # specimen temperature not logged (no data is no pass): the check goes through after.
    for criterion in ("water-8.depth", "water-8.duration", "water-8.temperature"):
        assert f"{criterion} failed" in bench.fail(*check)
        bench(*deviation(bench, criterion), "--quiet")
    bench("record", "check", RUN, *bench.signed("MO"), "--at", "2027-01-15T17:00Z", "--quiet")
    roll = json.loads(bench("judge", "--json", ok=False).stdout)["rollup"]
    # Valid now; the leak test was never recorded, so the product is not yet judged whole.
    assert roll["runs"][RUN] == "incomplete"
    assert roll["specimen_text"]["QC-2027-014-S01"] == "incomplete (0 of 4 runs done)"


def test_an_invalid_run_is_repeated_as_a_new_run(bench: Bench) -> None:
    record(bench, dip=True)
    # Only an approver may invalidate; AK is an operator.
    assert "approver" in bench.fail("record", "invalidate", RUN, "--reason", "dip", "--by", "AK")
    out = bench("record", "invalidate", RUN, "--reason", "tank drawn down", "--by", "MO")
    assert f"{RUN}: invalid; repeat planned as {RUN}-repeat2" in out.stdout
    assert bench.fail("record", "check", RUN, *bench.signed("MO"), "--at", CHECKED) == (
        f"error: RUN: cannot check run {RUN}: it was declared invalid and a repeat planned"
    )
    roll = json.loads(bench("judge", "--json", ok=False).stdout)["rollup"]
    assert roll["runs"][RUN] == f"invalid, repeated as {RUN}-repeat2"
    assert roll["runs"][f"{RUN}-repeat2"] == "not started"
    assert [RUN + "-repeat2", ["QC-2027-014-S01", "QC-2027-014-S02"]] in [
        [p["run"], p["specimens"]] for p in roll["not_performed"]
    ]
    # The invalidation and the planned repeat are in the audit trail.
    actions = [r[0] for r in bench.sql("SELECT action FROM audit ORDER BY seq")]
    assert "run.invalidate" in actions and "run.plan_repeat" in actions


def test_a_run_with_outcome_criteria_and_no_observation_cannot_be_checked(bench: Bench) -> None:
    bench("record", "start", RUN, *START, "--at", "2027-01-12T16:05Z", "--quiet")
    bench("record", "finish", RUN, "--by", "AK", "--at", "2027-01-15T16:40Z", "--quiet")
    assert bench.fail("record", "check", RUN, *bench.signed("MO"), "--at", CHECKED) == (
        f"error: RUN: run {RUN} has no observation, and its outcome criteria (water-8.ingress, "
        "water-8.function, water-8.leak, water-8.insulation) need one (record them with "
        "`testplan record observe` first)"
    )


def test_claims_are_stated_one_by_one(bench: Bench) -> None:
    record(bench, dip=False)
    claims = {
        c["claim"]: c
        for c in json.loads(bench("judge", "--json", ok=False).stdout)["rollup"]["claims"]
    }
    # IP66/IP68 with 2 m 72 h declared: one claim per numeral, then salt mist and endurance.
    assert list(claims)[:3] == ["IP6X", "IPX6", "IPX8 at 2 m for 72 h"]
    assert claims["IP6X"]["status"] == "not evaluated"
    assert claims["IPX8 at 2 m for 72 h"]["status"] == "not evaluated"
    assert RUN in claims["IPX8 at 2 m for 72 h"]["runs"]
    assert claims["IPX8 at 2 m for 72 h"]["reason"] == (
        "0 of 3 runs passed; 1 invalid, 2 not performed"
    )


def test_a_claim_not_met_names_the_specimens_that_failed_and_where() -> None:
    from testplan.domain import judge as J
    from testplan.store.judging import _claim_reason

    pairs = [
        ("water-8@aged-1-repeat2", J.PASSED, "QC-2027-014-S03"),
        ("water-8@aged-1-repeat2", J.FAILED, "QC-2027-014-S04"),
        ("water-8@aged-2", J.PASSED, "QC-2027-014-S05"),
    ]
    keys = ["water-8@aged-1-repeat2", "water-8@aged-2"]
    assert _claim_reason(J.NOT_MET, keys, pairs) == (
        "failed: QC-2027-014-S04 in water-8@aged-1-repeat2"
    )
    assert _claim_reason(J.MET, keys, pairs[:1]) == ""
