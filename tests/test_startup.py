"""Start-up paths must not import the heavy libraries (speed is measured in bench/)."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

HEAVY = (
    "pandas",
    "sqlalchemy",
    "sqlmodel",
    "weasyprint",
    "matplotlib",
    "scipy",
    "numpy",
    "pint",
    "pydantic",
    "rich",
    "starlette",
    "uvicorn",
    "argon2",
    "jinja2",
)
SAMPLE = Path(__file__).resolve().parents[1] / "sample_campaign" / "flood-gauge-node.toml"


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


def test_subcommand_help_imports_nothing_heavy() -> None:
    assert loaded_after(["record", "import", "--help"]) == set()
    assert loaded_after(["store", "check", "--help"]) == set()
    assert loaded_after(["serve", "--help"]) == set()
    assert loaded_after(["people", "password", "--help"]) == set()


def heavy_loaded_by(code: str) -> set[str]:
    probe = f"import sys\n{code}\nprint(' '.join(m for m in {HEAVY!r} if m in sys.modules))"
    result = subprocess.run(
        [sys.executable, "-c", probe], capture_output=True, text=True, check=True
    )
    return set(result.stdout.split())


def test_plan_loads_only_units_and_tables() -> None:
    # planning needs the units library (and whatever it loads itself) and pydantic for
    # typer's parameter coercion; no pandas, SQLAlchemy, rich, ...
    units = heavy_loaded_by("import pint; pint.UnitRegistry()")
    assert "pint" in units
    assert loaded_after(["plan", str(SAMPLE)]) - units <= {"pydantic"}
