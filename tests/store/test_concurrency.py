"""Several benches writing into one campaign at once: nothing lost, nothing half-seen."""

from __future__ import annotations

import datetime as dt
import os
import subprocess
import sys
import time

import pytest

from .conftest import SAMPLE, START, Bench

RUN = "water-8@ip-verification-1"
ROWS = 50_000
PROCESSES = 4


@pytest.mark.slow
def test_four_processes_import_50000_samples_each(bench: Bench) -> None:
    bench("record", "start", RUN, *START, "--at", "2027-01-12T16:05Z", "--quiet")
    files = []
    for n in range(PROCESSES):
        t0 = dt.datetime(2027, 1, 12, 16, 5, tzinfo=dt.UTC) + dt.timedelta(milliseconds=250 * n)
        lines = ["time,depth"] + [
            f"{(t0 + dt.timedelta(seconds=i)).isoformat()},{2100 + (i % 7) * 0.1:.1f}"
            for i in range(ROWS)
        ]
        files.append(bench.write(f"bench-{n}.csv", "\n".join(lines) + "\n"))
    env = {**os.environ, "TESTPLAN_DB": bench.url}
    procs = [
        subprocess.Popen(
            [sys.executable, "-m", "testplan", "record", "import", RUN, str(f), "--map",
             "depth[mm]=lowest_point_depth@LT-03", "--by", "AK", "--quiet"],
            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env,
        )
        for f in files
    ]  # fmt: skip
    seen = 0
    while any(p.poll() is None for p in procs):
        # A reader never sees a half-finished import: every visible raw file has all its
        # samples.
        for expected, stored in bench.sql(
            "SELECT f.samples, (SELECT coalesce(sum(n), 0) FROM sample_block s "
            "WHERE s.raw_file_id = f.id) "
            "FROM raw_file f"
        ):
            assert stored == expected
            seen += 1
        time.sleep(0.2)
    for p in procs:
        out, err = p.communicate()
        assert p.returncode == 0, err
        assert "Traceback" not in err and "locked" not in err.lower()
        assert f"imported {ROWS} samples" in out
    assert bench.sample_count() == PROCESSES * ROWS
    assert bench.sql("SELECT count(*) FROM audit WHERE action = 'data.import'") == [(PROCESSES,)]
    assert bench("store", "check").stdout.startswith("ok: ")


def test_a_reading_session_reads_while_another_bench_holds_the_write_lock(tmp_path) -> None:  # type: ignore[no-untyped-def]
    """A page or report reads the last committed state while an import is being written: on
    SQLite the reading session takes no write lock (else it would wait out the busy timeout
    and fail), and it does not see the writer's uncommitted rows."""
    import sqlalchemy as sa

    from testplan.store.engine import open_store

    url = f"sqlite:///{tmp_path / 'lab.db'}"
    Bench(url, tmp_path)("init", str(SAMPLE), "--quiet")
    store = open_store(url)
    writer = sa.create_engine(url, connect_args={"timeout": 0})
    try:
        with writer.connect() as conn:
            conn.exec_driver_sql("BEGIN IMMEDIATE")
            conn.exec_driver_sql("DELETE FROM run")  # uncommitted, holding the write lock
            with store.reading() as session:
                assert session.execute(sa.text("SELECT count(*) FROM run")).scalar_one() > 0
            conn.exec_driver_sql("ROLLBACK")
    finally:
        writer.dispose()
        store.dispose()
