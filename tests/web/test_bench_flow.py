"""A whole run through the bench page (TestClient), compared with a CLI-recorded twin."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from starlette.testclient import TestClient

from tests.store.conftest import PASS, Bench, db_url
from tests.web.conftest import DATA, RUN, START_FORM, Clock, client_for, csrf_of, log_in, stocked
from tests.web.twin import COVERED, COVERED_WHY, INGRESS, differences, record_twin


def checklist_size(client: TestClient) -> int:
    return client.get(f"/run/{RUN}").text.count('value="ok"')


def whole_run(client: TestClient, folder: Path) -> None:
    """Start, upload, map, import, ingress with photo, finish as AK; check as JT."""
    csrf = log_in(client, "AK")
    ticks = {f"item_{i}": "ok" for i in range(1, checklist_size(client) + 1)}
    reply = client.post(f"/run/{RUN}/start", data={"csrf": csrf, **START_FORM, **ticks})
    assert "run started" in reply.text
    content = (DATA / "loggers" / "tank-long.csv").read_bytes()
    reply = client.post(
        f"/run/{RUN}/logger",
        data={"csrf": csrf},
        files={"file": ("tank-long.csv", content, "text/csv")},
        follow_redirects=False,
    )
    preview = client.get(reply.headers["location"])
    assert "<th>channel</th>" in preview.text and "<legend>level</legend>" in preview.text
    reply = client.post(
        reply.headers["location"],
        data={
            "csrf": csrf,
            "source": ["level", "water"],
            "quantity_0": "lowest_point_depth",
            "unit_0": "cm",
            "equipment_0": "LT-03",
            "quantity_1": "water_temperature",
            "unit_1": "degC",
            "equipment_1": "LT-03",
        },
    )
    assert "imported 6 samples from tank-long.csv" in reply.text
    photo = (DATA / "photos" / "gland-after-immersion.png").read_bytes()
    reply = client.post(
        f"/run/{RUN}/observe",
        data={"csrf": csrf, "kind": "ingress", "medium": "water", "found": "yes", **INGRESS},
        files={"photo": ("gland.png", photo, "image/png")},
    )
    assert "2 observation(s) recorded" in reply.text
    assert "run finished" in client.post(f"/run/{RUN}/finish", data={"csrf": csrf}).text
    client.post("/logout", data={"csrf": csrf})
    csrf = log_in(client, "JT")
    key = (folder / "JT.pem").read_bytes()

    def check() -> str:
        reply = client.post(
            f"/run/{RUN}/check",
            data={"csrf": csrf, "passphrase": PASS},
            files={"key_file": ("JT.pem", key, "application/octet-stream")},
        )
        return reply.text

    # Six readings leave test conditions failed: the check is refused, the criterion named
    # beside its button, until an approved deviation covers each one.
    covered: list[str] = []
    while "data checked" not in (page := check()):
        assert 'id="check-error"' in page and len(covered) < len(COVERED)
        found = re.search(r"condition (\S+) failed and is not dispositioned", page)
        assert found is not None, page
        covered.append(found.group(1))
        reply = client.post(
            f"/run/{RUN}/deviation",
            data={
                "csrf": csrf,
                "description": COVERED_WHY[0],
                "reason": COVERED_WHY[1],
                "covers": found.group(1),
                "approver": "MO",
                "approver_passphrase": PASS,
            },
            files={"approver_key": ("MO.pem", (folder / "MO.pem").read_bytes(), "text/plain")},
        )
        assert "deviation recorded, approved by MO" in reply.text
    assert covered == list(COVERED)


__all__ = ["db_url"]  # the store tests' fixture: SQLite, and PostgreSQL when a server is given


def test_a_whole_run_stores_what_the_cli_stores(
    db_url: str, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    folder = tmp_path / "web"
    folder.mkdir()
    bench = stocked(folder, monkeypatch, db_url)
    with client_for(bench, Clock()) as client:
        whole_run(client, folder)
        for page in ("/", f"/run/{RUN}", f"/run/{RUN}/results", f"/run/{RUN}/live"):
            assert client.get(page).status_code == 200
    twin_folder = tmp_path / "twin"
    twin_folder.mkdir()
    twin = stocked(twin_folder, monkeypatch)
    record_twin(twin)
    assert differences(bench, twin) == {}
    assert bench("store", "check").exit_code == 0


def test_a_refused_start_shows_the_message_beside_the_field_and_stores_nothing(
    client: TestClient, bench: Bench
) -> None:
    csrf = log_in(client, "AK")
    ticks = {f"item_{i}": "ok" for i in range(1, checklist_size(client) + 1)}
    before = bench.sql("SELECT count(*) FROM audit")
    reply = client.post(
        f"/run/{RUN}/start",
        data={"csrf": csrf, **START_FORM, **ticks, "ambient_pressure": "twelve"},
    )
    assert reply.status_code == 400
    assert 'id="ambient_pressure-error"' in reply.text and "Traceback" not in reply.text
    reply = client.post(f"/run/{RUN}/start", data={"csrf": csrf, **START_FORM})
    assert 'id="checklist-error"' in reply.text and "not confirmed" in reply.text
    assert bench.sql("SELECT state FROM run WHERE key = :k", k=RUN) == [("planned",)]
    assert bench.sql("SELECT count(*) FROM audit") == before


def test_a_bad_logger_mapping_is_shown_and_nothing_is_imported(
    client: TestClient, bench: Bench
) -> None:
    csrf = log_in(client, "AK")
    ticks = {f"item_{i}": "ok" for i in range(1, checklist_size(client) + 1)}
    client.post(f"/run/{RUN}/start", data={"csrf": csrf, **START_FORM, **ticks})
    content = (DATA / "loggers" / "tank-long.csv").read_bytes()
    where = client.post(
        f"/run/{RUN}/logger",
        data={"csrf": csrf},
        files={"file": ("tank-long.csv", content, "text/csv")},
        follow_redirects=False,
    ).headers["location"]
    reply = client.post(
        where,
        data={
            "csrf": csrf,
            "source": ["level", "water"],
            "quantity_0": "lowest_point_depth",
            "unit_0": "kg",
            "equipment_0": "LT-03",
        },
    )
    assert reply.status_code == 400 and 'class="error"' in reply.text
    assert bench.sql("SELECT count(*) FROM raw_file") == [(0,)]
    assert csrf_of(reply.text) == csrf
