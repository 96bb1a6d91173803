"""`testplan record import`: long and wide logger files into a run, all or nothing."""

from __future__ import annotations

import datetime as dt
import hashlib
import json
from pathlib import Path

import pytest

from tests.importers.cases import CASES

from .conftest import START, Bench

DATA = Path(__file__).resolve().parents[1] / "data" / "loggers"
RUN = "water-8@ip-verification-1"
LEVEL = "level[cm]=lowest_point_depth@LT-03"
WATER = "water[degF]=water_temperature@LT-03"


@pytest.fixture
def running(bench: Bench) -> Bench:
    bench("record", "start", RUN, *START, "--at", "2027-01-12T16:05Z", "--quiet")
    return bench


def samples(bench: Bench) -> list[tuple[str, str, float]]:
    return [(q, t, round(v, 6)) for q, t, v in bench.samples()]


# 2027-01-12T16:05:00Z in microseconds since the epoch.
T0 = 1_799_769_900_000_000


def test_long_file_with_offsets_is_converted_to_plan_units_and_utc(running: Bench) -> None:
    result = running(
        "record",
        "import",
        RUN,
        str(DATA / "tank-long.csv"),
        "--map",
        LEVEL,
        "--map",
        WATER,
        "--by",
        "AK",
    )
    assert result.stdout.strip().startswith(
        f"{RUN}: imported 6 samples from tank-long.csv "
        "(2027-01-12 16:05:00Z to 2027-01-12 16:05:02Z)"
    )
    # cm -> mm is x10; degF -> degC is (F - 32) x 5/9: 53.6 degF = 12.0 degC.
    assert samples(running) == [
        ("lowest_point_depth", T0, 2054.0),
        ("water_temperature", T0, 12.0),
        ("lowest_point_depth", T0 + 1_000_000, 2054.2),
        ("water_temperature", T0 + 1_000_000, 12.0),
        ("lowest_point_depth", T0 + 2_000_000, 2053.8),
        ("water_temperature", T0 + 2_000_000, 12.111111),
    ]


def test_the_original_file_is_kept_byte_for_byte_with_its_reading(running: Bench) -> None:
    path = DATA / "tank-long.csv"
    running(
        "record", "import", RUN, str(path), "--map", LEVEL, "--map", WATER, "--by", "AK", "--quiet"
    )
    content, sha, tool, options = running.sql(
        "SELECT content, sha256, tool_version, read_options_json FROM raw_file"
    )[0]
    assert bytes(content) == path.read_bytes()
    assert sha == hashlib.sha256(path.read_bytes()).hexdigest()
    assert tool == "0.1.0"
    assert LEVEL in options and '"layout":"long"' in options
    channels = running.sql(
        "SELECT number, source, source_unit, quantity, unit FROM logger_channel ORDER BY number"
    )
    assert channels == [
        (0, "level", "cm", "lowest_point_depth", "mm"),
        (1, "water", "degF", "water_temperature", "degC"),
    ]
    assert running.sql("SELECT action, actor FROM audit ORDER BY seq DESC LIMIT 1") == [
        ("data.import", "AK")
    ]


def test_wide_file_with_zone_bom_decimal_comma_and_gaps(running: Bench) -> None:
    running(
        "record",
        "import",
        RUN,
        str(DATA / "tank-wide-de.csv"),
        "--time-column",
        "Zeit",
        "--delimiter",
        ";",
        "--decimal",
        ",",
        "--tz",
        "Europe/Berlin",
        "--skip-unmapped",
        "--map",
        "Pegel[cm]=lowest_point_depth@LT-03",
        "--map",
        "Wasser[degC]=water_temperature@LT-03",
        "--by",
        "AK",
        "--quiet",
    )
    # Berlin is UTC+1 in January; the empty cell at 17:05:10 is no reading.
    assert samples(running) == [
        ("lowest_point_depth", T0, 2054.0),
        ("water_temperature", T0, 12.0),
        ("lowest_point_depth", T0 + 10_000_000, 2054.1),
        ("lowest_point_depth", T0 + 20_000_000, 2053.9),
        ("water_temperature", T0 + 20_000_000, 12.1),
    ]


