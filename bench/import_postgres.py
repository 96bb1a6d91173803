"""Import: a 1,000,000-row long logger file into PostgreSQL, against a raw psycopg COPY of
the same rows (reading and parsing the file with pandas included on both sides).
Needs TESTPLAN_TEST_PG_URL (a server where databases may be created)."""

from __future__ import annotations

import os
import shutil
import sys
import tempfile
import uuid
from pathlib import Path

from common import bench_store, import_cmd, long_csv, median_of, report, run_timed

BASELINE = """
import hashlib, sys, uuid
import pandas as pd, psycopg
path, url = sys.argv[1:]
hashlib.sha256(open(path, "rb").read()).hexdigest()
df = pd.read_csv(path)
t = pd.to_datetime(df["time"], format="ISO8601", utc=True).astype("int64") // 1000
codes = df["channel"].astype("category").cat.codes
rid = str(uuid.uuid4())
with psycopg.connect(url) as con, con.cursor() as cur:
    cur.execute("CREATE TABLE IF NOT EXISTS sample (raw_file_id uuid, seq bigint, channel int, "
                "t_us bigint, value float8, PRIMARY KEY (raw_file_id, seq))")
    with cur.copy("COPY sample FROM STDIN") as copy:
        copy.write("".join(f"{rid}\\t{i}\\t{c}\\t{tt}\\t{v!r}\\n" for i, (c, tt, v) in
                           enumerate(zip(codes.tolist(), t.tolist(), df["value"].tolist()))))
"""


def main() -> int:
    admin_url = os.environ.get("TESTPLAN_TEST_PG_URL")
    if not admin_url:
        print("import 1M rows into PostgreSQL: skipped (set TESTPLAN_TEST_PG_URL)")
        return 0
    import sqlalchemy as sa
    from sqlalchemy.engine import make_url

    work = Path(tempfile.mkdtemp(prefix="tp-bench-"))
    admin = sa.create_engine(admin_url, isolation_level="AUTOCOMMIT")
    names: list[str] = []

    def fresh_db() -> str:
        name = "tpbench_" + uuid.uuid4().hex[:12]
        with admin.connect() as conn:
            conn.exec_driver_sql(f'CREATE DATABASE "{name}"')
        names.append(name)
        return make_url(admin_url).set(database=name).render_as_string(hide_password=False)

    try:
        csv = long_csv(work / "log.csv")
        script = work / "baseline.py"
        script.write_text(BASELINE)
        base_url = fresh_db()
        raw_url = (
            make_url(base_url).set(drivername="postgresql").render_as_string(hide_password=False)
        )
        base = median_of(lambda: run_timed([sys.executable, str(script), str(csv), raw_url]))
        urls: list[str] = []

        def prepare() -> None:
            urls.append(bench_store(work, fresh_db()))

        ours = median_of(
            lambda: run_timed(import_cmd(csv, urls[-1])),
            before=prepare,
        )
        ok = report("import 1M rows into PostgreSQL", ours, base, 1.5, peak_limit_mb=400)
    finally:
        with admin.connect() as conn:
            for name in names:
                conn.exec_driver_sql(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')
        admin.dispose()
        shutil.rmtree(work, ignore_errors=True)
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
