"""An issued report is a signed act carrying its own proof: dates, the issuer, offline verify
and the tampering it refuses."""

from __future__ import annotations

import copy
import io
import json
from pathlib import Path
from typing import Any

import pytest
from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey
from pypdf import PdfReader, PdfWriter

from testplan import keys
from testplan.store import proof as P
from testplan.store.identity import TRUST_FORMAT, enrol_message
from testplan.store.signoff import message
from testplan.store.tables import PersonKey

from .conftest import PASS, SIGNED_AT, Bench, approve_and_issue, issue, record_and_judge, sign
from .test_signoff import problems


@pytest.fixture
def judged(bench: Bench, monkeypatch: pytest.MonkeyPatch) -> Bench:
    monkeypatch.setenv("TESTPLAN_KEY_PASSPHRASE", PASS)
    return record_and_judge(bench)


@pytest.fixture
def issued(judged: Bench) -> tuple[Bench, Path, Path]:
    """The approved campaign's issued report and the lab's trust file."""
    pdf = approve_and_issue(judged)
    trust = judged.folder / "trust.json"
    judged("keys", "trust", "--out", str(trust))
    return judged, pdf, trust


def offline_problems(b: Bench, pdf: Path, trust: Path) -> list[str]:
    """The problem lines of a `verify --offline` (the store is not read) that must fail."""
    return problems(b, pdf, "--trust", str(trust), "--offline")


def sqlite_only(b: Bench) -> None:
    if not b.url.startswith("sqlite"):
        pytest.skip("the proof is checked without the store; once is enough")


# --- dates and the issuer -----------------------------------------------------------------


def test_a_signature_dated_before_a_data_check_or_out_of_role_order_is_refused(
    judged: Bench,
) -> None:
    line = judged.fail(*sign(judged, "prepared", "RP")[:-2], "--at", "2027-01-16T08:00Z")
    assert "dated 2027-01-16 08:00 UTC would be before the data check of run" in line, line
    assert "(2027-01-16 09:00 UTC)" in line and "--at" in line
    judged(*sign(judged, "prepared", "RP"), "--quiet")  # 2027-01-20 10:00
    line = judged.fail(*sign(judged, "reviewed", "LV")[:-2], "--at", "2027-01-20T09:00Z")
    assert "reviewed signature dated 2027-01-20 09:00 UTC would be before the prepared one " in (
        line
    )
    assert "(2027-01-20 10:00 UTC)" in line
    judged(*sign(judged, "reviewed", "LV"), "--quiet")
    line = judged.fail(*sign(judged, "approved", "MO")[:-2], "--at", "2027-01-20T10:30Z")
    assert "before the reviewed one (2027-01-20 11:00 UTC)" in line, line
    assert judged.sql("SELECT count(*) FROM signature")[0][0] == 2


def test_an_approved_report_is_issued_only_by_an_approver_with_their_key(judged: Bench) -> None:
    for role, who in (("prepared", "RP"), ("reviewed", "LV"), ("approved", "MO")):
        judged(*sign(judged, role, who), "--quiet")
    pdf = judged.folder / "r.pdf"
    base = ("report", "QC-2027-014", "-o", str(pdf), "--issue-date", "2027-02-01")
    line = judged.fail(*base)
    assert "is approved: its report is issued, signed by an approver" in line and "--by" in line
    judged.enrol("AK")
    line = judged.fail(*base, *judged.signed("AK"))
    assert "Anna Kowal (AK) is not authorised as approver" in line, line
    line = judged.fail(*base, "--by", "MO", "--key", judged.key("LV"))
    assert "is the key of Lars Vik (LV), not of Mark Osei (MO)" in line, line
    assert not pdf.exists()
    assert judged.sql("SELECT count(*) FROM report_issue")[0][0] == 0
    issue(judged, pdf)
    row = judged.sql("SELECT issued_by, signature, base_sha256 FROM report_issue")
    assert row[0][0] == "MO" and row[0][1] and len(row[0][2]) == 64
    actor = judged.sql("SELECT actor FROM audit WHERE action = 'report.issue'")[0][0]
    assert actor.startswith("MO key "), actor


def test_printing_the_issued_revision_again_gives_the_same_bytes(
    issued: tuple[Bench, Path, Path],
) -> None:
    b, pdf, _trust = issued
    again = b.folder / "again.pdf"
    issue(b, again)
    assert again.read_bytes() == pdf.read_bytes()
    assert b.sql("SELECT count(*) FROM report_issue")[0][0] == 1
    # another approver's issue of the same revision is other bytes: refused
    line = b.fail(
        "report", "QC-2027-014", "-o", str(b.folder / "other.pdf"), "--issue-date",
        "2027-02-02", *b.signed("MO"),
    )  # fmt: skip
    assert "revision 1 was issued on 2027-02-01" in line, line


# --- verify from the PDF alone ------------------------------------------------------------


