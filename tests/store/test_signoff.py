"""Sign-off, the lock, amendments and `testplan verify`: what is signed cannot change unseen."""

from __future__ import annotations

from pathlib import Path

import pytest
import sqlalchemy as sa
from pypdf import PdfReader

from testplan.keys import fingerprint, new_private_pem

from .conftest import (
    PASS,
    PG_URL,
    RUN,
    Bench,
    approve_and_issue,
    fresh_postgres_database,
    record_and_judge,
    sign,
)


@pytest.fixture
def judged(bench: Bench, monkeypatch: pytest.MonkeyPatch) -> Bench:
    """One run recorded, checked and judged; RP, LV, MO hold registered keys."""
    monkeypatch.setenv("TESTPLAN_KEY_PASSPHRASE", PASS)
    return record_and_judge(bench)


def problems(b: Bench, pdf: Path | str, *options: str) -> list[str]:
    """The problem lines of a `verify` that must fail (exit 3)."""
    result = b("verify", str(pdf), *options, ok=False)
    assert result.exit_code == 3, (result.stdout, result.stderr)
    assert "Traceback" not in result.stderr
    return [
        ln.removeprefix("problem: ")
        for ln in result.stderr.splitlines()
        if ln.startswith("problem: ")
    ]


def test_a_signed_report_verifies(judged: Bench) -> None:
    pdf = approve_and_issue(judged)
    result = judged("verify", str(pdf))
    assert result.stdout.splitlines()[-1] == f"verified: {pdf}"
    assert "approved: Mark Osei (MO)" in result.stdout
    assert "DRAFT" not in " ".join(PdfReader(pdf).pages[0].extract_text().split())


def test_unauthorised_or_repeated_signers_are_refused(judged: Bench) -> None:
    assert "Anna Kowal (AK) is not authorised as preparer" in judged.fail(
        *sign(judged, "prepared", "AK", key="RP")
    )
    assert "cannot sign as approved before the campaign is prepared and reviewed" in judged.fail(
        *sign(judged, "approved", "MO")
    )
    judged(*sign(judged, "prepared", "LV"), "--quiet")
    # LV is a reviewer too, but prepared, reviewed and approved need three people.
    assert "already signed this campaign in another role" in judged.fail(
        *sign(judged, "reviewed", "LV")
    )


def test_a_key_not_registered_for_the_signer_is_refused(judged: Bench) -> None:
    line = judged.fail(*sign(judged, "prepared", "RP", key="LV"))
    assert line.startswith("error: --key: key ")
    assert line.endswith(
        "is the key of Lars Vik (LV), not of Rita Pereira (RP) (use RP's own key file)"
    )


def test_approval_locks_the_campaign(judged: Bench) -> None:
    approve_and_issue(judged)
    line = judged.fail("record", "observe", RUN, "--note", "late note", "--by", "AK")
    assert line == (
        "error: QC-2027-014 is approved and locked; its records cannot change (record the "
        "reason with `testplan amend QC-2027-014 --why ...`, then sign again)"
    )


@pytest.mark.parametrize(
    ("statement", "named"),
    [
        (
            # every value overwritten by the bytes of its time stamp
            "UPDATE sample_block SET value = t_us",
            "samples of tank.csv, chunk 1 (rows 1 to 4400): changed",
        ),
        (
            "UPDATE observation SET data_json = replace(data_json, 'false', 'true')",
            "observation ingress on QC-2027-014-S01 in water-8@ip-verification-1: changed",
        ),
        ("UPDATE verdict SET outcome = 'pass' WHERE outcome <> 'pass'", "verdict water-8."),
        (
            "UPDATE calibration SET due_on = '2028-06-01'",
            "calibration VC-2026-118 of LT-03 (lowest_point_depth): changed",
        ),
    ],
)
def test_a_direct_edit_is_refused_by_postgresql_or_named_by_verify(
    judged: Bench, statement: str, named: str
) -> None:
    """Through a second connection, behind the tool's back."""
    pdf = approve_and_issue(judged)
    if judged.url.startswith("postgresql"):
        with pytest.raises(
            sa.exc.DBAPIError, match="belongs to an approved campaign and is locked"
        ):
            judged.raw(statement)
        assert "verified" in judged("verify", str(pdf)).stdout
        return
    judged.tamper(statement)
    found = problems(judged, pdf)
    assert any(p.startswith(named) for p in found), found


