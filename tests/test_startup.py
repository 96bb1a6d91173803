"""`testplan --help` must not import the heavy libraries."""

from __future__ import annotations

import subprocess
import sys

HEAVY = ("pandas", "sqlalchemy", "sqlmodel", "weasyprint", "matplotlib", "scipy", "numpy", "pint")


def loaded_after(args: list[str]) -> set[str]:
    code = (
        "import sys\n"
        "from testplan.cli import app\n"
        f"sys.argv = ['testplan', *{args!r}]\n"
        "try:\n    app()\nexcept SystemExit:\n    pass\n"
        f"print(' '.join(m for m in {HEAVY!r} if m in sys.modules), file=sys.stderr)\n"
    )
    result = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, check=True
    )
    return set(result.stderr.split())


def test_help_imports_nothing_heavy() -> None:
    assert loaded_after(["--help"]) == set()


def test_plan_help_imports_nothing_heavy() -> None:
    assert loaded_after(["plan", "--help"]) == set()


def test_module_entry_point() -> None:
    result = subprocess.run(
        [sys.executable, "-m", "testplan", "--version"], capture_output=True, text=True, check=True
    )
    assert result.stdout.startswith("testplan ")