def test_the_issued_pdf_verifies_offline_with_the_store_gone(
    issued: tuple[Bench, Path, Path], tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    b, pdf, trust = issued
    sqlite_only(b)
    store = Path(b.url.removeprefix("sqlite:///"))
    store.rename(tmp_path / "moved-away.db")
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)
    monkeypatch.delenv("TESTPLAN_DB", raising=False)
    from testplan.cli import app

    result = b.runner.invoke(app, ["verify", str(pdf), "--trust", str(trust)])
    assert result.exit_code == 0, (result.stdout, result.stderr)
    out = result.stdout.splitlines()
    assert out[0] == "mode: offline, from the proof inside the PDF"
    assert "approved: Mark Osei (MO)" in result.stdout
    assert out[-1] == f"verified: {pdf}"
    # with the store back, both are checked
    (tmp_path / "moved-away.db").rename(store)
    both = b("verify", str(pdf), "--trust", str(trust))
    assert both.stdout.startswith("mode: the proof inside the PDF and the store ")


def _base_and_proof(pdf: Path) -> tuple[bytes, dict[str, Any], dict[str, Any]]:
    base, record = P.split(pdf.read_bytes())
    found = P.read_proof(base)
    assert found is not None and record is not None
    return base, found, record


def _with_proof(base: bytes, proof: dict[str, Any]) -> bytes:
    """``base`` rewritten with another embedded proof (as someone with pypdf would)."""
    writer = PdfWriter(clone_from=io.BytesIO(base))
    names = writer._root_object["/Names"]["/EmbeddedFiles"]["/Names"]
    stream = names[1].get_object()["/EF"]["/F"].get_object()
    stream.set_data(P.proof_bytes(proof))
    out = io.BytesIO()
    writer.write(out)
    return out.getvalue()


def _mo(b: Bench) -> Ed25519PrivateKey:
    return keys.load_private(Path(b.key("MO")), PASS)


def _forge(b: Bench, tmp_path: Path, proof: dict[str, Any], base: bytes, key: Any = None) -> Path:
    """A PDF with ``proof``, re-signed as issued by whoever holds ``key`` (MO's by default:
    the strongest attacker short of the approvers' keys)."""
    new_base = _with_proof(base, proof)
    _record, content = P.sign_issue(key or _mo(b), proof, new_base)
    out = tmp_path / "forged.pdf"
    out.write_bytes(content)
    return out


def test_offline_verify_refuses_a_changed_byte_or_an_appended_update(
    issued: tuple[Bench, Path, Path], tmp_path: Path
) -> None:
    b, pdf, trust = issued
    sqlite_only(b)
    content = bytearray(pdf.read_bytes())
    assert content[9:10] == b"%"  # the header's binary comment line
    content[10] ^= 1
    changed = tmp_path / "changed.pdf"
    changed.write_bytes(bytes(content))
    found = offline_problems(b, changed, trust)
    assert any("the issue record does not match this PDF" in p for p in found), found
    writer = PdfWriter(io.BytesIO(pdf.read_bytes()), incremental=True)
    writer.add_metadata({"/Subject": "all pass"})
    appended = tmp_path / "appended.pdf"
    with appended.open("wb") as fh:
        writer.write(fh)
    assert appended.read_bytes().startswith(pdf.read_bytes())
    found = offline_problems(b, appended, trust)
    assert found == [
        "the PDF was changed or added to after it was issued (its tail is not the issued one)"
    ], found


def test_offline_verify_refuses_edited_results_or_a_dropped_signature(
    issued: tuple[Bench, Path, Path], tmp_path: Path
) -> None:
    b, pdf, trust = issued
    sqlite_only(b)
    base, proof, _record = _base_and_proof(pdf)
    edited = copy.deepcopy(proof)
    verdicts = [v for r in edited["results"]["runs"] for v in r["verdicts"]]
    failed = [v for v in verdicts if v["outcome"] != "pass"] or verdicts
    failed[0]["outcome"] = "pass" if failed[0]["outcome"] != "pass" else "fail"
    found = offline_problems(b, _forge(b, tmp_path, edited, base), trust)
    assert found == [
        "the results in the proof are not the ones approved (their SHA-256 differs from the "
        "approval's)"
    ], found
    dropped = copy.deepcopy(proof)
    dropped["signatures"] = [s for s in dropped["signatures"] if s["role"] != "reviewed"]
    found = offline_problems(b, _forge(b, tmp_path, dropped, base), trust)
    assert found == ["the proof has no reviewed signature"], found


