"""Shared helpers for the benchmarks: time commands in fresh processes, median of runs,
peak memory from the child's own rusage, and the one-line result format."""

from __future__ import annotations

import os
import statistics
import subprocess
import sys
import time
from collections.abc import Callable, Sequence
from pathlib import Path

RUNS = int(os.environ.get("BENCH_RUNS", "5"))
ROOT = Path(__file__).resolve().parents[1]
VENV_BIN = Path(sys.executable).parent
TESTPLAN = str(VENV_BIN / "testplan")


def run_timed(cmd: Sequence[str], env: dict[str, str] | None = None) -> tuple[float, float]:
    """Wall time (s) and peak resident memory (MB) of one command in a fresh process."""
    start = time.perf_counter()
    proc = subprocess.Popen(
        cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env=env or os.environ.copy()
    )
    _, status, usage = os.wait4(proc.pid, 0)
    elapsed = time.perf_counter() - start
    err = proc.stderr.read().decode() if proc.stderr else ""
    if os.waitstatus_to_exitcode(status) not in (0, 3):
        raise SystemExit(f"{' '.join(cmd)} failed:\n{err}")
    return elapsed, usage.ru_maxrss / 1024


def median_of(
    trial: Callable[[], tuple[float, float]],
    runs: int = RUNS,
    before: Callable[[], None] | None = None,
) -> tuple[float, float]:
    """Median wall time and the largest peak memory over ``runs`` trials."""
    times, peaks = [], []
    for _ in range(runs):
        if before is not None:
            before()
        t, peak = trial()
        times.append(t)
        peaks.append(peak)
    return statistics.median(times), max(peaks)


def report(
    name: str,
    ours: tuple[float, float],
    base: tuple[float, float],
    target: float,
    peak_limit_mb: float | None = None,
) -> bool:
    """Print `name: testplan X s, baseline Y s, ratio Z, peak N MB` and whether it holds."""
    ratio = ours[0] / base[0]
    ok = ratio <= target and (peak_limit_mb is None or ours[1] < peak_limit_mb)
    limit = f", limit {peak_limit_mb:g} MB" if peak_limit_mb else ""
    print(
        f"{name}: testplan {ours[0]:.3f} s, baseline {base[0]:.3f} s, ratio {ratio:.2f} "
        f"(target <= {target:g}), peak {ours[1]:.0f} MB{limit} -> {'ok' if ok else 'MISSED'}",
        flush=True,
    )
    return ok


# The baselines' store: one row per sample, written by sqlite3 executemany in one
# transaction (after the script has set df, codes, t and con).
SQLITE_EXECUTEMANY = """
rid = uuid.uuid4().hex
con.execute("CREATE TABLE IF NOT EXISTS sample (raw_file_id CHAR(32), seq BIGINT, channel INT, "
            "t_us BIGINT, value FLOAT, PRIMARY KEY (raw_file_id, seq))")
with con:
    con.executemany("INSERT INTO sample VALUES (?, ?, ?, ?, ?)",
                    zip([rid] * len(df), range(len(df)), codes.tolist(), t.tolist(),
                        df["value"].tolist()))
con.close()
"""


def py(code: str) -> list[str]:
    return [sys.executable, "-c", code]


SAMPLE = ROOT / "sample_campaign" / "flood-gauge-node.toml"
RUN = "water-8@ip-verification-1"
MAPS = [
    "--map",
    "depth[mm]=lowest_point_depth@LT-03",
    "--map",
    "water[degC]=water_temperature@LT-03",
    "--map",
    "s1[degC]=specimen_temperature@LT-03#QC-2027-014-S01",
    "--map",
    "s2[degC]=specimen_temperature@LT-03#QC-2027-014-S02",
]


def import_cmd(csv: Path, db: str) -> list[str]:
    """`testplan record import` of the long file into the bench run."""
    return [TESTPLAN, "record", "import", RUN, str(csv), *MAPS, "--by", "AK", "--db", db, "-q"]


def long_csv(path: Path, rows: int = 1_000_000) -> Path:
    """A long-format logger file: 4 channels, 1 s steps, rows/4 time stamps, UTC."""
    import datetime as dt

    import numpy as np

    if path.exists():
        return path
    n = rows // 4
    t0 = dt.datetime(2027, 1, 12, 16, 5, tzinfo=dt.UTC).timestamp()
    stamps = np.array(
        [dt.datetime.fromtimestamp(t0 + i, dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ") for i in range(n)]
    )
    rng = np.random.default_rng(7)
    values = {
        "depth": 2100 + rng.normal(0, 0.2, n),
        "water": 12 + rng.normal(0, 0.05, n),
        "s1": 12.5 + rng.normal(0, 0.05, n),
        "s2": 12.6 + rng.normal(0, 0.05, n),
    }
    with path.open("w") as f:
        f.write("time,channel,value\n")
        for i in range(n):
            for name, v in values.items():
                f.write(f"{stamps[i]},{name},{v[i]:.3f}\n")
    return path


MANAGER_PASSPHRASE = "bench manager passphrase"  # of QM's key, folder/qm.pem in bench_store


def bench_store(folder: Path, url: str | None = None) -> str:
    """A store with the sample campaign, an operator, a calibrated instrument and the run
    started; returns its URL."""
    url = url or f"sqlite:///{folder / 'template.db'}"
    key = folder / "qm.pem"
    env = {
        **os.environ,
        "TESTPLAN_DB": url,
        "TESTPLAN_KEY": str(key),
        "TESTPLAN_KEY_PASSPHRASE": MANAGER_PASSPHRASE,
    }

    def tp(*args: str) -> None:
        subprocess.run([TESTPLAN, *args], check=True, env=env, stdout=subprocess.DEVNULL)

    # the store's founding manager enrols their key, then adds the operator
    tp("people", "add", "QM", "--name", "Quinn Marsh", "--role", "manager", "-q")
    if not key.exists():
        tp("keys", "new", "QM", "--out", str(key))
    tp("keys", "register", "QM", "--public", f"{key}.pub", "--by", "QM", "-q")
    tp("people", "add", "AK", "--name", "Anna Kowal", "--role", "operator", "--by", "QM", "-q")
    tp("init", str(SAMPLE), "-q")
    tp("equipment", "add", "LT-03", "--description", "transmitter", "-q")
    for channel in ("lowest_point_depth", "water_temperature", "specimen_temperature"):
        tp(
            "equipment",
            "calibrate",
            "LT-03",
            "--channel",
            channel,
            "--certificate",
            "C",
            "--provider",
            "P",
            "--calibrated",
            "2026-06-01",
            "--due",
            "2027-06-01",
            "--uncertainty",
            "0.2",
            "-q",
        )
    tp(
        "record",
        "start",
        RUN,
        "--operator",
        "AK",
        "--equipment",
        "LT-03",
        "--ambient-temperature",
        "21 degC",
        "--ambient-humidity",
        "45 %",
        "--ambient-pressure",
        "1012 hPa",
        "--state-ok",
        "--at",
        "2027-01-12T16:05Z",
        "-q",
    )
    return url
