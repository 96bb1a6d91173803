"""Read a campaign file (TOML) into domain objects, naming file, line and key on any error.

The file's keys are the contract documented in README.md. Unknown keys are errors
with a did-you-mean, so a typo never passes silently. Quantities go through
``testplan.domain.units`` with the dimension each key expects.
"""

from __future__ import annotations

import datetime as dt
import difflib
import math
import re
import tomllib
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from testplan.domain.campaign import (
    Acceptance,
    Calendar,
    Campaign,
    CampaignInfo,
    Device,
    Endurance,
    Facility,
    Leg,
    SaltMist,
    SaltPhase,
    Target,
    VehicleDust,
)
from testplan.domain.ipcode import parse_ip_code
from testplan.domain.units import parse_key, parse_quantity
from testplan.errors import CampaignFileError, TestplanError

SCHEMA_VERSION = 1

# Allowed keys per section; the value says whether the key is required.
SECTIONS: dict[str, dict[str, bool]] = {
    "campaign": {
        "title": True,
        "reference": True,
        "client": True,
        "laboratory": True,
        "laboratory_address": False,
        "client_contact": False,
        "location": False,
        "decision_rule": False,
        "guard_factor": False,
        "decision_rule_agreement": False,
    },
    "device": {
        "name": True,
        "maker": False,
        "model": False,
        "height": True,
        "largest_dimension": False,
        "surface_area": False,
        "enclosure_volume": False,
        "free_volume": False,
        "dust_category": False,
        "mounting": False,
        "cable": False,
        "gland_torque": False,
    },
    "target": {
        "code": True,
        "immersion_depth": False,
        "depth_reference": False,
        "immersion_duration": False,
        "service_water": False,
        "test_implied": False,
        "spray_method": False,
        "tube_holes_4k": False,
    },
    "acceptance": {
        "water_ingress": False,
        "dust_ingress": False,
        "leak_rate_max": False,
        "functional_check": False,
        "insulation_resistance_min": False,
        "dielectric_test": False,
    },
    "vehicle_dust": {"test_dust": True, "concentration": True, "duration": True, "cycle": True},
    "salt_mist": {
        "standard": True,
        "test_method": True,
        "duration": False,
        "corrosion_rating_min": False,
        "cycles": False,
        "phases": False,
    },
    "endurance": {
        "name": True,
        "travel": True,
        "operations_per_cycle": True,
        "rated_cycles": True,
        "reliability": True,
        "confidence": True,
        "weibull_shape": True,
        "rig_specimens": True,
        "rate": True,
        "failure": True,
        "checkpoints": False,
        "allowed_failures": False,
        "friction_radius": False,
        "spring_wire": False,
        "spring_mean_diameter": False,
        "spring_active_coils": False,
        "spring_deflection": False,
        "spring_material": False,
        "shear_modulus": False,
        "friction_coefficient": False,
        "torque_tolerance": False,
    },
    "leg": {"name": True, "specimens": True, "tests": True},
    "facility": {"name": True, "serves": True, "capacity": True},
    "calendar": {
        "start": True,
        "workdays": False,
        "workday_hours": False,
        "between_tests": False,
        "timezone": False,
    },
}
TOP_LEVEL = {"schema": True, "campaign": True, "device": True, "target": True}
ARRAY_SECTIONS = {"endurance", "leg", "facility"}
WEEKDAYS = ["Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun"]

_HEADER = re.compile(r"^\s*(\[\[?)\s*([A-Za-z0-9_.\-]+)\s*\]\]?\s*(#.*)?$")
_KEYLINE = re.compile(r"^\s*([A-Za-z0-9_\-]+)\s*=")


@dataclass(frozen=True)
class LoadedCampaign:
    """A campaign with the file it came from and where each key stands in it."""

    campaign: Campaign
    path: Path
    lines: Mapping[str, int]
    text: str

    def line_of(self, key: str | None) -> int | None:
        """Line of a dotted key (``device.height``, ``endurance[2].rate``), else its section."""
        return locate(self.lines, key)


