"""The body of a logger file is read in chunks: any chunk size gives the same reading,
and a problem in a later chunk is named by the file's own line."""

from __future__ import annotations

import hashlib
import json
import uuid
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from typer.testing import CliRunner

from testplan.cli import app
from testplan.importers import logger_csv
from testplan.importers.logger_csv import LoggerData
from testplan.store.samples import block_rows, digest_arrays, digest_source

from .cases import CASES, DATA

SIZES = [1, 7, None]  # None: the module's CHUNK_ROWS


def read(monkeypatch: pytest.MonkeyPatch, size: int | None, *args: str) -> tuple[int, Any, Any]:
    """`record preview --json` with the body read ``size`` rows at a time; its exit code,
    output (JSON or the error line) and the LoggerData the reader returned."""
    got: list[LoggerData] = []
    real = logger_csv.read_logger_file

    def spy(*a: Any, **k: Any) -> LoggerData:
        data = real(*a, **k)
        got.append(data)
        return data

    with monkeypatch.context() as m:
        m.setattr(logger_csv, "read_logger_file", spy)
        if size is not None:
            m.setattr(logger_csv, "CHUNK_ROWS", size)
        result = CliRunner().invoke(app, ["record", "preview", *args, "--json"])
    assert "Traceback" not in result.stderr
    if result.exit_code:
        return result.exit_code, result.stderr.strip(), None
    return 0, json.loads(result.stdout), got[0]


def temperature(
    monkeypatch: pytest.MonkeyPatch, size: int | None, path: Path, tz: str
) -> tuple[int, Any, Any]:
    """``read`` of a file whose second column is an ambient temperature in lab time."""
    return read(monkeypatch, size, str(path), "--map", "2=ambient_temperature", "--tz", tz)


def blocks(data: LoggerData) -> list[tuple[int, int, int, str]]:
    rows = block_rows(uuid.UUID(int=0), data.t_us, data.channel, data.value)
    return [(r["block"], r["first_seq"], r["n"], r["sha256"]) for r in rows]  # type: ignore[misc]


@pytest.mark.parametrize("case", CASES, ids=[c[0] for c in CASES])
def test_every_chunk_size_reads_each_dialect_the_same(
    monkeypatch: pytest.MonkeyPatch, case: tuple[Any, ...]
) -> None:
    name, options = case[0], case[1]
    readings = [read(monkeypatch, size, str(DATA / name), *options) for size in SIZES]
    code, whole, data = readings[-1]
    assert code == 0, whole
    for code, shown, chunked in readings[:-1]:
        assert code == 0, shown
        # counts, first/last, min/max, the dialect (missing counts, footers) and warnings
        assert shown == whole
        assert np.array_equal(chunked.t_us, data.t_us)
        assert np.array_equal(chunked.channel, data.channel)
        assert np.array_equal(chunked.value, data.value)
        assert blocks(chunked) == blocks(data)
        assert digest_source(chunked.samples) == digest_arrays(data.t_us, data.channel, data.value)


def many_rows(path: Path, rows: int, last: str | None = None) -> Path:
    lines = ["time,level"]
    lines += [f"2027-01-12T16:{5 + i // 60:02d}:{i % 60:02d}Z,{200 + i % 10}" for i in range(rows)]
    if last is not None:
        lines.append(last)
    path.write_text("\n".join(lines) + "\n")
    return path


@pytest.mark.parametrize("size", SIZES)
def test_an_error_on_the_last_line_of_many_chunks_names_that_line(
    monkeypatch: pytest.MonkeyPatch, tmp_path: Path, size: int | None
) -> None:
    path = many_rows(tmp_path / "log.csv", 40, "2027-01-12T16:06:00Z,2O4")
    code, line, _ = read(monkeypatch, size, str(path), "--map", "level[cm]=lowest_point_depth")
    assert code == 1
    assert line == (
        f"error: {path}:42: level: '2O4' is not a finite number (if it marks a missing reading, "
        "pass --missing TEXT)"
    )