def test_a_bad_line_mid_file_is_named_and_nothing_is_kept(running: Bench) -> None:
    audit_before = running.sql("SELECT count(*) FROM audit")
    line = running.fail(
        "record",
        "import",
        RUN,
        str(DATA / "tank-bad-line.csv"),
        "--map",
        "level[mm]=lowest_point_depth@LT-03",
        "--map",
        "water[degC]=water_temperature@LT-03",
        "--by",
        "AK",
    )
    assert (
        line == f"error: {DATA / 'tank-bad-line.csv'}:5003: value: '20S.4' is not a finite number "
        "(if it marks a missing reading, pass --missing TEXT)"
    )
    assert running.sql("SELECT count(*) FROM raw_file") == [(0,)]
    assert running.sample_count() == 0
    assert running.sql("SELECT count(*) FROM audit") == audit_before


def test_a_failure_while_writing_samples_leaves_nothing(running: Bench) -> None:
    # The sample-block table is swapped for one that refuses every block, so the store
    # fails after the raw file and its channels went in, in the same transaction; all of
    # it must be rolled back.
    uuid_type = "UUID" if running.url.startswith("postgresql") else "CHAR(32)"
    blob = "BYTEA" if running.url.startswith("postgresql") else "BLOB"
    running.raw("ALTER TABLE sample_block RENAME TO sample_away")
    running.raw(
        f"CREATE TABLE sample_block (raw_file_id {uuid_type}, block INTEGER, "
        f"first_seq BIGINT, n INTEGER, t_us {blob}, channel {blob}, value {blob}, "
        "sha256 VARCHAR(64), CHECK (n < 0))"
    )
    line = running.fail(
        "record",
        "import",
        RUN,
        str(DATA / "tank-long.csv"),
        "--map",
        LEVEL,
        "--map",
        WATER,
        "--by",
        "AK",
    )
    assert "refused the change" in line
    running.raw("DROP TABLE sample_block")
    running.raw("ALTER TABLE sample_away RENAME TO sample_block")
    assert running.sql("SELECT count(*) FROM raw_file") == [(0,)]
    assert running.sql("SELECT count(*) FROM logger_channel") == [(0,)]


def write(bench: Bench, text: str, name: str = "log.csv") -> str:
    return str(bench.write(name, text))


@pytest.mark.parametrize(
    ("text", "args", "expected"),
    [
        (
            "time,level\n2027-01-12 16:05:00,205.4\n",
            [],
            "log.csv:2: time: time stamp '2027-01-12 16:05:00' has no time zone (give the "
            "logger's zone with --tz, e.g. --tz Europe/London or --tz +01:00)",
        ),
        (
            "time,level\n2027-01-12T16:05:00Z,205.4\n2027-01-12 16:05:01,205.5\n",
            [],
            "log.csv:3: time: some time stamps carry a time zone and others do not",
        ),
        (
            "time,level\n2027-01-12T16:05:00Z,205.4\n2027-01-12T16:04:59Z,205.5\n",
            [],
            "log.csv:3: time: time stamp goes back from the one on line 2",
        ),
        (
            "time,level\n2027-01-12T16:05:00Z,205.4\n2027-01-12T16:05:00Z,205.5\n",
            [],
            "log.csv:3: time: time stamp repeats the one on line 2",
        ),
        (
            "time,level\n2027-01-12T16:05:00Z,205.4\n2027-01-12T16:05:01Z,n/v\n",
            [],
            "log.csv:3: level: 'n/v' is not a finite number (if it marks a missing reading, "
            "pass --missing TEXT)",
        ),
        (
            "time,level\n2027-01-12T16:05:00Z,inf\n",
            [],
            "log.csv:2: level: 'inf' is not a finite number",
        ),
        (
            "time,level\n2027-01-12T16:05:00Z,205.4\nyesterday,205.5\n",
            [],
            "log.csv:3: time: cannot read 'yesterday' as a time stamp (give its format with "
            "--time-format)",
        ),
        (
            "time,depth\n2027-01-12T16:05:00Z,205.4\n",
            [],
            "log.csv:1: --map: no column 'level' (columns are: time, depth)",
        ),
        (
            "stamp,level\n2027-01-12T16:05:00Z,205.4\n",
            ["--time-column", "when"],
            "log.csv:1: no 'when' column (columns are: stamp, level) (name it with --time-column)",
        ),
        (
            "time,channel,value\n2027-01-12T16:05:00Z,level,205.4\n2027-01-12T16:05:00Z,bat,3.6\n",
            [],
            "log.csv:3: channel: channel 'bat' is not in the channel map",
        ),
        (
            "time,channel,value\n2027-01-12T16:05:00Z,level,205.4\n2027-01-12T16:05:00Z,level,205.5\n",
            [],
            "log.csv:3: time: time stamp repeats the one on line 2 for channel 'level'",
        ),
        (
            "time,level\n2027-03-28 01:30:00,205.4\n",
            ["--tz", "Europe/London"],
            "does not exist or is ambiguous in Europe/London (clock change)",
        ),
        (
            "time,level\n2027-01-12T16:05:00Z,205.4,9\n",
            [],
            "log.csv: line 2: expected 2 fields, found 3",
        ),
        ("", [], "log.csv: the file is empty"),
        ("time,level\n", [], "log.csv:2: no data lines"),
        (
            "time,level\n2027-01-12T16:05:00Z,205.4\n",
            ["--tz", "Europe/Londres"],
            "--tz: unknown time zone 'Europe/Londres'",
        ),
    ],
)
def test_bad_files_are_refused_in_one_line(
    running: Bench, text: str, args: list[str], expected: str
) -> None:
    path = write(running, text)
    line = running.fail("record", "import", RUN, path, "--map", LEVEL, *args, "--by", "AK")
    assert expected in line
    assert running.sample_count() == 0


