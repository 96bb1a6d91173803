"""The quantities a data logger may record for a run, each with its kind and plan unit.

``record import --map SOURCE[UNIT]=QUANTITY@EQUIPMENT`` names one of these. Values are
stored converted to the plan unit given here, which is also the unit judging uses.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Channel:
    """A loggable quantity: name, kind (see units.KINDS), plan unit and meaning."""

    name: str
    kind: str
    unit: str
    meaning: str


CHANNELS: dict[str, Channel] = {
    c.name: c
    for c in [
        Channel(
            "lowest_point_depth", "length", "mm", "water surface to the specimen's lowest point"
        ),
        Channel(
            "highest_point_depth", "length", "mm", "water surface to the specimen's highest point"
        ),
        Channel("water_temperature", "temperature", "degC", "tank or spray water temperature"),
        Channel("specimen_temperature", "temperature", "degC", "specimen surface temperature"),
        Channel("probe_force", "force", "N", "force applied by an access or object probe"),
        Channel("depression", "pressure", "kPa", "depression inside the enclosure, below ambient"),
        Channel("extraction_rate", "volume_flow", "L/h", "air drawn through the enclosure"),
        Channel("air_drawn", "volume", "L", "air drawn through the enclosure, running total"),
        Channel("flow", "volume_flow", "L/min", "water delivered by the nozzle"),
        Channel("tube_flow", "volume_flow", "L/min", "water delivered by the oscillating tube"),
        Channel("rainfall", "speed", "mm/min", "drip-box rainfall rate"),
        Channel("nozzle_pressure", "pressure", "kPa", "water pressure at the nozzle"),
        Channel("fog_collection", "volume_flow", "mL/h", "fog collected per 80 cm^2 collector"),
        Channel("solution_ph", "count", "", "pH of the salt solution or collected fog"),
        Channel("cabinet_temperature", "temperature", "degC", "salt-mist cabinet temperature"),
        Channel("humid_temperature", "temperature", "degC", "humidity-storage temperature"),
        Channel("humid_rh", "ratio", "%", "humidity-storage relative humidity"),
        Channel(
            "storage_temperature", "temperature", "degC", "standard-atmosphere storage temperature"
        ),
        Channel("storage_rh", "ratio", "%", "standard-atmosphere storage relative humidity"),
        Channel("cycle_count", "count", "cycle", "operating cycles completed on the rig"),
        Channel("torque", "torque", "N*mm", "operating torque of the mechanism"),
        Channel("test_pressure", "pressure", "mbar", "absolute pressure in a leak-test circuit"),
        Channel("insulation_resistance", "resistance", "Mohm", "insulation resistance"),
        Channel("ambient_temperature", "temperature", "degC", "laboratory air temperature"),
        Channel("ambient_humidity", "ratio", "%", "laboratory relative humidity"),
        Channel("ambient_pressure", "pressure", "hPa", "laboratory barometric pressure"),
    ]
}
