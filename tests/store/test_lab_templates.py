"""A lab's own template set: registered once by a manager, named by the approval, the only
set an approved campaign's report is issued with."""

from __future__ import annotations

from pathlib import Path

import pytest

from testplan.report.render import template_dir, templates_sha256

from .conftest import PASS, Bench, record_and_judge, sign


@pytest.fixture
def judged(bench: Bench, monkeypatch: pytest.MonkeyPatch) -> Bench:
    monkeypatch.setenv("TESTPLAN_KEY_PASSPHRASE", PASS)
    record_and_judge(bench)
    bench(*sign(bench, "prepared", "RP"), "--quiet")
    bench(*sign(bench, "reviewed", "LV"), "--quiet")
    return bench


def lab_set(b: Bench, name: str = "lab") -> Path:
    """A lab's set: testplan's report template with a letterhead line of its own."""
    folder = b.folder / name
    folder.mkdir()
    report = (template_dir() / "report.html.j2").read_text()
    (folder / "report.html.j2").write_text(report + "{# letterhead #123456 #}\n")
    return folder


def register(b: Bench, folder: Path, by: str = "QM") -> str:
    return b("store", "templates", str(folder), "--name", "lab letterhead", *b.signed(by)).stdout


def approve(b: Bench, *extra: str, ok: bool = True):  # type: ignore[no-untyped-def]
    return b(*sign(b, "approved", "MO"), *extra, "--quiet", ok=ok)


def issue(b: Bench, *extra: str) -> list[str]:
    return ["report", "QC-2027-014", "-o", str(b.folder / "r.pdf"), "--issue-date",
            "2027-02-01", *b.signed("MO"), "--quiet", *extra]  # fmt: skip


def test_a_registered_set_is_approved_and_issued(judged: Bench) -> None:
    folder = lab_set(judged)
    sha = templates_sha256(folder)
    assert register(judged, folder) == f"template set 'lab letterhead' registered: SHA-256 {sha}\n"
    assert judged.sql("SELECT action, actor FROM audit ORDER BY seq DESC LIMIT 1")[0][0] == (
        "templates.register"
    )
    approve(judged, "--templates", str(folder))
    judged(*issue(judged, "--templates", str(folder)))
    assert "verified" in judged("verify", str(judged.folder / "r.pdf")).stdout
    # testplan's own set is not the one the approval names
    (judged.folder / "r.pdf").unlink()
    line = judged.fail(*issue(judged))
    assert "was approved for printing with" in line, line


def test_an_unregistered_set_is_refused_at_approval_and_at_issue(judged: Bench) -> None:
    folder = lab_set(judged)
    sha = templates_sha256(folder)[:16]
    assert judged.fail(*sign(judged, "approved", "MO"), "--templates", str(folder)) == (
        f"error: --templates: sign approved: the template set given (SHA-256 {sha}) is not "
        "registered (a manager registers it once with `testplan store templates DIR`)"
    )
    approve(judged)
    assert judged.fail(*issue(judged, "--templates", str(folder))) == (
        f"error: --templates: issue QC-2027-014: the template set given (SHA-256 {sha}) is not "
        "registered (a manager registers it once with `testplan store templates DIR`)"
    )
    assert not (judged.folder / "r.pdf").exists()


def test_only_a_manager_registers_a_set(judged: Bench) -> None:
    folder = lab_set(judged)
    line = judged.fail("store", "templates", str(folder), "--name", "mine", *judged.signed("MO"))
    assert "MO" in line and "manager" in line, line
    assert judged.sql("SELECT count(*) FROM template_set") == [(0,)]


def test_a_set_edited_after_registration_is_refused(judged: Bench) -> None:
    folder = lab_set(judged)
    register(judged, folder)
    page = folder / "report.html.j2"
    page.write_text(page.read_text().replace("#123456", "#654321"))
    assert "is not registered" in judged.fail(
        *sign(judged, "approved", "MO"), "--templates", str(folder)
    )
    page.write_text(page.read_text().replace("#654321", "#123456"))
    approve(judged, "--templates", str(folder))
    (folder / "extra.html.j2").write_text("{{ 'every verdict: pass' }}\n")
    assert "is not registered" in judged.fail(*issue(judged, "--templates", str(folder)))


def test_a_set_is_registered_once(judged: Bench) -> None:
    folder = lab_set(judged)
    register(judged, folder)
    line = judged.fail("store", "templates", str(folder), "--name", "again",
                       *judged.signed("QM"))  # fmt: skip
    assert "already registered as 'lab letterhead'" in line, line