def test_wrong_encoding_is_named_with_its_line(running: Bench) -> None:
    path = running.folder / "latin.csv"
    path.write_bytes(b"time,level\n2027-01-12T16:05:00Z,205.4\n2027-01-12T16:05:01Z,205.5\xb0\n")
    line = running.fail(
        "record", "import", RUN, str(path), "--map", LEVEL, "--by", "AK", "--encoding", "utf-8"
    )
    assert line == (
        f"error: {path}:3: byte 0xb0 is not valid utf-8 (give the file's encoding with "
        "--encoding, e.g. cp1252)"
    )


@pytest.mark.parametrize(
    ("mapping", "expected"),
    [
        ("level[cm]=depth@LT-03", "error: --map: unknown quantity 'depth' in"),
        ("level[s]=lowest_point_depth@LT-03", "'s' is not a length unit"),
        ("level=lowest_point_depth@LT-03", "no unit for 'level' in the map or the header"),
        ("level[cm]=lowest_point_depth@PT-09", "no equipment 'PT-09' in the register"),
        ("level[cm]=torque@LT-03", "'cm' is not a torque unit"),
        ("level cm lowest", "error: --map: cannot read the channel map 'level cm lowest'"),
    ],
)
def test_bad_channel_maps_are_refused(running: Bench, mapping: str, expected: str) -> None:
    path = write(running, "time,level\n2027-01-12T16:05:00Z,205.4\n")
    assert expected in running.fail("record", "import", RUN, path, "--map", mapping, "--by", "AK")


def test_an_instrument_not_recorded_on_the_run_is_refused(running: Bench) -> None:
    running("equipment", "add", "PT-04", "--description", "spare transmitter", "--quiet")
    path = write(running, "time,level\n2027-01-12T16:05:00Z,205.4\n")
    line = running.fail(
        "record", "import", RUN, path, "--map", "level[cm]=lowest_point_depth@PT-04", "--by", "AK"
    )
    assert line == (
        "error: --map: PT-04 was not recorded on run water-8@ip-verification-1 with a "
        "lowest_point_depth calibration (name the equipment when starting the run, or map "
        "another instrument)"
    )


def test_missing_file_unknown_run_and_unstarted_run(running: Bench) -> None:
    missing = running.folder / "gone.csv"
    assert running.fail("record", "import", RUN, str(missing), "--map", LEVEL, "--by", "AK") == (
        f"error: {missing}: no such file"
    )
    path = write(running, "time,level\n2027-01-12T16:05:00Z,205.4\n")
    assert "no run 'water-9@x-1' in the store" in running.fail(
        "record", "import", "water-9@x-1", path, "--map", LEVEL, "--by", "AK"
    )
    assert "cannot import data into run water-6@aged-1: it has not been started" in running.fail(
        "record", "import", "water-6@aged-1", path, "--map", LEVEL, "--by", "AK"
    )


