"""Judging every criterion of a run with 1,000,000 samples, against that run's import time."""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

from common import MAPS, RUN, TESTPLAN, bench_store, long_csv, median_of, report, run_timed


def imported_store(work: Path) -> tuple[str, tuple[float, float]]:
    """A store with the 1M-sample file imported into a finished run, and the import time."""
    csv = long_csv(work / "log.csv")
    template = Path(bench_store(work).removeprefix("sqlite:///"))
    db = work / "store.db"

    def fresh() -> None:
        for suffix in ("", "-wal", "-shm"):
            Path(f"{db}{suffix}").unlink(missing_ok=True)
        shutil.copy(template, db)

    cmd = [TESTPLAN, "record", "import", RUN, str(csv), *MAPS, "--by", "AK", "--db", str(db), "-q"]
    imported = median_of(lambda: run_timed(cmd), before=fresh)
    env = {**os.environ, "TESTPLAN_DB": str(db)}
    subprocess.run(
        [TESTPLAN, "record", "finish", RUN, "--by", "AK", "--at", "2027-01-15T17:30Z", "-q"],
        check=True,
        env=env,
        stdout=subprocess.DEVNULL,
    )
    return str(db), imported


def main() -> int:
    work = Path(tempfile.mkdtemp(prefix="tp-bench-"))
    try:
        db, imported = imported_store(work)
        ours = median_of(lambda: run_timed([TESTPLAN, "judge", RUN, "--db", db, "-q"]))
        ok = report("judge a run of 1M samples (baseline: its import)", ours, imported, 0.25)
    finally:
        shutil.rmtree(work, ignore_errors=True)
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
