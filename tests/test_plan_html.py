"""The printable HTML plan and the template lookup."""

from __future__ import annotations

from pathlib import Path

import pytest
from typer.testing import CliRunner

from testplan.cli import app
from testplan.errors import TestplanError
from testplan.report.render import render, template_dir

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_campaign/flood-gauge-node.toml"


def test_html_plan_has_procedures_cautions_and_precedence(
    runner: CliRunner, tmp_path: Path
) -> None:
    out = tmp_path / "plan.html"
    result = runner.invoke(app, ["plan", str(SAMPLE), "--html", str(out)])
    assert result.exit_code == 0, result.stderr
    page = out.read_text(encoding="utf-8")
    assert "water-8" in page and "salt-mist" in page and "endurance-battery-door-latch" in page
    assert "Respirable talc" in page and "Pressure vessels" in page
    assert "take precedence" in page
    assert not list(tmp_path.glob("*.part"))


def test_user_templates_override_the_defaults(runner: CliRunner, tmp_path: Path) -> None:
    mine = tmp_path / "mine"
    mine.mkdir()
    (mine / "plan.html.j2").write_text("<p>{{ plan.campaign.reference }} &amp; ours</p>")
    out = tmp_path / "plan.html"
    result = runner.invoke(app, ["plan", str(SAMPLE), "--html", str(out), "--templates", str(mine)])
    assert result.exit_code == 0, result.stderr
    assert out.read_text() == "<p>QC-2027-014 &amp; ours</p>"


def test_autoescape_and_missing_folder(tmp_path: Path) -> None:
    mine = tmp_path / "t"
    mine.mkdir()
    (mine / "x.html.j2").write_text("{{ value }}")
    assert render("x.html.j2", {"value": "<b>"}, mine) == "&lt;b&gt;"
    with pytest.raises(TestplanError, match="template folder not found"):
        template_dir(tmp_path / "absent")
    assert (template_dir() / "plan.html.j2").is_file()


def test_unwritable_output_is_one_line(runner: CliRunner, tmp_path: Path) -> None:
    result = runner.invoke(app, ["plan", str(SAMPLE), "--html", str(tmp_path / "no" / "p.html")])
    assert result.exit_code == 1
    assert result.stderr.startswith(f"error: {tmp_path / 'no' / 'p.html'}: cannot write here")


def test_html_plan_shows_from_memory_as_to_verify_and_cites_clauses_cleanly(tmp_path) -> None:  # type: ignore[no-untyped-def]
    from typer.testing import CliRunner

    from testplan.cli import app

    out = tmp_path / "plan.html"
    result = CliRunner().invoke(
        app, ["plan", "sample_campaign/flood-gauge-node.toml", "--html", str(out)]
    )
    assert result.exit_code == 0, result.output
    html = out.read_text()
    assert "to verify against the current edition" in html
    assert "<td>from memory" not in html
    for stray in ("cl. Table", "cl. test method", "cl. cl."):
        assert stray not in html