def test_channels_can_name_the_specimen_they_measure(bench: Bench) -> None:
    bench(
        "equipment", "add", "TT-07", "--description", "two-channel surface thermometer", "--quiet"
    )
    bench(
        "equipment",
        "calibrate",
        "TT-07",
        "--channel",
        "specimen_temperature",
        "--certificate",
        "VC-2026-201",
        "--provider",
        "Gellimoor Calibration Ltd",
        "--calibrated",
        "2026-09-01",
        "--due",
        "2027-09-01",
        "--uncertainty",
        "0.5 K",
        "--quiet",
    )
    start = [*START, "--equipment", "TT-07"]
    bench("record", "start", RUN, *start, "--at", "2027-01-12T16:05Z", "--quiet")
    path = write(bench, "time,s1,s2\n2027-01-12T16:05:00Z,15.5,15.9\n")
    maps = [
        "--map",
        "s1[degC]=specimen_temperature@TT-07#QC-2027-014-S01",
        "--map",
        "s2[degC]=specimen_temperature@TT-07#QC-2027-014-S02",
    ]
    bench("record", "import", RUN, path, *maps, "--by", "AK", "--quiet")
    rows = bench.sql(
        "SELECT c.source, s.serial FROM logger_channel c JOIN specimen s "
        "ON s.id = c.specimen_id ORDER BY c.number"
    )
    assert rows == [("s1", "QC-2027-014-S01"), ("s2", "QC-2027-014-S02")]
    bad = ["--map", "s1[degC]=specimen_temperature@TT-07#QC-2027-014-S05", "--skip-unmapped"]
    line = bench.fail("record", "import", RUN, path, *bad, "--by", "AK")
    assert line == (
        "error: --map: specimen 'QC-2027-014-S05' is not on run water-8@ip-verification-1 "
        "(it has QC-2027-014-S01, QC-2027-014-S02)"
    )


def _us(instant: str) -> int:
    import datetime as dt

    return int(dt.datetime.fromisoformat(instant.replace("Z", "+00:00")).timestamp() * 1e6)


@pytest.mark.parametrize(("name", "options", "quantity", "expected", "facts"), CASES)
def test_each_dialect_is_imported_as_previewed(
    running: Bench,
    name: str,
    options: list[str],
    quantity: str,
    expected: list[tuple[str, float]],
    facts: dict[str, object],
) -> None:
    path = DATA / name
    running("record", "import", RUN, str(path), *options, "--by", "AK")
    got = [(t, v) for q, t, v in running.samples() if q == quantity]
    assert [t for t, _ in got] == [_us(t) for t, _ in expected]
    # common practice (no source): the conversions are worked by hand in tests/importers/cases.py
    assert [v for _, v in got] == pytest.approx([v for _, v in expected])
    [(content, options_json)] = running.sql("SELECT content, read_options_json FROM raw_file")
    assert bytes(content) == path.read_bytes()  # as received, never a converted copy
    kept = json.loads(options_json)
    for key, value in facts.items():
        assert kept["dialect"][key] == value, key


def test_the_same_file_twice_is_refused_naming_the_earlier_import(running: Bench) -> None:
    path = DATA / "trailing.csv"
    args = ("record", "import", RUN, str(path), "--map", "2=ambient_temperature", "--by", "AK")
    running(*args)
    [(raw_id, at)] = running.sql("SELECT id, imported_at FROM raw_file")
    audit_before = running.sql("SELECT count(*) FROM audit")
    line = running.fail(*args)
    sha = hashlib.sha256(path.read_bytes()).hexdigest()
    import datetime as dt
    import uuid

    when = at if isinstance(at, dt.datetime) else dt.datetime.fromisoformat(str(at))
    assert line == (
        f"error: FILE: trailing.csv (sha256 {sha[:16]}) is already imported into run {RUN}: "
        f"import {uuid.UUID(str(raw_id))} of {when:%Y-%m-%d %H:%M:%S}Z (trailing.csv) (the same "
        "bytes are stored once per run)"
    )
    assert running.sql("SELECT count(*) FROM raw_file") == [(1,)]
    assert running.sql("SELECT count(*) FROM audit") == audit_before


