"""docs/validation.md maps every requirement to the tests that show it (ISO/IEC 17025
cl. 7.11.2): this test fails when a requirement has no row, a row has no test, or a row
names a test that does not exist."""

from __future__ import annotations

import re
import typing
from pathlib import Path

import pytest

from testplan.domain.plan import Comparison, Procedure, When

ROOT = Path(__file__).resolve().parents[1]
VALIDATION = ROOT / "docs" / "validation.md"
README = ROOT / "README.md"
# ISO/IEC 17025:2017 cl. 7.8.2.1 items a) to p), then 7.8.2.2, 7.8.3.1, 7.8.6, 7.8.7 and the
# amendment of an issued report, 7.8.8.1 and 7.8.8.2
# source: ISO/IEC 17025:2017 cl. 7.8 (from memory)
REPORT_ITEMS = [f"REP-7.8.2.1{c}" for c in "abcdefghijklmnop"] + [
    "REP-7.8.2.2",
    "REP-7.8.3.1",
    "REP-7.8.6",
    "REP-7.8.7",
    "REP-7.8.8.1",
    "REP-7.8.8.2",
]


def rows() -> dict[str, list[str]]:
    """Requirement id -> the test ids its row names."""
    out: dict[str, list[str]] = {}
    for line in VALIDATION.read_text(encoding="utf-8").splitlines():
        cells = [c.strip() for c in line.strip().strip("|").split("|")]
        if len(cells) != 3 or cells[0] in ("ID", "---"):
            continue
        assert cells[0] not in out, f"{cells[0]} has two rows"
        out[cells[0]] = [t.strip() for t in cells[2].split(",") if t.strip()]
    return out


def guarantees() -> list[str]:
    """The INT-... ids the README's Reliability section promises."""
    text = README.read_text(encoding="utf-8")
    section = text.split("## Reliability", 1)[1].split("\n## ", 1)[0]
    return sorted(set(re.findall(r"INT-[a-z-]+[a-z]", section)))


def required() -> list[str]:
    hints = typing.get_type_hints(Procedure)
    families = [f"PAR-{g}" for g in typing.get_args(hints["group"])]
    comparisons = [f"CRIT-{c}" for c in typing.get_args(Comparison)]
    windows = [f"WHEN-{w}" for w in typing.get_args(When)]
    return families + comparisons + windows + REPORT_ITEMS + guarantees()


def test_the_readme_promises_guarantees() -> None:
    assert len(guarantees()) >= 10


@pytest.mark.parametrize("requirement", required())
def test_every_requirement_has_a_row_with_tests(requirement: str) -> None:
    table = rows()
    assert requirement in table, f"docs/validation.md has no row for {requirement}"
    assert table[requirement], f"{requirement} names no test"


def test_every_named_test_exists() -> None:
    missing = []
    for requirement, tests in rows().items():
        for test in tests:
            path, _, name = test.partition("::")
            file = ROOT / path
            if not name or not file.is_file() or f"def {name}(" not in file.read_text("utf-8"):
                missing.append(f"{requirement}: {test}")
    assert missing == []
