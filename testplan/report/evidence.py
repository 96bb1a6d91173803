"""Bench observations as the report prints them: every field of every observation, in
words, with its unit (SI typography is applied with the rest of the context)."""

from __future__ import annotations

import json
from typing import Any

from testplan.domain.observations import KINDS

# Field names as a reader says them, where the stored key is not already plain words.
FIELD_WORDS = {
    "live_parts": "live parts",
    "start_pressure": "start pressure",
    "end_pressure": "end pressure",
    "start_temperature": "start temperature",
    "end_temperature": "end temperature",
    "barometric_pressure": "barometric pressure",
    "dead_volume": "dead volume",
    "test_voltage": "test voltage",
    "where": "where",
    "amount": "how much",
}

KIND_WORDS = {
    "leak_test": "leak test",
    "probe_entry": "probe entry",
    "mass": "mass before and after",
    "torque": "torque checkpoint",
    "note": "operator's note",
}


def _value(spec_kind: str, unit: str | None, value: Any) -> str:
    if spec_kind == "bool":
        return "yes" if value else "no"
    if isinstance(value, int | float) and not isinstance(value, bool):
        # as recorded, to six significant digits (a mass to 0.01 g must keep its digits)
        return f"{value:.6g}" + (f" {unit}" if unit else "")
    return str(value)


def observation_text(kind: str, data: dict[str, Any]) -> str:
    """Every field of one observation as 'name: value unit', in the kind's field order,
    then any field the kind does not list (kept, never dropped)."""
    specs = KINDS.get(kind, ())
    if kind == "note" and set(data) == {"text"}:
        return str(data["text"])
    parts = []
    for spec in specs:
        if spec.name in data and data[spec.name] is not None:
            name = FIELD_WORDS.get(spec.name, spec.name.replace("_", " "))
            parts.append(f"{name}: {_value(spec.kind, spec.unit, data[spec.name])}")
    known = {s.name for s in specs}
    for name, value in sorted(data.items()):
        if name not in known and value is not None:
            parts.append(f"{name.replace('_', ' ')}: {value}")
    if (
        kind == "mass"
        and isinstance(data.get("before"), float | int)
        and isinstance(data.get("after"), float | int)
    ):
        change = float(data["after"]) - float(data["before"])
        parts.append(f"change: {change:+.6g} g")
    return "; ".join(parts)


def observation_rows(observations: list[tuple[Any, str | None, str | None]]) -> list[list[str]]:
    """(observation, specimen serial, who recorded it) -> rows of specimen, checkpoint, kind,
    what was found, recorded (when and by whom)."""
    rows = []
    for o, serial, who in observations:
        data = json.loads(o.data_json)
        rows.append(
            [
                serial or "whole run",
                o.checkpoint or "-",
                KIND_WORDS.get(o.kind, o.kind.replace("_", " ")),
                observation_text(o.kind, data),
                f"{o.recorded_at:%Y-%m-%d %H:%M}" + (f", {who}" if who else ""),
            ]
        )
    return rows