def test_a_withdrawn_import_stays_stored_and_audited_but_is_not_judged(running: Bench) -> None:
    import sqlalchemy as sa
    from sqlmodel import Session, select

    from testplan.store.judging import _series
    from testplan.store.tables import RunRecord

    path = DATA / "tank-long.csv"
    out = running("record", "import", RUN, str(path), "--map", LEVEL, "--map", WATER, "--by", "AK")
    import_id = out.stdout.strip().rsplit("import ", 1)[1]
    assert running.fail("record", "withdraw", RUN, "nope", "--why", "x", "--by", "AK") == (
        f"error: IMPORT: no import 'nope' on run {RUN} (give the import id that `record import` "
        "printed)"
    )
    running("record", "withdraw", RUN, import_id, "--why", "wrong tank logger", "--by", "AK")
    [(name, by, why, at)] = running.sql(
        "SELECT name, withdrawn_by, withdrawn_why, withdrawn_at FROM raw_file"
    )
    assert (name, by, why) == ("tank-long.csv", "AK", "wrong tank logger") and at is not None
    assert running.sql("SELECT count(*) FROM sample_block") == [(1,)]  # samples kept
    assert running.sql("SELECT why FROM audit WHERE action = 'data.withdraw'") == [
        ("wrong tank logger",)
    ]
    line = running.fail("record", "withdraw", RUN, import_id, "--why", "again", "--by", "AK")
    assert line == f"error: IMPORT: import {import_id} was already withdrawn by AK"
    engine = sa.create_engine(running.url)
    with Session(engine) as session:
        run = session.exec(select(RunRecord).where(RunRecord.key == RUN)).one()
        assert _series(session, run) == []  # judging sees no samples from it
    engine.dispose()
    # withdrawn, it no longer blocks the same file from being imported again correctly
    running("record", "import", RUN, str(path), "--map", LEVEL, "--map", WATER, "--by", "AK")


def test_an_import_cannot_be_withdrawn_after_the_data_check(running: Bench) -> None:
    path = DATA / "tank-long.csv"
    out = running("record", "import", RUN, str(path), "--map", LEVEL, "--map", WATER, "--by", "AK")
    import_id = out.stdout.strip().rsplit("import ", 1)[1]
    running("record", "finish", RUN, "--by", "AK", "--at", "2027-01-15T17:30Z", "--quiet")
    # Six readings leave conditions failed: signed deviations accept them before the check.
    running("record", "observe", RUN, "--note", "short trial log", "--by", "AK", "--quiet")
    for criterion in ("water-8.duration", "water-8.temperature"):
        running(
            *("record", "deviation", RUN, "--description", "short log", "--reason", "trial"),
            *("--approved-by", "MO", "--key", running.key("MO"), "--by", "AK"),
            *("--covers", criterion, "--quiet"),
        )
    running("record", "check", RUN, *running.signed("MO"), "--at", "2027-01-16T09:00Z", "--quiet")
    line = running.fail("record", "withdraw", RUN, import_id, "--why", "late", "--by", "AK")
    assert line == (
        f"error: IMPORT: run {RUN} has had its data check; its imports can no longer be "
        "withdrawn (record a deviation instead)"
    )
    assert running.sql("SELECT count(*) FROM raw_file WHERE withdrawn_at IS NULL") == [(1,)]


def test_readings_outside_the_run_are_refused_unless_kept_or_dropped(running: Bench) -> None:
    # the run started at 2027-01-12T16:05Z; two readings lie before it
    path = running.folder / "early.csv"
    path.write_text(
        "time,level\n2027-01-12T16:04:58Z,205.0\n2027-01-12T16:04:59Z,205.1\n"
        "2027-01-12T16:05:00Z,205.2\n2027-01-12T16:05:01Z,205.3\n"
    )
    args = ("record", "import", RUN, str(path), "--map", LEVEL, "--by", "AK")
    assert running.fail(*args) == (
        f"error: --outside-run: early.csv: 2 readings lie outside run {RUN} (2027-01-12 "
        "16:05:00Z), the first at 2027-01-12 16:04:58Z (say --outside-run keep or "
        "--outside-run drop)"
    )
    assert running.sql("SELECT count(*) FROM raw_file") == [(0,)]
    running(*args, "--outside-run", "drop")
    assert [t for _, t, _ in running.samples()] == [T0, T0 + 1_000_000]
    [(content, options_json)] = running.sql("SELECT content, read_options_json FROM raw_file")
    assert bytes(content) == path.read_bytes()
    assert json.loads(options_json)["outside_run"] == {"how": "drop", "count": 2}


