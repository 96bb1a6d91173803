"""Every store command says what is wrong in one line, exit 1, no traceback."""

from __future__ import annotations

import pytest

from .conftest import START, Bench

UNKNOWN = "water-8@ip-verfication-1"
RUN_COMMANDS = [
    ["record", "start", UNKNOWN, *START],
    ["record", "deviation", UNKNOWN, "--description", "d", "--reason", "r", "--approved-by",
     "MO", "--key", "{mo}", "--by", "AK"],
    ["record", "import", UNKNOWN, "{csv}", "--map", "level[mm]=lowest_point_depth", "--by", "AK"],
    ["record", "observe", UNKNOWN, "--note", "n", "--by", "AK"],
    ["record", "finish", UNKNOWN, "--by", "AK"],
    ["record", "check", UNKNOWN, "--by", "MO", "--key", "{mo}"],
]  # fmt: skip


@pytest.mark.parametrize("args", RUN_COMMANDS, ids=lambda a: " ".join(a[:2]))
def test_an_unknown_run_is_named_with_a_suggestion(bench: Bench, args: list[str]) -> None:
    csv = bench.write("log.csv", "time,level\n2027-01-12T16:05:00Z,2054\n")
    args = [{"{csv}": str(csv), "{mo}": bench.key("MO")}.get(a, a) for a in args]
    assert bench.fail(*args) == (
        f"error: RUN: no run '{UNKNOWN}' in the store (did you mean 'water-8@ip-verification-1'?)"
    )


@pytest.mark.parametrize(
    "args",
    [
        ["init", "{missing}"],
        [
            "record",
            "import",
            "water-8@ip-verification-1",
            "{missing}",
            "--map",
            "level[mm]=lowest_point_depth",
            "--by",
            "AK",
        ],
        ["record", "observe", "water-8@ip-verification-1", "--sheet", "{missing}", "--by", "AK"],
    ],  # fmt: skip
    ids=lambda a: " ".join(a[:2]),
)
def test_a_missing_file_is_named(bench: Bench, args: list[str]) -> None:
    missing = bench.folder / "missing.file"
    args = [str(missing) if a == "{missing}" else a for a in args]
    assert bench.fail(*args) == f"error: {missing}: no such file"


def test_an_unknown_campaign_is_named(bench: Bench) -> None:
    assert bench.fail("record", "list", "--campaign", "QC-2027-41") == (
        "error: --campaign: no campaign 'QC-2027-41' in the store (did you mean 'QC-2027-014'?)"
    )
