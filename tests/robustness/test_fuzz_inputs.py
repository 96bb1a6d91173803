"""Bad input never shows a traceback and never reaches the store half-done.

Hypothesis feeds the campaign reader, the quantity, IP-code and channel-map parsers, the
logger importer and the observation sheets with random text, truncated and mangled files,
wrong encodings and BOMs, decimal commas, empty files, duplicated and out-of-order time
stamps, NaN, infinities, huge and negative values, and wrong units. Each either reads
(with finite values) or raises the project's one error type with its file, line or field;
the command line turns that into one line and exit 1.

Runs are derandomised so CI is repeatable; TESTPLAN_FUZZ_EXAMPLES raises the count for a
longer hunt.
"""

from __future__ import annotations

import math
import os
import re
from pathlib import Path
from typing import Any

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from typer.testing import CliRunner

from testplan.cli import app
from testplan.domain.ipcode import parse_ip_code
from testplan.domain.observations import check_sheet
from testplan.domain.planner import build_plan
from testplan.domain.units import KEY_UNITS, parse_key
from testplan.errors import TestplanError
from testplan.importers.logger_csv import ReadOptions, parse_map, read_logger_bytes
from testplan.reader import read_campaign, with_location
from tests.store.conftest import RUN, START, Bench

ROOT = Path(__file__).resolve().parents[2]
SAMPLE = ROOT / "sample_campaign" / "flood-gauge-node.toml"
SAMPLE_TEXT = SAMPLE.read_text(encoding="utf-8")
SAMPLE_LOG = (ROOT / "tests" / "data" / "loggers" / "tank-long.csv").read_text(encoding="utf-8")
MAPS = [parse_map("level[cm]=lowest_point_depth"), parse_map("water[degF]=water_temperature")]
N = int(os.environ.get("TESTPLAN_FUZZ_EXAMPLES", "0"))


def fuzz(examples: int, **kw: Any) -> Any:
    return settings(
        max_examples=N or examples,
        derandomize=not N,
        deadline=None,
        suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
        **kw,
    )


# Text a person or a logger might plausibly produce, plus the nasty cases.
NUMBERS = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.integers(-(10**30), 10**30).map(str),
    st.sampled_from(["nan", "inf", "-inf", "1e400", "-0", "1,5", "1.5.2", "0x10", "1_000", ""]),
)
UNITS = st.sampled_from(
    ["mm", "m", "h", "min", "kg", "degC", "K", "%", "L/h", "kPa", "N*m", "ft", "", "furlong", "(("]
)
QUANTITY_TEXT = st.one_of(
    st.text(max_size=30),
    st.builds(lambda n, u, sep: f"{n}{sep}{u}", NUMBERS, UNITS, st.sampled_from([" ", "", "  "])),
)


def located(err: TestplanError) -> bool:
    return bool(err.file or err.key)


@fuzz(400)
@given(text=QUANTITY_TEXT, key=st.sampled_from(sorted(KEY_UNITS)))
def test_quantity_parser_reads_or_names_the_key(text: str, key: str) -> None:
    try:
        value = parse_key(text, key)
    except TestplanError as err:
        assert err.key == key
        return
    assert math.isfinite(value)  # source: IEEE 754 (finite values only reach the plan)


@fuzz(400)
@given(
    text=st.one_of(
        st.text(max_size=20),
        st.from_regex(r"IP[0-9X]{2}[A-DHMSW]{0,2}(/IP[0-9X]{2}[A-DHMSW]{0,2})?", fullmatch=True),
    )
)
def test_ip_code_parser_reads_or_refuses(text: str) -> None:
    try:
        code = parse_ip_code(text)
    except TestplanError:
        return
    # IEC 60529 cl. 4 (from memory): first numeral 0-6 or X, second 0-9 or X
    assert str(code)


@fuzz(300)
@given(text=st.one_of(st.text(max_size=60), st.from_regex(r"\w+\[[^\]]*\]=\w+(@[\w-]+)?(#\w+)?")))
def test_channel_map_parser_reads_or_names_the_option(text: str) -> None:
    try:
        parse_map(text)
    except TestplanError as err:
        assert err.key == "--map"


def mangle(text: str, data: st.DataObject) -> bytes:
    """One of the ways a logger file goes wrong."""
    lines = text.splitlines()
    how = data.draw(
        st.sampled_from(
            [
                "truncate",
                "drop_line",
                "swap_lines",
                "duplicate_line",
                "replace_cell",
                "decimal_comma",
                "bom",
                "utf16",
                "latin1",
                "empty",
                "garbage",
            ]
        )
    )
    if how == "truncate":
        cut = data.draw(st.integers(0, len(text)))
        return text[:cut].encode()
    if how in ("drop_line", "swap_lines", "duplicate_line"):
        i = data.draw(st.integers(0, len(lines) - 1))
        j = data.draw(st.integers(0, len(lines) - 1))
        if how == "drop_line":
            del lines[i]
        elif how == "swap_lines":
            lines[i], lines[j] = lines[j], lines[i]
        else:
            lines.insert(i, lines[j])
        return ("\n".join(lines) + "\n").encode()
    if how == "replace_cell":
        i = data.draw(st.integers(1, len(lines) - 1))
        cells = lines[i].split(",")
        k = data.draw(st.integers(0, len(cells) - 1))
        cells[k] = data.draw(
            st.one_of(
                NUMBERS, st.text(max_size=12), st.sampled_from(["", "NaN", "1e999", "-1e308"])
            )
        )
        lines[i] = ",".join(cells)
        return ("\n".join(lines) + "\n").encode()
    if how == "decimal_comma":
        return text.replace(".", ",").encode()
    if how == "bom":
        return b"\xef\xbb\xbf" + text.encode()
    if how == "utf16":
        return text.encode("utf-16")
    if how == "latin1":
        return text.replace("time", "Zeit\u00b0").encode("latin-1")
    if how == "empty":
        return b""
    return data.draw(st.binary(max_size=200))


