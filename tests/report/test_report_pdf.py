"""`testplan report`: a real PDF read back for each ISO/IEC 17025 cl. 7.8.2.1 item."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from pypdf import PdfReader

from tests.report.conftest import KNOB, RUN, build_store
from tests.store.conftest import Bench


@pytest.fixture(scope="module")
def report(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, list[str], PdfReader]:
    """The fixture store (tests/report/conftest.py), reported once."""
    folder = tmp_path_factory.mktemp("report")
    b = build_store(folder)
    pdf = folder / "out" / "report.pdf"
    pdf.parent.mkdir()
    html = folder / "report.html"  # the HTML that was printed, for per-cell text checks
    result = b(
        *("report", "QC-2027-014", "-o", str(pdf), "--issue-date", "2027-02-01"),
        *("--html", str(html)),
    )
    assert result.stdout.strip() == f"wrote {pdf}"
    # Progress on stderr while it renders: each run's section with its plots, then printing.
    assert "run 1 of 2 drawn: " in result.stderr and "run 2 of 2 drawn: " in result.stderr
    assert result.stderr.index("run 2 of 2") < result.stderr.index("printing the PDF")
    reader = PdfReader(pdf)
    pages = [" ".join(p.extract_text().split()) for p in reader.pages]
    return pdf, pages, reader


def text(report: tuple[Path, list[str], PdfReader]) -> str:
    return " ".join(report[1])


@pytest.mark.parametrize(
    "needle",
    [
        # source: ISO/IEC 17025:2017 cl. 7.8.2.1 a-p (from memory)
        "Test report",  # a) title
        "Ferrowick Environmental Test Laboratory, 14 Ferry Road, Ferrowick Industrial Estate",  # b)
        "Place of testing Ferrowick laboratory, bay 2",  # c)
        "Report number and revision TR-QC-2027-014, revision 1",  # d)
        "Quorrel Gaugeworks Ltd",  # e) client
        "contact: Priya Nair",  # e) contact
        "Method: IEC 60529:Ed. 2.2",  # f) method with edition
        "cl. 14.2.8",  # f) clause
        "QC-2027-014-S01 ip-verification 2027-01-06 new, sealed carton",  # g) h) items, receipt
        "Dates of test 2027-01-12 to 2027-01-16",  # i)
        "Date of issue 2027-02-01",  # j)
        "the laboratory did not sample them",  # k) no sampling plan: the client supplied them
        "The results in this report relate only to the items tested",  # l)
        "tank topped up during the run evaporation Mark Osei (MO)",  # n) deviation, who allowed
        "Not yet prepared, reviewed and approved",  # o) authorisation (draft)
        "Results from external providers: none",  # p)
        "21 °C, 45 %RH, 1012 hPa at the start",  # environmental conditions
        "VC-LT-03, Gellimoor Calibration Ltd",  # equipment and certificate
        "valid for the run",  # calibration status
        "4 mm (k = 2)",  # uncertainty
        "guarded acceptance, w = 1 × U (ILAC-G8); agreed: client letter QG-QA-0112",  # rule
        "supplied by the client",  # customer-supplied data identified (cl. 7.8.2.2)
        "The laboratory is not responsible for it",  # its disclaimer
        # cl. 7.8.7: S03 failed where the plan allows none, so the reliability claim is withheld
        "Interpretation. Reliability claim withheld: 1 failure (QC-2027-014-S03",
        "shall not be reproduced except in full",
    ],
)
def test_each_checklist_item_is_in_the_pdf(report, needle: str) -> None:  # type: ignore[no-untyped-def]
    assert needle in text(report)


def test_every_page_carries_the_report_number_and_page_x_of_y(report) -> None:  # type: ignore[no-untyped-def]
    pages = report[1]
    assert len(pages) >= 6
    for i, page in enumerate(pages, start=1):
        assert "TR-QC-2027-014 revision 1 DRAFT of 2027-02-01" in page
        assert f"Page {i} of {len(pages)}" in page
        assert "DRAFT: not authorised for issue" in page
    assert "End of report TR-QC-2027-014, revision 1" in pages[-1]


def summary(report: tuple[Path, list[str], PdfReader]) -> str:
    """The summary section: from page 1 to where the items tested begin."""
    return text(report).split("Items tested")[0]


def test_summary_comes_first(report) -> None:  # type: ignore[no-untyped-def]
    first = summary(report)
    assert "Summary of results" in first
    assert "Verdict per leg" in first and "Verdict per specimen" in first
    assert re.search(
        r"water-8@ip-verification-1 QC-2027-014-S01, QC-2027-014-S02 .* invalid, repeated as "
        r"water-8@ip-verification-1-repeat2",
        first,
    )


def test_page_one_states_conformity_per_claim_and_what_was_not_done(report) -> None:  # type: ignore[no-untyped-def]
    first = report[1][0]
    rest = summary(report)
    # source: ISO/IEC 17025:2017 cl. 7.8.6.2 (from memory): conformity per specification
    assert "Statement of conformity" in first
    # IP66/IP68, 2 m for 72 h declared: one claim per numeral; nothing here is yet met.
    for claim in ("IP6X not evaluated", "IPX6 not evaluated", "IPX8 at 2 m for 72 h not evaluated"):
        assert claim in first
    assert "How to read the verdicts." in first and "coverage probability" in first
    assert "Planned, not performed:" in first
    assert "water-8@ip-verification-1-repeat2 (QC-2027-014-S01, QC-2027-014-S02)" in rest
    assert (
        "water-8@ip-verification-1: tank topped up during the run (reason: evaporation; "
        "approved by MO)" in rest
    )
    assert "water-8@ip-verification-1: invalid, tank level dipped at hour 10" in rest
    # Its only run so far was invalid; the repeat is still to be done.
    assert "QC-2027-014-S01 ip-verification not started" in rest


def test_units_are_printed_in_si_typography(report) -> None:  # type: ignore[no-untyped-def]
    # source: SI Brochure, 9th edition (BIPM), unit symbols °C, Ω and the half-high dot
    # for a product of units (from memory)
    body = text(report)
    assert "°C" in body
    for ascii_unit in ("degC", "N*mm", "Mohm", "Gohm", "m^3"):
        assert ascii_unit not in body, ascii_unit


def test_a_draft_carries_a_diagonal_watermark(report) -> None:  # type: ignore[no-untyped-def]
    # The watermark is text on every page (weasyprint repeats a fixed element).
    assert all(
        re.search(r"\bDRAFT\b", p.replace("DRAFT:", "").replace("DRAFT of", "")) for p in report[1]
    )


def test_results_carry_units_uncertainty_and_verdict(report) -> None:  # type: ignore[no-untyped-def]
    body = text(report)
    # Guarded (w = 1 x U): specification limit, acceptance limit moved in by U, U with its
    # coverage probability, the margin against the acceptance limit.
    # source: ILAC-G8:09/2019 guarded acceptance (from memory)
    assert "Specification limit Acceptance limit" in body
    assert (
        "depth all 2000 mm >= 2053.7 mm >= 2057.7 mm 4 mm (k = 2, about 95 %) -57.7 mm fail" in body
    )
    assert "below the limit for about 2 min in the exposure" in body


def test_editions_cautions_and_guidance_for_the_reader(report) -> None:  # type: ignore[no-untyped-def]
    body = text(report)
    assert "Methods and editions" in body and "IEC 60529 Ed. 2.2 (1989 + A1:1999 + A2:2013)" in body
    assert "Safety cautions for the tests performed" in body
    assert "de-energise before handling or opening" in body
    # A caution that several procedures share is printed once, naming them.
    assert body.count("Assess the risks before the test") == 1
    assert body.count("de-energise before handling or opening") == 1
    assert "For anyone reusing the methods described here" in body
    assert (
        "the product standard, local codes and accredited or licensed practice take "
        "precedence over any value or wording here" in body
    )


def test_plots_are_present(report) -> None:  # type: ignore[no-untyped-def]
    body = text(report)
    assert "Figure 1. water-8@ip-verification-1: lowest point depth over the run" in body
    assert "Campaign calendar" in body
    pdf, pages, reader = report
    figure_page = next(i for i, p in enumerate(pages) if "Figure 1." in p)
    xobjects = reader.pages[figure_page]["/Resources"].get("/XObject", {})
    assert len(xobjects) >= 1
    assert pdf.stat().st_size < 20 * 1024 * 1024


def test_the_pdf_is_written_whole_with_the_usual_mode(report) -> None:  # type: ignore[no-untyped-def]
    pdf = report[0]
    assert [p.name for p in pdf.parent.iterdir()] == ["report.pdf"]
    assert pdf.stat().st_mode & 0o044 == 0o044
    assert report[2].metadata.title == "TR-QC-2027-014 revision 1"


def test_letter_paper_and_bad_options(report, tmp_path: Path) -> None:  # type: ignore[no-untyped-def]
    folder = report[0].parent.parent
    b = Bench(f"sqlite:///{folder / 'lab.db'}", folder)
    out = tmp_path / "letter.pdf"
    b("report", "QC-2027-014", "-o", str(out), "--paper", "letter", "--quiet")
    box = PdfReader(out).pages[0].mediabox
    assert (round(float(box.width)), round(float(box.height))) == (612, 792)
    a4 = PdfReader(report[0]).pages[0].mediabox
    assert (round(float(a4.width)), round(float(a4.height))) == (595, 842)
    assert b.fail("report", "QC-2027-014", "-o", str(out), "--paper", "a3") == (
        "error: --paper: unknown paper 'a3' (a4 or letter)"
    )
    assert "no campaign 'QC-2027-41'" in b.fail("report", "QC-2027-41", "-o", str(out))
    assert b.fail("report", "QC-2027-014", "-o", str(tmp_path / "r.txt")).endswith(
        "--output: the report file must end in .pdf"
    )


@pytest.mark.parametrize(
    "needle",
    [
        # Every field of every observation, with its unit (tests/report/conftest.py SHEET).
        "where: drop under the lid seal at the cable entry",
        "live parts: clear",
        "how much: about 0.2 mL",
        "before: 412.35 g; after: 412.61 g; change: +0.26 g",
        "start pressure: 1200 mbar; end pressure: 1199.8 mbar; duration: 600 s",
        "start temperature: 21.4 °C; end temperature: 21.4 °C",
        "barometric pressure: 1012 mbar; dead volume: 0.045 L; gauge: PG-01",
        "resistance: 2100 MΩ; test voltage: 500 V; meter: IR-04",
        "operator's note lid screws re-torqued by the client before delivery",
        "torque checkpoint cycles: 0; value: 26 N·mm",
        "torque checkpoint cycles: 54000; value: 24.5 N·mm",
        "failure cycles: 41000; description: detent spring cracked",
    ],
)
def test_every_observation_field_is_printed(report, needle: str) -> None:  # type: ignore[no-untyped-def]
    assert needle in text(report)


def test_instruments_whose_reading_enters_a_verdict_are_listed(report) -> None:  # type: ignore[no-untyped-def]
    # The leak gauge and the insulation tester are named only in the observations; their
    # calibration and U are what the leak and insulation verdicts use.
    body = text(report)
    assert "PG-01: test_pressure sensor leak-test pressure VC-PG-01, Gellimoor" in body
    assert "0.05 mbar (k = 2) 800 to 1600 mbar" in body
    assert "IR-04: insulation_resistance sensor insulation resistance VC-IR-04" in body
    assert "20 MΩ (k = 2) 1 to 10000 MΩ" in body


def test_each_caution_and_disclaimer_is_printed_once(report, tmp_path: Path) -> None:  # type: ignore[no-untyped-def]
    import json

    body = text(report)
    folder = report[0].parent.parent
    b = Bench(f"sqlite:///{folder / 'lab.db'}", folder)
    plan = json.loads(b.sql("SELECT plan_json FROM plan_revision")[0][0])
    used = {"water-8", "endurance-mode-selector-knob"}
    lines = {c for p in plan["procedures"] if p["id"] in used for c in p["cautions"]}
    assert len(lines) >= 4
    for line in lines:
        assert body.count(" ".join(line.split())[:60]) == 1, line
    for once in (
        "take precedence over any value or wording here",
        "The laboratory is not responsible for it",
        "shall not be reproduced except in full",
        "The results in this report relate only to the items tested",
    ):
        assert body.count(once) == 1, once


def test_no_stray_punctuation_or_doubled_words(report) -> None:  # type: ignore[no-untyped-def]
    body = text(report)
    assert not re.search(r"\(\s*\)|\):\.|:\.|\.\.(?!\.)|;;|, ,|; ;", body)
    assert "Interpretation. Interpretation" not in body
    assert not re.search(r"cl\. (Table|table|test method|method|Annex)", body)
    # A word printed twice in a row within one paragraph, cell, heading or caption (the
    # PDF's text runs cells together, so the HTML that was printed is read element by element).
    for piece in printed_texts(report[0].parent.parent / "report.html"):
        assert not re.search(r"\b([A-Za-z]{2,})[.,:]? \1\b", piece, flags=re.IGNORECASE), piece


def printed_texts(html: Path) -> list[str]:
    """The text of each paragraph, table cell, list item, heading and caption of a page."""
    from html.parser import HTMLParser

    blocks = {"p", "td", "th", "li", "h1", "h2", "h3", "figcaption"}
    out: list[str] = []

    class Reader(HTMLParser):
        def __init__(self) -> None:
            super().__init__()
            self.open: list[list[str]] = []

        def handle_starttag(self, tag: str, attrs: object) -> None:
            if tag in blocks:
                self.open.append([])

        def handle_endtag(self, tag: str) -> None:
            if tag in blocks and self.open:
                out.append(" ".join("".join(self.open.pop()).split()))

        def handle_data(self, data: str) -> None:
            if self.open:
                self.open[-1].append(data)

    Reader().feed(html.read_text())
    assert len(out) > 100
    return out


def test_a_serial_is_never_broken_across_lines(report) -> None:  # type: ignore[no-untyped-def]
    # Extracted line by line (not joined): a serial split at its hyphen would end a line
    # with "QC-2027-014-" and start the next with "S01".
    reader = report[2]
    for page in reader.pages:
        for line in page.extract_text().splitlines():
            assert not re.search(r"QC-2027-014-\s*$", line), line
            assert not re.search(r"^S0\d\b", line.strip()), line
    assert "QC-2027-014- S0" not in text(report)


def test_the_calendar_is_the_one_carried_out_with_each_run_labelled(report) -> None:  # type: ignore[no-untyped-def]
    pages = report[1]
    page = next(p for p in pages if "Calendar as carried out:" in p)
    # Each run started is a labelled bar, from its recorded start (the rig at 11:00 UTC).
    for key in (RUN, KNOB):
        assert key in page
    assert "time from the first start, 2027-01-12 11:00 UTC (d)" in page
    assert "3.75 d" in page  # the rig ran 2027-01-12 11:00 to 2027-01-16 05:05
    assert "Calendar as planned (for comparison; not the dates of test)" in text(report)


def test_the_context_as_data_carries_no_image_payloads(report) -> None:  # type: ignore[no-untyped-def]
    import datetime as dt
    import json

    from testplan.report.context import build
    from testplan.report.pdf import context_json
    from testplan.store.engine import open_store
    from testplan.store.reporting import load_report

    store = open_store(f"sqlite:///{report[0].parent.parent / 'lab.db'}")
    try:
        with store.reading() as session:
            data = load_report(session, "QC-2027-014")
    finally:
        store.dispose()
    ctx = build(data, issue_date=dt.date(2027, 2, 1), paper="A4")
    assert ctx.as_run_svg and ctx.calendar_svg and ctx.runs[1].figures
    plain = json.dumps(context_json(ctx))
    assert "<svg" not in plain and "data:image" not in plain
    assert "where: drop under the lid seal at the cable entry" in plain
