"""The printed plan: clause citations and provenance as a reader should see them."""

from __future__ import annotations

import json
from pathlib import Path

from typer.testing import CliRunner

from testplan.cli import app
from testplan.domain.plan import cite, shown_provenance

SAMPLE = str(Path(__file__).resolve().parents[1] / "sample_campaign/flood-gauge-node.toml")


def test_clause_numbers_and_named_references_cite_cleanly() -> None:
    # common practice (no source): "cl." before a clause number only
    assert cite("14.2.4 b)") == "cl. 14.2.4 b)"
    assert cite("Table 6") == "Table 6"
    assert cite("test method 2") == "test method 2"
    assert cite("12:.") == "cl. 12"


def test_from_memory_prints_as_to_verify_and_json_keeps_it(runner: CliRunner) -> None:
    # common practice (no source): a value not checked against the standard says so
    assert shown_provenance("from memory") == "to verify against the current edition"
    text = runner.invoke(app, ["plan", SAMPLE])
    assert text.exit_code == 0, text.stderr
    assert "to verify against the" in text.stdout
    assert "from memory" not in text.stdout
    for stray in ("cl. Table", "cl. test method", "():", "cl. cl."):
        assert stray not in text.stdout
    data = json.loads(runner.invoke(app, ["plan", SAMPLE, "--json"]).stdout)
    provenances = {
        p["provenance"] for proc in data["procedures"] for p in proc["parameters"].values()
    }
    assert "from memory" in provenances
