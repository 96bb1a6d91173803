"""What is issued is what was signed: attacks on a signed campaign that verify must name.

Each case is a finding made on copies of an approved store: a change behind the tool's back
(a plain database connection) that an earlier `verify` or `store check` did not see.
"""

from __future__ import annotations

import datetime as dt
import uuid
from pathlib import Path

import pytest
import sqlalchemy as sa

from testplan.report.render import templates_sha256

from .conftest import PASS, RUN, Bench, approve_and_issue, record_and_judge, sign
from .test_audit_chain import unlock_audit
from .test_signoff import problems


@pytest.fixture
def judged(bench: Bench, monkeypatch: pytest.MonkeyPatch) -> Bench:
    monkeypatch.setenv("TESTPLAN_KEY_PASSPHRASE", PASS)
    return record_and_judge(bench)


def tamper(b: Bench, statement: str) -> bool:
    """Run ``statement`` behind the tool; False when PostgreSQL's lock refused it."""
    try:
        b.tamper(statement)
    except sa.exc.DBAPIError as err:
        assert b.url.startswith("postgresql"), err
        assert "locked" in str(err.orig), err
        return False
    return True


@pytest.mark.parametrize(
    ("statement", "named"),
    [
        # a signer who ran no run: the preparer's name
        (
            "UPDATE person SET name = 'Somebody Else' WHERE initials = 'RP'",
            "prepared signature of RP: the signer's person record (name or initials) "
            "changed since signing",
        ),
        # the method text the report prints
        ("UPDATE procedure SET edition = '1989', clause = '99'", "procedure "),
        # a criterion limit the judge reads
        ("UPDATE criterion SET max = 999 WHERE max IS NOT NULL", "criterion "),
        ("UPDATE criterion SET text = 'anything goes' WHERE text IS NOT NULL", "criterion "),
        ("UPDATE equipment SET serial = '00000'", "equipment LT-03: changed"),
    ],
)
def test_records_the_report_prints_are_covered(judged: Bench, statement: str, named: str) -> None:
    pdf = approve_and_issue(judged)
    if not tamper(judged, statement):
        assert "verified" in judged("verify", str(pdf)).stdout
        return
    found = problems(judged, pdf)
    assert any(p.startswith(named) for p in found), found


def test_cutting_the_audit_trails_tail_is_named(judged: Bench) -> None:
    """The sign-offs and the issue are the last audit entries; deleting them leaves a chain
    that still checks out on its own."""
    pdf = approve_and_issue(judged)
    unlock_audit(judged)
    (last,) = judged.sql("SELECT max(seq) FROM audit")[0]
    judged.raw("DELETE FROM audit WHERE seq > :s", s=last - 4)
    assert judged("store", "check").stdout.startswith("ok: ")  # the chain alone is whole
    found = problems(judged, pdf)
    assert "the issue's audit entry is gone (the trail's tail was cut)" in found, found
    assert (
        "approved signature of MO: its audit entry is gone (the trail's tail was cut)" in found
    ), found


def test_a_rewritten_audit_trail_after_signing_is_named(judged: Bench) -> None:
    """Entries cut back to before the review and re-chained: the head the approver saw is
    gone."""
    pdf = approve_and_issue(judged)
    (context,) = judged.sql("SELECT context_json FROM signature WHERE role = 'approved'")[0]
    import json

    length = json.loads(context)["audit_head"]["length"]
    unlock_audit(judged)
    judged.raw("DELETE FROM audit WHERE seq >= :s", s=length)
    found = problems(judged, pdf)
    assert (
        f"approved signature of MO: the audit trail has no entry {length} any more "
        "(its tail was cut)" in found
    ), found


def test_raw_file_bytes_stored_as_text_are_named_not_a_crash(judged: Bench) -> None:
    if judged.url.startswith("postgresql"):
        pytest.skip("a bytea column cannot hold text; SQLite columns take any type")
    pdf = approve_and_issue(judged)
    judged.tamper("UPDATE raw_file SET content = 'time,depth'")
    found = problems(judged, pdf)
    assert any(p.startswith("raw file tank.csv of " + RUN + ": changed") for p in found), found
    result = judged("store", "check", ok=False)
    assert result.exit_code == 3 and "Traceback" not in result.stderr
    assert "it holds str, not bytes" in result.stderr