def locate(lines: Mapping[str, int], key: str | None) -> int | None:
    """Find the line of ``key`` or, failing that, of the nearest enclosing section."""
    if not key:
        return None
    probe = key
    while probe:
        if probe in lines:
            return lines[probe]
        if "." not in probe:
            break
        probe = probe.rsplit(".", 1)[0]
    return None


def key_lines(text: str) -> dict[str, int]:
    """Map each ``section.key`` (and each section) in TOML text to its 1-based line.

    Arrays of tables are numbered from 1: ``endurance[2].rate``.
    """
    lines: dict[str, int] = {}
    counts: dict[str, int] = {}
    prefix = ""
    for number, raw in enumerate(text.splitlines(), start=1):
        header = _HEADER.match(raw)
        if header:
            name = header[2]
            if header[1] == "[[":
                counts[name] = counts.get(name, 0) + 1
                prefix = f"{name}[{counts[name]}]"
            else:
                prefix = name
            lines.setdefault(prefix, number)
            continue
        keyline = _KEYLINE.match(raw)
        if keyline:
            full = f"{prefix}.{keyline[1]}" if prefix else keyline[1]
            lines.setdefault(full, number)
    return lines


def _did_you_mean(word: str, options: list[str]) -> str | None:
    close = difflib.get_close_matches(word, options, n=1, cutoff=0.6)
    return f"did you mean {close[0]!r}?" if close else None


class _Reader:
    """Checks one parsed file section by section; errors carry the dotted key."""

    def __init__(self, data: dict[str, Any]) -> None:
        self.data = data

    def section(self, name: str, raw: object, prefix: str) -> dict[str, Any]:
        if not isinstance(raw, dict):
            raise CampaignFileError(f"[{name}] must be a table", key=prefix)
        allowed = SECTIONS[name]
        for key in raw:
            if key not in allowed:
                raise CampaignFileError(
                    f"unknown key {key!r} in [{name}]",
                    key=f"{prefix}.{key}",
                    fix=_did_you_mean(key, list(allowed)) or f"allowed keys: {', '.join(allowed)}",
                )
        for key, required in allowed.items():
            if required and key not in raw:
                raise CampaignFileError(
                    f"missing key {key!r} in [{name}]",
                    key=prefix,
                    fix=f"add {key} = ... to [{name}]",
                )
        return raw

    @staticmethod
    def text(sec: dict[str, Any], key: str, prefix: str, default: str | None = None) -> str | None:
        value = sec.get(key, default)
        if value is None:
            return None
        if not isinstance(value, str) or not value.strip():
            raise CampaignFileError(
                f"expected non-empty text, got {value!r}", key=f"{prefix}.{key}"
            )
        return value.strip()

    @staticmethod
    def choice(sec: dict[str, Any], key: str, prefix: str, options: list[str], default: str) -> str:
        value = sec.get(key, default)
        if value not in options:
            raise CampaignFileError(
                f"{value!r} is not one of {', '.join(repr(o) for o in options)}",
                key=f"{prefix}.{key}",
                fix=_did_you_mean(str(value), options),
            )
        return str(value)

    @staticmethod
    def integer(
        sec: dict[str, Any],
        key: str,
        prefix: str,
        *,
        default: int | None = None,
        minimum: int | None = None,
        maximum: int | None = None,
    ) -> int | None:
        value = sec.get(key, default)
        if value is None:
            return None
        if isinstance(value, bool) or not isinstance(value, int):
            raise CampaignFileError(
                f"expected a whole number, got {value!r}", key=f"{prefix}.{key}"
            )
        if minimum is not None and value < minimum:
            raise CampaignFileError(
                f"must be at least {minimum}, got {value}", key=f"{prefix}.{key}"
            )
        if maximum is not None and value > maximum:
            raise CampaignFileError(
                f"must be at most {maximum}, got {value}", key=f"{prefix}.{key}"
            )
        return value

    @staticmethod
    def number(sec: dict[str, Any], key: str, prefix: str) -> float:
        value = sec.get(key)
        if isinstance(value, bool) or not isinstance(value, int | float):
            raise CampaignFileError(f"expected a number, got {value!r}", key=f"{prefix}.{key}")
        if not math.isfinite(value):
            raise CampaignFileError(
                f"expected a finite number, got {value!r}", key=f"{prefix}.{key}"
            )
        return float(value)

    @staticmethod
    def quantity(sec: dict[str, Any], key: str, prefix: str, table_key: str) -> float | None:
        if key not in sec:
            return None
        try:
            return parse_key(sec[key], table_key)
        except TestplanError as err:
            err.key = f"{prefix}.{key}"
            raise

    @staticmethod
    def positive(value: float | None, key: str) -> float | None:
        if value is not None and value <= 0:
            raise CampaignFileError("must be greater than zero", key=key)
        return value


