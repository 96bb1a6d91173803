"""A whole run in a real browser (Debian's chromium driven by Playwright), as two people
would do it at a tablet, then the store compared with a CLI-recorded twin."""

from __future__ import annotations

import datetime as dt
import shutil
import socket
import threading
import time
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from testplan.cli import app as cli_app
from tests.store.conftest import MANAGER, PASS, Bench, record_and_judge
from tests.web.conftest import DATA, PASSWORDS, RUN, stocked
from tests.web.twin import COVERED, COVERED_WHY, INGRESS, differences, record_twin

CHROMIUM = "/usr/bin/chromium"
pytestmark = [
    pytest.mark.slow,
    pytest.mark.skipif(
        not Path(CHROMIUM).exists(),
        reason=f"no browser at {CHROMIUM}: install Debian's chromium (.ci/run does)",
    ),
]
# A 10-inch tablet held upright, in CSS pixels.
TABLET = {"width": 800, "height": 1280}


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


@pytest.fixture
def served(bench: Bench, tmp_path: Path) -> Iterator[str]:
    """The bench page over the test store, by uvicorn in a thread on a free loopback port."""
    import uvicorn

    from testplan.store.engine import open_store
    from testplan.web.app import make_app

    store = open_store(bench.url)
    uploads = tmp_path / "uploads"
    uploads.mkdir()
    port = free_port()
    config = uvicorn.Config(
        make_app(store, upload_dir=uploads), host="127.0.0.1", port=port, log_level="warning"
    )
    server = uvicorn.Server(config)
    thread = threading.Thread(target=server.run, daemon=True)
    thread.start()
    for _ in range(200):
        if server.started:
            break
        time.sleep(0.05)
    assert server.started
    try:
        yield f"http://127.0.0.1:{port}"
    finally:
        server.should_exit = True
        thread.join(timeout=10)
        store.dispose()


class Shots:
    """Saves a screenshot of each page and checks it fits the tablet without side-scrolling."""

    def __init__(self, page: Any, folder: Path) -> None:
        self.page, self.folder, self.n = page, folder, 0

    def __call__(self, name: str) -> None:
        self.n += 1
        self.page.screenshot(path=str(self.folder / f"{self.n:02d}-{name}.png"), full_page=True)
        wide = self.page.evaluate("document.documentElement.scrollWidth")
        assert wide <= TABLET["width"], f"{name}: {wide} px wide"


def log_in(page: Any, base: str, who: str) -> None:
    page.goto(f"{base}/login")
    page.fill("#initials", who)
    page.fill("#password", PASSWORDS[who])
    page.get_by_role("button", name="Log in", exact=True).click()
    page.wait_for_url(f"{base}/")


