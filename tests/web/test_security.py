"""Trying to get around the bench page's guards: no session, no CSRF token, the wrong role,
an expired or forged session, bad uploads, password guessing, a LAN address without TLS."""

from __future__ import annotations

from pathlib import Path

import pytest
from starlette.testclient import TestClient
from typer.testing import CliRunner

from testplan.cli import app as cli_app
from tests.store.conftest import MANAGER, PASS, Bench
from tests.web.conftest import DATA, RUN, START_FORM, Clock, csrf_of, log_in

GETS = [
    "/",
    f"/run/{RUN}",
    f"/run/{RUN}/results",
    f"/run/{RUN}/live",
    f"/run/{RUN}/logger/" + "0" * 32,
    "/campaign/QC-2027-014/signoff",
    "/people",
]
POSTS = [
    "/logout",
    f"/run/{RUN}/start",
    f"/run/{RUN}/finish",
    f"/run/{RUN}/check",
    f"/run/{RUN}/observe",
    f"/run/{RUN}/deviation",
    f"/run/{RUN}/logger",
    f"/run/{RUN}/logger/" + "0" * 32,
    "/campaign/QC-2027-014/signoff",
    "/people/password",
    "/people/own-password",
]


def audit_count(bench: Bench) -> int:
    return int(bench.sql("SELECT count(*) FROM audit")[0][0])


def start(client: TestClient, csrf: str) -> None:
    ticks = {f"item_{i}": "ok" for i in range(1, 10)}
    reply = client.post(f"/run/{RUN}/start", data={"csrf": csrf, **START_FORM, **ticks})
    assert "run started" in reply.text


def finished_then_checker(client: TestClient) -> str:
    """AK starts and finishes the run and logs out; JT logs in (password): JT's CSRF token."""
    csrf = log_in(client, "AK")
    start(client, csrf)
    client.post(f"/run/{RUN}/finish", data={"csrf": csrf})
    client.post("/logout", data={"csrf": csrf})
    return log_in(client, "JT")


def check_with_jt_key(client: TestClient, csrf: str, folder: Path) -> str:
    """The data check posted with JT's key file; the refusal page's text (status 400)."""
    reply = client.post(
        f"/run/{RUN}/check",
        data={"csrf": csrf, "passphrase": PASS},
        files={"key_file": ("JT.pem", (folder / "JT.pem").read_bytes(), "text/plain")},
    )
    assert reply.status_code == 400
    return reply.text


def test_every_page_and_action_refuses_without_a_session(client: TestClient, bench: Bench) -> None:
    before = audit_count(bench)
    for path in GETS:
        reply = client.get(path, follow_redirects=False)
        assert reply.status_code == 303 and reply.headers["location"] == "/login", path
    for path in POSTS:
        reply = client.post(path, data={**START_FORM, "csrf": "x"}, follow_redirects=False)
        assert reply.status_code == 403, path
    assert audit_count(bench) == before


def test_a_form_without_its_csrf_token_is_refused(client: TestClient, bench: Bench) -> None:
    csrf = log_in(client, "AK")
    before = audit_count(bench)
    for data in (START_FORM, {**START_FORM, "csrf": csrf[:-2] + "xx"}):
        reply = client.post(f"/run/{RUN}/start", data=data)
        assert reply.status_code == 403
    assert bench.sql("SELECT state FROM run WHERE key = :k", k=RUN) == [("planned",)]
    assert audit_count(bench) == before
    client.cookies.clear()
    login = client.post("/login", data={"initials": "AK", "password": "tank-side-0417"})
    assert login.status_code == 403


def test_an_operator_cannot_check_or_sign_and_no_one_signs_with_anothers_key(
    client: TestClient, bench: Bench, tmp_path: Path
) -> None:
    csrf = log_in(client, "AK")
    start(client, csrf)
    assert "run finished" in client.post(f"/run/{RUN}/finish", data={"csrf": csrf}).text
    assert "The data are checked" not in client.get(f"/run/{RUN}").text
    before = audit_count(bench)
    own_key = (tmp_path / "AK.pem").read_bytes()
    reply = client.post(
        f"/run/{RUN}/check",
        data={"csrf": csrf, "passphrase": PASS},
        files={"key_file": ("AK.pem", own_key, "application/octet-stream")},
    )
    assert reply.status_code == 400 and "is not authorised as checker" in reply.text
    client.post("/logout", data={"csrf": csrf})
    csrf = log_in(client, "JT")
    for key, passphrase, said in (
        (own_key, PASS, "is the key of Anna Kowal (AK), not of Jo Tran (JT)"),
        ((tmp_path / "JT.pem").read_bytes(), "not the passphrase", "wrong passphrase"),
    ):
        reply = client.post(
            f"/run/{RUN}/check",
            data={"csrf": csrf, "passphrase": passphrase},
            files={"key_file": ("k.pem", key, "application/octet-stream")},
        )
        assert reply.status_code == 400 and said in reply.text
    assert bench.sql("SELECT state FROM run WHERE key = :k", k=RUN) == [("finished",)]
    assert audit_count(bench) == before