def _read_info(r: _Reader) -> CampaignInfo:
    sec = r.section("campaign", r.data["campaign"], "campaign")
    return CampaignInfo(
        title=r.text(sec, "title", "campaign") or "",
        reference=r.text(sec, "reference", "campaign") or "",
        client=r.text(sec, "client", "campaign") or "",
        laboratory=r.text(sec, "laboratory", "campaign") or "",
        location=r.text(sec, "location", "campaign"),
        laboratory_address=r.text(sec, "laboratory_address", "campaign"),
        client_contact=r.text(sec, "client_contact", "campaign"),
        decision_rule=r.choice(sec, "decision_rule", "campaign", ["simple", "guarded"], "simple"),
        guard_factor=_guard_factor(r, sec),
        decision_rule_agreement=r.text(sec, "decision_rule_agreement", "campaign"),
    )


def _guard_factor(r: _Reader, sec: dict[str, Any]) -> float:
    if "guard_factor" not in sec:
        return 1.0
    value = r.number(sec, "guard_factor", "campaign")
    if not 0 <= value <= 3:
        raise CampaignFileError(
            f"expected a factor r from 0 to 3 (w = r x U), got {value:g}",
            key="campaign.guard_factor",
        )
    return value


def _read_device(r: _Reader) -> Device:
    p = "device"
    sec = r.section(p, r.data[p], p)
    q = {
        k: r.positive(r.quantity(sec, k, p, f"device.{k}"), f"device.{k}")
        for k in (
            "height",
            "largest_dimension",
            "surface_area",
            "enclosure_volume",
            "free_volume",
            "gland_torque",
        )
    }
    category = r.integer(sec, "dust_category", p, default=1, minimum=1, maximum=2)
    enclosure = q["enclosure_volume"]
    free = q["free_volume"] if q["free_volume"] is not None else enclosure
    if enclosure is not None and free is not None and free > enclosure:
        raise CampaignFileError(
            "free_volume cannot exceed enclosure_volume", key="device.free_volume"
        )
    height = q["height"]
    assert height is not None  # required key
    return Device(
        name=r.text(sec, "name", p) or "",
        maker=r.text(sec, "maker", p),
        model=r.text(sec, "model", p),
        height_mm=height,
        largest_dimension_mm=q["largest_dimension"],
        surface_area_m2=q["surface_area"],
        enclosure_volume_l=enclosure,
        free_volume_l=free,
        dust_category=category or 1,
        dust_category_declared="dust_category" in sec,
        mounting=r.text(sec, "mounting", p),
        cable=r.text(sec, "cable", p),
        gland_torque_nm=q["gland_torque"],
    )


def _read_target(r: _Reader) -> Target:
    p = "target"
    sec = r.section(p, r.data[p], p)
    code_text = sec["code"]
    try:
        code = parse_ip_code(code_text)
    except TestplanError as err:
        err.key = "target.code"
        raise
    test_implied = sec.get("test_implied", False)
    if not isinstance(test_implied, bool):
        raise CampaignFileError(
            f"expected true or false, got {test_implied!r}", key="target.test_implied"
        )
    depth = r.positive(
        r.quantity(sec, "immersion_depth", p, "target.immersion_depth"), "target.immersion_depth"
    )
    duration = r.positive(
        r.quantity(sec, "immersion_duration", p, "target.immersion_duration"),
        "target.immersion_duration",
    )
    return Target(
        code=code,
        immersion_depth_m=depth,
        depth_reference=r.choice(
            sec, "depth_reference", p, ["lowest point", "highest point"], "lowest point"
        ),
        immersion_duration_h=duration,
        service_water=r.choice(sec, "service_water", p, ["fresh", "sea"], "fresh"),
        test_implied=test_implied,
        spray_method=(
            r.choice(sec, "spray_method", p, ["tube", "nozzle"], "tube")
            if "spray_method" in sec
            else None
        ),
        tube_holes_4k=r.integer(sec, "tube_holes_4k", p, minimum=1, maximum=1000),
    )


