"""The plan's JSON output is validated against the schema kept in the repo."""

from __future__ import annotations

import json
from importlib import resources
from pathlib import Path
from typing import Any

import jsonschema
import pytest
from typer.testing import CliRunner

from testplan.cli import app
from tests.helpers import plan

ROOT = Path(__file__).resolve().parents[1]


def schema() -> dict[str, Any]:
    text = resources.files("testplan").joinpath("schema/plan.schema.json").read_text()
    data: dict[str, Any] = json.loads(text)
    jsonschema.Draft202012Validator.check_schema(data)
    return data


@pytest.mark.parametrize(
    "target",
    [
        {
            "code": "IP66/IP68",
            "immersion_depth": "2 m",
            "immersion_duration": "72 h",
            "service_water": "sea",
        },
        {"code": "IP20C"},
        {"code": "IPX4", "test_implied": True},
        {"code": "IP5X"},
        {"code": "IPX9K"},
        {"code": "IPXXB"},
    ],
)
def test_plans_validate(target: dict[str, Any]) -> None:
    jsonschema.validate(plan(target=target).to_json(), schema())


def test_cli_json_of_the_sample_validates(runner: CliRunner) -> None:
    result = runner.invoke(
        app, ["plan", str(ROOT / "sample_campaign/flood-gauge-node.toml"), "--json"]
    )
    assert result.exit_code == 0, result.stderr
    data = json.loads(result.stdout)
    jsonschema.validate(data, schema())
    assert data["schema_version"] == 1
    assert {p["family"] for p in data["procedures"]} == {"ingress", "salt_mist", "endurance"}
    water8 = next(p for p in data["procedures"] if p["id"] == "water-8")
    assert water8["parameters"]["declared_depth"] == {
        "value": 2.0,
        "unit": "m",
        "text": "at the lowest point, in sea water",
        "provenance": "declared",
    }
    assert "take precedence" in data["precedence_note"]


def test_schema_rejects_a_broken_plan() -> None:
    data = plan(target={"code": "IPX7"}).to_json()
    data["procedures"][0]["status"] = "maybe"
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(data, schema())
    data = plan(target={"code": "IPX7"}).to_json()
    del data["precedence_note"]
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(data, schema())