def test_a_revoked_key_neither_logs_in_nor_signs(
    client: TestClient, bench: Bench, tmp_path: Path
) -> None:
    csrf = finished_then_checker(client)  # JT logged in before the revocation
    bench("keys", "revoke", "JT", "--why", "laptop lost", *bench.signed(MANAGER), "--quiet")
    before = audit_count(bench)
    refused = check_with_jt_key(client, csrf, tmp_path)
    assert 'id="key-error"' in refused and "of JT is revoked from" in refused
    assert bench.sql("SELECT state FROM run WHERE key = :k", k=RUN) == [("finished",)]
    assert audit_count(bench) == before
    client.post("/logout", data={"csrf": csrf})
    page = client.get("/login")
    reply = client.post(
        "/login",
        data={"csrf": csrf_of(page.text), "initials": "JT", "passphrase": PASS},
        files={"key_file": ("JT.pem", (tmp_path / "JT.pem").read_bytes(), "text/plain")},
        follow_redirects=False,
    )
    assert reply.status_code == 401


def test_a_role_withdrawn_after_login_no_longer_signs(
    client: TestClient, bench: Bench, tmp_path: Path
) -> None:
    csrf = finished_then_checker(client)  # a checker at login: the page offers the check
    assert "The data are checked" in client.get(f"/run/{RUN}").text
    bench("people", "withdraw", "JT", "--role", "checker", "--why", "moved to another lab",
          *bench.signed(MANAGER), "--quiet")  # fmt: skip
    before = audit_count(bench)
    assert "Jo Tran (JT) is not authorised as checker" in check_with_jt_key(client, csrf, tmp_path)
    assert bench.sql("SELECT state FROM run WHERE key = :k", k=RUN) == [("finished",)]
    assert audit_count(bench) == before


def test_a_session_expires_after_idle_time(client: TestClient, clock: Clock) -> None:
    log_in(client, "AK")
    clock.now += 29 * 60
    assert client.get("/", follow_redirects=False).status_code == 200
    clock.now += 31 * 60
    reply = client.get("/", follow_redirects=False)
    assert reply.status_code == 303 and reply.headers["location"] == "/login"


def test_a_forged_or_altered_cookie_is_refused(client: TestClient) -> None:
    log_in(client, "AK")
    real = client.cookies["tp_session"]
    client.cookies.clear()

    def status(cookie: str) -> int:
        reply = client.get("/", headers={"cookie": f"tp_session={cookie}"}, follow_redirects=False)
        return reply.status_code

    for forged in (real[:-3] + "abc", "AK", real.split(".")[0] + ".forged", ""):
        assert status(forged) == 303, forged
    assert status(real) == 200


def test_cookies_are_httponly_and_samesite_strict(client: TestClient) -> None:
    page = client.get("/login")
    reply = client.post(
        "/login",
        data={"csrf": csrf_of(page.text), "initials": "AK", "password": "tank-side-0417"},
        follow_redirects=False,
    )
    cookie = reply.headers["set-cookie"].lower()
    assert "httponly" in cookie and "samesite=strict" in cookie and "secure" not in cookie


def test_photos_must_be_images_with_plain_names(client: TestClient, bench: Bench) -> None:
    csrf = log_in(client, "AK")
    start(client, csrf)
    before = audit_count(bench)
    photo = (DATA / "photos" / "gland-after-immersion.png").read_bytes()
    for name, content, said in (
        ("gland.png", b"#!/bin/sh\nrm -rf /\n", "not a photo"),
        ("gland.png", photo[:40], "damaged or not an image"),
        ("../../etc/gland.png", photo, "plain name"),
        ("a/b.png", photo, "plain name"),
        ("..\\gland.png", photo, "plain name"),
        (".hidden.png", photo, "plain name"),
    ):
        reply = client.post(
            f"/run/{RUN}/observe",
            data={"csrf": csrf, "kind": "ingress", "medium": "water", "found": "no"},
            files={"photo": (name, content, "image/png")},
        )
        assert reply.status_code == 400 and 'id="photo-error"' in reply.text, name
        assert said in reply.text, name
    assert bench.sql("SELECT count(*) FROM observation") == [(0,)]
    assert bench.sql("SELECT count(*) FROM attachment") == [(0,)]
    assert audit_count(bench) == before


def test_logger_uploads_are_reached_only_by_their_token_and_uploader(
    client: TestClient, bench: Bench, tmp_path: Path
) -> None:
    csrf = log_in(client, "AK")
    start(client, csrf)
    content = (DATA / "loggers" / "tank-long.csv").read_bytes()
    where = client.post(
        f"/run/{RUN}/logger",
        data={"csrf": csrf},
        files={"file": ("../../tank-long.csv", content, "text/csv")},
        follow_redirects=False,
    ).headers["location"]
    assert client.get(where).status_code == 200
    assert sorted(p.name for p in (tmp_path / "uploads").iterdir())[0] == where.rsplit("/")[-1]
    for path in (f"/run/{RUN}/logger/..%2f..%2flab.db", f"/run/{RUN}/logger/{'a' * 31}"):
        assert client.get(path).status_code == 404
    client.post("/logout", data={"csrf": csrf})
    log_in(client, "JT")
    assert client.get(where).status_code == 404


