"""The audit trail is append-only and hash-chained; `store check` finds what changed behind
the tool's back (audit entries, raw files, samples, photos)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import sqlalchemy as sa

from testplan.store.samples import digest_arrays

from .conftest import START, Bench

DATA = Path(__file__).resolve().parents[1] / "data"
RUN = "water-8@ip-verification-1"


@pytest.fixture
def recorded(bench: Bench) -> Bench:
    bench("record", "start", RUN, *START, "--at", "2027-01-12T16:05Z", "--quiet")
    bench(
        "record",
        "import",
        RUN,
        str(DATA / "loggers" / "tank-long.csv"),
        "--map",
        "level[cm]=lowest_point_depth@LT-03",
        "--map",
        "water[degF]=water_temperature@LT-03",
        "--by",
        "AK",
        "--quiet",
    )
    bench(
        "record",
        "observe",
        RUN,
        "--photo",
        str(DATA / "photos" / "gland-after-immersion.png"),
        "--ingress",
        "water:none",
        "--by",
        "AK",
        "--quiet",
    )
    return bench


def unlock_audit(bench: Bench) -> None:
    """What someone with database access could do: switch the append-only triggers off."""
    if bench.url.startswith("postgresql"):
        bench.raw("ALTER TABLE audit DISABLE TRIGGER audit_append_only")
    else:
        bench.raw("DROP TRIGGER audit_no_update")
        bench.raw("DROP TRIGGER audit_no_delete")


def problems(bench: Bench) -> list[str]:
    result = bench("store", "check", ok=False)
    assert result.exit_code == 3, result.stderr
    assert "Traceback" not in result.stderr
    return [
        ln.removeprefix("problem: ")
        for ln in result.stderr.splitlines()
        if ln.startswith("problem: ")
    ]


def test_an_untouched_store_checks_out(recorded: Bench) -> None:
    entries = recorded.sql("SELECT count(*) FROM audit")[0][0]
    result = recorded("store", "check")
    assert result.stdout.strip() == (
        f"ok: {entries} audit entries chained, 1 raw files and their samples, 1 attachments "
        "match their hashes, 3 audited records as audited"
    )
    actions = [a for (a,) in recorded.sql("SELECT action FROM audit ORDER BY seq")]
    assert actions[:2] == ["campaign.create", "plan.create"]
    assert actions[-4:] == ["run.start", "data.import", "observation.add", "observation.add"]


@pytest.mark.parametrize("statement", ["UPDATE audit SET why = 'x'", "DELETE FROM audit"])
def test_the_database_refuses_to_change_the_audit_trail(recorded: Bench, statement: str) -> None:
    with pytest.raises(sa.exc.DBAPIError, match="append-only"):
        recorded.raw(statement)


def seq_of_anna(bench: Bench) -> int:
    rows = bench.sql("SELECT seq FROM audit WHERE action = 'person.add' AND new_json LIKE '%Anna%'")
    return int(rows[0][0])


def test_a_changed_audit_entry_is_found(recorded: Bench) -> None:
    seq = seq_of_anna(recorded)
    unlock_audit(recorded)
    recorded.raw(
        "UPDATE audit SET new_json = replace(new_json, 'Anna', 'Anne') WHERE seq = :s", s=seq
    )
    assert problems(recorded) == [
        f"audit entry {seq} (person.add person): content changed after it was recorded"
    ]


def test_a_deleted_audit_entry_is_found(recorded: Bench) -> None:
    seq = seq_of_anna(recorded)
    unlock_audit(recorded)
    recorded.raw("DELETE FROM audit WHERE seq = :s", s=seq)
    assert problems(recorded) == [
        f"audit entry {seq + 1} (role.grant role_grant): entries {seq} to {seq} are missing",
        f"audit entry {seq + 1} (role.grant role_grant): does not follow the entry before it "
        "(chain broken)",
    ]


def stored_block(bench: Bench) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    ((t, c, v),) = bench.sql("SELECT t_us, channel, value FROM sample_block")
    return np.frombuffer(t, "<i8"), np.frombuffer(c, "<i4"), np.frombuffer(v, "<f8").copy()


def test_a_changed_sample_is_found(recorded: Bench) -> None:
    _, _, v = stored_block(recorded)
    v[2] = 2060.0
    recorded.raw("UPDATE sample_block SET value = :v", v=v.astype("<f8").tobytes())
    found = problems(recorded)
    assert found[0].startswith("raw file tank-long.csv (")
    assert found[0].endswith(": sample block 1 (from sample 1): its values changed since import")
    assert found[1].endswith(": samples changed since import")


def test_a_changed_sample_with_its_block_hash_recomputed_is_found(recorded: Bench) -> None:
    # Whoever changes a value and re-hashes its block still meets the import's own hash.
    t, c, v = stored_block(recorded)
    v[2] = 2060.0
    recorded.raw(
        "UPDATE sample_block SET value = :v, sha256 = :h",
        v=v.astype("<f8").tobytes(),
        h=digest_arrays(t, c, v),
    )
    assert problems(recorded) == [
        problems(recorded)[0].split(": ")[0] + ": samples changed since import"
    ]


def test_a_deleted_sample_is_found(recorded: Bench) -> None:
    t, c, v = stored_block(recorded)
    recorded.raw(
        "UPDATE sample_block SET t_us = :t, channel = :c, value = :v",
        t=t[:5].tobytes(),
        c=c[:5].tobytes(),
        v=v[:5].tobytes(),
    )
    found = problems(recorded)
    assert found[0].endswith(": sample block 1 (from sample 1): holds 5 samples, not 6")
    assert found[1].endswith(": holds 5 samples, 6 were imported")


def test_a_deleted_sample_block_is_found(recorded: Bench) -> None:
    recorded.raw("DELETE FROM sample_block")
    assert problems(recorded)[0].endswith(": holds 0 samples, 6 were imported")


def test_a_changed_raw_file_is_found(recorded: Bench) -> None:
    recorded.raw("UPDATE raw_file SET content = :c", c=b"time,channel,value\n")
    assert problems(recorded)[0].endswith(": content no longer matches its SHA-256")


def test_a_changed_photo_is_found(recorded: Bench) -> None:
    recorded.raw("UPDATE attachment SET content = :c", c=b"\x89PNG not the photo")
    assert problems(recorded) == [
        "attachment gland-after-immersion.png: content no longer matches its SHA-256"
    ]


def test_samples_rewritten_with_all_their_hashes_are_found(recorded: Bench) -> None:
    """Finding 3: samples rewritten together with their block and import hashes before
    sign-off passed `store check`; the import's audit entry still holds the old hash."""
    t, c, v = stored_block(recorded)
    v[2] = 2060.0
    digest = digest_arrays(t, c, v)
    recorded.raw(
        "UPDATE sample_block SET value = :v, sha256 = :h", v=v.astype("<f8").tobytes(), h=digest
    )
    recorded.raw("UPDATE raw_file SET samples_sha256 = :h", h=digest)
    assert problems(recorded) == [
        f"raw file tank-long.csv of {RUN}: samples_sha256 differs from its audited value"
    ]