def test_an_untouched_issued_report_still_verifies(judged: Bench, tmp_path: Path) -> None:
    pdf = approve_and_issue(judged)
    assert judged("verify", str(pdf)).stdout.splitlines()[-1] == f"verified: {pdf}"


def test_sign_off_refuses_a_judgement_older_than_the_evidence(
    bench: Bench, monkeypatch: pytest.MonkeyPatch
) -> None:
    """Finding 2: ingress found after judging was not in the report, which still said pass."""
    monkeypatch.setenv("TESTPLAN_KEY_PASSPHRASE", PASS)
    judged = record_and_judge(bench, until_finished=True)
    judged("judge", "--quiet", ok=False)
    judged(
        "record",
        "observe",
        RUN,
        "--specimen",
        "QC-2027-014-S01",
        "--ingress",
        "water:found",
        "--where",
        "terminal cavity",
        "--live-parts",
        "reached",
        "--by",
        "AK",
        "--quiet",
    )
    # The data check judges the run again (its conditions must be dispositioned), so through
    # testplan the ingress found after judging reaches the judgement before anyone signs.
    judged("record", "check", RUN, *judged.signed("MO"), "--at", "2027-01-16T09:00Z", "--quiet")
    assert ("fail",) in judged.sql(
        "SELECT v.outcome FROM verdict v JOIN judgement j ON j.id = v.judgement_id"
        " JOIN run r ON r.id = j.run_id WHERE r.key = :k AND v.criterion_key LIKE '%ingress%'",
        k=RUN,
    )
    # Evidence added behind testplan's back after the check: sign-off refuses the judgement.

    new_id = uuid.uuid4()
    judged.raw(
        "INSERT INTO observation (id, run_id, specimen_id, kind, checkpoint, data_json,"
        " attachment_id, recorded_by_id, recorded_at) SELECT :id, run_id, specimen_id, kind,"
        " checkpoint, data_json, attachment_id, recorded_by_id, :at FROM observation"
        " WHERE kind = 'ingress' LIMIT 1",
        id=str(new_id) if judged.url.startswith("postgresql") else new_id.hex,
        at=dt.datetime.now(dt.UTC) + dt.timedelta(days=400),
    )
    line = judged.fail(*sign(judged, "prepared", "RP"))
    assert line.startswith(f"error: run {RUN} was judged ")
    assert "on evidence that has changed since (inputs of " in line
    assert "observation ingress recorded " in line
    assert line.endswith("(run `testplan judge` again, then sign)")
    judged("judge", "--quiet", ok=False)
    judged(*sign(judged, "prepared", "RP"), "--quiet")


def issue(b: Bench, *extra: str, ok: bool = True, name: str = "again.pdf"):  # type: ignore[no-untyped-def]
    return b("report", "QC-2027-014", "-o", str(b.folder / name), *b.signed("MO"), *extra, ok=ok)


def test_an_issued_revision_prints_once(judged: Bench) -> None:
    """Finding 6: another --issue-date gave a second, different issued PDF that verified."""
    pdf = approve_and_issue(judged)
    again = issue(judged)  # the kept date of issue, not today's
    assert (judged.folder / "again.pdf").read_bytes() == pdf.read_bytes()
    assert "issued TR-QC-2027-014 revision 1" in again.stderr
    assert judged.sql("SELECT count(*) FROM report_issue") == [(1,)]
    line = judged.fail(
        "report", "QC-2027-014", "-o", str(judged.folder / "x.pdf"), "--issue-date", "2027-02-02",
        *judged.signed("MO"),
    )  # fmt: skip
    assert line.startswith("error: --issue-date: ")
    assert "revision 1 was issued on 2027-02-01 as PDF SHA-256 " in line
    assert not (judged.folder / "x.pdf").exists()
    assert judged.sql("SELECT count(*) FROM report_issue") == [(1,)]


