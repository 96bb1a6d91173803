"""Bench-page fixtures: the sample campaign in an SQLite store, people with passwords and
keys, and a Starlette TestClient logged in as one of them."""

from __future__ import annotations

import re
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import pytest
from starlette.testclient import TestClient

from tests.store.conftest import MANAGER, PASS, Bench, stock

RUN = "water-8@ip-verification-1"
PASSWORDS = {"AK": "tank-side-0417", "JT": "second-pair-of-eyes", "MO": "approver-only-99"}
DATA = Path(__file__).resolve().parents[1] / "data"


class Clock:
    """A clock the test moves by hand, for session expiry."""

    def __init__(self) -> None:
        self.now = 1000.0

    def __call__(self) -> float:
        return self.now


def stocked(folder: Path, monkeypatch: pytest.MonkeyPatch, url: str | None = None) -> Bench:
    """The store tests' stock (founding manager QM; keys for MO, JT), passwords for AK, JT
    and MO set by the manager, and an enrolled key for AK too."""
    bench = stock(Bench(url or f"sqlite:///{folder / 'lab.db'}", folder))
    monkeypatch.setenv("TESTPLAN_KEY_PASSPHRASE", PASS)
    for who, password in PASSWORDS.items():
        result = bench.runner.invoke(
            __import__("testplan.cli", fromlist=["app"]).app,
            ["people", "password", who, *bench.signed(MANAGER), "--db", bench.url, "--quiet"],
            input=password + "\n",
        )
        assert result.exit_code == 0, result.stderr
    bench.enrol("AK")
    return bench


@pytest.fixture
def bench(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Bench:
    return stocked(tmp_path, monkeypatch)


@pytest.fixture
def clock() -> Clock:
    return Clock()


@contextmanager
def client_for(bench: Bench, clock: Clock) -> Iterator[TestClient]:
    """A TestClient over the bench page of ``bench``'s store."""
    from testplan.store.engine import open_store
    from testplan.web.app import make_app

    store = open_store(bench.url)
    uploads = bench.folder / "uploads"
    uploads.mkdir()
    app = make_app(store, idle_minutes=30, clock=clock, upload_dir=uploads)
    try:
        with TestClient(app, base_url="http://127.0.0.1") as c:
            yield c
    finally:
        store.dispose()


@pytest.fixture
def client(bench: Bench, clock: Clock) -> Iterator[TestClient]:
    with client_for(bench, clock) as c:
        yield c


def csrf_of(html: str) -> str:
    """The CSRF token a page's forms carry."""
    found = re.search(r'name="csrf" value="([^"]+)"', html)
    assert found, html[:500]
    return found.group(1)


def log_in(client: TestClient, who: str) -> str:
    """Log ``who`` in; returns the CSRF token of their session."""
    page = client.get("/login")
    reply = client.post(
        "/login",
        data={"csrf": csrf_of(page.text), "initials": who, "password": PASSWORDS[who]},
        follow_redirects=False,
    )
    assert reply.status_code == 303, reply.text
    return csrf_of(client.get("/").text)


START_FORM = {
    "ambient_temperature": "21",
    "ambient_humidity": "45",
    "ambient_pressure": "1012",
    "equipment": "LT-03",
}