def _read_acceptance(r: _Reader) -> Acceptance:
    p = "acceptance"
    raw = r.data.get(p, {})
    sec = r.section(p, raw, p)
    return Acceptance(
        water_ingress=r.choice(sec, "water_ingress", p, ["none", "no harmful"], "no harmful"),
        dust_ingress=r.choice(sec, "dust_ingress", p, ["none", "no harmful"], "no harmful"),
        leak_rate_max_mbar_l_s=r.positive(
            r.quantity(sec, "leak_rate_max", p, "acceptance.leak_rate_max"),
            "acceptance.leak_rate_max",
        ),
        functional_check=r.text(sec, "functional_check", p),
        insulation_resistance_min_mohm=r.positive(
            r.quantity(sec, "insulation_resistance_min", p, "acceptance.insulation_resistance_min"),
            "acceptance.insulation_resistance_min",
        ),
        dielectric_test=r.text(sec, "dielectric_test", p),
        declared=frozenset(sec),
    )


def _read_vehicle_dust(r: _Reader) -> VehicleDust | None:
    p = "vehicle_dust"
    if p not in r.data:
        return None
    sec = r.section(p, r.data[p], p)
    conc = r.positive(
        r.quantity(sec, "concentration", p, "vehicle_dust.concentration"), f"{p}.concentration"
    )
    dur = r.positive(r.quantity(sec, "duration", p, "vehicle_dust.duration"), f"{p}.duration")
    assert conc is not None and dur is not None
    return VehicleDust(
        test_dust=r.text(sec, "test_dust", p) or "",
        concentration_kg_m3=conc,
        duration_h=dur,
        cycle=r.text(sec, "cycle", p) or "",
    )


def _read_salt_mist(r: _Reader) -> SaltMist | None:
    p = "salt_mist"
    if p not in r.data:
        return None
    sec = r.section(p, r.data[p], p)
    method = sec["test_method"]
    if isinstance(method, bool) or not isinstance(method, int | str):
        raise CampaignFileError(
            f"expected a method number or name, got {method!r}", key=f"{p}.test_method"
        )
    phases: list[SaltPhase] = []
    raw_phases = sec.get("phases", [])
    if not isinstance(raw_phases, list):
        raise CampaignFileError("expected a list of phase tables", key=f"{p}.phases")
    for i, ph in enumerate(raw_phases, start=1):
        key = f"{p}.phases"
        if not isinstance(ph, dict) or set(ph) - {"name", "duration", "temperature", "humidity"}:
            raise CampaignFileError(
                f"phase {i} must be a table with name, duration, temperature, humidity",
                key=key,
            )
        if "name" not in ph or "duration" not in ph:
            raise CampaignFileError(f"phase {i} needs a name and a duration", key=key)
        dur = parse_quantity(ph["duration"], "time", "h", key=f"{key}[{i}].duration")
        temp = (
            parse_quantity(ph["temperature"], "temperature", "degC", key=f"{key}[{i}].temperature")
            if "temperature" in ph
            else None
        )
        hum = (
            parse_quantity(ph["humidity"], "ratio", "%", key=f"{key}[{i}].humidity")
            if "humidity" in ph
            else None
        )
        if dur <= 0:
            raise CampaignFileError(f"phase {i} duration must be greater than zero", key=key)
        phases.append(SaltPhase(str(ph["name"]), dur, temp, hum))
    return SaltMist(
        standard=r.text(sec, "standard", p) or "",
        test_method=str(method),
        duration_h=r.positive(
            r.quantity(sec, "duration", p, "salt_mist.duration"), f"{p}.duration"
        ),
        corrosion_rating_min=r.integer(sec, "corrosion_rating_min", p, minimum=0, maximum=10),
        cycles=r.integer(sec, "cycles", p, minimum=1),
        phases=tuple(phases),
    )


