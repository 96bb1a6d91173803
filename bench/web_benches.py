"""The bench page under load: 20 simulated benches (httpx2 clients on loopback) browsing and
importing at once against one `testplan serve`; p95 page time against `testplan record
list` (the CLI's answer to "what is on today"), and import throughput against the CLI
importing the same files one after another, both measured in this run.

Bounded: BENCH_WEB_BENCHES benches (20), BENCH_WEB_PAGES pages each (12), one import each
of BENCH_WEB_ROWS rows (20,000), and a 300 s deadline for the whole load.
"""

from __future__ import annotations

import os
import re
import shutil
import socket
import statistics
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

from common import MANAGER_PASSPHRASE, RUN, TESTPLAN, bench_store, long_csv, median_of, run_timed

BENCHES = int(os.environ.get("BENCH_WEB_BENCHES", "20"))
PAGES = int(os.environ.get("BENCH_WEB_PAGES", "12"))
ROWS = int(os.environ.get("BENCH_WEB_ROWS", "20000"))
DEADLINE_S = 300.0
PASSWORD = "bench-load-password"
MAP_FORM = {
    "source": ["depth", "water", "s1", "s2"],
    "quantity_0": "lowest_point_depth",
    "unit_0": "mm",
    "equipment_0": "LT-03",
    "quantity_1": "water_temperature",
    "unit_1": "degC",
    "equipment_1": "LT-03",
}
CLI_MAPS = [
    "--map", "depth[mm]=lowest_point_depth@LT-03",
    "--map", "water[degC]=water_temperature@LT-03",
    "--skip-unmapped",
]  # fmt: skip


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def csrf_of(html: str) -> str:
    found = re.search(r'name="csrf" value="([^"]+)"', html)
    if not found:
        raise SystemExit("no CSRF token on the page")
    return found.group(1)


def variants(csv: Path, n: int) -> list[Path]:
    """``n`` copies of ``csv`` holding the same samples in different bytes (trailing zeros
    on the first value): the store refuses the same bytes twice in one run."""
    head, first, rest = csv.read_bytes().split(b"\n", 2)
    out = []
    for i in range(n):
        path = csv.with_name(f"log-{i:02d}.csv")
        path.write_bytes(b"\n".join([head, first + b"0" * i, rest]))
        out.append(path)
    return out


def one_bench(base: str, csv: Path, pages: list[float], imports: list[float], stop: float) -> None:
    """Log in, browse PAGES pages, import one file, as one person at one bench."""
    import httpx2 as httpx

    with httpx.Client(base_url=base, timeout=120) as client:
        login = client.get("/login")
        client.post(
            "/login",
            data={"csrf": csrf_of(login.text), "initials": "AK", "password": PASSWORD},
        )
        csrf = csrf_of(client.get("/").text)
        paths = ["/", f"/run/{RUN}", f"/run/{RUN}/live"]
        for i in range(PAGES):
            if time.monotonic() > stop:
                return
            t = time.perf_counter()
            reply = client.get(paths[i % len(paths)])
            pages.append(time.perf_counter() - t)
            reply.raise_for_status()
            if i == PAGES // 2:
                t = time.perf_counter()
                with csv.open("rb") as f:
                    up = client.post(
                        f"/run/{RUN}/logger",
                        data={"csrf": csrf},
                        files={"file": (csv.name, f, "text/csv")},
                    )
                done = client.post(up.headers["location"], data={"csrf": csrf, **MAP_FORM})
                if "imported" not in done.text:
                    said = re.findall(r'class="error"[^>]*>([^<]*)', done.text)
                    raise SystemExit(f"import refused: {said or done.status_code}")
                imports.append(time.perf_counter() - t)


def main() -> int:
    work = Path(tempfile.mkdtemp(prefix="tp-webbench-"))
    server = None
    try:
        csvs = variants(long_csv(work / "log.csv", rows=ROWS), BENCHES)
        url = bench_store(work)
        env = {**os.environ, "TESTPLAN_DB": url, "TESTPLAN_KEY": str(work / "qm.pem"),
               "TESTPLAN_KEY_PASSPHRASE": MANAGER_PASSPHRASE}  # fmt: skip
        subprocess.run(  # QM: the store's founding manager (bench_store), signing
            [TESTPLAN, "people", "password", "AK", "--by", "QM", "-q"],
            input=PASSWORD + "\n", text=True, check=True, env=env, stdout=subprocess.DEVNULL,
        )  # fmt: skip
        template = Path(url.removeprefix("sqlite:///"))
        cli_db = work / "cli.db"
        shutil.copy(template, cli_db)

        # The CLI: the same BENCHES imports one after another, and `record list`.
        def cli_imports() -> tuple[float, float]:
            t = time.perf_counter()
            peak = 0.0
            for csv in csvs:
                cmd = [TESTPLAN, "record", "import", RUN, str(csv), *CLI_MAPS, "--by", "AK",
                       "--db", f"sqlite:///{cli_db}", "-q"]  # fmt: skip
                peak = max(peak, run_timed(cmd)[1])
            return time.perf_counter() - t, peak

        cli_import_s, _ = cli_imports()
        cli_list_s, _ = median_of(
            lambda: run_timed([TESTPLAN, "record", "list", "--db", f"sqlite:///{cli_db}"])
        )

        port = free_port()
        server = subprocess.Popen(
            [TESTPLAN, "serve", "--db", url, "--port", str(port)],
            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
        )  # fmt: skip
        base = f"http://127.0.0.1:{port}"
        import httpx2 as httpx

        for _ in range(200):
            try:
                httpx.get(f"{base}/login", timeout=1)
                break
            except httpx.TransportError:
                time.sleep(0.1)
        pages: list[float] = []
        imports: list[float] = []
        errors: list[BaseException] = []
        stop = time.monotonic() + DEADLINE_S

        def worker(csv: Path) -> None:
            try:
                one_bench(base, csv, pages, imports, stop)
            except BaseException as err:  # reported below
                errors.append(err)

        t = time.perf_counter()
        threads = [threading.Thread(target=worker, args=(csv,)) for csv in csvs]
        for th in threads:
            th.start()
        for th in threads:
            th.join()
        load_s = time.perf_counter() - t
        if errors:
            server.terminate()
            _, said = server.communicate(timeout=10)
            tail = "\n".join(said.decode(errors="replace").splitlines()[-30:])
            raise SystemExit(f"a bench failed: {errors[0]!r}\nthe server said:\n{tail}")
        samples = ROWS // 2  # two of the four channels are mapped
        p95 = statistics.quantiles(pages, n=20)[-1] if len(pages) >= 20 else max(pages)
        web_rate = len(imports) * samples / load_s
        cli_rate = BENCHES * samples / cli_import_s
        print(
            f"web_benches: {BENCHES} benches, {len(pages)} pages, {len(imports)} imports of "
            f"{samples} samples in {load_s:.1f} s",
            flush=True,
        )
        print(
            f"web_page_p95: bench page {p95:.3f} s (median {statistics.median(pages):.3f} s), "
            f"`testplan record list` {cli_list_s:.3f} s, ratio {p95 / cli_list_s:.2f}"
        )
        print(
            f"web_import: bench page {web_rate:,.0f} samples/s while serving pages, CLI "
            f"{cli_rate:,.0f} samples/s one import after another, ratio {web_rate / cli_rate:.2f}"
        )
        return 0
    finally:
        if server is not None:
            server.terminate()
            server.wait(timeout=10)
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