def test_a_whole_run_in_a_browser_stores_what_the_cli_stores(
    served: str, bench: Bench, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    from playwright.sync_api import sync_playwright

    shots_dir = tmp_path / "screenshots"
    shots_dir.mkdir()
    photo = tmp_path / "gland.png"
    shutil.copy(DATA / "photos" / "gland-after-immersion.png", photo)
    logger = tmp_path / "tank-long.csv"
    shutil.copy(DATA / "loggers" / "tank-long.csv", logger)
    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM)
        page = browser.new_context(viewport=TABLET).new_page()
        shot = Shots(page, shots_dir)
        page.goto(f"{served}/login")
        shot("login")
        log_in(page, served, "AK")
        shot("today")
        page.get_by_role("link", name=RUN).first.click()
        shot("run-planned")
        for box in page.locator("input[name^=item_]").all():
            box.check()
        page.fill("#ambient_temperature", "21")
        page.fill("#ambient_humidity", "45")
        page.fill("#ambient_pressure", "1012")
        page.get_by_label("LT-03").check()
        page.get_by_role("button", name="Start the run").click()
        assert page.locator(".note").first.inner_text() == "run started"
        shot("run-started")
        page.set_input_files("#file", str(logger))
        page.get_by_role("button", name="Upload and preview").click()
        shot("logger-preview")
        for i, (quantity, unit) in enumerate(
            (("lowest_point_depth", "cm"), ("water_temperature", "degC"))
        ):
            page.select_option(f"#quantity_{i}", quantity)
            page.fill(f"#unit_{i}", unit)
            page.select_option(f"#equipment_{i}", "LT-03")
        page.get_by_role("button", name="Import").click()
        assert "imported 6 samples from tank-long.csv" in page.locator(".note").first.inner_text()
        page.select_option("#ingress-medium", "water")
        page.select_option("#ingress-found", "yes")
        page.fill("#ingress-where", INGRESS["where"])
        page.set_input_files("#ingress-photo", str(photo))
        shot("observation")
        page.get_by_role("button", name="Record ingress").click()
        assert page.locator(".note").first.inner_text() == "2 observation(s) recorded"
        page.goto(f"{served}/run/{RUN}/live")
        shot("live")
        page.goto(f"{served}/run/{RUN}")
        page.get_by_role("button", name="Finish the run").click()
        assert page.locator(".note").first.inner_text() == "run finished"
        page.get_by_role("button", name="Log out").click()
        log_in(page, served, "JT")
        for criterion in COVERED:  # failed conditions, each covered before the data check
            page.goto(f"{served}/run/{RUN}")
            page.locator("summary", has_text="Record a deviation").click()
            page.fill("#description", COVERED_WHY[0])
            page.fill("#reason", COVERED_WHY[1])
            page.fill("#covers", criterion)
            page.fill("#approver", "MO")
            page.set_input_files("#approver_key", str(tmp_path / "MO.pem"))
            page.fill("#approver_passphrase", PASS)
            page.get_by_role("button", name="Record the approved deviation").click()
            note = page.locator(".note").first.inner_text()
            assert note == "deviation recorded, approved by MO"
        page.goto(f"{served}/run/{RUN}")
        page.set_input_files("#key_file", str(tmp_path / "JT.pem"))
        page.fill("#passphrase", PASS)
        shot("data-check")
        page.get_by_role("button", name="The data are checked").click()
        assert page.locator(".note").first.inner_text() == "data checked"
        page.goto(f"{served}/run/{RUN}/results")
        shot("results")
        browser.close()
    assert len(list(shots_dir.glob("*.png"))) == 9
    twin_folder = tmp_path / "twin"
    twin_folder.mkdir()
    twin = stocked(twin_folder, monkeypatch)
    record_twin(twin)
    assert differences(bench, twin) == {}
    assert bench("store", "check").exit_code == 0


def test_sign_off_in_a_browser(
    served: str, bench: Bench, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """A run recorded and judged through the CLI; the preparer signs on the sign-off page
    with their own key file, and the page then shows the signature and the root."""
    from playwright.sync_api import sync_playwright

    record_and_judge(bench)
    # The page signs at the time it is used; this campaign's data checks are dated 2027, so
    # the page is used after them.
    monkeypatch.setattr(
        "testplan.store.signoff.utc_now", lambda: dt.datetime(2027, 1, 20, 9, 0, tzinfo=dt.UTC)
    )
    result = bench.runner.invoke(
        cli_app,
        ["people", "password", "RP", *bench.signed(MANAGER), "--db", bench.url, "--quiet"],
        input="signing-desk-2027\n",
    )
    assert result.exit_code == 0, result.stderr
    shots_dir = tmp_path / "screenshots"
    shots_dir.mkdir()
    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM)
        page = browser.new_context(viewport=TABLET).new_page()
        shot = Shots(page, shots_dir)
        page.goto(f"{served}/login")
        page.fill("#initials", "RP")
        page.fill("#password", "signing-desk-2027")
        page.get_by_role("button", name="Log in", exact=True).click()
        page.wait_for_url(f"{served}/")
        page.get_by_role("link", name="QC-2027-014").click()
        assert page.locator("#next-role").inner_text() == "prepared"
        shot("signoff")
        page.set_input_files("#key_file", str(tmp_path / "RP.pem"))
        page.fill("#passphrase", "not the passphrase")
        page.get_by_role("button", name="Sign the campaign's records").click()
        assert page.locator("#key-error").is_visible()
        shot("signoff-refused")
        page.set_input_files("#key_file", str(tmp_path / "RP.pem"))
        page.fill("#passphrase", PASS)
        page.get_by_role("button", name="Sign the campaign's records").click()
        assert page.locator(".note").first.inner_text().startswith("prepared by RP")
        assert "Rita Pereira (RP)" in page.locator("#signatures").inner_text()
        assert page.locator("#next-role").inner_text() == "reviewed"
        shot("signoff-prepared")
        page.get_by_role("link", name="People").click()
        shot("people")
        browser.close()
    assert len(list(shots_dir.glob("*.png"))) == 4
    assert bench.sql("SELECT role FROM signature") == [("prepared",)]
