"""Tampering is found: for each kind of record in a signed campaign, a change, a deletion
and an insertion made behind the tool's back (a plain database connection) make `verify`
fail and name the record. On PostgreSQL the database itself refuses changes and deletions
of an approved campaign's records (the tests connect as the bench role `store grant-bench`
set up); `verify` then still passes. Since migration 0018 it also refuses new rows in an
approved campaign; an insertion into a shared register or the role grants goes in and is
named by `verify` as on SQLite. On SQLite the same lock is dropped first, as someone holding the
file can (`Bench.tamper`)."""

from __future__ import annotations

import datetime as dt
import uuid
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import pytest
import sqlalchemy as sa

from testplan.store.samples import digest_arrays
from tests.store.conftest import RUN, Bench

from .conftest import Signed, as_param, clone_row


@dataclass(frozen=True)
class Tamper:
    kind: str
    op: str
    act: Callable[[Bench], None]
    named: str  # the start of the problem `verify` must print
    locked: bool  # PostgreSQL refuses it for an approved campaign


def sql(statement: str, **params: object) -> Callable[[Bench], None]:
    return lambda b: b.tamper(statement, **params)


def extra_block(b: Bench) -> None:
    ((raw_id,),) = b.sql("SELECT raw_file_id FROM sample_block")
    t, c, v = np.array([1_799_999_999_000_000]), np.array([0]), np.array([2100.0])
    b.tamper(
        "INSERT INTO sample_block (raw_file_id, block, first_seq, n, t_us, channel, value, "
        "sha256) VALUES (:r, 1, 4400, 1, :t, :c, :v, :h)",
        r=raw_id,
        t=t.astype("<i8").tobytes(),
        c=c.astype("<i4").tobytes(),
        v=v.astype("<f8").tobytes(),
        h=digest_arrays(t, c, v),
    )


def extra_calibration(b: Bench) -> None:
    new = clone_row(b, "calibration", "channel = 'lowest_point_depth'", certificate="VC-2099-001")
    assert new is not None
    b.tamper("UPDATE logger_channel SET calibration_id = :c", c=as_param(b, new))


def extra_withdrawal(b: Bench) -> None:
    """A withdrawal of the approver's role slipped in just after it was granted, so the
    approval was made without the role."""
    from sqlmodel import SQLModel

    t = SQLModel.metadata.tables["role_grant"]
    engine = sa.create_engine(b.url)
    try:
        with engine.begin() as conn:
            at = conn.execute(sa.select(t.c.at).where(t.c.role == "approver")).scalar_one()
    finally:
        engine.dispose()
    clone_row(b, "role_grant", "role = 'approver'", action="withdraw",
              at=at + dt.timedelta(microseconds=1))  # fmt: skip


RAW = f"raw file tank.csv of {RUN}"
OBS = f"observation ingress on QC-2027-014-S01 in {RUN}"
DEV = f"deviation on {RUN}: tank topped up for 3 min"
CAL = "calibration VC-2026-118 of LT-03 (lowest_point_depth)"
CHUNK = "samples of tank.csv, chunk 1 (rows 1 to 4400)"