def test_a_deleted_import_is_found(recorded: Bench) -> None:
    """Finding 3: a whole import deleted from a campaign not yet signed went unnamed."""
    ((raw_id,),) = recorded.sql("SELECT id FROM raw_file")
    for table in ("sample_block", "logger_channel"):
        recorded.raw(f"DELETE FROM {table} WHERE raw_file_id = :r", r=raw_id)
    recorded.raw("DELETE FROM raw_file")
    only_deleted(recorded, "raw_file", "data.import")


def only_deleted(b: Bench, entity: str, action: str) -> None:
    """`store check` names one record of ``entity`` as deleted without an audit entry."""
    found = problems(b)
    assert len(found) == 1 and found[0].startswith(f"{entity} "), found
    assert found[0].endswith(f", {action}): deleted without an audit entry"), found


def test_a_deleted_photo_or_observation_is_found(recorded: Bench) -> None:
    recorded.raw("UPDATE observation SET attachment_id = NULL")
    recorded.raw("DELETE FROM attachment")
    assert problems(recorded) == [f"observation photo in {RUN}: its photo is gone"]
    recorded.raw("DELETE FROM observation WHERE kind = 'photo'")
    only_deleted(recorded, "observation", "observation.add")


def test_a_changed_observation_is_found(recorded: Bench) -> None:
    recorded.raw("UPDATE observation SET data_json = replace(data_json, 'false', 'true')")
    assert problems(recorded) == [
        f"observation ingress in {RUN}: content differs from its audited state"
    ]
