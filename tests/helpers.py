"""Build campaigns in memory for domain tests."""

from __future__ import annotations

import tomllib
from typing import Any

from testplan.domain.campaign import Campaign
from testplan.domain.plan import Plan
from testplan.domain.planner import build_plan
from testplan.reader import campaign_from_dict
from tests.conftest import BASE


def campaign(**sections: dict[str, Any]) -> Campaign:
    """BASE campaign with each given section updated (a None value removes the key)."""
    data = tomllib.loads(BASE)
    for name, values in sections.items():
        sec = data.setdefault(name, {})
        for key, value in values.items():
            if value is None:
                sec.pop(key, None)
            else:
                sec[key] = value
    return campaign_from_dict(data)


def plan(**sections: dict[str, Any]) -> Plan:
    return build_plan(campaign(**sections))


def value(p: Plan, pid: str, name: str) -> Any:
    return p.procedure(pid).parameter(name).value