def _read_endurance(r: _Reader) -> tuple[Endurance, ...]:
    raw = r.data.get("endurance", [])
    if not isinstance(raw, list):
        raise CampaignFileError("write each item as [[endurance]]", key="endurance")
    items: list[Endurance] = []
    for i, item in enumerate(raw, start=1):
        p = f"endurance[{i}]"
        sec = r.section("endurance", item, p)

        def qty(key: str, sec: dict[str, Any] = sec, p: str = p) -> float | None:
            return r.quantity(sec, key, p, f"endurance.{key}")

        def prob(key: str, sec: dict[str, Any] = sec, p: str = p) -> float:
            value = r.number(sec, key, p)
            if not 0 < value < 1:
                raise CampaignFileError(
                    f"must lie strictly between 0 and 1, got {value}", key=f"{p}.{key}"
                )
            return value

        travel = qty("travel")
        assert travel is not None
        if travel <= 0:
            raise CampaignFileError("travel must be greater than zero", key=f"{p}.travel")
        rate = qty("rate")
        assert rate is not None
        if rate <= 0:
            raise CampaignFileError("rate must be greater than zero", key=f"{p}.rate")
        shape = r.number(sec, "weibull_shape", p)
        if shape <= 0:
            raise CampaignFileError(
                "weibull_shape must be greater than zero", key=f"{p}.weibull_shape"
            )
        checkpoints = sec.get("checkpoints", [])
        if not isinstance(checkpoints, list) or not all(
            isinstance(c, int) and not isinstance(c, bool) and c >= 0 for c in checkpoints
        ):
            raise CampaignFileError(
                "expected a list of whole cycle counts, e.g. [0, 1000, 5000]",
                key=f"{p}.checkpoints",
            )
        if list(checkpoints) != sorted(set(checkpoints)):
            raise CampaignFileError(
                "checkpoints must be increasing without repeats", key=f"{p}.checkpoints"
            )
        mu = sec.get("friction_coefficient")
        mu_pair: tuple[float, float] | None = None
        if mu is not None:
            if isinstance(mu, bool) or isinstance(mu, int | float):
                mu = [mu, mu]
            if (
                not isinstance(mu, list)
                or len(mu) != 2
                or not all(isinstance(m, int | float) and not isinstance(m, bool) for m in mu)
                or not 0 < mu[0] <= mu[1]
                or not math.isfinite(mu[1])
            ):
                raise CampaignFileError(
                    "expected a range [low, high] of positive friction coefficients",
                    key=f"{p}.friction_coefficient",
                )
            mu_pair = (float(mu[0]), float(mu[1]))
        coils = sec.get("spring_active_coils")
        if coils is not None and (
            isinstance(coils, bool) or not isinstance(coils, int | float) or not 0 < coils < 1e6
        ):
            raise CampaignFileError(
                "expected a positive number of active coils", key=f"{p}.spring_active_coils"
            )
        if "spring_material" in sec and "shear_modulus" in sec:
            raise CampaignFileError(
                "give spring_material or shear_modulus, not both", key=f"{p}.shear_modulus"
            )
        positive_keys = (
            "friction_radius",
            "spring_wire",
            "spring_mean_diameter",
            "spring_deflection",
            "shear_modulus",
            "torque_tolerance",
        )
        extra = {k: r.positive(qty(k), f"{p}.{k}") for k in positive_keys}
        items.append(
            Endurance(
                name=r.text(sec, "name", p) or "",
                travel_deg=travel,
                operations_per_cycle=r.integer(sec, "operations_per_cycle", p, minimum=1) or 1,
                rated_cycles=r.integer(sec, "rated_cycles", p, minimum=1) or 1,
                reliability=prob("reliability"),
                confidence=prob("confidence"),
                weibull_shape=shape,
                rig_specimens=r.integer(sec, "rig_specimens", p, minimum=1) or 1,
                rate_per_min=rate,
                failure=r.text(sec, "failure", p) or "",
                checkpoints=tuple(checkpoints),
                allowed_failures=r.integer(
                    sec, "allowed_failures", p, default=0, minimum=0, maximum=1
                )
                or 0,
                friction_radius_mm=extra["friction_radius"],
                spring_wire_mm=extra["spring_wire"],
                spring_mean_diameter_mm=extra["spring_mean_diameter"],
                spring_active_coils=float(coils) if coils is not None else None,
                spring_deflection_mm=extra["spring_deflection"],
                spring_material=r.text(sec, "spring_material", p),
                shear_modulus_gpa=extra["shear_modulus"],
                friction_coefficient=mu_pair,
                torque_tolerance_pct=extra["torque_tolerance"],
                index=i,
            )
        )
    names = [e.name for e in items]
    for i, name in enumerate(names, start=1):
        if names.count(name) > 1:
            raise CampaignFileError(
                f"endurance name {name!r} is used twice", key=f"endurance[{i}].name"
            )
    return tuple(items)