def test_failed_logins_back_off(client: TestClient, bench: Bench) -> None:
    for _ in range(3):
        page = client.get("/login")
        reply = client.post(
            "/login", data={"csrf": csrf_of(page.text), "initials": "AK", "password": "guess"}
        )
        assert reply.status_code == 401
        assert "unknown initials or wrong password" in reply.text
    page = client.get("/login")
    reply = client.post(
        "/login",
        data={"csrf": csrf_of(page.text), "initials": "AK", "password": "tank-side-0417"},
    )
    assert reply.status_code == 401 and "too many failed logins; try again in" in reply.text
    assert bench.sql("SELECT count(*) FROM login_failure") == [(3,)]


@pytest.mark.parametrize(
    ("args", "said"),
    [
        (["--host", "0.0.0.0"], "error: --host: 0.0.0.0 is not a loopback address and no TLS"),
        (["--host", "10.1.2.3", "--certfile", "c.pem"], "error: --certfile: TLS needs both"),
    ],
)
def test_serve_refuses_a_lan_address_without_tls(bench: Bench, args: list[str], said: str) -> None:
    result = CliRunner().invoke(cli_app, ["serve", *args, "--db", bench.url])
    assert result.exit_code == 1 and result.stderr.startswith(said), result.stderr


def test_log_in_with_ones_own_key_file_and_passphrase(
    client: TestClient, bench: Bench, tmp_path: Path
) -> None:
    def attempt(who: str, key_file: str, passphrase: str) -> int:
        page = client.get("/login")
        reply = client.post(
            "/login",
            data={"csrf": csrf_of(page.text), "initials": who, "passphrase": passphrase},
            files={"key_file": ("k.pem", (tmp_path / key_file).read_bytes(), "text/plain")},
            follow_redirects=False,
        )
        if reply.status_code == 401:
            assert 'id="key-error"' in reply.text
        return reply.status_code

    assert attempt("JT", "AK.pem", PASS) == 401  # another person's key
    assert attempt("JT", "JT.pem", "not it") == 401
    assert bench.sql("SELECT count(*) FROM login_failure") == [(2,)]
    assert attempt("JT", "JT.pem", PASS) == 303
    assert client.get("/", follow_redirects=False).status_code == 200
    assert bench.sql("SELECT count(*) FROM login_failure") == [(0,)]


def test_a_deviation_is_approved_only_by_an_approver_with_their_own_key(
    client: TestClient, bench: Bench, tmp_path: Path
) -> None:
    csrf = log_in(client, "AK")

    def deviation(approver: str, key_file: str) -> str:
        reply = client.post(
            f"/run/{RUN}/deviation",
            data={
                "csrf": csrf,
                "description": "tank at 1.9 m for 3 min while topping up",
                "reason": "leak in the tank valve",
                "approver": approver,
                "approver_passphrase": PASS,
            },
            files={"approver_key": ("k.pem", (tmp_path / key_file).read_bytes(), "text/plain")},
        )
        return reply.text

    assert "is not authorised as approver" in deviation("AK", "AK.pem")  # an operator
    refused = deviation("MO", "AK.pem")
    assert "is the key of Anna Kowal (AK), not of Mark Osei (MO)" in refused
    assert 'id="approver_key-error"' in refused
    assert bench.sql("SELECT count(*) FROM deviation") == [(0,)]
    assert "deviation recorded, approved by MO" in deviation("MO", "MO.pem")
    assert bench.sql("SELECT count(*) FROM deviation") == [(1,)]


def test_photo_uploads_follow_the_cli_rule() -> None:
    """The page takes what `record observe --photo` takes: JPEG, PNG, WebP, TIFF or HEIC
    by their first bytes, up to 50 MB, under a plain name."""
    from testplan.web.security import photo_problem

    png = (DATA / "photos" / "gland-after-immersion.png").read_bytes()
    # source: ISO/IEC 23008-12 (HEIF) ftyp box with brand "heic" (from memory)
    heic = b"\x00\x00\x00\x18ftypheic\x00\x00\x00\x00mif1heic"
    assert photo_problem("gland.png", png) is None
    assert photo_problem("gland.heic", heic) is None
    assert photo_problem("gland.gif", b"GIF89a" + b"\x00" * 64) == (
        "not a photo: JPEG, PNG, WebP, TIFF or HEIC expected"
    )
    assert photo_problem("big.png", png[:16] + b"\x00" * (50 * 1024 * 1024)) == (
        "not a photo: more than 50 MB"
    )
    for name in ("gland\u202egnp.png", "gland\x07.png", "gland\u2066.png"):
        assert "plain name" in (photo_problem(name, png) or ""), repr(name)