def _stamp(i: int) -> str:
    return f"{dt.datetime.fromtimestamp(T0 / 1e6 + i, dt.UTC):%Y-%m-%dT%H:%M:%SZ}"


def _long_run(rows: int) -> list[str]:
    # one reading a second from the run's start, in cm: 200.0 + (i mod 50) / 10
    return [f"{_stamp(i)},{200 + (i % 50) / 10:.1f}" for i in range(rows)]


def test_a_file_read_in_many_chunks_is_stored_in_the_one_block_layout(
    running: Bench, monkeypatch: pytest.MonkeyPatch
) -> None:
    import numpy as np

    from testplan.importers import logger_csv

    rows = 70_000  # two blocks of 65,536 samples, read 997 rows at a time
    path = running.write("many.csv", "time,level\n" + "\n".join(_long_run(rows)) + "\n")
    monkeypatch.setattr(logger_csv, "CHUNK_ROWS", 997)
    running("record", "import", RUN, str(path), "--map", LEVEL, "--by", "AK", "--quiet")
    t = T0 + np.arange(rows, dtype="<i8") * 1_000_000
    c = np.zeros(rows, dtype="<i4")
    v = (2000 + (np.arange(rows) % 50)).astype("<f8")  # mm: x10 of the cm reading

    def sha(start: int, stop: int) -> str:
        h = hashlib.sha256()
        for a in (t, c, v):
            h.update(a[start:stop].tobytes())
        return h.hexdigest()

    assert running.sql("SELECT block, first_seq, n, sha256 FROM sample_block ORDER BY block") == [
        (0, 0, 65_536, sha(0, 65_536)),
        (1, 65_536, rows - 65_536, sha(65_536, rows)),
    ]
    assert running.sql("SELECT samples, samples_sha256 FROM raw_file") == [(rows, sha(0, rows))]
    assert running("store", "check").exit_code == 0


def test_an_error_on_the_last_line_of_a_many_chunk_file_stores_nothing(
    running: Bench, monkeypatch: pytest.MonkeyPatch
) -> None:
    from testplan.importers import logger_csv

    lines = _long_run(70_000)
    lines.append(f"{_stamp(69_998)},201.0")
    path = running.write("many.csv", "time,level\n" + "\n".join(lines) + "\n")
    monkeypatch.setattr(logger_csv, "CHUNK_ROWS", 1000)
    line = running.fail("record", "import", RUN, str(path), "--map", LEVEL, "--by", "AK")
    assert line == (
        f"error: {path}:70002: time: time stamp goes back from the one on line 70001 (times "
        "must rise; remove duplicated or out-of-order lines)"
    )
    assert running.sql("SELECT count(*) FROM raw_file") == [(0,)]
    assert running.sample_count() == 0


def test_a_file_changed_while_being_imported_is_refused_and_nothing_kept(
    running: Bench, monkeypatch: pytest.MonkeyPatch
) -> None:
    from testplan.importers import logger_csv

    path = running.write("growing.csv", "time,level\n" + "\n".join(_long_run(20)) + "\n")
    real = logger_csv.read_logger_file

    def then_the_logger_writes_on(*args: object, **kwargs: object) -> logger_csv.LoggerData:
        data = real(*args, **kwargs)  # type: ignore[arg-type]
        with path.open("a") as f:
            f.write(f"{_stamp(20)},209.9\n")
        return data

    monkeypatch.setattr(logger_csv, "read_logger_file", then_the_logger_writes_on)
    line = running.fail("record", "import", RUN, str(path), "--map", LEVEL, "--by", "AK")
    assert line == (
        f"error: {path}: the file changed while it was being imported; nothing was kept "
        "(import it again once the logger has finished writing it)"
    )
    assert running.sql("SELECT count(*) FROM raw_file") == [(0,)]
    assert running.sample_count() == 0


def test_on_sqlite_the_raw_bytes_are_the_last_column_so_they_stream_in(running: Bench) -> None:
    if not running.url.startswith("sqlite"):
        pytest.skip("a SQLite row layout")
    columns = [row[1] for row in running.sql("PRAGMA table_info(raw_file)")]
    assert columns[-1] == "content"
    assert len(columns) == len(set(columns))
    path = DATA / "tank-long.csv"
    running("record", "import", RUN, str(path), "--map", LEVEL, "--map", WATER, "--by", "AK")
    assert running.sql("SELECT content FROM raw_file") == [(path.read_bytes(),)]
