"""Interruptions lose nothing: a process killed with SIGKILL (no clean-up of any kind) in
the middle of an import, a report render or a sign-off leaves a store that opens, passes
`store check` and holds the whole change or none of it; running the command again works.

Each test first times the command run to the end, then kills fresh attempts at fractions
of that time, so kills land before, during and after the write.
"""

from __future__ import annotations

import datetime as dt
import os
import signal
import subprocess
import sys
import time
from collections.abc import Callable
from pathlib import Path

import pytest
from pypdf import PdfReader

from tests.store.conftest import PASS, RUN, START, Bench, record_and_judge, sign, stock

from .conftest import Signed

pytestmark = pytest.mark.slow  # each test runs and kills several processes

TESTPLAN = str(Path(sys.executable).parent / "testplan")
FRACTIONS = (0.3, 0.45, 0.6, 0.7, 0.8, 0.9, 1.0, 1.2)
ROWS = 150_000


def run_cli(bench: Bench, *args: str) -> subprocess.Popen[str]:
    env = {**os.environ, "TESTPLAN_DB": bench.url, "TESTPLAN_KEY_PASSPHRASE": PASS}
    return subprocess.Popen(
        [TESTPLAN, *args],
        env=env,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        cwd=bench.folder,
    )


def timed(bench: Bench, *args: str) -> float:
    start = time.perf_counter()
    proc = run_cli(bench, *args)
    out, err = proc.communicate()
    assert proc.returncode in (0, 3), err
    return time.perf_counter() - start


def killed_after(bench: Bench, delay: float, *args: str) -> int:
    """Start the command, SIGKILL it after ``delay`` seconds; its return code."""
    proc = run_cli(bench, *args)
    try:
        proc.wait(timeout=delay)
    except subprocess.TimeoutExpired:
        proc.send_signal(signal.SIGKILL)
        proc.wait()
    proc.communicate()
    return proc.returncode


def store_checks_out(bench: Bench) -> None:
    result = bench("store", "check", ok=False)
    assert result.exit_code == 0, (result.stdout, result.stderr)
    assert result.stdout.startswith("ok: ")


def long_log(folder: Path) -> Path:
    t0 = dt.datetime(2027, 1, 12, 16, 5, tzinfo=dt.UTC)
    path = folder / "tank.csv"
    with path.open("w") as f:
        f.write("time,depth\n")
        for s in range(ROWS):
            f.write(f"{t0 + dt.timedelta(seconds=s):%Y-%m-%dT%H:%M:%SZ},{2100 + s % 7}\n")
    return path


def kill_at_fractions(
    attempt: Callable[[float], int], total: float, settled: Callable[[], bool]
) -> list[int]:
    """Kill attempts at growing fractions of ``total`` until one completes; return codes."""
    codes = []
    for f in FRACTIONS:
        codes.append(attempt(total * f))
        if settled():
            break
    return codes


def test_a_killed_import_leaves_all_or_nothing(bench: Bench) -> None:
    bench("record", "start", RUN, *START, "--at", "2027-01-12T16:05Z", "--quiet")
    log = long_log(bench.folder)
    args = ("record", "import", RUN, str(log), "--map", "depth[mm]=lowest_point_depth@LT-03")
    args += ("--by", "AK", "--quiet")
    # How long a whole import takes, on a second store made the same way.
    apart = bench.folder / "timing"  # its own folder: its people get key files of their own
    apart.mkdir()
    timing = stock(Bench(f"sqlite:///{apart / 'timing.db'}", apart))
    timing("record", "start", RUN, *START, "--at", "2027-01-12T16:05Z", "--quiet")
    total = timed(timing, *args)
    before = bench.sample_count()

    def files() -> int:
        return int(
            bench.sql(
                "SELECT count(*) FROM raw_file f JOIN run r ON r.id = f.run_id WHERE r.key = :k",
                k=RUN,
            )[0][0]
        )

    def attempt(delay: float) -> int:
        code = killed_after(bench, delay, *args)
        store_checks_out(bench)
        stored = bench.sample_count() - before
        assert (files(), stored) in ((0, 0), (1, ROWS)), (files(), stored)
        return code

    codes = kill_at_fractions(attempt, total, lambda: files() == 1)
    assert -signal.SIGKILL in codes  # at least one attempt really was cut short
    if files() == 0:
        timed(bench, *args)
    assert files() == 1 and bench.sample_count() - before == ROWS
    store_checks_out(bench)
    # The operator who saw the kill runs the import again: it committed, so it is refused.
    line = bench.fail(*args)
    assert (
        line.startswith("error: FILE: tank.csv (sha256 ") and "is already imported into run" in line
    )
    assert line.endswith("(tank.csv) (the same bytes are stored once per run)")
    assert files() == 1 and bench.sample_count() - before == ROWS


def test_a_killed_report_leaves_no_half_written_pdf(signed: Signed) -> None:
    bench = signed.bench
    out = bench.folder / "again.pdf"
    args = ("report", "QC-2027-014", "-o", str(out), "--issue-date", "2027-02-01",
            *bench.signed("MO"), "--quiet")  # fmt: skip
    total = timed(bench, *args)
    pages = len(PdfReader(out).pages)
    out.unlink()

    def whole() -> bool:
        # renamed into place only when whole: a complete PDF the store knows as issued
        if not out.exists():
            return False
        assert len(PdfReader(out).pages) == pages
        assert bench("verify", str(out)).stdout.splitlines()[-1] == f"verified: {out}"
        return True

    def attempt(delay: float) -> int:
        code = killed_after(bench, delay, *args)
        whole()
        store_checks_out(bench)
        return code

    codes = kill_at_fractions(attempt, total, out.exists)
    assert -signal.SIGKILL in codes
    if not out.exists():
        timed(bench, *args)
    assert whole()


@pytest.fixture
def judged(bench: Bench, monkeypatch: pytest.MonkeyPatch) -> Bench:
    monkeypatch.setenv("TESTPLAN_KEY_PASSPHRASE", PASS)
    return record_and_judge(bench)


def test_a_killed_sign_off_leaves_the_signature_whole_or_absent(judged: Bench) -> None:
    bench = judged
    args = tuple(sign(bench, "prepared", "RP")) + ("--quiet",)

    def signatures() -> int:
        return int(bench.sql("SELECT count(*) FROM signature")[0][0])

    # The preparer's signature, run to the end, gives the time; the reviewer's is killed.
    total = timed(bench, *args)
    assert signatures() == 1
    args = tuple(sign(bench, "reviewed", "LV")) + ("--quiet",)

    def attempt(delay: float) -> int:
        code = killed_after(bench, delay, *args)
        store_checks_out(bench)
        # the reviewer signs the preparer's manifest: one manifest, one or two signatures,
        # none pointing at a manifest that is not there
        assert bench.sql("SELECT count(*) FROM manifest") == [(1,)]
        assert signatures() in (1, 2)
        orphans = bench.sql(
            "SELECT count(*) FROM signature s LEFT JOIN manifest m ON m.id = s.manifest_id "
            "WHERE m.id IS NULL"
        )
        assert orphans == [(0,)]
        return code

    codes = kill_at_fractions(attempt, total, lambda: signatures() == 2)
    assert -signal.SIGKILL in codes
    if signatures() == 1:
        timed(bench, *args)
    assert signatures() == 2
    assert sorted(r[0] for r in bench.sql("SELECT role FROM signature")) == [
        "prepared",
        "reviewed",
    ]
    store_checks_out(bench)
