"""Setting a password is a manager's signed act, on the CLI and on the page; a hash written
into the store behind the tool logs nobody in. On SQLite and on PostgreSQL."""

from __future__ import annotations

import json
from collections.abc import Iterator
from pathlib import Path

import pytest
from starlette.testclient import TestClient

from testplan.cli import app as cli_app
from tests.store.conftest import MANAGER, PASS, Bench
from tests.store.conftest import db_url as db_url  # noqa: F401  (the SQLite/PostgreSQL fixture)
from tests.web.conftest import PASSWORDS, Clock, client_for, csrf_of, stocked

NEW = "a fresh bench password"


@pytest.fixture
def bench(db_url: str, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Bench:  # noqa: F811
    return stocked(tmp_path, monkeypatch, db_url)


@pytest.fixture
def client(bench: Bench) -> Iterator[TestClient]:
    with client_for(bench, Clock()) as c:
        yield c


def password_cli(bench: Bench, *args: str, password: str = NEW) -> tuple[int, str]:
    result = bench.runner.invoke(
        cli_app, ["people", "password", *args, "--db", bench.url], input=password + "\n"
    )
    assert "Traceback" not in result.stderr
    return result.exit_code, result.stderr.strip().splitlines()[-1] if result.stderr else ""


def password_rows(bench: Bench) -> list[tuple[str, str]]:
    return sorted(
        (str(i), str(h))
        for i, h in bench.sql(
            "SELECT p.initials, w.hash FROM person_password w JOIN person p ON p.id = w.person_id"
        )
    )


def audit_count(bench: Bench) -> int:
    return int(bench.sql("SELECT count(*) FROM audit")[0][0])


def logs_in(client: TestClient, who: str, password: str) -> tuple[int, str]:
    page = client.get("/login")
    reply = client.post(
        "/login",
        data={"csrf": csrf_of(page.text), "initials": who, "password": password},
        follow_redirects=False,
    )
    return reply.status_code, reply.text


def test_the_cli_sets_a_password_only_with_a_managers_own_key(bench: Bench) -> None:
    before, entries = password_rows(bench), audit_count(bench)
    assert password_cli(bench, "JT", "--by", MANAGER) == (
        1,
        "error: --key: QM signs this with their own key (give --key FILE (or set $TESTPLAN_KEY))",
    )
    assert password_cli(bench, "JT", *bench.signed("AK")) == (  # an operator, own key
        1,
        "error: --by: Anna Kowal (AK) is not authorised as manager (a manager grants it "
        "with `testplan people grant AK --role manager`)",
    )
    code, said = password_cli(bench, "JT", "--by", MANAGER, "--key", bench.key("MO"))
    assert code == 1 and said.startswith("error: --key: key ")
    assert said.endswith(
        "is the key of Mark Osei (MO), not of Quinn Marsh (QM) (use QM's own key file)"
    )
    code, said = password_cli(bench, "JT", *bench.signed(MANAGER), password="short")
    assert code == 1 and "at least 10 are needed" in said
    assert password_rows(bench) == before and audit_count(bench) == entries  # nothing stored

    assert password_cli(bench, "JT", *bench.signed(MANAGER))[0] == 0
    (jt, hashed), = [r for r in password_rows(bench) if r[0] == "JT"]  # fmt: skip
    assert hashed.startswith("$argon2id$") and hashed != dict(before)["JT"]
    ((actor, new),) = bench.sql(  # fmt: skip
        "SELECT actor, new_json FROM audit WHERE action = 'person.password' ORDER BY seq DESC"
    )[:1]
    signed = json.loads(new)
    assert actor.startswith("QM key ") and signed["by"] == MANAGER
    assert signed["fingerprint"].startswith(actor.removeprefix("QM key "))
    assert len(signed["signature"]) > 40 and "replaced" in signed


def test_a_password_set_through_the_cli_logs_in_and_an_old_one_no_longer(
    bench: Bench, client: TestClient
) -> None:
    assert password_cli(bench, "JT", *bench.signed(MANAGER))[0] == 0
    assert logs_in(client, "JT", PASSWORDS["JT"])[0] == 401
    assert logs_in(client, "JT", NEW)[0] == 303


def test_a_hash_written_behind_the_tool_logs_nobody_in(bench: Bench, client: TestClient) -> None:
    from argon2 import PasswordHasher

    # someone holding the database copies JT's hash onto AK, to log in as AK with JT's password
    bench.raw(
        "UPDATE person_password SET hash = (SELECT w.hash FROM person_password w JOIN person p "
        "ON p.id = w.person_id WHERE p.initials = 'JT') WHERE person_id = "
        "(SELECT id FROM person WHERE initials = 'AK')"
    )
    code, text = logs_in(client, "AK", PASSWORDS["JT"])
    assert code == 401 and "not the one signed for it" in text
    # or writes a hash of their own for the manager, who has no password
    bench.raw(
        "INSERT INTO person_password (person_id, hash, set_by, set_at) SELECT id, :h, 'QM', "
        "CURRENT_TIMESTAMP FROM person WHERE initials = 'QM'",
        h=PasswordHasher().hash("typed into the store"),
    )
    code, text = logs_in(client, MANAGER, "typed into the store")
    assert code == 401 and "set without a manager&#39;s signature" in text
    assert logs_in(client, "JT", PASSWORDS["JT"])[0] == 303  # the signed one still works


def key_login(client: TestClient, bench: Bench, who: str) -> str:
    page = client.get("/login")
    reply = client.post(
        "/login",
        data={"csrf": csrf_of(page.text), "initials": who, "passphrase": PASS},
        files={"key_file": ("k.pem", Path(bench.key(who)).read_bytes(), "text/plain")},
        follow_redirects=False,
    )
    assert reply.status_code == 303, reply.text
    return csrf_of(client.get("/people").text)


def page_set(client: TestClient, bench: Bench, csrf: str | None, key_of: str, **form: str) -> str:
    data = {"initials": "JT", "password": NEW, "password_again": NEW, "passphrase": PASS, **form}
    if csrf is not None:
        data["csrf"] = csrf
    reply = client.post(
        "/people/password",
        data=data,
        files={"key_file": ("k.pem", Path(bench.key(key_of)).read_bytes(), "text/plain")},
    )
    return f"{reply.status_code} {reply.text}"


def test_the_page_sets_a_password_signed_by_the_logged_in_manager(
    bench: Bench, client: TestClient
) -> None:
    csrf = key_login(client, bench, MANAGER)
    assert "Set the password" in client.get("/people").text
    before, entries = password_rows(bench), audit_count(bench)
    assert page_set(client, bench, None, MANAGER).startswith("403 this form has expired")
    refused = page_set(client, bench, csrf, "MO")  # not the manager's own key
    assert refused.startswith("400 ") and 'id="key-error"' in refused
    assert "is the key of Mark Osei (MO), not of Quinn Marsh (QM)" in refused
    refused = page_set(client, bench, csrf, MANAGER, password_again="something else")
    assert refused.startswith("400 ") and "the two passwords differ" in refused
    refused = page_set(client, bench, csrf, MANAGER, passphrase="not the passphrase")
    assert refused.startswith("400 ") and 'id="key-error"' in refused
    assert password_rows(bench) == before and audit_count(bench) == entries

    done = page_set(client, bench, csrf, MANAGER)
    assert done.startswith("200 ") and "JT: password set, signed by QM" in done
    assert audit_count(bench) == entries + 1
    client.post("/logout", data={"csrf": csrf})
    assert logs_in(client, "JT", NEW)[0] == 303


def test_an_operator_cannot_set_a_password_on_the_page(bench: Bench, client: TestClient) -> None:
    csrf = key_login(client, bench, "AK")
    assert "Set the password" not in client.get("/people").text
    before, entries = password_rows(bench), audit_count(bench)
    refused = page_set(client, bench, csrf, "AK")
    assert refused.startswith("400 ") and "Anna Kowal (AK) is not authorised as manager" in refused
    assert password_rows(bench) == before and audit_count(bench) == entries


def change_own(client: TestClient, bench: Bench, csrf: str, key_of: str, **form: str) -> str:
    data = {
        "csrf": csrf,
        "old_password": PASSWORDS["AK"],
        "new_password": NEW,
        "new_password_again": NEW,
        "own_passphrase": PASS,
        **form,
    }
    reply = client.post(
        "/people/own-password",
        data=data,
        files={"own_key_file": ("k.pem", Path(bench.key(key_of)).read_bytes(), "text/plain")},
    )
    return f"{reply.status_code} {reply.text}"


def test_a_person_changes_their_own_password_with_the_old_one_and_their_key(
    bench: Bench, client: TestClient
) -> None:
    assert logs_in(client, "AK", PASSWORDS["AK"])[0] == 303
    csrf = csrf_of(client.get("/people").text)
    before, entries = password_rows(bench), audit_count(bench)
    refused = change_own(client, bench, csrf, "AK", old_password="a guess at it")
    assert refused.startswith("400 ") and 'id="old_password-error"' in refused
    refused = change_own(client, bench, csrf, "JT")  # someone else's key
    assert refused.startswith("400 ") and 'id="own_key-error"' in refused
    assert "is the key of Jo Tran (JT), not of Anna Kowal (AK)" in refused
    refused = change_own(
        client, bench, csrf, "AK", new_password="short", new_password_again="short"
    )
    assert refused.startswith("400 ") and 'id="new_password-error"' in refused
    assert password_rows(bench) == before and audit_count(bench) == entries

    assert change_own(client, bench, csrf, "AK").startswith("200 ")
    (new,) = bench.sql("SELECT new_json FROM audit ORDER BY at DESC, seq DESC")[0]
    assert json.loads(new)["own"] is True and json.loads(new)["by"] == "AK"
    client.post("/logout", data={"csrf": csrf})
    assert logs_in(client, "AK", PASSWORDS["AK"])[0] == 401
    assert logs_in(client, "AK", NEW)[0] == 303
    # a hash copied onto AK behind the tool still logs nobody in
    bench.raw(
        "UPDATE person_password SET hash = (SELECT w.hash FROM person_password w JOIN person p "
        "ON p.id = w.person_id WHERE p.initials = 'JT') WHERE person_id = "
        "(SELECT id FROM person WHERE initials = 'AK')"
    )
    client.cookies.clear()
    code, text = logs_in(client, "AK", PASSWORDS["JT"])
    assert code == 401 and "not the one signed for it" in text
