"""Safety cautions, in plain words, keyed by hazard. Plans and reports print them per procedure."""

from __future__ import annotations

CAUTIONS: dict[str, str] = {
    "general": (
        "Assess the risks before the test; trained staff only; the method standards do not "
        "cover every safety issue, so local regulations and the lab's own practice apply."
    ),
    "live_parts_probe": (
        "Probe tests near live parts: indicate contact with a 40-50 V signal circuit and lamp, "
        "not with the mains; isolate the specimen's own supply first."
    ),
    "water_live": (
        "Water and live parts: keep the specimen de-energised unless the product standard "
        "requires it to operate; any supply through an RCD or isolating transformer, "
        "safety extra-low voltage where possible; keep connectors out of the water; bond and "
        "earth metal apparatus; de-energise before handling or opening. Sealed batteries in "
        "water can short, vent or give off hydrogen."
    ),
    "jets": (
        "Water jets carry high momentum: aim only at the specimen, wear eye protection, "
        "secure hoses against whipping, keep floors drained against slips."
    ),
    "hot_jets": (
        "Hot high-pressure jets (about 80 degC at several MPa): scalds, injection injury and "
        "hose or fitting rupture; run in an interlocked booth, operate remotely, use "
        "pressure-rated hoses and face and hand protection."
    ),
    "immersion": (
        "Immersion tanks: guard against falls into deep tanks, use lifting aids for heavy "
        "specimens, wipe up spills to prevent slips."
    ),
    "pressure_vessel": (
        "Pressure vessels: use a vessel rated for the pressure with a relief valve and a "
        "calibrated gauge; never exceed the rating; fill with water rather than gas; "
        "depressurise fully before opening."
    ),
    "talc": (
        "Respirable talc: use an asbestos-free grade, local exhaust and a P2/P3 respirator; "
        "filter the vacuum-pump exhaust; let the dust settle before opening the chamber; clean "
        "with a HEPA vacuum, never compressed air; follow occupational-health rules."
    ),
    "vehicle_dust": (
        "Test dust is respirable: local exhaust, P2/P3 respirator, let it settle before opening, "
        "HEPA cleaning."
    ),
    "salt_aerosol": (
        "Salt aerosol is corrosive and irritant: let the mist clear and ventilate before "
        "opening the cabinet; gloves and eye protection; handle acids for pH adjustment and "
        "copper salts only with chemical-handling training and dispose of effluent correctly."
    ),
    "chamber_heat": (
        "Chamber heat and humidity: hot surfaces and scalding condensate; compressed-air lines "
        "under pressure."
    ),
    "saline_electrics": (
        "Electrical equipment near the cabinet: keep supplies and instruments out of the "
        "saline mist and drips; RCD-protected supplies."
    ),
    "moving_rig": (
        "Cycling rigs: entanglement, crushing and pinch points, fragments on fatigue fracture "
        "and stored spring energy; fixed or interlocked guards, emergency stop, lock out before "
        "reaching in, shields for fracture debris, guard against unexpected restart."
    ),
}


def cautions(*keys: str) -> tuple[str, ...]:
    """The caution texts for ``keys``, always starting with the general one."""
    ordered = ["general", *[k for k in keys if k != "general"]]
    return tuple(CAUTIONS[k] for k in ordered)