def _read_legs(r: _Reader) -> tuple[tuple[Leg, ...], tuple[Facility, ...], Calendar | None]:
    legs: list[Leg] = []
    for i, item in enumerate(r.data.get("leg", []), start=1):
        p = f"leg[{i}]"
        sec = r.section("leg", item, p)
        tests = sec["tests"]
        if not isinstance(tests, list) or not all(isinstance(t, str) for t in tests):
            raise CampaignFileError("expected a list of test names", key=f"{p}.tests")
        legs.append(
            Leg(
                name=r.text(sec, "name", p) or "",
                specimens=r.integer(sec, "specimens", p, minimum=1) or 1,
                tests=tuple(tests),
            )
        )
    facilities: list[Facility] = []
    for i, item in enumerate(r.data.get("facility", []), start=1):
        p = f"facility[{i}]"
        sec = r.section("facility", item, p)
        serves = sec["serves"]
        if (
            not isinstance(serves, list)
            or not serves
            or not all(isinstance(t, str) for t in serves)
        ):
            raise CampaignFileError("expected a non-empty list of test names", key=f"{p}.serves")
        facilities.append(
            Facility(
                name=r.text(sec, "name", p) or "",
                serves=tuple(serves),
                capacity=r.integer(sec, "capacity", p, minimum=1) or 1,
            )
        )
    calendar = None
    if "calendar" in r.data:
        sec = r.section("calendar", r.data["calendar"], "calendar")
        start = sec["start"]
        if not isinstance(start, dt.date) or isinstance(start, dt.datetime):
            raise CampaignFileError(
                f"expected a TOML date such as 2027-01-11, got {start!r}", key="calendar.start"
            )
        days = sec.get("workdays", WEEKDAYS[:5])
        if not isinstance(days, list) or not days or not all(d in WEEKDAYS for d in days):
            raise CampaignFileError(
                f"expected a list of weekday names from {', '.join(WEEKDAYS)}",
                key="calendar.workdays",
            )
        hours = sec.get("workday_hours", [8, 17])
        if (
            not isinstance(hours, list)
            or len(hours) != 2
            or not all(isinstance(h, int) and not isinstance(h, bool) for h in hours)
            or not 0 <= hours[0] < hours[1] <= 24
        ):
            raise CampaignFileError(
                "expected [first hour, last hour] of the working day, e.g. [8, 17]",
                key="calendar.workday_hours",
            )
        between = r.quantity(sec, "between_tests", "calendar", "calendar.between_tests")
        if between is not None and between < 0:
            raise CampaignFileError("cannot be negative", key="calendar.between_tests")
        zone = sec.get("timezone", "UTC")
        if not isinstance(zone, str) or not _is_zone(zone):
            raise CampaignFileError(
                f"unknown time zone {zone!r}; expected an IANA name such as 'Europe/London'",
                key="calendar.timezone",
            )
        calendar = Calendar(
            start=start,
            timezone=zone,
            workdays=tuple(sorted({WEEKDAYS.index(d) for d in days})),
            day_start_h=hours[0],
            day_end_h=hours[1],
            between_tests_h=4.0 if between is None else between,
        )
    return tuple(legs), tuple(facilities), calendar


def _is_zone(name: str) -> bool:
    from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

    try:
        ZoneInfo(name)
    except (ZoneInfoNotFoundError, ValueError):
        return False
    return True