@pytest.mark.parametrize("size", SIZES)
def test_a_stamp_going_back_across_a_chunk_boundary_is_named(
    monkeypatch: pytest.MonkeyPatch, tmp_path: Path, size: int | None
) -> None:
    path = many_rows(tmp_path / "log.csv", 14, "2027-01-12T16:05:13Z,204")
    code, line, _ = read(monkeypatch, size, str(path), "--map", "level[cm]=lowest_point_depth")
    assert code == 1
    assert line == (
        f"error: {path}:16: time: time stamp repeats the one on line 15 (times must rise; "
        "remove duplicated or out-of-order lines)"
    )


def day_first(path: Path, rows: int, last: str) -> Path:
    # 1 to 12 February: every one reads as day/month and as month/day until the last line
    lines = ["time,Temp [°C]"]
    lines += [f"{d:02d}/02/2027 09:00:00,{20 + d}" for d in range(1, rows + 1)]
    lines.append(last)
    path.write_text("\n".join(lines) + "\n")
    return path


@pytest.mark.parametrize("size", SIZES)
def test_day_first_settled_only_by_the_last_chunk(
    monkeypatch: pytest.MonkeyPatch, tmp_path: Path, size: int | None
) -> None:
    path = day_first(tmp_path / "log.csv", 12, "13/02/2027 09:00:00,33")
    code, shown, data = temperature(monkeypatch, size, path, "+00:00")
    assert code == 0, shown
    assert shown["dialect"]["time_format"] == "%d/%m/%Y %H:%M:%S"
    # source: 2027-02-01T09:00Z is 1801472400 s since 1970 (worked by hand: 20485 days)
    assert data.t_us[0] == 1_801_472_400_000_000
    assert np.all(np.diff(data.t_us) == 86_400_000_000)


@pytest.mark.parametrize("size", SIZES)
def test_a_later_chunk_contradicting_the_date_order_is_refused(
    monkeypatch: pytest.MonkeyPatch, tmp_path: Path, size: int | None
) -> None:
    # 13/02 says day first; 02/14 can only be month first: no one order reads both
    lines = ["time,Temp [°C]", "13/02/2027 09:00:00,1"]
    lines += [f"{d:02d}/02/2027 10:00:00,2" for d in range(14, 20)] + ["02/14/2027 11:00:00,3"]
    path = tmp_path / "log.csv"
    path.write_text("\n".join(lines) + "\n")
    code, line, _ = temperature(monkeypatch, size, path, "+00:00")
    assert code == 1
    assert line == (
        f"error: {path}:9: time: cannot read '02/14/2027 11:00:00' as a time stamp "
        "(give its format with --time-format, e.g. '%d/%m/%Y %H:%M:%S')"
    )


@pytest.mark.parametrize("size", SIZES)
def test_an_ambiguous_date_order_is_refused_whatever_the_chunks(
    monkeypatch: pytest.MonkeyPatch, tmp_path: Path, size: int | None
) -> None:
    path = day_first(tmp_path / "log.csv", 11, "12/02/2027 09:00:00,33")
    code, line, _ = temperature(monkeypatch, size, path, "+00:00")
    assert code == 1
    assert line == (
        f"error: {path}:2: time: day and month cannot be told apart in any time stamp (first "
        "'01/02/2027 09:00:00') (say which with --date-order dmy or --date-order mdy)"
    )


