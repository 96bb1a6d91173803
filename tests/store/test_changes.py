"""A revision's "what changed" list, derived from the records (ISO/IEC 17025 cl. 7.8.8.2)."""

from __future__ import annotations

import pytest
import sqlalchemy as sa

from testplan.store.changes import revision_changes
from testplan.store.engine import open_store
from testplan.store.records import find_campaign

from .conftest import PASS, RUN, Bench, approve_and_issue, record_and_judge, sign


@pytest.fixture
def approved(bench: Bench, monkeypatch: pytest.MonkeyPatch) -> Bench:
    """One run recorded, checked, judged and approved (not issued)."""
    monkeypatch.setenv("TESTPLAN_KEY_PASSPHRASE", PASS)
    record_and_judge(bench)
    for role, who in (("prepared", "RP"), ("reviewed", "LV"), ("approved", "MO")):
        bench(*sign(bench, role, who), "--quiet")
    return bench


def changes(b: Bench) -> tuple[str, list[str]] | None:
    store = open_store(b.url)
    try:
        with store.reading() as session:
            found = revision_changes(session, find_campaign(session, "QC-2027-014"))
            return None if found is None else (found.reason, found.lines)
    finally:
        store.engine.dispose()


def test_a_first_revision_has_no_change_list(approved: Bench) -> None:
    assert changes(approved) is None


def test_an_amended_revision_lists_exactly_the_records_changed(approved: Bench) -> None:
    approved(
        "amend", "QC-2027-014", "--why", "function check of S01 added", "--by", "MO", "--quiet"
    )
    # Amended, nothing changed yet: the reason, and no record changed.
    assert changes(approved) == ("function check of S01 added", [])
    approved(
        *("record", "observe", RUN, "--specimen", "QC-2027-014-S01", "--function", "fail"),
        *("--by", "AK", "--quiet"),
    )
    approved("judge", "--quiet", ok=False)
    assert changes(approved) == (
        "function check of S01 added",
        [
            f"{RUN}: function observation added on QC-2027-014-S01",
            # Before, the plan's function check had no observation: no data.
            f"{RUN}: judgement redone (run verdict changed from no data to fail); verdict "
            "function (QC-2027-014-S01) changed from no data to fail",
        ],
    )


def test_a_change_made_behind_the_tool_is_listed_too(approved: Bench) -> None:
    # Someone holding the database changes a deviation's words after the amendment: the
    # list names the record, whatever the tool did or did not log.
    approved("amend", "QC-2027-014", "--why", "typo in a deviation", "--by", "MO", "--quiet")
    approved.raw("UPDATE deviation SET reason = 'valve leak'")
    reason, lines = changes(approved) or ("", [])
    assert lines == [f"deviation on {RUN}: specimen temperature not logged: changed"]
    # A record deleted behind the tool is named as removed.
    approved.raw("DELETE FROM observation")
    assert (
        f"observation ingress on QC-2027-014-S01 in {RUN}: removed"
        in (changes(approved) or ("", []))[1]
    )


def test_the_revision_2_report_states_the_reason_and_exactly_that_change(approved: Bench) -> None:
    from pypdf import PdfReader

    # source: ISO/IEC 17025:2017 cl. 7.8.8.2 (from memory): an amended report says what
    # changed and, where appropriate, why
    approved(
        "amend", "QC-2027-014", "--why", "function check of S01 added", "--by", "MO", "--quiet"
    )
    approved(
        *("record", "observe", RUN, "--specimen", "QC-2027-014-S01", "--function", "pass"),
        *("--by", "AK", "--quiet"),
    )
    approved("judge", "--quiet", ok=False)
    # Approved again and issued: the issued revision 2 states what changed.
    pdf = approve_and_issue(approved, "revision-2.pdf")
    pages = [" ".join(p.extract_text().split()) for p in PdfReader(pdf).pages]
    assert "Authorised report" in pages[0] and "DRAFT" not in pages[0]
    summary = " ".join(pages).split("Summary of results")[0]
    assert "What changed in this revision" in summary
    assert (
        "Revision 2 amends revision 1: function check of S01 added (requested by MO on " in summary
    )
    part = summary.split("Changes in the records since the superseded revision:")[1]
    assert part.strip() == (
        f"{RUN}: function observation added on QC-2027-014-S01 {RUN}: judgement redone (run "
        "verdict still no data); verdict function (QC-2027-014-S01) changed from no data to "
        "pass"
    )


