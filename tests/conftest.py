"""Shared fixtures: campaign files written into tmp_path from a small base campaign."""

from __future__ import annotations

import re
from collections.abc import Callable
from pathlib import Path

import pytest
from typer.testing import CliRunner

BASE = """\
schema = 1

[campaign]
title = "Test campaign"
reference = "T-001"
client = "Client Ltd"
laboratory = "Test Lab"

[device]
name = "Enclosure"
height = "310 mm"
largest_dimension = "310 mm"
surface_area = "0.24 m^2"
enclosure_volume = "2.4 L"

[target]
code = "IP67"
"""


def set_key(text: str, section: str, key: str, value: str | None) -> str:
    """Set (or with None remove) ``key = value`` in ``[section]`` of TOML text."""
    lines = text.splitlines()
    out: list[str] = []
    in_section = False
    done = False
    for line in lines:
        header = re.match(r"^\[(.+)\]\s*$", line)
        if header:
            if in_section and not done and value is not None:
                out.append(f"{key} = {value}")
                done = True
            in_section = header[1] == section
        elif in_section and re.match(rf"^{re.escape(key)}\s*=", line):
            done = True
            if value is not None:
                out.append(f"{key} = {value}")
            continue
        out.append(line)
    if not done and value is not None:
        if not in_section:
            out.append(f"[{section}]")
        out.append(f"{key} = {value}")
    return "\n".join(out) + "\n"


@pytest.fixture
def write_campaign(tmp_path: Path) -> Callable[..., Path]:
    """Write a campaign: BASE (or ``text``) plus ``{"section.key": "toml value"}`` edits."""

    def write(
        edits: dict[str, str | None] | None = None, *, text: str = BASE, extra: str = ""
    ) -> Path:
        for dotted, value in (edits or {}).items():
            section, key = dotted.rsplit(".", 1)
            text = set_key(text, section, key, value)
        path = tmp_path / "campaign.toml"
        path.write_text(text + extra, encoding="utf-8")
        return path

    return write


@pytest.fixture
def runner() -> CliRunner:
    return CliRunner()
