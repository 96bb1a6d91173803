"""A run's phase schedule, from its procedure's parameters.

A cyclic salt-mist procedure (IEC 60068-2-52) has parameters ``phase_<i>_<name>`` (hours,
in cycle order) and ``cycles``; a continuous one (ISO 9227, ASTM B117, IEC 60068-2-11) has
one phase, ``exposure``, of ``duration`` hours. Other procedures have no phase schedule
(their conditions are judged over the run or its exposure).

Boundaries: a phase holds the readings from its start up to, not including, its end, so a
reading at the very instant one phase gives way to the next belongs to the next; the last
phase of the schedule also holds its end instant.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Any

_PHASE = re.compile(r"^phase_(\d+)_(.+)$")


@dataclass(frozen=True)
class PhaseSpan:
    """One phase of one cycle, in hours from the run's start; ``last`` closes its end."""

    name: str
    cycle: int
    start_h: float
    end_h: float
    last: bool = False

    def shown(self) -> str:
        """'the salt spray phase of cycle 2', or 'the exposure phase' for a single phase."""
        where = f" of cycle {self.cycle}" if self.cycle else ""
        return f"the {self.name.replace('_', ' ')} phase{where}"


def schedule(procedure: dict[str, Any]) -> list[PhaseSpan]:
    """The phase schedule of a procedure (plan JSON shape), earliest first; [] for none."""
    params: dict[str, Any] = procedure.get("parameters", {})
    cycle: list[tuple[int, str, float]] = []
    for name, p in params.items():
        m = _PHASE.match(name)
        if m and isinstance(p.get("value"), int | float):
            cycle.append((int(m.group(1)), m.group(2), float(p["value"])))
    cycle.sort()
    out: list[PhaseSpan] = []
    if cycle:
        cycles = params.get("cycles", {}).get("value")
        if not isinstance(cycles, int | float) or cycles < 1:
            return []
        t = 0.0
        for n in range(1, int(cycles) + 1):
            for _, name, hours in cycle:
                out.append(PhaseSpan(name, n, t, t + hours))
                t += hours
    elif procedure.get("family") == "salt_mist":
        hours = params.get("duration", {}).get("value")
        if isinstance(hours, int | float) and hours > 0:
            out.append(PhaseSpan("exposure", 0, 0.0, float(hours)))
    if out:
        end = out[-1]
        out[-1] = PhaseSpan(end.name, end.cycle, end.start_h, end.end_h, last=True)
    return out


def phase_names(procedure: dict[str, Any]) -> list[str]:
    """The distinct phase names of a procedure's schedule, in order of first occurrence."""
    return list(dict.fromkeys(p.name for p in schedule(procedure)))
