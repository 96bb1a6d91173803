"""The plan's building blocks: parameters, criteria, procedures and the plan itself.

``Plan.to_json()`` gives the versioned JSON shape validated by
``testplan/schema/plan.schema.json`` (``schema_version`` below).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Literal

PLAN_SCHEMA_VERSION = 1

Provenance = Literal["computed", "declared", "confirmed", "from memory"]
When = Literal["whole_run", "at_start", "per_period", "at_checkpoints", "at_end", "outcome"]
Comparison = Literal[">=", "<=", "between", "none_found", "no_harmful", "pass"]

PRECEDENCE_NOTE = (
    "This plan summarises the methods for planning. The current edition of the governing "
    "standard (with its amendments), the product standard, local codes and accredited or "
    "licensed practice take precedence over any value or wording here."
)


def _num(x: float | int | str | None) -> str:
    """A number as a person reads it: whole numbers in full, others to 4 significant digits."""
    if x is None:
        return "-"
    if isinstance(x, str):
        return x
    if float(x).is_integer() and abs(x) < 1e12:
        return str(int(x))
    return f"{x:.4g}"


@dataclass(frozen=True)
class Parameter:
    """One planned parameter: a value or a min/max range, with unit and provenance."""

    name: str
    value: float | int | str | None = None
    min: float | None = None
    max: float | None = None
    unit: str | None = None
    tolerance: str | None = None
    text: str | None = None
    clause: str | None = None
    provenance: Provenance = "confirmed"

    def to_json(self) -> dict[str, Any]:
        out: dict[str, Any] = {}
        if self.value is not None:
            out["value"] = self.value
        if self.min is not None:
            out["min"] = self.min
        if self.max is not None:
            out["max"] = self.max
        out["unit"] = self.unit
        for key in ("tolerance", "text", "clause"):
            val = getattr(self, key)
            if val is not None:
                out[key] = val
        out["provenance"] = self.provenance
        return out

    def shown(self) -> str:
        """The value as a person reads it: '1000 mm', '40 to 60 volume/h', '+/-5 %'."""

        unit = f" {self.unit}" if self.unit else ""
        if self.value is not None:
            core = f"{_num(self.value)}{unit}"
        elif self.min is not None and self.max is not None:
            core = f"{_num(self.min)} to {_num(self.max)}{unit}"
        elif self.min is not None:
            core = f">= {_num(self.min)}{unit}"
        elif self.max is not None:
            core = f"<= {_num(self.max)}{unit}"
        else:
            core = ""
        if self.tolerance:
            core = f"{core} ({self.tolerance})" if core else self.tolerance
        if self.text:
            core = f"{core}; {self.text}" if core else self.text
        return core


@dataclass(frozen=True)
class Criterion:
    """A machine-checkable criterion: which quantity, how compared, when evaluated."""

    id: str
    quantity: str
    comparison: Comparison
    when: When
    unit: str | None = None
    min: float | None = None
    max: float | None = None
    text: str | None = None
    clause: str | None = None
    phase: str | None = None  # a phase of the procedure's schedule (domain/phases.py)

    def to_json(self) -> dict[str, Any]:
        limits: dict[str, Any] = {"unit": self.unit}
        if self.min is not None:
            limits["min"] = self.min
        if self.max is not None:
            limits["max"] = self.max
        out: dict[str, Any] = {
            "id": self.id,
            "quantity": self.quantity,
            "comparison": self.comparison,
            "limits": limits,
            "when": self.when,
        }
        if self.text is not None:
            out["text"] = self.text
        if self.clause is not None:
            out["clause"] = self.clause
        if self.phase is not None:
            out["phase"] = self.phase
        return out

    def shown(self) -> str:
        """One readable line, e.g. 'immersion_depth >= 2.04 m over the whole run'."""
        when = {
            "whole_run": "over the whole run",
            "at_start": "at the start",
            "per_period": "in every averaging period",
            "at_checkpoints": "at every checkpoint",
            "at_end": "at the end",
            "outcome": "after the test",
        }[self.when]
        unit = f" {self.unit}" if self.unit else ""
        if self.comparison == ">=":
            rule = f">= {_num(self.min)}{unit}"
        elif self.comparison == "<=":
            rule = f"<= {_num(self.max)}{unit}"
        elif self.comparison == "between":
            rule = f"within {_num(self.min)} to {_num(self.max)}{unit}"
        elif self.comparison == "none_found":
            rule = "none found"
        elif self.comparison == "no_harmful":
            rule = "none harmful"
        else:
            rule = self.comparison
        if self.phase is not None:
            when = f"in every {self.phase.replace('_', ' ')} phase"
        extra = f" ({self.text})" if self.text else ""
        return f"{self.quantity} {rule} {when}{extra}"


@dataclass(frozen=True)
class Procedure:
    """One test procedure for this specimen, planned or listed as implied."""

    id: str
    family: Literal["ingress", "salt_mist", "endurance"]
    group: Literal["probe", "dust", "water", "salt_mist", "endurance"]
    code: str
    title: str
    standard: str
    edition: str
    clause: str
    status: Literal["planned", "implied"]
    parameters: tuple[Parameter, ...] = ()
    criteria: tuple[Criterion, ...] = ()
    cautions: tuple[str, ...] = ()
    specimen_state: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()
    implied_by: str | None = None
    destructive: bool = False
    duration_h: float = 0.0
    order: int = 0

    def parameter(self, name: str) -> Parameter:
        """The parameter called ``name``; KeyError if the procedure has none."""
        for p in self.parameters:
            if p.name == name:
                return p
        raise KeyError(name)

    def to_json(self) -> dict[str, Any]:
        return {
            "id": self.id,
            "family": self.family,
            "group": self.group,
            "code": self.code,
            "title": self.title,
            "standard": {"name": self.standard, "edition": self.edition},
            "clause": self.clause,
            "status": self.status,
            "implied_by": self.implied_by,
            "destructive": self.destructive,
            "duration_h": round(self.duration_h, 6),
            "parameters": {p.name: p.to_json() for p in self.parameters},
            "criteria": [c.to_json() for c in self.criteria],
            "specimen_state": list(self.specimen_state),
            "cautions": list(self.cautions),
            "notes": list(self.notes),
        }


@dataclass(frozen=True)
class Plan:
    """The whole plan for one campaign."""

    campaign: dict[str, Any]
    procedures: tuple[Procedure, ...]
    notes: tuple[str, ...] = ()
    specimens: tuple[dict[str, Any], ...] | None = None
    schedule: dict[str, Any] | None = None
    closing_note: str = field(default=PRECEDENCE_NOTE)

    def procedure(self, pid: str) -> Procedure:
        """The procedure with id ``pid``; KeyError if absent."""
        for p in self.procedures:
            if p.id == pid:
                return p
        raise KeyError(pid)

    def to_json(self) -> dict[str, Any]:
        out: dict[str, Any] = {
            "schema_version": PLAN_SCHEMA_VERSION,
            "campaign": self.campaign,
            "procedures": [p.to_json() for p in self.procedures],
            "notes": list(self.notes),
        }
        if self.specimens is not None:
            out["specimens"] = list(self.specimens)
        if self.schedule is not None:
            out["schedule"] = self.schedule
        out["precedence_note"] = self.closing_note
        return out


FROM_MEMORY_SHOWN = "to verify against the current edition"


def cite(clause: str) -> str:
    """``cl. 14.2.4`` for a clause number; a table, figure or method reference as written."""
    text = clause.strip().rstrip(".:")
    return f"cl. {text}" if text[:1].isdigit() else text


def shown_provenance(provenance: str) -> str:
    """How a parameter's provenance reads on the plan (the JSON keeps the stored value)."""
    return FROM_MEMORY_SHOWN if provenance == "from memory" else provenance