def test_an_approved_report_is_not_printed_with_other_templates(judged: Bench) -> None:
    """Finding 1: a template that printed "pass" everywhere was issued and verified."""
    mine = judged.folder / "mine"
    mine.mkdir()
    (mine / "report.html.j2").write_text("<p>pass</p>\n")
    approve_and_issue(judged)
    line = judged.fail(
        "report", "QC-2027-014", "-o", str(judged.folder / "x.pdf"), "--templates", str(mine)
    )
    sha = templates_sha256(mine)[:16]
    assert line == (
        f"error: --templates: issue QC-2027-014: the template set given (SHA-256 {sha}) is not "
        "registered (a manager registers it once with `testplan store templates DIR`)"
    )
    assert not (judged.folder / "x.pdf").exists()


def test_report_refuses_to_issue_changed_records(judged: Bench) -> None:
    judged(*sign(judged, "prepared", "RP"), "--quiet")
    judged(*sign(judged, "reviewed", "LV"), "--quiet")
    judged(*sign(judged, "approved", "MO"), "--quiet")
    if not tamper(judged, "UPDATE verdict SET outcome = 'pass'"):
        return
    line = judged.fail(
        "report", "QC-2027-014", "-o", str(judged.folder / "x.pdf"), "--issue-date", "2027-02-01",
        *judged.signed("MO"),
    )  # fmt: skip
    assert line.startswith(
        "error: QC-2027-014: the records differ from the approved manifest (verdict "
    )
    assert "nothing was issued" in line
    assert judged.sql("SELECT count(*) FROM report_issue") == [(0,)]
    assert not (judged.folder / "x.pdf").exists()


@pytest.mark.parametrize("day", ["2026-01-05", "2027-01-10"])
def test_a_date_of_issue_before_the_approval_or_the_tests_is_refused(
    judged: Bench, day: str
) -> None:
    """Finding 6: an issue date before every test was accepted."""
    for role, who in (("prepared", "RP"), ("reviewed", "LV"), ("approved", "MO")):
        judged(*sign(judged, role, who), "--quiet")
    line = judged.fail(
        "report", "QC-2027-014", "-o", str(judged.folder / "x.pdf"), "--issue-date", day,
        *judged.signed("MO"),
    )  # fmt: skip
    # the approval is dated 2027-01-20; the run's data check 2027-01-16 09:00 UTC
    assert line.startswith(f"error: --issue-date: date of issue {day} is before the campaign's ")
    assert "; nothing was issued (give --issue-date " in line
    assert judged.sql("SELECT count(*) FROM report_issue") == [(0,)]
    assert not (judged.folder / "x.pdf").exists()


def test_the_approval_covers_the_template_set_that_prints(
    judged: Bench, monkeypatch: pytest.MonkeyPatch
) -> None:
    """Issuing is part of the signed act: the approval names the tool version and the
    SHA-256 of the template set; another set (a changed installation) does not issue."""
    import json

    from testplan.report import render

    for role, who in (("prepared", "RP"), ("reviewed", "LV"), ("approved", "MO")):
        judged(*sign(judged, role, who), "--quiet")
    ((context,),) = judged.sql("SELECT context_json FROM signature WHERE role = 'approved'")
    assert json.loads(context)["printing"]["templates_sha256"] == render.templates_sha256()
    monkeypatch.setattr(render, "templates_sha256", lambda override=None: "f" * 64)
    line = judged.fail(
        "report", "QC-2027-014", "-o", str(judged.folder / "x.pdf"), "--issue-date", "2027-02-01",
        *judged.signed("MO"),
    )  # fmt: skip
    assert line.startswith("error: QC-2027-014 was approved for printing with testplan ")
    assert "; these are ffffffffffffffff (testplan " in line
    assert judged.sql("SELECT count(*) FROM report_issue") == [(0,)]