def test_an_edited_superseded_manifest_gives_no_list_but_says_so(approved: Bench) -> None:
    # To hide a change, edit the superseded manifest's items so they match the records now.
    approved(
        "amend", "QC-2027-014", "--why", "function check of S01 added", "--by", "MO", "--quiet"
    )
    approved(
        *("record", "observe", RUN, "--specimen", "QC-2027-014-S01", "--function", "fail"),
        *("--by", "AK", "--quiet"),
    )
    forged = "[]"
    if approved.url.startswith("postgresql"):
        # The bench database refuses any change to a sign-off record.
        with pytest.raises(sa.exc.DBAPIError, match="manifest records are append-only"):
            approved.raw("UPDATE manifest SET body_json = :b", b=forged)
        return
    approved.tamper("UPDATE manifest SET body_json = :b", b=forged)
    assert changes(approved) == (
        "function check of S01 added",
        [
            "the manifest of revision 1 no longer matches its signed root: the changes "
            "cannot be listed (run `testplan verify`)"
        ],
    )


def test_a_run_started_with_a_new_calibration_shows_the_calibration_replaced(
    approved: Bench,
) -> None:
    from .conftest import START

    approved("amend", "QC-2027-014", "--why", "second immersion run added", "--by", "MO", "--quiet")
    approved(
        *("equipment", "calibrate", "LT-03", "--channel", "lowest_point_depth"),
        *("--certificate", "VC-2027-007", "--provider", "Gellimoor Calibration Ltd"),
        *("--calibrated", "2027-01-20", "--due", "2028-01-20", "--uncertainty", "3 mm"),
        *("--range", "0 mm", "3000 mm", "--by", "AK", "--quiet"),
    )
    other = "water-8@aged-1"
    approved("record", "start", other, *START, "--at", "2027-01-21T09:00Z", "--quiet")
    reason, lines = changes(approved) or ("", [])
    assert reason == "second immersion run added"
    assert lines == [
        f"run {other} changed; now running",
        "calibration of LT-03 (lowest_point_depth) replaced: certificate VC-2026-118 by "
        "VC-2027-007 (due 2028-01-20)",
        # LT-03's water temperature channel was not recalibrated: the old one is now used
        # by this run too, and was already in the signed records.
    ]


def test_an_invalidated_run_and_its_repeat_are_worded(
    bench: Bench, monkeypatch: pytest.MonkeyPatch
) -> None:
    # compare() on its own: the records before and after a run is declared invalid.
    from testplan.store.changes import compare
    from testplan.store.signoff import compute_items

    monkeypatch.setenv("TESTPLAN_KEY_PASSPHRASE", PASS)
    record_and_judge(bench, until_finished=True)
    store = open_store(bench.url)
    try:
        with store.reading() as session:
            camp = find_campaign(session, "QC-2027-014")
            before = [i.to_json() for i in compute_items(session, camp)]
        bench("record", "invalidate", RUN, "--reason", "tank level dipped at hour 10", "--by", "MO")
        with store.reading() as session:
            lines = compare(
                session, before, compute_items(session, find_campaign(session, "QC-2027-014"))
            )
    finally:
        store.dispose()
    assert lines[:2] == [
        f"run {RUN} declared invalid: tank level dipped at hour 10",
        f"run {RUN}-repeat2 added, repeating {RUN} (planned)",
    ]
    # Declaring it invalid judges it: a first judgement, with the outcome it keeps.
    (outcome,) = bench.sql("SELECT outcome FROM judgement")[0]
    assert lines[2:] == [f"{RUN}: judged, {outcome}"]
