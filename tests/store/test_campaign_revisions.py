"""`testplan init`: the campaign, its procedures, criteria, specimens and runs; plan revisions."""

from __future__ import annotations

from pathlib import Path

from .conftest import SAMPLE, START, Bench


def test_init_stores_procedures_criteria_specimens_and_runs(bench: Bench) -> None:
    assert bench.sql("SELECT reference, title FROM campaign") == [
        ("QC-2027-014", "Qualification of the Quorrel Q-Brook 7 flood-gauge node")
    ]
    assert bench.sql("SELECT count(*) FROM specimen")[0][0] == 6
    assert bench.sql("SELECT count(*) FROM run")[0][0] == 15
    row = bench.sql(
        "SELECT c.quantity, c.comparison, c.min, c.unit, c.evaluated FROM criterion c "
        "JOIN procedure p ON p.id = c.procedure_id WHERE c.key = 'water-8.depth'"
    )
    assert row == [("lowest_point_depth", ">=", 2053.697, "mm", "whole_run")]
    serials = bench.sql(
        "SELECT s.serial FROM run_specimen rs JOIN run r ON r.id = rs.run_id "
        "JOIN specimen s ON s.id = rs.specimen_id WHERE r.key = 'water-8@ip-verification-1' "
        "ORDER BY s.serial"
    )
    assert [s for (s,) in serials] == ["QC-2027-014-S01", "QC-2027-014-S02"]


def test_planned_times_are_stored_in_utc_from_the_lab_time_zone(bench: Bench) -> None:
    # The calendar is Europe/London; in July the lab is one hour ahead of UTC.
    text = SAMPLE.read_text().replace("start = 2027-01-11", "start = 2027-07-12")
    changed = bench.write("summer.toml", text)
    bench("init", str(changed), "--why", "moved to July", "--quiet")
    (start,) = bench.sql(
        "SELECT planned_start FROM run WHERE key = 'probe-access-d@ip-verification-1'"
    )[0]
    assert str(start).startswith("2027-07-12 07:00:00")


def test_the_same_file_again_changes_nothing(bench: Bench) -> None:
    result = bench("init", str(SAMPLE))
    assert result.stdout.strip() == "QC-2027-014: unchanged, still at plan revision 1"
    assert bench.sql("SELECT count(*) FROM plan_revision")[0][0] == 1


def test_a_changed_file_makes_a_revision_and_started_runs_keep_theirs(bench: Bench) -> None:
    bench("record", "start", "probe-access-d@ip-verification-1", *START, "--quiet")
    text = (
        SAMPLE.read_text()
        .replace('between_tests = "4 h"', 'between_tests = "6 h"')
        .replace('tests = ["endurance", "salt_mist", "water"]', 'tests = ["endurance", "water"]')
    )
    changed = bench.write("rev2.toml", text)
    result = bench("init", str(changed), "--by", "AK", "--why", "no salt mist on the aged leg")
    assert result.stdout.strip() == (
        "QC-2027-014: plan revision 2: 0 runs added, 13 moved to it, 1 kept on the revision "
        "they ran against, 1 withdrawn"
    )
    rows = dict(
        bench.sql("SELECT r.key, p.number FROM run r JOIN plan_revision p ON p.id = r.revision_id")
    )
    assert rows["probe-access-d@ip-verification-1"] == 1
    assert rows["water-8@aged-1"] == 2
    assert bench.sql("SELECT state FROM run WHERE key = 'salt-mist@aged-1'")[0][0] == "withdrawn"
    reasons = bench.sql("SELECT number, reason, created_by FROM plan_revision ORDER BY number")
    assert reasons == [(1, None, reasons[0][2]), (2, "no salt mist on the aged leg", "AK")]
    assert reasons[0][2].startswith("os:")
    # Both revisions keep their own source text and procedures.
    assert bench.sql("SELECT count(*) FROM procedure")[0][0] == 2 * 19
    line = bench.fail("record", "start", "salt-mist@aged-1", *START)
    assert line == ("error: RUN: cannot start run salt-mist@aged-1: it was withdrawn from the plan")


def test_a_bad_campaign_file_stores_nothing(db_url: str, tmp_path: Path) -> None:
    bench = Bench(db_url, tmp_path)
    bad = bench.write(
        "bad.toml", SAMPLE.read_text().replace('height = "310 mm"', 'height = "310 s"')
    )
    line = bench.fail("init", str(bad))
    number = bad.read_text().splitlines().index('height = "310 s"') + 1
    assert line.startswith(f"error: {bad}:{number}: device.height: '310 s' is not a length")
    assert not (tmp_path / "lab.db").exists() or bench.sql("SELECT count(*) FROM campaign") == [
        (0,)
    ]
