"""Page fill and margins, measured from weasyprint's layout of the fixture report."""

from __future__ import annotations

from typing import Any

import pytest

from testplan.report.layout import overflowing, page_fills, render_document, short_pages
from tests.report.conftest import build_store


@pytest.fixture(scope="module")
def laid_out(tmp_path_factory: pytest.TempPathFactory) -> Any:
    """The fixture report's HTML as `report` printed it, laid out once."""
    folder = tmp_path_factory.mktemp("layout")
    b = build_store(folder)
    html = folder / "report.html"
    b(
        *("report", "QC-2027-014", "-o", str(folder / "report.pdf"), "--html", str(html)),
        *("--issue-date", "2027-02-01", "--quiet"),
    )
    return render_document(html.read_text())


def test_no_page_is_under_a_third_full_unless_a_section_ends_there(laid_out: Any) -> None:
    # common practice (no source): a printed report does not leave pages nearly empty
    fills = page_fills(laid_out)
    assert short_pages(fills) == []
    # Major sections start anew: the first run section and the annex (client data,
    # calendars, cautions, authorisation); the summary opens page 1.
    assert [f.number for f in fills if f.starts_part] == [4, 8]


def test_the_page_count_stays_in_its_range(laid_out: Any) -> None:
    # Summary and items: 3 pages (the conformity table and 13 runs planned, not performed);
    # two run sections with 22 verdicts and two observation tables: 3 to 5 pages; the annex
    # (client data, two calendars, eleven cautions, authorisation): 2 to 3 pages.
    assert 8 <= len(laid_out.pages) <= 11


def test_nothing_is_printed_past_the_right_margin(laid_out: Any) -> None:
    assert overflowing(laid_out) == []


def test_short_pages_are_found_and_section_ends_are_allowed() -> None:
    filler = "<p>line</p>" * 50
    # Page 1 ends after one line because of a plain forced break: too short.
    doc = render_document(f"<p>one</p><div style='break-before: page'>{filler}</div>")
    assert [f.number for f in short_pages(page_fills(doc))] == [1]
    # The same short page before a major section (class part) ends a section: allowed.
    doc = render_document(
        f"<p>one</p><section class='part' style='break-before: page'>"
        f"<h2>Annex</h2>{filler}</section>"
    )
    fills = page_fills(doc)
    assert fills[1].starts_part and short_pages(fills) == []
    assert fills[0].fill < 0.05 and fills[1].fill > 0.5
    wide = render_document("<p style='white-space: nowrap'>" + "QC-2027-014-S01 " * 40 + "</p>")
    assert overflowing(wide) and overflowing(wide)[0][0] == 1