@fuzz(250)
@given(data=st.data())
def test_logger_reader_reads_or_names_file_and_line(data: st.DataObject) -> None:
    content = mangle(SAMPLE_LOG, data)
    options = ReadOptions(timezone=data.draw(st.sampled_from([None, "Europe/London"])))
    try:
        logged = read_logger_bytes(content, "tank.csv", MAPS, options)
    except TestplanError as err:
        assert err.file == "tank.csv", err.one_line()
        assert "\n" not in err.one_line()
        return
    assert logged.count == len(logged.value) > 0
    assert all(math.isfinite(v) for v in logged.value.tolist())
    # each channel's times rise (a logger records forward in time)
    for c in set(logged.channel.tolist()):
        t = logged.t_us[logged.channel == c]
        assert (t[1:] > t[:-1]).all()


SHEET_KEYS = ["ingress", "function", "mass", "leak_test", "insulation", "corrosion", "torque"]


@fuzz(300)
@given(
    sheet=st.dictionaries(
        st.one_of(st.sampled_from([*SHEET_KEYS, "specimen", "checkpoint"]), st.text(max_size=8)),
        st.one_of(
            st.text(max_size=12),
            st.integers(),
            st.floats(),
            st.booleans(),
            st.dictionaries(
                st.sampled_from(["found", "result", "value", "before", "after", "note", "kind"]),
                st.one_of(st.text(max_size=12), st.floats(), st.booleans(), QUANTITY_TEXT),
                max_size=4,
            ),
        ),
        max_size=4,
    )
)
def test_observation_sheet_checks_or_names_the_field(sheet: dict[str, Any]) -> None:
    try:
        check_sheet(sheet)
    except TestplanError as err:
        assert err.key is not None, err.one_line()


def mutate_campaign(data: st.DataObject) -> bytes:
    lines = SAMPLE_TEXT.splitlines()
    how = data.draw(
        st.sampled_from(["value", "drop_line", "truncate", "bom", "utf16", "latin1", "garbage"])
    )
    if how == "value":
        i = data.draw(
            st.sampled_from([n for n, ln in enumerate(lines) if re.match(r"^\w+ = ", ln)])
        )
        key = lines[i].split(" = ")[0]
        value = data.draw(
            st.one_of(
                QUANTITY_TEXT.map(lambda t: '"' + t.replace("\\", "").replace('"', "") + '"'),
                NUMBERS.filter(bool),
                st.sampled_from(["true", "[]", "{}", '"IP69"', '"IPX9K"', "-1", "1e400", "nan"]),
            )
        )
        lines[i] = f"{key} = {value}"
        return ("\n".join(lines) + "\n").encode()
    if how == "drop_line":
        del lines[data.draw(st.integers(0, len(lines) - 1))]
        return ("\n".join(lines) + "\n").encode()
    if how == "truncate":
        return SAMPLE_TEXT[: data.draw(st.integers(0, len(SAMPLE_TEXT)))].encode()
    if how == "bom":
        return b"\xef\xbb\xbf" + SAMPLE_TEXT.encode()
    if how == "utf16":
        return SAMPLE_TEXT.encode("utf-16")
    if how == "latin1":
        return SAMPLE_TEXT.replace("Quorrel", "Qu\u00f6rrel").encode("latin-1")
    return data.draw(st.binary(max_size=300))


def campaign_file(data: st.DataObject, folders: pytest.TempPathFactory) -> Path:
    path = folders.mktemp("c") / "campaign.toml"
    path.write_bytes(mutate_campaign(data))
    return path


@fuzz(150)
@given(data=st.data())
def test_campaign_reader_and_planner_read_or_name_file_line_and_key(
    data: st.DataObject, tmp_path_factory: pytest.TempPathFactory
) -> None:
    path = campaign_file(data, tmp_path_factory)
    try:
        loaded = read_campaign(path)
        with_location(loaded, lambda: build_plan(loaded.campaign))
    except TestplanError as err:
        assert err.file == str(path), err.one_line()
        # where: the line, or for something missing (no line to point at) the key
        assert err.line is not None or err.key, err.one_line()
        assert "\n" not in err.one_line()


