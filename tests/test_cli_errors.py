"""Bad campaign files: one line naming file, line and key; exit 1; no traceback."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import pytest
from typer.testing import CliRunner

from testplan.cli import app
from tests.conftest import BASE


def run_plan(runner: CliRunner, path: Path) -> tuple[int, str, str]:
    result = runner.invoke(app, ["plan", str(path)])
    return result.exit_code, result.stdout, result.stderr


@pytest.mark.parametrize(
    ("edits", "expected"),
    [
        ({"device.height": None}, "device: missing key 'height' in [device]"),
        (
            {"device.heigth": '"310 mm"'},
            "device.heigth: unknown key 'heigth' in [device] (did you mean 'height'?)",
        ),
        ({"device.height": "310"}, "device.height: expected a quantity string"),
        ({"device.height": '"310"'}, "device.height: '310' has no unit"),
        ({"device.height": '"5 kg"'}, "device.height: '5 kg' is not a length"),
        ({"device.height": '"310 mmm"'}, "device.height: unknown unit 'mmm'"),
        ({"target.code": '"IPX-8"'}, "target.code: 'IPX-8': an IP code has no hyphen"),
        (
            {"target.code": '"IP68"'},
            "target.immersion_depth: numeral 8 needs the declared immersion depth",
        ),
        (
            {"device.surface_area": None, "target.code": '"IP65"'},
            "device.surface_area: IPX5 needs the external surface area",
        ),
        ({"target.service_water": '"salt"'}, "target.service_water: 'salt' is not one of"),
        ({"target.test_implied": '"yes"'}, "target.test_implied: expected true or false"),
        ({"campaign.reference": '""'}, "campaign.reference: expected non-empty text"),
    ],
)
def test_bad_file_one_line(
    runner: CliRunner,
    write_campaign: Callable[..., Path],
    edits: dict[str, str | None],
    expected: str,
) -> None:
    path = write_campaign(edits)
    code, out, err = run_plan(runner, path)
    assert code == 1
    assert out == ""
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith(f"error: {path}:")
    assert expected in lines[0]
    assert "Traceback" not in err


def test_wrong_schema_version(runner: CliRunner, write_campaign: Callable[..., Path]) -> None:
    path = write_campaign(text=BASE.replace("schema = 1", "schema = 2"))
    code, _, err = run_plan(runner, path)
    assert code == 1
    assert err.strip() == (
        f"error: {path}:1: schema: this testplan reads campaign schema 1, the file says 2"
    )


def test_line_number_points_at_the_key(
    runner: CliRunner, write_campaign: Callable[..., Path]
) -> None:
    path = write_campaign({"device.height": '"5 kg"'})
    line = next(i for i, t in enumerate(path.read_text().splitlines(), 1) if t.startswith("height"))
    _, _, err = run_plan(runner, path)
    assert err.startswith(f"error: {path}:{line}: device.height: ")


def test_toml_syntax_error(runner: CliRunner, write_campaign: Callable[..., Path]) -> None:
    path = write_campaign(extra="[acceptance]\nwater_ingress = none\n")
    code, _, err = run_plan(runner, path)
    assert code == 1
    n = len(path.read_text().splitlines())
    assert err.startswith(f"error: {path}:{n}:")
    assert "TOML syntax error" in err


def test_missing_file(runner: CliRunner, tmp_path: Path) -> None:
    code, _, err = run_plan(runner, tmp_path / "nope.toml")
    assert code == 1
    assert err.strip() == f"error: {tmp_path / 'nope.toml'}: no such file"


def test_not_utf8(runner: CliRunner, tmp_path: Path) -> None:
    path = tmp_path / "latin.toml"
    path.write_bytes(b'schema = 1\n[campaign]\ntitle = "Gr\xfcn"\n')
    code, _, err = run_plan(runner, path)
    assert code == 1 and f"{path}:3: is not UTF-8 text" in err


def test_unknown_section_did_you_mean(
    runner: CliRunner, write_campaign: Callable[..., Path]
) -> None:
    path = write_campaign(extra='[acceptanse]\nwater_ingress = "none"\n')
    code, _, err = run_plan(runner, path)
    assert code == 1
    assert "unknown section or key 'acceptanse' (did you mean 'acceptance'?)" in err


def test_usage_error_exits_2(runner: CliRunner) -> None:
    result = runner.invoke(app, ["plan"])
    assert result.exit_code == 2
