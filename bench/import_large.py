"""Import of a large logger file: about 200 MB and 12 million samples, long format, into a
fresh SQLite store, against pandas.read_csv of the whole file plus raw sqlite3 executemany
in one transaction (file hashing included on both sides). Each side runs once in its own
process; its wall time and peak resident memory come from that child's rusage. Fails when
testplan's peak reaches PEAK_LIMIT_MB: the import reads the file in chunks, so its peak
must not grow with the file."""

from __future__ import annotations

import os
import shutil
import sys
import tempfile
from pathlib import Path

from common import RUN, SQLITE_EXECUTEMANY, TESTPLAN, bench_store, report, run_timed

SAMPLES = int(os.environ.get("BENCH_LARGE_SAMPLES", "12000000"))
PEAK_LIMIT_MB = 400
START = "2027-01-12T16:05:00Z"
CHANNELS = {"d": 2100.0, "w": 12.0, "a": 12.5, "b": 12.6}  # short names: ~17 bytes a line
MAPS = [
    "--map",
    "d[mm]=lowest_point_depth@LT-03",
    "--map",
    "w[degC]=water_temperature@LT-03",
    "--map",
    "a[degC]=specimen_temperature@LT-03#QC-2027-014-S01",
    "--map",
    "b[degC]=specimen_temperature@LT-03#QC-2027-014-S02",
]

BASELINE = (
    """
import hashlib, sqlite3, sys, uuid
import pandas as pd
path, db, start = sys.argv[1:]
hashlib.sha256(open(path, "rb").read()).hexdigest()
df = pd.read_csv(path)
t = (pd.Timestamp(start).value // 1000 + (df["time"] * 1_000_000)).astype("int64")
codes = df["channel"].astype("category").cat.codes
con = sqlite3.connect(db)
"""
    + SQLITE_EXECUTEMANY
)


def large_csv(path: Path, samples: int = SAMPLES) -> Path:
    """Long format, elapsed seconds since the run's start (given with --start), four
    channels read every second: ``time,channel,value``."""
    import numpy as np

    rng = np.random.default_rng(11)
    steps = samples // len(CHANNELS)
    per_write = 250_000
    with path.open("w") as f:
        f.write("time,channel,value\n")
        for first in range(0, steps, per_write):
            n = min(per_write, steps - first)
            noise = {c: rng.normal(0, 0.05, n) + base for c, base in CHANNELS.items()}
            lines = [f"{first + i},{c},{noise[c][i]:.2f}\n" for i in range(n) for c in CHANNELS]
            f.write("".join(lines))
    return path


def main() -> int:
    work = Path(tempfile.mkdtemp(prefix="tp-bench-large-"))
    try:
        csv = large_csv(work / "large.csv")
        size_mb = csv.stat().st_size / 1e6
        url = bench_store(work)
        db = url.removeprefix("sqlite:///")
        base_db = work / "base.db"
        script = work / "baseline.py"
        script.write_text(BASELINE)
        base = run_timed([sys.executable, str(script), str(csv), str(base_db), START])
        ours = run_timed(
            [
                TESTPLAN,
                "record",
                "import",
                RUN,
                str(csv),
                *MAPS,
                "--start",
                START,
                "--by",
                "AK",
                "--db",
                db,
                "-q",
            ]
        )
        print(
            f"large file: {size_mb:.0f} MB, {SAMPLES:,} samples; baseline peak {base[1]:.0f} MB, "
            f"testplan/baseline peak {ours[1] / base[1]:.2f}",
            flush=True,
        )
        # time is reported against the baseline, not held to a target; memory is
        ok = report(
            f"import {SAMPLES / 1e6:g}M samples into SQLite",
            ours,
            base,
            float("inf"),
            peak_limit_mb=PEAK_LIMIT_MB,
        )
    finally:
        shutil.rmtree(work, ignore_errors=True)
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
