"""Import: a 1,000,000-row long logger file into SQLite, against pandas.read_csv plus raw
sqlite3 executemany in one transaction (file hashing included on both sides)."""

from __future__ import annotations

import shutil
import sys
import tempfile
from pathlib import Path

from common import (
    SQLITE_EXECUTEMANY,
    bench_store,
    import_cmd,
    long_csv,
    median_of,
    report,
    run_timed,
)

BASELINE = (
    """
import hashlib, sqlite3, sys, uuid
import pandas as pd
path, db = sys.argv[1:]
hashlib.sha256(open(path, "rb").read()).hexdigest()
df = pd.read_csv(path)
t = pd.to_datetime(df["time"], format="ISO8601", utc=True).astype("int64") // 1000
codes = df["channel"].astype("category").cat.codes
con = sqlite3.connect(db)
"""
    + SQLITE_EXECUTEMANY
)


def main() -> int:
    work = Path(tempfile.mkdtemp(prefix="tp-bench-"))
    try:
        csv = long_csv(work / "log.csv")
        template = Path(bench_store(work).removeprefix("sqlite:///"))
        db = work / "store.db"
        base_db = work / "base.db"
        script = work / "baseline.py"
        script.write_text(BASELINE)

        def fresh() -> None:
            for p in (db, base_db):
                for suffix in ("", "-wal", "-shm"):
                    Path(f"{p}{suffix}").unlink(missing_ok=True)
            shutil.copy(template, db)

        base = median_of(
            lambda: run_timed([sys.executable, str(script), str(csv), str(base_db)]), before=fresh
        )
        ours = median_of(
            lambda: run_timed(import_cmd(csv, str(db))),
            before=fresh,
        )
        ok = report("import 1M rows into SQLite", ours, base, 1.5, peak_limit_mb=400)
    finally:
        shutil.rmtree(work, ignore_errors=True)
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