@fuzz(25)
@given(data=st.data())
def test_bad_campaign_files_give_one_line_and_exit_1(
    data: st.DataObject, tmp_path_factory: pytest.TempPathFactory
) -> None:
    path = campaign_file(data, tmp_path_factory)
    result = CliRunner().invoke(app, ["plan", str(path)])
    assert result.exception is None or isinstance(result.exception, SystemExit), result.exception
    assert result.exit_code in (0, 1)
    if result.exit_code == 1:
        assert result.stderr.count("\n") == 1, result.stderr
        assert result.stderr.startswith(f"error: {path}")


@fuzz(20)
@given(data=st.data())
def test_a_bad_logger_file_leaves_the_store_as_it_was(
    bench: Bench, data: st.DataObject, tmp_path_factory: pytest.TempPathFactory
) -> None:
    if not bench.sql("SELECT count(*) FROM run WHERE state <> 'planned'")[0][0]:
        bench("record", "start", RUN, *START, "--at", "2027-01-12T16:05Z", "--quiet")
    path = tmp_path_factory.mktemp("log") / "tank.csv"
    path.write_bytes(mangle(SAMPLE_LOG, data))
    before = [bench.sql(f"SELECT count(*) FROM {t}") for t in ("raw_file", "audit", "sample_block")]
    result = bench(
        "record",
        "import",
        RUN,
        str(path),
        "--map",
        "level[cm]=lowest_point_depth@LT-03",
        "--map",
        "water[degF]=water_temperature@LT-03",
        "--tz",
        "Europe/London",
        "--by",
        "AK",
        "--quiet",
        ok=False,
    )
    assert result.exception is None or isinstance(result.exception, SystemExit), result.exception
    if result.exit_code == 0:
        return
    assert result.exit_code == 1, result.stderr
    # A mangled file that still reads may repeat one an earlier example imported: refused
    # as the same bytes (one line naming the earlier import) rather than as unreadable.
    assert result.stderr.count("\n") == 1
    assert result.stderr.startswith((f"error: {path}", "error: FILE: tank.csv (sha256 "))
    after = [bench.sql(f"SELECT count(*) FROM {t}") for t in ("raw_file", "audit", "sample_block")]
    assert after == before


# Cases the fuzzing found, kept as plain tests.


@pytest.mark.parametrize(
    ("line", "text", "named"),
    [
        (58, "weibull_shape = 0.02", ":58: endurance[1].weibull_shape: "),
        (60, 'rate = "0.00001 cycle/min"', ": leg[2].tests: endurance-mode-selector-knob "),
        (35, 'immersion_duration = "9e9 h"', ": leg[1].tests: water-8 would take"),
    ],
)
def test_campaign_values_that_overflowed_are_refused_in_one_line(
    tmp_path: Path, line: int, text: str, named: str
) -> None:
    lines = SAMPLE_TEXT.splitlines()
    assert lines[line - 1].split(" = ")[0] == text.split(" = ")[0]
    lines[line - 1] = text
    path = tmp_path / "campaign.toml"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    result = CliRunner().invoke(app, ["plan", str(path)])
    assert result.exit_code == 1, result.stderr
    assert result.stderr.count("\n") == 1 and named in result.stderr, result.stderr


def test_a_campaign_cut_off_mid_value_names_its_last_line(tmp_path: Path) -> None:
    path = tmp_path / "campaign.toml"
    path.write_text(SAMPLE_TEXT[: SAMPLE_TEXT.index('"IP66/IP68"') + 4], encoding="utf-8")
    result = CliRunner().invoke(app, ["plan", str(path)])
    assert result.exit_code == 1
    last = path.read_text(encoding="utf-8").count("\n") + 1
    assert result.stderr.startswith(f"error: {path}:{last}: TOML syntax error: ")


def test_a_reading_that_overflows_in_the_plan_unit_is_named() -> None:
    lines = SAMPLE_LOG.splitlines()
    lines[1] = lines[1].rsplit(",", 1)[0] + ",1E308"  # cm: beyond float range in mm
    with pytest.raises(TestplanError) as caught:
        read_logger_bytes(("\n".join(lines) + "\n").encode(), "tank.csv", MAPS)
    assert caught.value.one_line().startswith("tank.csv:2: value: the 'level' reading is out of")


def test_carriage_returns_inside_a_file_are_line_ends() -> None:
    crlf = SAMPLE_LOG.replace("\n", "\r\n").encode()
    cr = SAMPLE_LOG.replace("\n", "\r").encode()
    plain = read_logger_bytes(SAMPLE_LOG.encode(), "tank.csv", MAPS)
    for content in (crlf, cr):
        logged = read_logger_bytes(content, "tank.csv", MAPS)
        assert logged.value.tolist() == plain.value.tolist()
    lines = SAMPLE_LOG.splitlines()
    lines[1] = lines[1].replace("level", "lev\rel")  # a stray CR splits the row in two
    with pytest.raises(TestplanError) as caught:
        read_logger_bytes(("\n".join(lines) + "\n").encode(), "tank.csv", MAPS)
    assert caught.value.file == "tank.csv" and caught.value.line is not None