def test_offline_verify_refuses_a_self_enrolled_key_another_labs_trust_or_a_grafted_proof(
    issued: tuple[Bench, Path, Path], tmp_path: Path
) -> None:
    b, pdf, trust = issued
    sqlite_only(b)
    base, proof, _record = _base_and_proof(pdf)
    # An attacker makes a key for MO, enrols it themselves and signs the approval with it.
    attacker = Ed25519PrivateKey.generate()
    public = keys.public_of(attacker)
    fp = keys.fingerprint(public)
    swapped = copy.deepcopy(proof)
    approval = next(s for s in swapped["signatures"] if s["role"] == "approved")
    mo_key = next(
        k for k in swapped["identity"]["keys"] if k["fingerprint"] == approval["fingerprint"]
    )
    row = {**mo_key, "public_key": public, "fingerprint": fp}
    row["proof"] = keys.sign(attacker, keys.proof_message("MO", public))
    row["enrolled_by_key_id"] = row["id"]
    key_obj = P._load(PersonKey, row)
    row["enrolment_signature"] = keys.sign(attacker, enrol_message(key_obj, "MO", "MO", fp))
    swapped["identity"]["keys"] = [
        row if k["id"] == mo_key["id"] else k for k in swapped["identity"]["keys"]
    ]
    import datetime as dt

    at = dt.datetime.fromisoformat(approval["signed_at"])
    msg = message(swapped["manifest"]["root"], "approved", "QC-2027-014", "MO", at,
                  approval["context"])  # fmt: skip
    approval["signature"], approval["fingerprint"] = keys.sign(attacker, msg), fp
    swapped["issuer"]["fingerprint"] = fp
    found = offline_problems(b, _forge(b, tmp_path, swapped, base, attacker), trust)
    assert found and all("self-enrolled, not in the anchor" in p for p in found), found
    # Another lab's trust file: nothing chains to it.
    other = Ed25519PrivateKey.generate()
    theirs = tmp_path / "other-lab.json"
    pub = keys.public_of(other)
    theirs.write_text(json.dumps({"testplan_trust": TRUST_FORMAT, "managers": [
        {"person": "ZZ", "name": "Z", "fingerprint": keys.fingerprint(pub), "public_key": pub}
    ]}))  # fmt: skip
    found = offline_problems(b, pdf, theirs)
    roles = {p.split(" ")[0] for p in found}
    assert roles == {"prepared", "reviewed", "approved", "issue"}, found
    # A proof of another revision on this PDF, its tail kept as issued.
    grafted = copy.deepcopy(proof)
    grafted["report"]["revision"] = 2
    new_base = _with_proof(base, grafted)
    _rec, content = P.sign_issue(_mo(b), proof, new_base)  # the record as issued for rev 1
    out = tmp_path / "grafted.pdf"
    out.write_bytes(content)
    found = offline_problems(b, out, trust)
    assert any("the issue record does not match this PDF and its proof" in p for p in found), found


def test_a_damaged_or_foreign_pdf_is_one_line(
    issued: tuple[Bench, Path, Path], tmp_path: Path
) -> None:
    b, pdf, trust = issued
    sqlite_only(b)
    cut = tmp_path / "cut.pdf"
    cut.write_bytes(pdf.read_bytes()[:2000])
    draft = tmp_path / "plain.pdf"
    writer = PdfWriter()
    writer.add_blank_page(100, 100)
    writer.write(str(draft))
    for bad in (cut, draft):
        line = b.fail("verify", str(bad), "--trust", str(trust), "--offline")
        assert line.startswith(f"error: {bad}: not an issued testplan report ("), line
    assert b.fail("verify", str(pdf), "--offline") == (
        "error: --trust: checking the PDF without a store needs the lab's trust file (give "
        "--trust FILE from `testplan keys trust`, or --db STORE)"
    )
    assert PdfReader(pdf).attachments.keys() == {P.PROOF_NAME}
    assert SIGNED_AT["approved"] < "2027-02-01"


def test_a_changed_pdf_with_its_recorded_hash_rewritten_is_refused_or_named(
    issued: tuple[Bench, Path, Path], tmp_path: Path
) -> None:
    """Someone holding the database edits the PDF's results and puts the new file's SHA-256
    in the issue record, keeping the issuer's signed tail."""
    import hashlib

    import sqlalchemy as sa

    b, pdf, _trust = issued
    base, proof, record = _base_and_proof(pdf)
    edited = copy.deepcopy(proof)
    edited["results"]["runs"][0]["outcome"] = "pass-edited"
    new_base = _with_proof(base, edited)
    forged = tmp_path / "forged.pdf"
    forged.write_bytes(new_base + P.tail(new_base, record))
    sha = hashlib.sha256(forged.read_bytes()).hexdigest()
    try:
        b.tamper("UPDATE report_issue SET pdf_sha256 = :s", s=sha)
    except sa.exc.DBAPIError as err:  # PostgreSQL: issue records are append-only
        assert b.url.startswith("postgresql"), err
        assert "report_issue" in str(err.orig), err
        return
    found = problems(b, forged)
    assert (
        "the PDF was changed or added to after it was issued (its signed tail does not fit)"
        in found
    ), found