def campaign_from_dict(data: dict[str, Any]) -> Campaign:
    """Check a parsed campaign mapping and build the Campaign. Raises TestplanError with a key."""
    for key in data:
        if key not in TOP_LEVEL and key not in SECTIONS:
            raise CampaignFileError(
                f"unknown section or key {key!r}",
                key=key,
                fix=_did_you_mean(key, list(TOP_LEVEL) + list(SECTIONS)),
            )
        if key in ARRAY_SECTIONS and not isinstance(data[key], list):
            raise CampaignFileError(f"write this section as [[{key}]]", key=key)
    for key in TOP_LEVEL:
        if key not in data:
            raise CampaignFileError(
                f"missing {'key' if key == 'schema' else 'section'} {key!r}",
                key=key,
                fix="schema = 1 goes at the top of the file" if key == "schema" else f"add [{key}]",
            )
    schema = data["schema"]
    if schema != SCHEMA_VERSION or isinstance(schema, bool):
        raise CampaignFileError(
            f"this testplan reads campaign schema {SCHEMA_VERSION}, the file says {schema!r}",
            key="schema",
        )
    r = _Reader(data)
    info = _read_info(r)
    device = _read_device(r)
    target = _read_target(r)
    acceptance = _read_acceptance(r)
    vehicle_dust = _read_vehicle_dust(r)
    salt_mist = _read_salt_mist(r)
    endurance = _read_endurance(r)
    legs, facilities, calendar = _read_legs(r)
    return Campaign(
        info=info,
        device=device,
        target=target,
        acceptance=acceptance,
        vehicle_dust=vehicle_dust,
        salt_mist=salt_mist,
        endurance=endurance,
        legs=legs,
        facilities=facilities,
        calendar=calendar,
    )


_TOML_POS = re.compile(r"\(at line (\d+), column (\d+)\)")


def read_campaign(path: str | Path) -> LoadedCampaign:
    """Read and check a campaign file. Raises TestplanError naming the file, line and key."""
    path = Path(path)
    data, text, lines = load_toml(path, "campaign file")
    return _finish(data, path, lines, text)


def load_toml(path: Path, what: str) -> tuple[dict[str, Any], str, dict[str, int]]:
    """Read a UTF-8 TOML file: its data, its text and the line of every key."""
    try:
        raw = path.read_bytes()
    except FileNotFoundError as err:
        raise CampaignFileError("no such file", file=path) from err
    except IsADirectoryError as err:
        raise CampaignFileError(f"is a directory, not a {what}", file=path) from err
    except OSError as err:
        raise CampaignFileError(f"cannot read: {err.strerror}", file=path) from err
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as err:
        line = raw[: err.start].count(b"\n") + 1
        raise CampaignFileError(
            "is not UTF-8 text", file=path, line=line, fix="save the file as UTF-8"
        ) from err
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        msg = str(err)
        pos = _TOML_POS.search(msg)
        toml_line = int(pos[1]) if pos else None
        col = int(pos[2]) if pos else None
        reason = _TOML_POS.sub("", msg).strip()
        if pos is None and "(at end of document)" in reason:
            # the file stops in the middle of something: point at its last line
            reason = reason.replace("(at end of document)", "at the end of the file").strip()
            toml_line = max(text.count("\n") + (0 if text.endswith("\n") else 1), 1)
        raise CampaignFileError(
            f"TOML syntax error: {reason}", file=path, line=toml_line, column=col
        ) from err
    return data, text, key_lines(text)


def _finish(data: dict[str, Any], path: Path, lines: dict[str, int], text: str) -> LoadedCampaign:
    try:
        campaign = campaign_from_dict(data)
    except TestplanError as err:
        raise err.located(file=path, line=locate(lines, err.key)) from None
    return LoadedCampaign(campaign=campaign, path=path, lines=lines, text=text)


def with_location(loaded: LoadedCampaign, run: Callable[[], Any]) -> Any:
    """Run ``run()``; a TestplanError it raises gets this campaign's file and key line."""
    try:
        return run()
    except TestplanError as err:
        raise err.located(file=loaded.path, line=loaded.line_of(err.key)) from None
