"""Judging every criterion of a run with 1,000,000 samples, against that run's import.

Both are timed in one warm process (`record import`, then `record finish`, then `judge`,
each through the command-line app, after one untimed round to load the libraries): the
ratio compares the work of judging with the work of importing. Start-up, the same for
every command, is measured by startup.py.
"""

from __future__ import annotations

import json
import resource
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

from common import MAPS, RUN, RUNS, bench_store, long_csv, report

WARM = """
import json, shutil, statistics, sys, time
import typer
from testplan.cli import app

template, csv, run = sys.argv[1:4]
maps, runs = json.loads(sys.argv[4]), int(sys.argv[5])

def call(*args):
    try:
        app(list(args), standalone_mode=False)
    except (SystemExit, typer.Exit) as done:
        code = getattr(done, "exit_code", getattr(done, "code", 0))
        if code not in (0, 3, None):
            raise SystemExit(f"{args[:2]} failed with {code}")

imports, judges = [], []
for i in range(runs + 1):
    db = f"{template}.{i}.db"
    shutil.copy(template, db)
    t = time.perf_counter()
    call("record", "import", run, csv, *maps, "--by", "AK", "--db", db, "-q")
    imported = time.perf_counter() - t
    call("record", "finish", run, "--by", "AK", "--at", "2027-01-15T17:30Z", "--db", db, "-q")
    t = time.perf_counter()
    call("judge", run, "--db", db, "-q")
    judged = time.perf_counter() - t
    if i:  # the first round loads the libraries
        imports.append(imported)
        judges.append(judged)
print(json.dumps([statistics.median(imports), statistics.median(judges)]))
"""


def main() -> int:
    work = Path(tempfile.mkdtemp(prefix="tp-bench-"))
    try:
        csv = long_csv(work / "log.csv")
        template = bench_store(work).removeprefix("sqlite:///")
        script = work / "warm.py"
        script.write_text(WARM)
        out = subprocess.run(
            [sys.executable, str(script), template, str(csv), RUN, json.dumps(MAPS), str(RUNS)],
            check=True,
            capture_output=True,
            text=True,
        )
        imported, judged = json.loads(out.stdout.strip().splitlines()[-1])
        peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024
        ok = report(
            "judge a run of 1M samples (baseline: its import, both in a warm process)",
            (judged, peak),
            (imported, peak),
            0.25,
        )
    finally:
        shutil.rmtree(work, ignore_errors=True)
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
