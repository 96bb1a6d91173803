"""The sign-off manifest over 1,000,000 samples (hashed per chunk), against the import time."""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

from common import (
    RUN,
    TESTPLAN,
    bench_store,
    import_cmd,
    long_csv,
    median_of,
    py,
    report,
    run_timed,
)

MANIFEST = """
import sys
from testplan.store.engine import open_store
from testplan.store.records import find_campaign
from testplan.store.signoff import compute_items, root_of
store = open_store(sys.argv[1])
with store.reading() as session:
    root_of(compute_items(session, find_campaign(session, None)))
"""


def imported_store(work: Path) -> tuple[str, tuple[float, float]]:
    """A store with the 1M-sample file imported into a finished run, and the import time
    of a whole `testplan record import` process."""
    csv = long_csv(work / "log.csv")
    template = Path(bench_store(work).removeprefix("sqlite:///"))
    db = work / "store.db"

    def fresh() -> None:
        for suffix in ("", "-wal", "-shm"):
            Path(f"{db}{suffix}").unlink(missing_ok=True)
        shutil.copy(template, db)

    imported = median_of(lambda: run_timed(import_cmd(csv, str(db))), before=fresh)
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
        ours = median_of(lambda: run_timed([*py(MANIFEST), db]))
        ok = report("manifest over 1M samples (baseline: their import)", ours, imported, 0.5)
    finally:
        shutil.rmtree(work, ignore_errors=True)
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
