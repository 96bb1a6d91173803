"""Build the whole plan for a campaign: ingress, salt-mist and endurance procedures."""

from __future__ import annotations

from typing import Any

from testplan.domain.campaign import Campaign
from testplan.domain.endurance import endurance_procedure
from testplan.domain.ingress import ingress_procedures
from testplan.domain.plan import Plan, Procedure
from testplan.domain.saltmist import salt_mist_procedure
from testplan.domain.schedule import lay_out
from testplan.errors import PlanningError

ORDER_NOTE = (
    "Order on one specimen: probe checks, then dust, then water tests from the lowest numeral "
    "up; inspect, dry and re-seal between successive water tests. Tests that open the specimen "
    "are marked destructive."
)


def campaign_summary(c: Campaign) -> dict[str, Any]:
    """The campaign block of the plan JSON (customer-supplied data marked as declared)."""
    d = c.device
    t = c.target
    return {
        "title": c.info.title,
        "reference": c.info.reference,
        "client": c.info.client,
        "laboratory": c.info.laboratory,
        "location": c.info.location,
        "laboratory_address": c.info.laboratory_address,
        "client_contact": c.info.client_contact,
        "decision_rule": {
            "rule": c.info.decision_rule,
            "guard_factor": c.info.guard_factor,
            "agreement": c.info.decision_rule_agreement,
        },
        "device": {
            "name": d.name,
            "maker": d.maker,
            "model": d.model,
            "height_mm": d.height_mm,
            "largest_dimension_mm": d.largest_dimension_mm,
            "surface_area_m2": d.surface_area_m2,
            "enclosure_volume_l": d.enclosure_volume_l,
            "free_volume_l": d.free_volume_l,
            "dust_category": d.dust_category,
        },
        "target": {
            "code": t.code.text,
            "immersion_depth_m": t.immersion_depth_m,
            "depth_reference": t.depth_reference,
            "immersion_duration_h": t.immersion_duration_h,
            "service_water": t.service_water,
            "test_implied": t.test_implied,
            "spray_method": t.spray_method,
            "tube_holes_4k": t.tube_holes_4k,
        },
    }


def build_procedures(c: Campaign) -> list[Procedure]:
    """All procedures of the campaign in a stable order. Raises PlanningError with a key."""
    procs = ingress_procedures(c)
    if c.salt_mist is not None:
        procs.append(salt_mist_procedure(c.salt_mist, c.acceptance.functional_check))
    for item in c.endurance:
        try:
            procs.append(endurance_procedure(item))
        except PlanningError as err:
            if err.key is None:
                err.key = f"endurance[{item.index}]"
            raise
    return procs


def build_plan(c: Campaign) -> Plan:
    """Plan the campaign. Raises PlanningError (naming the key) when it cannot be planned."""
    procs = build_procedures(c)
    notes = [ORDER_NOTE]
    if not c.target.test_implied and any(p.status == "implied" for p in procs):
        notes.append(
            "Implied numerals are listed, not tested; set test_implied = true in "
            "[target] to plan them too."
        )
    try:
        schedule = lay_out(c, procs)
    except OverflowError:
        raise PlanningError(
            "the calendar would run past the year 9999",
            key="calendar.start",
            fix="check the durations, rates and cycle counts",
        ) from None
    if schedule is None:
        return Plan(campaign=campaign_summary(c), procedures=tuple(procs), notes=tuple(notes))
    if schedule.unallocated:
        notes.append("Planned but in no leg: " + ", ".join(schedule.unallocated) + ".")
    return Plan(
        campaign=campaign_summary(c),
        procedures=tuple(procs),
        notes=tuple(notes),
        specimens=tuple(s.to_json() for s in schedule.specimens),
        schedule=schedule.to_json(),
    )
