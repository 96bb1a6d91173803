"""Quantities with units: the per-key dimension table and the parser.

Every quantity in a campaign file is a string such as ``"310 mm"`` or ``"6.5 ft"``.
``parse_quantity`` checks it against the dimension its key expects and returns a
plain float in the key's plan unit, so the rest of the domain works with floats.

The units library (pint) is imported on first use only, so ``testplan --help``
stays light. Two of its defaults are changed: ``cycle`` is a plain count of
operating cycles (pint's own is an angle of one turn), and temperatures are
offset units, so a temperature *difference* is converted through ``delta_degC``.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from functools import lru_cache
from typing import TYPE_CHECKING, Any

from testplan.errors import QuantityError

if TYPE_CHECKING:  # pragma: no cover
    import pint


@dataclass(frozen=True)
class Kind:
    """A physical kind of quantity: its pint dimensionality and a readable name."""

    name: str
    dimensionality: str
    example: str


KINDS: dict[str, Kind] = {
    "length": Kind("length", "[length]", "310 mm"),
    "area": Kind("area", "[length] ** 2", "0.24 m^2"),
    "volume": Kind("volume", "[length] ** 3", "2.4 L"),
    "time": Kind("time", "[time]", "72 h"),
    "angle": Kind("angle", "angle", "120 deg"),
    "rate": Kind("rate", "1 / [time]", "10 cycle/min"),
    "pressure": Kind("pressure", "[mass] / [length] / [time] ** 2", "69 GPa"),
    "ratio": Kind("ratio", "ratio", "20 %"),
    "torque": Kind("torque", "[length] ** 2 * [mass] / [time] ** 2", "2.5 N*m"),
    "force": Kind("force", "[length] * [mass] / [time] ** 2", "10 N"),
    "leak_rate": Kind("leak_rate", "[length] ** 2 * [mass] / [time] ** 3", "1e-3 mbar*L/s"),
    "resistance": Kind(
        "resistance", "[length] ** 2 * [mass] / [current] ** 2 / [time] ** 3", "100 Mohm"
    ),
    "temperature": Kind("temperature", "[temperature]", "23 degC"),
    "temperature_difference": Kind("temperature_difference", "[temperature]", "5 K"),
    "mass_concentration": Kind("mass_concentration", "[mass] / [length] ** 3", "2 kg/m^3"),
    "volume_flow": Kind("volume_flow", "[length] ** 3 / [time]", "100 L/min"),
    "speed": Kind("speed", "[length] / [time]", "1 mm/min"),
    "mass": Kind("mass", "[mass]", "1.2 kg"),
    "voltage": Kind("voltage", "[length] ** 2 * [mass] / [current] / [time] ** 3", "500 V"),
    "count": Kind("count", "dimensionless", "1000 cycle"),
}


@dataclass(frozen=True)
class KeyUnit:
    """What one campaign-file key expects: its kind and the unit the plan uses for it."""

    key: str
    kind: str
    plan_unit: str
    meaning: str


# The contract for quantity keys. Shown by `testplan plan --help` and in README.
KEY_UNITS: dict[str, KeyUnit] = {
    k.key: k
    for k in [
        KeyUnit("device.height", "length", "mm", "vertical extent in the immersed position"),
        KeyUnit("device.largest_dimension", "length", "mm", "largest overall dimension"),
        KeyUnit("device.surface_area", "area", "m^2", "external area to be sprayed"),
        KeyUnit("device.enclosure_volume", "volume", "L", "internal volume (dust extraction)"),
        KeyUnit("device.free_volume", "volume", "L", "internal air volume (leak maths)"),
        KeyUnit("device.gland_torque", "torque", "N*m", "cable-gland tightening torque"),
        KeyUnit("target.immersion_depth", "length", "m", "declared depth for numeral 8"),
        KeyUnit("target.immersion_duration", "time", "h", "declared duration for numeral 8"),
        KeyUnit("vehicle_dust.duration", "time", "h", "ISO 20653 5K/6K dust test duration"),
        KeyUnit(
            "vehicle_dust.concentration",
            "mass_concentration",
            "kg/m^3",
            "ISO 20653 5K/6K dust concentration",
        ),
        KeyUnit("acceptance.leak_rate_max", "leak_rate", "mbar*L/s", "pressure-decay limit"),
        KeyUnit("acceptance.insulation_resistance_min", "resistance", "Mohm", "after water tests"),
        KeyUnit("salt_mist.duration", "time", "h", "continuous salt-mist exposure"),
        KeyUnit("endurance.travel", "angle", "deg", "total travel of one operation"),
        KeyUnit("endurance.rate", "rate", "1/min", "rig speed in cycles per minute"),
        KeyUnit("endurance.friction_radius", "length", "mm", "effective friction radius"),
        KeyUnit("endurance.spring_wire", "length", "mm", "spring wire diameter"),
        KeyUnit("endurance.spring_mean_diameter", "length", "mm", "spring mean coil diameter"),
        KeyUnit("endurance.spring_deflection", "length", "mm", "spring deflection in use"),
        KeyUnit("endurance.shear_modulus", "pressure", "GPa", "spring material shear modulus"),
        KeyUnit("endurance.torque_tolerance", "ratio", "%", "band around the cycle-0 torque"),
        KeyUnit("calendar.between_tests", "time", "h", "inspect, dry and re-seal between tests"),
    ]
}

_NUMBER = re.compile(
    r"^\s*(?P<num>[-+]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][-+]?\d+)?)\s*(?P<unit>.*?)\s*$"
)


@lru_cache(maxsize=1)
def registry() -> pint.UnitRegistry[Any]:
    """The one unit registry, built on first use (importing pint costs ~0.2 s)."""
    import pint

    try:  # pint keeps its parsed definitions in the user's cache folder: 10x faster start
        ureg: pint.UnitRegistry[Any] = pint.UnitRegistry(
            on_redefinition="ignore", autoconvert_offset_to_baseunit=False, cache_folder=":auto:"
        )
    except Exception:  # an unwritable cache folder must not stop the tool
        ureg = pint.UnitRegistry(on_redefinition="ignore", autoconvert_offset_to_baseunit=False)
    # An operating cycle is a count, not pint's angle of one turn.
    ureg.define("cycle = 1 = cyc")
    ureg.define("operation = 1 = op")
    return ureg


def _matches(q: Any, kind: Kind) -> bool:
    ureg = registry()
    if kind.dimensionality == "angle":
        root = ureg.get_root_units(q.units)[1]
        return str(root) == "radian"
    if kind.dimensionality == "dimensionless":
        return bool(q.dimensionless)
    if kind.dimensionality == "ratio":
        return bool(q.dimensionless) and str(ureg.get_root_units(q.units)[1]) == "dimensionless"
    return bool(q.dimensionality == ureg.get_dimensionality(kind.dimensionality))


def parse_quantity(text: object, kind: str, unit: str, *, key: str = "") -> float:
    """Parse ``"<number> <unit>"`` of the given kind and return its value in ``unit``.

    Raises QuantityError (naming ``key``) for a non-string, a bare number, an unknown
    unit, a non-finite number or the wrong dimension. Temperature differences given
    in degC or degF are read as differences, not as points on the scale.
    """
    expected = KINDS[kind]
    if isinstance(text, bool) or not isinstance(text, str):
        raise QuantityError(
            f'expected a quantity string such as "{expected.example}", got {text!r}',
            key=key,
            fix="write the number and its unit in quotes",
        )
    match = _NUMBER.match(text)
    if match is None:
        raise QuantityError(
            f"cannot read {text!r} as a quantity; expected a number then a unit, "
            f'e.g. "{expected.example}"',
            key=key,
        )
    value = float(match["num"])
    unit_text = match["unit"]
    if not math.isfinite(value):
        raise QuantityError(f"{text!r} is not a finite number", key=key)
    if not unit_text:
        raise QuantityError(
            f"{text!r} has no unit; a bare number is ambiguous",
            key=key,
            fix=f'write it with its {expected.name} unit, e.g. "{expected.example}"',
        )
    import pint

    ureg = registry()
    try:
        units = ureg.parse_units(unit_text.replace("%", "percent"))
    except (pint.errors.PintError, ValueError, TypeError, AttributeError, SyntaxError) as err:
        raise QuantityError(f"unknown unit {unit_text!r} in {text!r}", key=key) from err
    except Exception as err:  # pint's tokenizer raises assorted errors on odd text
        raise QuantityError(f"cannot read the unit {unit_text!r} in {text!r}", key=key) from err
    if kind == "temperature_difference":
        delta = {"degree_Celsius": "delta_degC", "degree_Fahrenheit": "delta_degF"}
        if str(units) in delta:
            units = ureg.parse_units(delta[str(units)])
    q = ureg.Quantity(value, units)
    if not _matches(q, expected):
        raise QuantityError(
            f"{text!r} is not {_a(expected.name)}",
            key=key,
            fix=f'give {_a(expected.name)}, e.g. "{expected.example}"',
        )
    if kind == "temperature_difference":
        result = q.to(unit).magnitude
    else:
        result = q.to(unit.replace("%", "percent")).magnitude
    result = float(result)
    if not math.isfinite(result):
        raise QuantityError(f"{text!r} is out of range", key=key)
    return result


def parse_key(text: object, key: str) -> float:
    """Parse the quantity for a campaign key listed in ``KEY_UNITS``; value in its plan unit."""
    spec = KEY_UNITS[key]
    return parse_quantity(text, spec.kind, spec.plan_unit, key=key)


def linear_map(unit_text: str, kind: str, plan_unit: str, *, key: str = "") -> tuple[float, float]:
    """``(scale, offset)`` so that ``value_in_plan_unit = scale * value + offset``.

    ``unit_text`` is a unit alone (``"cm"``, ``"degF"``, ``"psi"``); it must be of
    ``kind``. Offset units (temperatures) give a non-zero offset. A dimensionless
    kind with plan unit ``""`` (pH, ratings) accepts ``""`` or ``"1"`` only.
    """
    import pint

    expected = KINDS[kind]
    text = unit_text.strip()
    if text and text == plan_unit:
        return 1.0, 0.0  # already in the plan unit: no conversion (and no units library)
    if plan_unit == "":
        if text in ("", "1"):
            return 1.0, 0.0
        raise QuantityError(f"{text!r}: this quantity has no unit; leave the unit out", key=key)
    if not text:
        raise QuantityError(
            f"no unit given; expected a {expected.name} unit such as "
            f"{expected.example.split(' ', 1)[1]!r}",
            key=key,
        )
    ureg = registry()
    try:
        units = ureg.parse_units(text.replace("%", "percent"))
    except Exception as err:  # pint's tokenizer raises assorted errors on odd text
        raise QuantityError(f"unknown unit {text!r}", key=key) from err
    if not _matches(ureg.Quantity(1.0, units), expected):
        raise QuantityError(
            f"{text!r} is not {_a(expected.name)} unit",
            key=key,
            fix=f"give {_a(expected.name)} unit such as {expected.example.split(' ', 1)[1]!r}",
        )
    target = plan_unit.replace("%", "percent")
    try:
        zero = float(ureg.Quantity(0.0, units).to(target).magnitude)
        one = float(ureg.Quantity(1.0, units).to(target).magnitude)
    except pint.errors.PintError as err:
        raise QuantityError(f"cannot convert {text!r} to {plan_unit!r}", key=key) from err
    return one - zero, zero


def units_table() -> str:
    """The quantity-key table as plain text (used in --help and checked against README)."""
    lines = []
    for spec in KEY_UNITS.values():
        lines.append(
            f'{spec.key:<36} {spec.kind:<19} {spec.plan_unit:<9} e.g. "{KINDS[spec.kind].example}"'
        )
    return "\n".join(lines)


def _a(noun: str) -> str:
    """The noun with its indefinite article: 'a length', 'an area'."""
    return f"{'an' if noun[:1] in 'aeiou' else 'a'} {noun}"