@pytest.mark.parametrize("size", SIZES)
def test_a_clock_change_in_a_later_chunk_is_named(
    monkeypatch: pytest.MonkeyPatch, tmp_path: Path, size: int | None
) -> None:
    # source: Europe/London moves from 01:00 GMT to 02:00 BST on 2027-03-28 (IANA tz database)
    lines = ["time,Temp [°C]"] + [f"2027-03-28 00:{m:02d}:00,1" for m in range(0, 60, 5)]
    lines.append("2027-03-28 01:30:00,2")
    path = tmp_path / "gap.csv"
    path.write_text("\n".join(lines) + "\n")
    code, line, _ = temperature(monkeypatch, size, path, "Europe/London")
    assert code == 1
    assert line == (
        f"error: {path}:14: time: local time 2027-03-28 01:30:00 does not exist or is ambiguous "
        "in Europe/London (clock change) (log in UTC or with offsets, or give --tz as a fixed "
        "offset such as +01:00)"
    )


@pytest.mark.parametrize("size", SIZES)
def test_a_midnight_24_00_in_a_later_chunk_is_the_next_day(
    monkeypatch: pytest.MonkeyPatch, tmp_path: Path, size: int | None
) -> None:
    lines = ["time,Temp [°C]"] + [f"2027-03-04 23:{m:02d}:00,1" for m in range(50, 60)]
    lines.append("2027-03-04 24:00:00,2")
    path = tmp_path / "late.csv"
    path.write_text("\n".join(lines) + "\n")
    code, shown, data = temperature(monkeypatch, size, path, "+00:00")
    assert code == 0, shown
    assert shown["channels"][0]["last"]["time"] == "2027-03-05T00:00:00Z"
    assert shown["dialect"]["time_format"] == "%Y-%m-%d %H:%M:%S"


@pytest.mark.parametrize("size", SIZES)
def test_a_thousands_mark_is_judged_over_the_whole_column(
    monkeypatch: pytest.MonkeyPatch, tmp_path: Path, size: int | None
) -> None:
    # '1.013' alone may group thousands; a later '1013,25' shows ',' is the decimal mark
    path = tmp_path / "p.csv"
    rows = [f"2027-03-04T09:{m:02d}:00Z;1.013" for m in range(9)]
    path.write_text("time;Druck [hPa]\n" + "\n".join([*rows, "2027-03-04T09:09:00Z;1013,25"]))
    code, shown, data = read(monkeypatch, size, str(path), "--map", "2=ambient_pressure")
    assert code == 0, shown
    assert shown["dialect"]["thousands"] == "."
    assert data.value.tolist() == [1013.0] * 9 + [1013.25]


def test_the_raw_bytes_hash_is_the_file_s_own(tmp_path: Path) -> None:
    path = many_rows(tmp_path / "log.csv", 30)
    data = logger_csv.read_logger_file(
        path, [logger_csv.parse_map("level[cm]=lowest_point_depth")], chunk_rows=4
    )
    assert data.content == path.read_bytes()
    assert data.sha256 == hashlib.sha256(path.read_bytes()).hexdigest()
    assert data.count == 30


def test_a_bad_byte_past_the_first_megabyte_is_named_by_its_line(tmp_path: Path) -> None:
    from testplan.errors import LoggerFileError

    rows = 60_000  # about 1.6 MB: the bad byte is in the second piece read
    lines = [f"2027-01-12T16:05:00Z,{i}" for i in range(rows)]
    path = tmp_path / "log.csv"
    path.write_bytes(("time,level\n" + "\n".join(lines) + "\n").encode() + b"x\xb0,1\n")
    with pytest.raises(LoggerFileError) as err:
        logger_csv.read_logger_file(
            path,
            [logger_csv.parse_map("level[cm]=lowest_point_depth")],
            logger_csv.ReadOptions(encoding="utf-8"),
        )
    assert (err.value.line, err.value.message) == (rows + 2, "byte 0xb0 is not valid utf-8")


def test_a_24_00_split_across_pieces_is_still_found(tmp_path: Path) -> None:
    from testplan.importers.source import PIECE, RawSource

    data = b"x" * (PIECE - 2) + b"24:00"
    assert RawSource(data=data).find(b"24:00")
    assert not RawSource(data=data[:-1]).find(b"24:00")
