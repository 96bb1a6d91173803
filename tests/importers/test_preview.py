"""`testplan record preview`: each dialect read without a store, as import would read it."""

from __future__ import annotations

import json
from typing import Any

import pytest
from typer.testing import CliRunner

from testplan.cli import app

from .cases import CASES, DATA


def preview(*args: str) -> Any:
    result = CliRunner().invoke(app, ["record", "preview", *args, "--json"])
    assert result.exit_code == 0, (result.stdout, result.stderr)
    return json.loads(result.stdout)


@pytest.mark.parametrize(("name", "options", "quantity", "expected", "facts"), CASES)
def test_each_dialect_is_found_and_read(
    name: str, options: list[str], quantity: str, expected: list[Any], facts: dict[str, Any]
) -> None:
    shown = preview(str(DATA / name), *options)
    channel = shown["channels"][0]
    assert channel["quantity"] == quantity
    assert channel["count"] == len(expected)
    assert channel["first"]["time"] == expected[0][0]
    assert channel["last"]["time"] == expected[-1][0]
    # common practice (no source): the conversions are worked by hand beside each case
    assert channel["first"]["value"] == pytest.approx(expected[0][1])
    assert channel["last"]["value"] == pytest.approx(expected[-1][1])
    assert channel["min"] == pytest.approx(min(v for _, v in expected))
    assert channel["max"] == pytest.approx(max(v for _, v in expected))
    for key, value in facts.items():
        assert shown["dialect"][key] == value, key


def test_preview_json_has_the_documented_shape() -> None:
    shown = preview(str(DATA / "missing.csv"), "--map", "2=cabinet_temperature")
    assert set(shown) == {"channels", "dialect", "warnings"}
    assert set(shown["channels"][0]) >= {
        "column",
        "source",
        "quantity",
        "unit",
        "count",
        "first",
        "last",
        "min",
        "max",
    }
    assert shown["channels"][0]["column"] == 2
    assert shown["warnings"] == [
        "Temp [°C]: 2 missing readings skipped",
        "column 'RH [%]' is not mapped and was not read",
    ]


def refusal(*args: str) -> str:
    result = CliRunner().invoke(app, ["record", "preview", *args])
    assert result.exit_code == 1, (result.stdout, result.stderr)
    assert result.stdout == ""
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.stderr
    return lines[0]


def test_an_ambiguous_date_order_is_refused_asking_for_date_order(tmp_path: Any) -> None:
    path = tmp_path / "both.csv"
    path.write_text("Date/Time,Depth (mm)\n03/04/2027 08:00:00,1\n04/05/2027 08:00:00,2\n")
    assert refusal(str(path), "--map", "2=lowest_point_depth", "--tz", "UTC") == (
        f"error: {path}:2: Date/Time: day and month cannot be told apart in any time stamp "
        "(first '03/04/2027 08:00:00') (say which with --date-order dmy or --date-order mdy)"
    )
    shown = preview(
        str(path), "--map", "2=lowest_point_depth", "--tz", "UTC", "--date-order", "dmy"
    )
    assert shown["channels"][0]["first"]["time"] == "2027-04-03T08:00:00Z"


def test_elapsed_time_without_start_is_refused_naming_start() -> None:
    path = DATA / "elapsed.csv"
    assert refusal(str(path), "--map", "2=lowest_point_depth") == (
        f"error: {path}:3: Elapsed (s): time stamp '0' is time since the start, not a date and "
        "time (give the start with --start, e.g. --start 2027-01-12T09:00:00+01:00)"
    )


def test_a_tz_that_contradicts_the_header_is_refused_naming_both() -> None:
    path = DATA / "header-zone.csv"
    assert refusal(str(path), "--map", "2=ambient_temperature", "--tz", "+02:00") == (
        f"error: {path}: --tz: --tz +02:00 contradicts the file's zone +01:00 (line 2: Time "
        "zone,GMT+01:00) (leave out --tz, or correct it)"
    )


def test_a_reading_that_is_text_is_named_with_its_cell(tmp_path: Any) -> None:
    path = tmp_path / "odd.csv"
    path.write_text("time,Temp [°C]\n2027-03-04T09:00:00Z,21.5\n2027-03-04T09:01:00Z,err\n")
    assert refusal(str(path), "--map", "2=ambient_temperature") == (
        f"error: {path}:3: Temp [°C]: 'err' is not a finite number (if it marks a missing "
        "reading, pass --missing TEXT)"
    )
    shown = preview(str(path), "--map", "2=ambient_temperature", "--missing", "err")
    assert shown["channels"][0]["count"] == 1


def test_a_thousands_separator_that_may_be_a_decimal_mark_is_refused(tmp_path: Any) -> None:
    path = tmp_path / "grouped.csv"
    path.write_text(
        "Zeit;Luftdruck [hPa]\n2027-03-04T09:00:00Z;1.013\n2027-03-04T09:01:00Z;1.012\n"
    )
    assert refusal(str(path), "--map", "2=ambient_pressure") == (
        f"error: {path}:2: Luftdruck [hPa]: '1.013': '.' may be a thousands separator or a "
        "decimal mark (say which is the decimal mark with --decimal . or --decimal ,)"
    )
    shown = preview(str(path), "--map", "2=ambient_pressure", "--decimal", ",")
    assert shown["channels"][0]["first"]["value"] == 1013.0


@pytest.mark.parametrize("word", ["tab", "\\t", "\t"])
def test_tab_as_a_delimiter_word(word: str) -> None:
    shown = preview(
        str(DATA / "utf16-tab.txt"), "--map", "2=water_temperature", "--delimiter", word
    )
    assert shown["dialect"]["delimiter"] == "\t"


def test_a_bad_delimiter_is_one_line() -> None:
    assert refusal(
        str(DATA / "trailing.csv"), "--map", "2=ambient_temperature", "--delimiter", "ab"
    ) == (
        "error: --delimiter: cannot use 'ab' as the delimiter (give one character, or tab, "
        "comma, semicolon or space)"
    )


def test_a_clock_change_gap_is_refused_naming_line_and_local_time(tmp_path: Any) -> None:
    # source: Europe/London moves from 01:00 GMT to 02:00 BST on 2027-03-28 (IANA tz database)
    path = tmp_path / "gap.csv"
    path.write_text("time,Temp [°C]\n2027-03-28 00:30:00,1\n2027-03-28 01:30:00,2\n")
    line = refusal(str(path), "--map", "2=ambient_temperature", "--tz", "Europe/London")
    assert line == (
        f"error: {path}:3: time: local time 2027-03-28 01:30:00 does not exist or is ambiguous "
        "in Europe/London (clock change) (log in UTC or with offsets, or give --tz as a fixed "
        "offset such as +01:00)"
    )
