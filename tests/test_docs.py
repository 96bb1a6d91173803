"""README documents every command and the quantity-key table as the code has them."""

from __future__ import annotations

from pathlib import Path

from typer.testing import CliRunner

from testplan.cli import app
from testplan.domain.units import KEY_UNITS, KINDS

README = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")


def command_names() -> list[str]:
    """Every command, groups walked: 'plan', 'record start', 'store check'..."""
    import typer.main

    names = []
    group = typer.main.get_command(app)
    for name, command in group.commands.items():  # type: ignore[attr-defined]
        subs = getattr(command, "commands", None)
        if subs:
            names.extend(f"{name} {sub}" for sub in subs)
        else:
            names.append(name)
    return sorted(names)


def test_every_command_is_documented_and_has_help_with_an_example() -> None:
    runner = CliRunner()
    names = command_names()
    assert "record import" in names and "store check" in names
    for name in names:
        assert f"`testplan {name}" in README, name
        result = runner.invoke(app, [*name.split(), "--help"])
        assert result.exit_code == 0
        assert f"Example: testplan {name}" in " ".join(result.stdout.split()), name


def test_quantity_table_matches_the_code() -> None:
    for spec in KEY_UNITS.values():
        row = (
            f"| `{spec.key}` | {spec.kind} | {spec.plan_unit} | "
            f'`"{KINDS[spec.kind].example}"` | {spec.meaning} |'
        )
        assert row in README, row


def test_readme_has_the_two_setup_commands() -> None:
    assert "make demo" in README and "make test" in README


def test_loggable_quantity_table_matches_the_code() -> None:
    from testplan.domain.channels import CHANNELS

    for c in CHANNELS.values():
        row = f"| `{c.name}` | {c.unit or '(none)'} | {c.meaning} |"
        assert row in README, row
