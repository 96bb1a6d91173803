"""Sign-off on the bench page: the campaign's state and what blocks signing, and signing in
one's role with one's own key and passphrase, on the rules ``testplan sign`` applies."""

from __future__ import annotations

import datetime as dt
from collections.abc import Iterator
from pathlib import Path

import pytest
from starlette.testclient import TestClient

from testplan.cli import app as cli_app
from tests.store.conftest import MANAGER, PASS, Bench, record_and_judge
from tests.store.conftest import db_url as db_url  # noqa: F401  (the SQLite/PostgreSQL fixture)
from tests.web.conftest import RUN, Clock, client_for, csrf_of, log_in, stocked

PAGE = "/campaign/QC-2027-014/signoff"
PASSWORD = "signing-desk-2027"


@pytest.fixture
def bench(db_url: str, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Bench:  # noqa: F811
    """The sample campaign with one run finished, not yet checked; RP (preparer) and LV
    (reviewer, preparer) with keys and passwords."""
    b = record_and_judge(stocked(tmp_path, monkeypatch, db_url), until_finished=True)
    # The page signs at the time it is used; this campaign's data checks are dated 2027, so
    # the page is used after them.
    monkeypatch.setattr(
        "testplan.store.signoff.utc_now", lambda: dt.datetime(2027, 1, 20, 9, 0, tzinfo=dt.UTC)
    )
    for who in ("RP", "LV"):
        result = b.runner.invoke(
            cli_app,
            ["people", "password", who, *b.signed(MANAGER), "--db", b.url, "--quiet"],
            input=PASSWORD + "\n",
        )
        assert result.exit_code == 0, result.stderr
    return b


@pytest.fixture
def client(bench: Bench) -> Iterator[TestClient]:
    with client_for(bench, Clock()) as c:
        yield c


def as_signer(client: TestClient, who: str) -> str:
    """Log ``who`` (RP or LV) in by password; their session's CSRF token."""
    client.cookies.clear()
    page = client.get("/login")
    reply = client.post(
        "/login",
        data={"csrf": csrf_of(page.text), "initials": who, "password": PASSWORD},
        follow_redirects=False,
    )
    assert reply.status_code == 303, reply.text
    return csrf_of(client.get(PAGE).text)


def sign(
    client: TestClient,
    bench: Bench,
    csrf: str | None,
    role: str,
    key_of: str,
    passphrase: str = PASS,
) -> tuple[int, str]:
    data = {"role": role, "passphrase": passphrase}
    if csrf is not None:
        data["csrf"] = csrf
    reply = client.post(
        PAGE,
        data=data,
        files={"key_file": ("k.pem", Path(bench.key(key_of)).read_bytes(), "text/plain")},
    )
    return reply.status_code, reply.text


def stored(bench: Bench) -> tuple[int, int, int]:
    """Signatures, manifests and audit entries in the store."""
    return (
        int(bench.sql("SELECT count(*) FROM signature")[0][0]),
        int(bench.sql("SELECT count(*) FROM manifest")[0][0]),
        int(bench.sql("SELECT count(*) FROM audit")[0][0]),
    )


def check_and_judge(bench: Bench) -> None:
    bench("record", "check", RUN, *bench.signed("MO"), "--at", "2027-01-16T09:00Z", "--quiet")
    bench("judge", "--quiet", ok=False)


def test_the_page_names_what_blocks_signing_and_refuses_until_it_is_done(
    bench: Bench, client: TestClient
) -> None:
    csrf = as_signer(client, "RP")
    page = client.get(PAGE).text
    assert "Not signed yet." in page and 'id="blockers"' in page
    assert f"run {RUN} is finished; every run must be finished and its data checked" in page
    before = stored(bench)
    code, text = sign(client, bench, csrf, "prepared", "RP")
    assert code == 400 and 'id="form-error"' in text and f"run {RUN} is finished" in text
    assert stored(bench) == before

    bench("record", "check", RUN, *bench.signed("MO"), "--at", "2027-01-16T09:00Z", "--quiet")
    bench("judge", "--quiet", ok=False)
    page = client.get(PAGE).text
    assert 'id="blockers"' not in page and "Nothing: every run carried out" in page
    # evidence changed after the judgement: the page says the judgement is stale
    bench.raw("UPDATE observation SET data_json = REPLACE(data_json, 'false', 'true')")
    assert "on evidence that has changed since" in client.get(PAGE).text


def test_three_people_sign_in_order_each_with_their_own_key(
    bench: Bench, client: TestClient
) -> None:
    check_and_judge(bench)
    csrf = as_signer(client, "RP")
    assert 'id="next-role">prepared<' in client.get(PAGE).text
    code, text = sign(client, bench, csrf, "reviewed", "RP")  # RP is no reviewer
    assert code == 400 and "Rita Pereira (RP) is not authorised as reviewer" in text
    code, text = sign(client, bench, csrf, "prepared", "LV")  # someone else's key
    assert code == 400 and 'id="key-error"' in text and "is the key of Lars Vik (LV)" in text
    code, text = sign(client, bench, csrf, "prepared", "RP", passphrase="not it")
    assert code == 400 and 'id="key-error"' in text
    assert stored(bench)[:2] == (0, 0)
    code, text = sign(client, bench, csrf, "prepared", "RP")
    assert code == 200 and "prepared by RP, manifest root " in text
    root = bench.sql("SELECT root FROM manifest")[0][0]
    assert root in text and "Rita Pereira (RP)" in text

    csrf = as_signer(client, "LV")
    code, text = sign(client, bench, csrf, "approved", "LV")  # out of order, and no approver
    assert code == 400 and "not authorised as approver" in text
    code, text = sign(client, bench, csrf, "reviewed", "LV")
    assert code == 200 and "reviewed by LV" in text
    code, text = sign(client, bench, csrf, "prepared", "LV")  # once reviewed, LV cannot re-prepare
    assert code == 400 and "already prepared; the records have not changed since" in text

    client.cookies.clear()
    csrf = log_in(client, "MO")
    code, text = sign(client, bench, csrf, "approved", "MO")
    assert code == 200 and "the campaign is now locked" in text and 'id="approved"' in text
    assert stored(bench)[:2] == (3, 1)
    signed = bench.sql("SELECT role, initials FROM signature s JOIN person p ON p.id = s.person_id")
    assert sorted(signed) == [("approved", "MO"), ("prepared", "RP"), ("reviewed", "LV")]
    bench("store", "check")


def test_an_operator_cannot_sign_and_a_form_without_its_token_is_refused(
    bench: Bench, client: TestClient
) -> None:
    check_and_judge(bench)
    csrf = log_in(client, "AK")  # an operator, with an enrolled key
    page = client.get(PAGE).text
    assert "Sign the campaign" not in page and "Signing needs the preparer" in page
    before = stored(bench)
    code, text = sign(client, bench, csrf, "prepared", "AK")
    assert code == 400 and "Anna Kowal (AK) is not authorised as preparer" in text
    csrf = as_signer(client, "RP")
    code, text = sign(client, bench, None, "prepared", "RP")
    assert code == 403 and "this form has expired" in text
    code, _ = sign(client, bench, "0" * 43, "prepared", "RP")
    assert code == 403
    assert stored(bench) == before


def test_the_same_person_does_not_sign_twice(bench: Bench, client: TestClient) -> None:
    check_and_judge(bench)
    csrf = as_signer(client, "LV")  # a preparer and a reviewer
    assert sign(client, bench, csrf, "prepared", "LV")[0] == 200
    before = stored(bench)
    code, text = sign(client, bench, csrf, "reviewed", "LV")
    assert code == 400 and "prepared, reviewed and approved need three different people" in text
    assert stored(bench) == before
