"""End to end on the sample campaign: the readable plan the demo prints."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import sqlalchemy as sa
from pypdf import PdfReader
from typer.testing import CliRunner

from testplan.cli import app

SAMPLE = Path(__file__).with_name("flood-gauge-node.toml")


def test_demo_plan_reads_in_100_columns() -> None:
    result = CliRunner().invoke(app, ["plan", str(SAMPLE)])
    assert result.exit_code == 0, result.stderr
    lines = result.stdout.splitlines()
    assert max(len(line) for line in lines) <= 100
    text = " ".join(result.stdout.split())  # wrapping is layout, not content
    for needle in (
        "dust-6",
        "water-6",
        "water-8",
        "salt-mist",
        "endurance-mode-selector-knob",
        "endurance-battery-door-latch",
        "Implied, not tested",
        "take precedence",
        "2054 mm",
    ):
        assert needle in text, needle


@pytest.mark.slow
def test_demo_bench_work_records_its_runs_judges_them_and_checks_out(tmp_path: Path) -> None:
    env = {**os.environ, "PATH": f"{Path(sys.executable).parent}{os.pathsep}{os.environ['PATH']}"}
    env.pop("TESTPLAN_DB", None)
    script = Path(__file__).with_name("record_demo.sh")
    result = subprocess.run([str(script), str(tmp_path)], capture_output=True, text=True, env=env)
    assert result.returncode == 0, result.stderr[-2000:]
    assert "Traceback" not in result.stderr
    lines = result.stdout.splitlines()
    assert any(line.startswith("ok: ") and "12 raw files" in line for line in lines)
    states = dict(ln.split()[::3] for ln in lines if len(ln.split()) == 4 and "@" in ln)
    checked = sorted(run for run, state in states.items() if state == "checked")
    assert checked == [
        "endurance-mode-selector-knob@aged-1",
        "salt-mist@aged-1",
        "water-6@aged-1",
        "water-6@aged-2",
        "water-6@aged-3",
        "water-6@ip-verification-1",
        "water-6@ip-verification-2",
        "water-8@aged-1-repeat2",
        "water-8@aged-2",
        "water-8@ip-verification-1",
    ]
    # The tank dip made water-8@aged-1 invalid (not a product failure); its repeat judges
    # the product: S04 leaks at the gland, S03 does not.
    assert states["water-8@aged-1"] == "invalid"
    assert "water-8@aged-1-repeat2: FAIL" in lines
    assert "water-8@aged-2: PASS" in lines
    assert any(ln.startswith("  FAIL   water-8.ingress QC-2027-014-S04: found") for ln in lines)
    assert not any(ln.startswith("  FAIL   water-8.ingress QC-2027-014-S03") for ln in lines)
    assert "campaign: failed" in lines
    # Page 1 of the issued report: a claim met, one not met, one not evaluated, the invalid
    # run with its repeat, and the deviation, each as the records say.
    first = " ".join(PdfReader(tmp_path / "report.pdf").pages[0].extract_text().split())
    assert "IPX6 met water-6@aged-1, water-6@aged-2, water-6@aged-3" in first
    assert "IPX8 at 2 m for 72 h not met water-8@aged-1-repeat2, water-8@aged-2" in first
    assert "IP6X not evaluated dust-6@ip-verification-1" in first
    # S04's ingress at the retest
    assert "salt mist, IEC 60068-2-52 not met salt-mist@aged-1 failed: QC-2027-014-S04" in first
    assert "endurance: mode selector knob not met" in first
    assert "quality manager" in first  # the approver's job title beside the signature
    whole = " ".join(p.extract_text() for p in PdfReader(tmp_path / "report.pdf").pages)
    assert "N·mm" in whole
    # The retest rests on valid runs only: the invalid water-8@aged-1 is not evidence.
    flat = " ".join(whole.split())
    assert "ingress found in water-8@aged-1- repeat2" in flat or (
        "ingress found in water-8@aged-1-repeat2" in flat
    )
    assert "ingress found in water-8@aged-1," not in flat
    assert "Verdict: invalid, repeated as a new run (tank level drawn down" in flat
    # The leak gauge and insulation tester, whose U the verdicts use, are in the equipment.
    assert "PG-7781" in whole and "IR-3310" in whole
    summary = " ".join(
        " ".join(p.extract_text().split()) for p in PdfReader(tmp_path / "report.pdf").pages[:3]
    )
    assert "water-8@aged-1: invalid, tank level drawn down below the declared depth" in summary
    assert "invalid, repeated as water-8@aged-1-repeat2" in summary
    assert "salt-mist@aged-1: cabinet temperature 34.4 to 35.7 °C" in summary
    # The reliability claim counts S04's ingress at the seal retest as a failure, which the
    # plan does not allow: the claim is withheld, and the bound with one failure given.
    assert any(
        ln.startswith(
            "  Reliability claim withheld: 1 failure (QC-2027-014-S04, ingress at the seal "
            "retest) where the plan allows 0. What can still be said"
        )
        for ln in lines
    )
    # The cabinet's 35.7 degC in the second cycle's spray phase, judged against the spray
    # phase's 15 to 35 degC, fails that phase's condition; the accepted deviation covers it.
    # source: IEC 60068-2-52 cl. 7 (from memory): spray at 15 to 35 degC
    assert any(
        ln.startswith("  FAIL   salt-mist.spray_temperature: 35.7 degC against 15 to 35 degC; ")
        and "worst in the salt spray phase of cycle 2 (3 such phase(s) judged)" in ln
        and "outside the band for about 40 min" in ln
        for ln in lines
    )
    assert any(
        ln.startswith("  PASS") and "salt-mist.humid_rh" in ln and "humid storage phase" in ln
        for ln in lines
    )
    # The jets' nozzle pressure is logged but the plan gives it no band: shown, not judged.
    assert any(
        ln.startswith("  NOBAND water-6.logged_nozzle_pressure: 37 reading(s) from ")
        and ln.endswith("kPa; the plan gives this channel no band")
        for ln in lines
    )
    # Signed off by three people, issued, and the PDF checks out against the store.
    assert lines[-1] == f"verified: {tmp_path / 'report.pdf'}"
    engine = sa.create_engine(f"sqlite:///{tmp_path / 'testplan.db'}")
    try:
        with engine.connect() as conn:
            assert conn.execute(sa.text("SELECT count(*) FROM raw_file")).scalar() == 12
            # Observations and deviations carry the bench times they were made at.
            for table in ("observation", "deviation"):
                first_made = conn.execute(sa.text(f"SELECT min(recorded_at) FROM {table}"))
                assert str(first_made.scalar()).startswith("2027-01-"), table
            # The made-to-fail run: the lowest point above 2053.7 mm for four minutes.
            (number,) = conn.execute(
                sa.text(
                    "SELECT c.number FROM logger_channel c JOIN raw_file f "
                    "ON f.id = c.raw_file_id "
                    "WHERE f.name = 'tank-aged1.csv' AND c.quantity = 'lowest_point_depth'"
                )
            ).one()
            blocks = conn.execute(
                sa.text(
                    "SELECT b.channel, b.value FROM sample_block b JOIN raw_file f "
                    "ON f.id = b.raw_file_id WHERE f.name = 'tank-aged1.csv' ORDER BY b.block"
                )
            ).all()
            channel = np.concatenate([np.frombuffer(c, "<i4") for c, _ in blocks])
            value = np.concatenate([np.frombuffer(v, "<f8") for _, v in blocks])
            depth = value[channel == number]
            assert int(((depth > 1900) & (depth < 2053.7)).sum()) == 4
            found = conn.execute(
                sa.text(
                    "SELECT o.data_json FROM observation o JOIN specimen s ON s.id = o.specimen_id "
                    "WHERE o.kind = 'ingress' AND s.serial = 'QC-2027-014-S04'"
                )
            ).all()
            # Dry after the jets, wet in both immersions (the invalid one and its repeat).
            assert sum('"found":true' in row[0] for row in found) == 2
    finally:
        engine.dispose()
    pg = os.environ.get("TESTPLAN_TEST_PG_URL")
    if pg:
        # The demo store to PostgreSQL and back still verifies its report unchanged.
        sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
        from tests.store.conftest import fresh_postgres_database

        url, admin, name = fresh_postgres_database()
        back = tmp_path / "back.db"
        try:
            for src, dst in ((str(tmp_path / "testplan.db"), url), (url, str(back))):
                copy = subprocess.run(
                    ["testplan", "store", "copy", "--from", src, "--to", dst, "-q"],
                    capture_output=True,
                    text=True,
                    env=env,
                )
                assert copy.returncode == 0, copy.stderr
        finally:
            with admin.connect() as conn:
                conn.exec_driver_sql(f'DROP DATABASE "{name}" WITH (FORCE)')
            admin.dispose()
        check = subprocess.run(
            ["testplan", "verify", str(tmp_path / "report.pdf"), "--db", str(back)],
            capture_output=True,
            text=True,
            env=env,
        )
        assert check.returncode == 0, check.stderr
        assert check.stdout.splitlines()[-1].startswith("verified: ")