def test_signatures_made_before_the_sample_block_upgrade_still_verify(judged: Bench) -> None:
    """Samples stored a row each (schema 0008) move into blocks (0009): manifests hash the
    same values in the same order, so the samples of an issued report still verify
    afterwards. (Going down below 0010 discards the signatures of the data check and of the
    deviation's approval, so the run and the deviation are named as changed.)"""
    from alembic import command

    from testplan.store.engine import _alembic_config, make_engine

    pdf = approve_and_issue(judged)
    before = judged.sample_count()
    # 0014's signature contexts do not survive a downgrade below it; put them back after.
    contexts = judged.sql("SELECT id, context_json FROM signature")
    engine = make_engine(judged.url)
    try:
        with engine.begin() as conn:
            command.downgrade(_alembic_config(conn), "0008")
    finally:
        engine.dispose()
    assert judged.sql("SELECT count(*) FROM sample") == [(before,)]
    assert "upgraded the store from schema 0008" in judged("store", "upgrade").stdout
    put_back = "UPDATE signature SET context_json = :c WHERE id = :i"
    if judged.url.startswith("sqlite"):
        for sid, context in contexts:
            judged.tamper(put_back, c=context, i=sid)
    else:
        engine = make_engine(judged.url)
        try:
            with engine.begin() as conn:
                conn.exec_driver_sql("SET LOCAL session_replication_role = replica")
                for sid, context in contexts:
                    conn.execute(sa.text(put_back), {"c": context, "i": sid})
        finally:
            engine.dispose()
    # Going down to 0008 also undid 0010, 0012 and 0014 (whose signature contexts are put
    # back above): the deviation loses its approval's signature and the criterion it
    # covered, so it is named as changed with the run.
    assert judged.sample_count() == before
    assert problems(judged, pdf) == [
        f"deviation on {RUN}: specimen temperature not logged: changed",
        f"run {RUN}: changed",
    ]
    assert judged("store", "check").stdout.startswith("ok: ")


def test_a_changed_pdf_byte_fails(judged: Bench) -> None:
    pdf = approve_and_issue(judged)
    data = bytearray(pdf.read_bytes())
    data[len(data) // 2] ^= 0x01  # one bit in the middle of the page content
    bad = judged.folder / "changed.pdf"
    bad.write_bytes(bytes(data))
    assert problems(judged, bad)[0].startswith("this PDF is not an issued report of this store")


def test_a_signature_by_an_unregistered_key_fails(judged: Bench) -> None:
    pdf = approve_and_issue(judged)
    _, other = new_private_pem(PASS)
    if judged.url.startswith("postgresql"):
        with pytest.raises(sa.exc.DBAPIError, match="person_key records are append-only"):
            judged.raw("UPDATE person_key SET public_key = :k", k=other)
        return
    judged.tamper(
        "UPDATE person_key SET public_key = :k, fingerprint = :f WHERE person_id = "
        "(SELECT id FROM person WHERE initials = 'MO')",
        k=other,
        f=fingerprint(other),
    )
    assert any(
        p.startswith("approved signature of MO: does not verify with MO's key")
        for p in problems(judged, pdf)
    )


def test_an_amendment_verifies_as_a_new_revision(judged: Bench) -> None:
    first = approve_and_issue(judged)
    judged("amend", "QC-2027-014", "--why", "function check of S01 added", "--by", "MO", "--quiet")
    judged(
        "record",
        "observe",
        RUN,
        "--specimen",
        "QC-2027-014-S01",
        "--function",
        "pass",
        "--by",
        "AK",
        "--quiet",
    )
    judged("judge", "--quiet", ok=False)
    second = approve_and_issue(judged, "report-2.pdf")
    result = judged("verify", str(second))
    assert "verified" in result.stdout
    text = " ".join(PdfReader(second).pages[0].extract_text().split())
    assert "TR-QC-2027-014, revision 2" in text
    assert "Replaces TR-QC-2027-014 revision 1 (amended" in text
    old = judged("verify", str(first))
    assert "superseded: amended" in old.stdout


@pytest.mark.postgres
def test_the_same_manifest_root_from_sqlite_and_postgresql(judged: Bench, tmp_path: Path) -> None:
    if not PG_URL or not judged.url.startswith("sqlite"):
        pytest.skip("needs the SQLite store and a PostgreSQL server")
    pdf = approve_and_issue(judged)
    url, admin, name = fresh_postgres_database()
    try:
        judged.plain("store", "copy", "--from", judged.url, "--to", url, "--quiet")
        pg = Bench(url, tmp_path)
        roots = {b.sql("SELECT root FROM manifest")[0][0] for b in (judged, pg)}
        assert len(roots) == 1
        assert "verified" in pg("verify", str(pdf)).stdout
    finally:
        with admin.connect() as conn:
            conn.exec_driver_sql(f'DROP DATABASE "{name}" WITH (FORCE)')
        admin.dispose()
