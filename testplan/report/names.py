"""Words a reader sees for the keys the records use: criteria, logged channels and plan
parameters (``torque_cycle0`` prints as "torque at cycle 0", ``humid_rh`` as "relative
humidity, humid phase"). Stored keys never change; only the printed name does.

A key with no entry below is printed from its parts: underscores become spaces, a known
abbreviation becomes its word ("rh" relative humidity, "ph" pH), a trailing number after
"cycle" reads "at cycle N" and a ``logged_`` prefix reads "(logged, no band)".
"""

from __future__ import annotations

import re

# Whole keys (a criterion's part after the procedure id, a channel, a parameter).
NAMES: dict[str, str] = {
    # criteria
    "contact": "probe contact with hazardous parts",
    "corrosion": "corrosion rating",
    "cycles": "operating cycles",
    "depression": "depression inside the enclosure",
    "depth": "lowest-point depth",
    "top_depth": "highest-point depth",
    "duration": "duration",
    "entry": "probe entry",
    "failure_cycles": "cycles at failure",
    "failures": "failures",
    "fallout": "fog collection",
    "flow": "water flow",
    "force": "probe force",
    "function": "function check",
    "humid_rh": "relative humidity, humid phase",
    "humid_temperature": "temperature, humid phase",
    "ingress": "water or dust ingress",
    "ingress_retest": "ingress at the retest",
    "insulation": "insulation resistance",
    "dielectric": "dielectric strength",
    "leak": "leak rate",
    "ph": "solution pH",
    "rainfall": "rainfall rate",
    "rate": "flow rate",
    "seal_retest": "seal retest (ingress)",
    "spray_temperature": "temperature, spray phase",
    "water_temperature": "water temperature",
    "torque": "operating torque",
    "torque_cycle0": "operating torque at cycle 0",
    "volumes": "air drawn (enclosure volumes)",
    # logged channels
    "lowest_point_depth": "lowest-point depth",
    "highest_point_depth": "highest-point depth",
    "specimen_temperature": "specimen surface temperature",
    "probe_force": "probe force",
    "extraction_rate": "air extraction rate",
    "air_drawn": "air drawn",
    "tube_flow": "oscillating-tube flow",
    "nozzle_pressure": "nozzle pressure",
    "fog_collection": "fog collection",
    "solution_ph": "solution pH",
    "cabinet_temperature": "cabinet temperature",
    "storage_temperature": "storage temperature",
    "storage_rh": "storage relative humidity",
    "cycle_count": "cycle count",
    "test_pressure": "leak-test pressure",
    "insulation_resistance": "insulation resistance",
    "ambient_temperature": "laboratory air temperature",
    "ambient_humidity": "laboratory relative humidity",
    "ambient_pressure": "barometric pressure",
    # plan parameters
    "allowed_failures": "failures allowed",
    "checkpoints": "function checkpoints (cycles)",
    "collection_period": "collection period",
    "confidence": "confidence level",
    "cycle_length": "cycle length",
    "declared_depth": "declared depth",
    "declared_duration": "declared duration",
    "depression_at_limit": "depression at the limit",
    "depression_max": "largest depression",
    "double_swing_time": "double swing time",
    "duration_max": "longest duration",
    "failure_definition": "failure definition",
    "flow_per_hole": "flow per hole",
    "fresh_water_density": "fresh-water density",
    "hole_diameter": "hole diameter",
    "indicator_circuit": "indicator circuit",
    "normal_force": "normal force",
    "nozzle_diameter": "nozzle diameter",
    "open_holes": "open holes",
    "operations_per_cycle": "operations per cycle",
    "phase_1_salt_spray": "phase 1, salt spray",
    "phase_2_humid_storage": "phase 2, humid storage",
    "pressure_at_lowest_point": "pressure at the lowest point",
    "pressure_vessel_alternative": "pressure-vessel alternative",
    "probe_diameter": "probe diameter",
    "probe_length": "probe length",
    "rated_cycles": "rated cycles",
    "reliability": "reliability target",
    "rig_specimens": "specimens on the rig",
    "rig_time": "rig time",
    "rinse_and_recovery": "rinse and recovery",
    "sea_lowest_point_depth": "lowest-point depth in sea water",
    "seawater_density": "sea-water density",
    "shear_modulus": "shear modulus",
    "spring_rate": "spring rate",
    "success_run_specimens": "specimens for a zero-failure test",
    "talc_concentration": "talc concentration",
    "talc_fineness": "talc fineness",
    "talc_reuse_max": "talc reuse, at most",
    "test_cycles": "test cycles",
    "test_cycles_one_failure": "test cycles, one failure allowed",
    "test_cycles_zero_failures": "test cycles, zero failures",
    "test_dust": "test dust",
    "time_per_position": "time per position",
    "torque_band": "torque band",
    "torque_tolerance": "torque tolerance",
    "total_duration": "total duration",
    "tube_radius": "tube radius",
    "turntable_eccentricity": "turntable eccentricity",
    "turntable_speed": "turntable speed",
    "vacuum_port": "vacuum port",
    "water_temperature_difference": "water minus specimen temperature",
    "water_specimen_difference": "water minus specimen temperature",
    "weibull_shape": "Weibull shape parameter",
}

# Parts of a key printed as a word of their own.
PARTS: dict[str, str] = {"rh": "relative humidity", "ph": "pH", "ir": "insulation resistance"}

_CYCLE_N = re.compile(r"^(?P<head>.*?)_?cycle(?P<n>\d+)$")


def words(key: object) -> str:
    """The printed name of a criterion, channel or parameter key (the part after a
    procedure id's dot, when given a full criterion id)."""
    text = str(key)
    if "." in text:
        text = text.rsplit(".", 1)[1]
    if text in NAMES:
        return NAMES[text]
    if text.startswith("logged_"):
        return f"{words(text[len('logged_') :])} (logged, no band)"
    m = _CYCLE_N.match(text)
    if m:
        return f"{words(m['head'])} at cycle {m['n']}"
    return " ".join(PARTS.get(p, p) for p in text.split("_") if p)


def criterion_words(key: object, quantity: str | None = None) -> str:
    """The printed name of a criterion: its own entry, else the quantity it judges (a
    generic key such as ``temperature`` reads as the cabinet or water quantity it is)."""
    text = str(key).rsplit(".", 1)[-1]
    if text in NAMES or text.startswith("logged_") or _CYCLE_N.match(text) or not quantity:
        return words(text)
    return words(quantity)
