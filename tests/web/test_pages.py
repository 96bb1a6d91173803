"""What the bench pages show: today's lists, equipment fit for the run, live readings
against their bands, and verdicts after judging; cookies under TLS."""

from __future__ import annotations

from pathlib import Path

from starlette.testclient import TestClient

from tests.store.conftest import Bench
from tests.web.conftest import log_in
from tests.web.test_bench_flow import RUN, whole_run


def calibrate(bench: Bench, tag: str, calibrated: str, due: str) -> None:
    bench(
        "equipment", "calibrate", tag, "--channel", "water_temperature", "--certificate",
        "VC-2026-201", "--provider", "Gellimoor Calibration Ltd", "--calibrated", calibrated,
        "--due", due, "--uncertainty", "0.3 K", "--by", "AK", "--quiet",
    )  # fmt: skip


def test_today_lists_due_runs_and_overdue_calibrations(client: TestClient, bench: Bench) -> None:
    bench("equipment", "add", "TT-07", "--description", "thermometer", "--quiet")
    calibrate(bench, "TT-07", "2025-01-10", "2026-01-10")
    log_in(client, "AK")
    page = client.get("/").text
    assert "TT-07 water_temperature: due 2026-01-10" in page
    assert "No run is running." in page and f'href="/run/{RUN}"' in page


def test_the_start_form_offers_only_equipment_valid_through_the_planned_end(
    client: TestClient, bench: Bench
) -> None:
    bench("equipment", "add", "TT-07", "--description", "thermometer", "--quiet")
    calibrate(bench, "TT-07", "2026-06-01", "2026-12-03")
    bench("equipment", "add", "TT-08", "--description", "spare thermometer", "--quiet")
    log_in(client, "AK")
    page = client.get(f"/run/{RUN}").text
    assert 'name="equipment" value="LT-03"' in page
    assert 'value="TT-07"' not in page and "TT-07 is out of service for this run" in page
    assert 'value="TT-08"' not in page and "TT-08 has no calibration on record" in page


def test_live_readings_against_bands_and_verdicts_after_judging(
    client: TestClient, bench: Bench, tmp_path: Path
) -> None:
    whole_run(client, tmp_path)
    live = client.get(f"/run/{RUN}/live").text
    assert "lowest_point_depth" in live and ": inside" in live and "time left" in live
    results = client.get(f"/run/{RUN}/results").text
    # The data check's disposition check judged the run: its verdicts show at once.
    assert "Not judged yet" not in results and "<svg" in results
    bench("judge", RUN, ok=False)  # exit 3 when a criterion fails or lacks data
    results = client.get(f"/run/{RUN}/results").text
    assert "Not judged yet" not in results
    assert bench.sql("SELECT count(*) FROM verdict")[0][0] == results.count("<tr><td>")


def test_cookies_are_secure_under_tls(bench: Bench) -> None:
    from testplan.store.engine import open_store
    from testplan.web.app import make_app

    store = open_store(bench.url)
    try:
        app = make_app(store, secure_cookies=True, upload_dir=bench.folder)
        with TestClient(app, base_url="https://127.0.0.1") as c:
            cookie = c.get("/login").headers["set-cookie"].lower()
        assert "secure" in cookie and "httponly" in cookie and "samesite=strict" in cookie
    finally:
        store.dispose()


def test_a_logger_file_larger_than_the_preview_window_is_previewed_and_imported_whole(
    client: TestClient, bench: Bench, tmp_path: Path
) -> None:
    from testplan.web.app import PREVIEW_BYTES
    from tests.web.conftest import START_FORM, csrf_of

    lines = ["time,channel,value"]
    for i in range(45_000):
        stamp = f"2027-01-12T16:{5 + i // 3600:02d}:{(i // 60) % 60:02d}.{i % 60:02d}Z"
        lines.append(f"{stamp},level,{205.4 + (i % 7) * 0.01:.2f}")
    content = ("\n".join(lines) + "\n").encode()
    assert len(content) > PREVIEW_BYTES
    csrf = log_in(client, "AK")
    ticks = {f"item_{i}": "ok" for i in range(1, 10)}
    client.post(f"/run/{RUN}/start", data={"csrf": csrf, **START_FORM, **ticks})
    where = client.post(
        f"/run/{RUN}/logger",
        data={"csrf": csrf},
        files={"file": ("long-log.csv", content, "text/csv")},
        follow_redirects=False,
    ).headers["location"]
    preview = client.get(where).text
    assert "<legend>level</legend>" in preview and csrf_of(preview) == csrf
    reply = client.post(
        where,
        data={"csrf": csrf, "source": ["level"], "quantity_0": "lowest_point_depth",
              "unit_0": "cm", "equipment_0": "LT-03"},
    )  # fmt: skip
    assert "imported 45000 samples from long-log.csv" in reply.text
    assert bench.sql("SELECT size FROM raw_file") == [(len(content),)]


def test_a_wrong_import_is_withdrawn_from_the_run_page_with_a_reason(
    client: TestClient, bench: Bench
) -> None:
    from tests.web.conftest import START_FORM

    content = (
        b"time,channel,value\n2027-01-12T16:05:00Z,level,205.4\n2027-01-12T16:05:01Z,level,205.5\n"
    )
    csrf = log_in(client, "AK")
    ticks = {f"item_{i}": "ok" for i in range(1, 10)}
    client.post(f"/run/{RUN}/start", data={"csrf": csrf, **START_FORM, **ticks})
    where = client.post(
        f"/run/{RUN}/logger",
        data={"csrf": csrf},
        files={"file": ("wrong-log.csv", content, "text/csv")},
        follow_redirects=False,
    ).headers["location"]
    client.post(
        where,
        data={"csrf": csrf, "source": ["level"], "quantity_0": "lowest_point_depth",
              "unit_0": "cm", "equipment_0": "LT-03"},
    )  # fmt: skip
    [(import_id,)] = bench.sql("SELECT id FROM raw_file")
    page = client.get(f"/run/{RUN}").text
    assert "Withdraw the import" in page
    # no reason: refused beside the field, nothing changed
    reply = client.post(f"/run/{RUN}/withdraw", data={"csrf": csrf, "import": str(import_id)})
    assert reply.status_code == 400 and "say why the import is withdrawn" in reply.text
    assert bench.sql("SELECT withdrawn_at FROM raw_file") == [(None,)]
    # without the form's token: refused
    reply = client.post(f"/run/{RUN}/withdraw", data={"import": str(import_id), "why": "x"})
    assert reply.status_code == 403
    reply = client.post(
        f"/run/{RUN}/withdraw",
        data={"csrf": csrf, "import": str(import_id), "why": "logger of the other tank"},
    )
    assert reply.status_code == 200 and "import withdrawn" in reply.text
    assert "(withdrawn by AK: logger of the other tank)" in reply.text
    assert bench.sql("SELECT withdrawn_by, withdrawn_why FROM raw_file") == [
        ("AK", "logger of the other tank")
    ]
    assert "Withdraw the import" not in reply.text  # nothing left to withdraw