CASES = [
    Tamper("sample", "change", sql("UPDATE sample_block SET value = t_us"), CHUNK, True),
    Tamper("sample", "delete", sql("DELETE FROM sample_block"), CHUNK, True),
    Tamper("sample", "insert", extra_block, CHUNK, False),
    Tamper(
        "raw file",
        "change",
        sql("UPDATE raw_file SET content = :c", c=b"time,depth\n"),
        f"{RAW}: changed",
        True,
    ),
    Tamper("raw file", "delete", sql("DELETE FROM raw_file"), f"{RAW}: deleted", True),
    Tamper(
        "raw file",
        "insert",
        lambda b: clone_row(b, "raw_file", "1 = 1", name="extra.csv", sha256="f" * 64),
        f"raw file extra.csv of {RUN}: added",
        True,
    ),
    Tamper(
        "observation",
        "change",
        sql("UPDATE observation SET data_json = replace(data_json, 'false', 'true')"),
        f"{OBS}: changed",
        True,
    ),
    Tamper("observation", "delete", sql("DELETE FROM observation"), f"{OBS}: deleted", True),
    Tamper(
        "observation",
        "insert",
        lambda b: clone_row(b, "observation", "1 = 1"),
        f"{OBS}: added",
        True,
    ),
    Tamper(
        "verdict",
        "change",
        sql("UPDATE verdict SET outcome = 'pass' WHERE outcome <> 'pass'"),
        "verdict water-8.",
        True,
    ),
    Tamper("verdict", "delete", sql("DELETE FROM verdict"), "verdict water-8.", True),
    Tamper(
        "verdict",
        "insert",
        lambda b: clone_row(b, "verdict", "1 = 1"),
        "verdict water-8.",
        True,
    ),
    Tamper(
        "calibration",
        "change",
        sql("UPDATE calibration SET due_on = '2028-06-01'"),
        f"{CAL}: changed",
        True,
    ),
    Tamper(
        "calibration",
        "delete",
        sql("DELETE FROM calibration WHERE channel = 'lowest_point_depth'"),
        f"{CAL}: deleted",
        True,
    ),
    Tamper(
        "calibration",
        "insert",
        extra_calibration,
        "calibration VC-2099-001 of LT-03 (lowest_point_depth): added",
        True,  # re-pointing the channel at it is refused
    ),
    Tamper(
        "person",
        "change",
        sql("UPDATE person SET name = 'Mara Osei' WHERE initials = 'MO'"),
        "person MO: changed",
        True,
    ),
    Tamper(
        "person",
        "delete",
        sql("DELETE FROM person WHERE initials = 'AK'"),
        "person AK: deleted",
        True,  # on PostgreSQL the foreign keys refuse it
    ),
    Tamper(
        "role grant",
        "insert",
        extra_withdrawal,
        "approved signature of MO: MO was not authorised as approver on ",
        False,  # grants are append-only: an insertion goes in on PostgreSQL too
    ),
    Tamper(
        "deviation",
        "change",
        sql("UPDATE deviation SET reason = 'none'"),
        f"{DEV}: changed",
        True,
    ),
    Tamper("deviation", "delete", sql("DELETE FROM deviation"), f"{DEV}: deleted", True),
    Tamper(
        "deviation",
        "insert",
        lambda b: clone_row(b, "deviation", "1 = 1"),
        f"{DEV}: added",
        True,
    ),
]


def verify_problems(signed: Signed) -> list[str]:
    result = signed.bench("verify", str(signed.pdf), ok=False)
    assert "Traceback" not in result.stderr
    if result.exit_code == 0:
        return []
    assert result.exit_code == 3, (result.stdout, result.stderr)
    return [
        ln.removeprefix("problem: ")
        for ln in result.stderr.splitlines()
        if ln.startswith("problem: ")
    ]


def test_the_untouched_copy_verifies(signed: Signed) -> None:
    assert verify_problems(signed) == []
    assert signed.bench("store", "check").stdout.startswith("ok: ")


@pytest.mark.parametrize("case", CASES, ids=[f"{c.kind}-{c.op}".replace(" ", "_") for c in CASES])
def test_tampering_is_refused_or_named(signed: Signed, case: Tamper) -> None:
    b = signed.bench
    if b.url.startswith("postgresql") and case.locked:
        with pytest.raises(sa.exc.DBAPIError):
            case.act(b)
        assert verify_problems(signed) == []
        return
    case.act(b)
    found = verify_problems(signed)
    assert any(p.startswith(case.named) for p in found), found


@pytest.mark.parametrize(
    ("act", "named"),
    [
        (sql("UPDATE sample_block SET value = t_us"), "its values changed since import"),
        (extra_block, "holds 4401 samples, 4400 were imported"),
        (
            sql("UPDATE raw_file SET content = :c", c=b"time,depth\n"),
            "content no longer matches its SHA-256",
        ),
    ],
    ids=["sample-change", "sample-insert", "raw_file-change"],
)
def test_store_check_names_changed_logged_data(
    signed: Signed, act: Callable[[Bench], None], named: str
) -> None:
    """`store check` needs no signature: it re-hashes the logged data against the hashes
    taken at import."""
    b = signed.bench
    if b.url.startswith("postgresql") and act is not extra_block:
        pytest.skip("PostgreSQL refuses the change (see above)")
    act(b)
    result = b("store", "check", ok=False)
    assert result.exit_code == 3
    assert "Traceback" not in result.stderr
    assert named in result.stderr, result.stderr


def test_a_forged_row_id_is_still_found(signed: Signed) -> None:
    """A deleted observation put back under a new id is a different record."""
    b = signed.bench
    if b.url.startswith("postgresql"):
        with pytest.raises(sa.exc.DBAPIError):  # a new row in an approved campaign
            clone_row(b, "observation", "1 = 1")
        assert verify_problems(signed) == []
        return
    new = clone_row(b, "observation", "1 = 1")
    assert isinstance(new, uuid.UUID)
    delete = sql("DELETE FROM observation WHERE id <> :i", i=as_param(b, new))
    delete(b)
    found = verify_problems(signed)
    assert f"{OBS}: deleted" in found and f"{OBS}: added" in found
