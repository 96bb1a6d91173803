"""End to end on the sample campaign: the readable plan the demo prints."""

from __future__ import annotations

from pathlib import Path

from typer.testing import CliRunner

from testplan.cli import app

SAMPLE = Path(__file__).with_name("flood-gauge-node.toml")


def test_demo_plan_reads_in_100_columns() -> None:
    result = CliRunner().invoke(app, ["plan", str(SAMPLE)])
    assert result.exit_code == 0, result.stderr
    lines = result.stdout.splitlines()
    assert max(len(line) for line in lines) <= 100
    text = result.stdout
    for needle in (
        "dust-6",
        "water-6",
        "water-8",
        "salt-mist",
        "endurance-mode-selector-knob",
        "endurance-battery-door-latch",
        "Implied, not tested",
        "take precedence",
        "2054 mm",
    ):
        assert needle in text, needle
