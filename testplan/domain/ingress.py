"""Ingress procedures (IEC 60529, ISO 20653 K-forms) sized to the specimen.

Values and clauses follow the lab's parameter sheet; where a value there is from
memory, the parameter says ``provenance="from memory"``. Depths in mm unless the
name says otherwise; flows in l/min; times in min or h as the unit says.
"""

from __future__ import annotations

from dataclasses import dataclass

from testplan.domain.campaign import Acceptance, Campaign, Device
from testplan.domain.cautions import cautions
from testplan.domain.ipcode import LETTER_ORDER, IPCode
from testplan.domain.plan import Criterion, Parameter, Procedure
from testplan.errors import PlanningError

IEC_60529 = "IEC 60529"
IEC_EDITION = "Ed. 2.2 (1989 + A1:1999 + A2:2013)"
ISO_20653 = "ISO 20653"
ISO_EDITION = "2023"

G = 9.80665  # m/s^2, standard gravity
RHO_FRESH = 998.2  # kg/m^3, fresh water at 20 degC
RHO_SEA = 1025.0  # kg/m^3, typical surface seawater (about 35 g/kg salinity)

IPX7_DEPTH_MM = 1000.0
IPX7_TOP_COVER_MM = 150.0
IPX7_TALL_MM = 850.0
IPX7_DURATION_MIN = 30.0
# The dust test's 8 h end condition applies at the 2 kPa limit; a logged depression within
# 10 % of it counts as "at the limit" (our reading; the standard gives no tolerance).
DEPRESSION_AT_LIMIT_KPA = 1.8

TUBE_RADII_MM = (200, 400, 600, 800, 1000, 1200, 1400, 1600)
TUBE_HOLES = {
    4: (12, 25, 37, 50, 62, 75, 87, 100),
    3: (8, 16, 25, 33, 41, 50, 58, 67),
}

OBJECT_PROBES = {
    1: ("rigid sphere", 50.0, 50.0, "the full diameter must not pass any opening"),
    2: ("rigid sphere", 12.5, 30.0, "the full diameter must not pass any opening"),
    3: ("rigid rod", 2.5, 3.0, "must not penetrate at all"),
    4: ("rigid wire", 1.0, 1.0, "must not penetrate at all"),
}
ACCESS_PROBES = {
    "A": (
        "rigid sphere (back of hand)",
        50.0,
        50.0,
        None,
        "adequate clearance from hazardous parts",
    ),
    "B": (
        "jointed test finger, 80 mm long",
        12.0,
        10.0,
        80.0,
        "may enter up to 80 mm, the stop face must not pass; joints bent up to 90 deg in every "
        "position; adequate clearance from hazardous parts",
    ),
    "C": (
        "rod, 100 mm long",
        2.5,
        3.0,
        100.0,
        "may enter its full length, the stop face must not pass; adequate clearance",
    ),
    "D": (
        "wire, 100 mm long",
        1.0,
        1.0,
        100.0,
        "may enter its full length, the stop face must not pass; adequate clearance",
    ),
}

HARMFUL_WATER = (
    "water that entered must not interfere with correct operation or impair safety, deposit "
    "on insulation where it could cause tracking, reach live parts or windings not designed "
    "to run wet, or accumulate near a cable end or enter the cable"
)


def ipx7_depths_mm(height_mm: float) -> tuple[float, float]:
    """Lowest- and highest-point depths for IPX7 (IEC 60529 cl. 14.2.7), in mm.

    Below 850 mm tall the lowest point is 1000 mm under; from 850 mm the highest point
    is 150 mm under. Returns (lowest, highest).
    """
    if height_mm < IPX7_TALL_MM:
        return IPX7_DEPTH_MM, IPX7_DEPTH_MM - height_mm
    return height_mm + IPX7_TOP_COVER_MM, IPX7_TOP_COVER_MM


def hydrostatic_kpa(depth_m: float, density_kg_m3: float = RHO_FRESH) -> float:
    """Gauge pressure rho*g*h at ``depth_m`` metres, in kPa."""
    return density_kg_m3 * G * depth_m / 1000.0


def fresh_depth_for_sea_m(sea_depth_m: float, rho_sea: float = RHO_SEA) -> float:
    """Fresh-water depth (m) giving the same gauge pressure as ``sea_depth_m`` in seawater."""
    return sea_depth_m * rho_sea / RHO_FRESH


def spray_minutes(area_m2: float, minimum_min: float) -> float:
    """Spray time: 1 min per m^2 of surface, but never less than ``minimum_min``."""
    return max(minimum_min, area_m2 * 1.0)


TUBE_CLEARANCE_MM = 50.0


def tube_radius_mm(largest_mm: float) -> int | None:
    """Smallest standard oscillating-tube radius that clears the specimen, or None.

    The specimen sits at the tube's centre, so the radius must exceed half its largest
    dimension; the rule applied is a clearance of at least TUBE_CLEARANCE_MM (50 mm)
    between the specimen and the tube (IEC 60529 cl. 14.2.3 a) puts the holes close to,
    but not touching, the specimen). None when even the 1600 mm tube does not clear it.
    """
    for radius in TUBE_RADII_MM:
        if radius - largest_mm / 2.0 >= TUBE_CLEARANCE_MM - 1e-9:
            return radius
    return None


def _need_largest(device: Device, code: str, why: str) -> float:
    if device.largest_dimension_mm is None:
        raise PlanningError(
            f"{code} needs the specimen's largest overall dimension to {why}",
            key="device.largest_dimension",
            fix='add largest_dimension = "310 mm" to [device]',
        )
    return device.largest_dimension_mm


def _water_state(device: Device, code: IPCode, immersion: bool) -> tuple[str, ...]:
    state = [
        "not energised, unless the product standard requires it to operate during the test",
        _installed(device),
        f"service position, mounted as in use{': ' + device.mounting if device.mounting else ''}",
    ]
    if "M" in code.supplementary:
        state.append("moving parts in motion during the test (letter M)")
    elif "S" in code.supplementary:
        state.append("moving parts stationary during the test (letter S)")
    else:
        state.append(
            "moving parts tested both moving and stationary unless the product standard says "
            "otherwise (no M or S letter)"
        )
    if immersion:
        state.append(
            "temperature stabilised, so the water is within 5 K of the specimen at the start"
        )
    return tuple(state)


def _installed(device: Device) -> str:
    parts = ["covers, seals and cable glands fitted as in service"]
    if device.cable:
        parts.append(f"with the specified cable ({device.cable})")
    if device.gland_torque_nm is not None:
        parts.append(f"glands tightened to {device.gland_torque_nm:g} N*m")
    return ", ".join(parts)


def _outcomes(acc: Acceptance, prefix: str, dust: int | None = None) -> list[Criterion]:
    out: list[Criterion] = []
    if dust is None:
        if acc.water_ingress == "none":
            out.append(
                Criterion(
                    f"{prefix}.ingress",
                    "water_ingress",
                    "none_found",
                    "outcome",
                    text="no water found inside",
                    clause="14.3",
                )
            )
        else:
            out.append(
                Criterion(
                    f"{prefix}.ingress",
                    "water_ingress",
                    "no_harmful",
                    "outcome",
                    text=HARMFUL_WATER,
                    clause="14.3",
                )
            )
    elif dust == 6 or acc.dust_ingress == "none":
        out.append(
            Criterion(
                f"{prefix}.ingress",
                "dust_ingress",
                "none_found",
                "outcome",
                text="no deposit of dust observable inside at the end",
                clause="13.4",
            )
        )
    else:
        out.append(
            Criterion(
                f"{prefix}.ingress",
                "dust_ingress",
                "no_harmful",
                "outcome",
                text="dust may enter, but not so as to impair operation or safety, nor deposit "
                "where "
                "it could cause tracking along creepage distances",
                clause="13.4",
            )
        )
    if acc.functional_check:
        out.append(
            Criterion(
                f"{prefix}.function", "function", "pass", "outcome", text=acc.functional_check
            )
        )
    if acc.leak_rate_max_mbar_l_s is not None:
        out.append(
            Criterion(
                f"{prefix}.leak",
                "leak_rate",
                "<=",
                "outcome",
                unit="mbar*L/s",
                max=acc.leak_rate_max_mbar_l_s,
                text="pressure-decay screen on the sealed enclosure",
            )
        )
    if dust is None and acc.insulation_resistance_min_mohm is not None:
        out.append(
            Criterion(
                f"{prefix}.insulation",
                "insulation_resistance",
                ">=",
                "outcome",
                unit="Mohm",
                min=acc.insulation_resistance_min_mohm,
            )
        )
    if dust is None and acc.dielectric_test:
        out.append(
            Criterion(
                f"{prefix}.dielectric", "dielectric", "pass", "outcome", text=acc.dielectric_test
            )
        )
    return out


def _probe_force(pid: str, force: float) -> Criterion:
    """Probe force within its +/-10 % tolerance for the whole application."""
    return Criterion(
        f"{pid}.force",
        "probe_force",
        "between",
        "whole_run",
        unit="N",
        min=round(force * 0.9, 6),
        max=round(force * 1.1, 6),
    )


def _probe_procedures(code: IPCode, test_implied: bool) -> list[Procedure]:
    procs: list[Procedure] = []
    first = code.first
    if first is not None and first >= 1:
        top_object = min(first, 4)
        for n in range(1, top_object + 1):
            kind, dia, force, rule = OBJECT_PROBES[n]
            planned = (n == first) or test_implied
            implied_by = (
                None if planned else (f"IP{first}X" if first <= 4 else f"dust test IP{first}X")
            )
            pid = f"probe-object-{n}"
            procs.append(
                Procedure(
                    id=pid,
                    family="ingress",
                    group="probe",
                    code=f"IP{n}X",
                    title=f"Object probe, first numeral {n}",
                    standard=IEC_60529,
                    edition=IEC_EDITION,
                    clause="13.2, 13.3, Table 7",
                    status="planned" if planned else "implied",
                    implied_by=implied_by,
                    parameters=(
                        Parameter("probe", text=kind, clause="Table 7"),
                        Parameter("probe_diameter", value=dia, unit="mm", clause="Table 7"),
                        Parameter(
                            "force", value=force, unit="N", tolerance="+/-10 %", clause="Table 7"
                        ),
                    ),
                    criteria=(
                        _probe_force(pid, force),
                        Criterion(
                            f"{pid}.entry",
                            "probe_entry",
                            "none_found",
                            "outcome",
                            text=rule,
                            clause="13.3",
                        ),
                    ),
                    cautions=cautions("live_parts_probe"),
                    specimen_state=(
                        "de-energised, or live parts monitored by a 40-50 V indicator circuit",
                        "covers and glands fitted as in service",
                    ),
                    notes=("Lower numerals may be skipped when obviously met (cl. 5).",)
                    if not planned
                    else (),
                    duration_h=0.5,
                    order=10 + n,
                )
            )
    letters_needed: list[str] = []
    access = code.access_letter
    if access is not None:
        top = LETTER_ORDER.index(access)
        letters_needed = list(LETTER_ORDER[: top + 1])
    for letter in letters_needed:
        kind, dia, force, length, rule = ACCESS_PROBES[letter]
        planned = letter == access or test_implied
        pid = f"probe-access-{letter.lower()}"
        params = [
            Parameter("probe", text=kind, clause="Table 6"),
            Parameter("probe_diameter", value=dia, unit="mm"),
            Parameter("force", value=force, unit="N", tolerance="+/-10 %"),
            Parameter(
                "indicator_circuit",
                min=40.0,
                max=50.0,
                unit="V",
                text="signal lamp in series; the lamp must not light",
                clause="12.3",
            ),
        ]
        if length is not None:
            params.insert(2, Parameter("probe_length", value=length, unit="mm"))
        reason = "letter" if code.letter == letter else f"first numeral {code.first}"
        procs.append(
            Procedure(
                id=pid,
                family="ingress",
                group="probe",
                code=f"access {letter}",
                title=f"Access probe {letter} (protection of persons)",
                standard=IEC_60529,
                edition=IEC_EDITION,
                clause="12",
                status="planned" if planned else "implied",
                implied_by=None if planned else f"access probe {access}",
                parameters=tuple(params),
                criteria=(
                    _probe_force(pid, force),
                    Criterion(
                        f"{pid}.contact",
                        "hazardous_part_contact",
                        "none_found",
                        "outcome",
                        text=rule,
                        clause="12.3",
                    ),
                ),
                cautions=cautions("live_parts_probe"),
                specimen_state=(
                    "live parts monitored by the 40-50 V indicator circuit",
                    "covers and glands fitted as in service",
                ),
                notes=(f"Required by the {reason}.",),
                duration_h=0.5,
                order=15,
            )
        )
    return procs


def _dust_procedure(campaign: Campaign) -> Procedure | None:
    code = campaign.target.code
    device = campaign.device
    n = code.first
    if n not in (5, 6):
        return None
    if code.first_k:
        return _vehicle_dust(campaign, n)
    notes: list[str] = []
    category = device.dust_category
    if n == 6:
        if device.dust_category_declared and device.dust_category == 2:
            notes.append(
                "The file declares category 2, but IP6X is always tested as category 1 "
                "(cl. 13.4); planned as category 1."
            )
        category = 1
    pid = f"dust-{n}"
    params = [
        Parameter(
            "talc_fineness",
            text="passes a square-mesh sieve of 75 um nominal gap and 50 um nominal wire diameter",
            clause="13.4",
        ),
        Parameter(
            "talc_concentration",
            value=2.0,
            unit="kg/m^3",
            text="of chamber volume, kept in suspension",
            clause="13.4",
        ),
        Parameter("talc_reuse_max", value=20, unit="tests", clause="13.4"),
        Parameter(
            "category",
            value=category,
            unit=None,
            provenance="computed",
            text="1: internal pressure falls below ambient in the working cycle; "
            "2: no pressure difference",
            clause="13.4",
        ),
    ]
    criteria: list[Criterion] = []
    state = [_installed(device), "service position, mounted as in use"]
    if category == 1:
        vol = device.enclosure_volume_l
        if vol is None:
            raise PlanningError(
                f"IP{n}X needs the enclosure volume to size the air extraction",
                key="device.enclosure_volume",
                fix='add enclosure_volume = "2.4 L" to [device]',
            )
        params += [
            Parameter(
                "depression_max", value=2.0, unit="kPa", text="below atmospheric", clause="13.5"
            ),
            Parameter(
                "extraction_rate",
                min=40.0 * vol,
                max=60.0 * vol,
                unit="L/h",
                text="40 to 60 enclosure volumes per hour, never above 60",
                clause="13.5",
                provenance="computed",
            ),
            Parameter(
                "air_drawn",
                min=80.0 * vol,
                max=120.0 * vol,
                unit="L",
                text="80 enclosure volumes at least; 80 to 120 over 2 h at the target rate",
                clause="13.5",
                provenance="computed",
            ),
            Parameter(
                "duration",
                value=2.0,
                unit="h",
                text="2 h if 40 to 60 volumes/h is reached at no more than 2 kPa; otherwise "
                "until 80 volumes are drawn or 8 h have elapsed, whichever comes first",
                clause="13.5",
            ),
            Parameter("duration_max", value=8.0, unit="h", clause="13.5"),
            Parameter(
                "depression_at_limit",
                min=DEPRESSION_AT_LIMIT_KPA,
                max=2.0,
                unit="kPa",
                text="the depression the 8 h end condition is judged at: 'at 2 kPa' read as "
                "within 10 % of the limit",
                clause="13.5",
                provenance="computed",
            ),
            Parameter(
                "vacuum_port",
                text="provide a connection into the enclosure for the vacuum "
                "pump (a drilled hole or a spare gland), sealed except for the pump line",
                clause="13.5",
            ),
        ]
        criteria += [
            Criterion(
                f"{pid}.depression",
                "depression",
                "<=",
                "whole_run",
                unit="kPa",
                max=2.0,
                clause="13.5",
            ),
            Criterion(
                f"{pid}.rate",
                "extraction_rate",
                "<=",
                "per_period",
                unit="L/h",
                max=60.0 * vol,
                text="60 volumes per hour",
                clause="13.5",
            ),
            Criterion(
                f"{pid}.volumes",
                "dust_end",
                ">=",
                "at_end",
                unit="L",
                min=80.0 * vol,
                text="80 volumes drawn; or, when 40 volumes/h cannot be reached, 8 h at the "
                f"depression limit ({DEPRESSION_AT_LIMIT_KPA:g} to 2 kPa), whichever first",
                clause="13.5",
            ),
        ]
        state.append("vacuum port fitted; pump line sealed into it")
        duration = 8.0
    else:
        params.append(
            Parameter(
                "duration",
                value=8.0,
                unit="h",
                text="in the chamber, no vacuum connection",
                clause="13.6",
            )
        )
        criteria.append(
            Criterion(
                f"{pid}.duration", "duration", ">=", "at_end", unit="h", min=8.0, clause="13.6"
            )
        )
        duration = 8.0
    if category == 1:
        criteria.append(
            Criterion(
                f"{pid}.duration",
                "duration",
                ">=",
                "at_end",
                unit="h",
                min=2.0,
                text="2 h at the target rate; up to 8 h below it",
                clause="13.5",
            )
        )
    criteria += _outcomes(campaign.acceptance, pid, dust=n)
    notes.append("Run the dust test before any water test on the same specimen.")
    return Procedure(
        id=pid,
        family="ingress",
        group="dust",
        code=f"IP{n}X",
        title=f"Dust chamber, first numeral {n}, category {category}",
        standard=IEC_60529,
        edition=IEC_EDITION,
        clause="13.4-13.6",
        status="planned",
        parameters=tuple(params),
        criteria=tuple(criteria),
        cautions=cautions("talc"),
        specimen_state=tuple(state),
        notes=tuple(notes),
        destructive=True,
        duration_h=duration,
        order=20,
    )


def _vehicle_dust(campaign: Campaign, n: int) -> Procedure:
    vd = campaign.vehicle_dust
    if vd is None:
        raise PlanningError(
            f"IP{n}KX: the ISO 20653 dust cycle is not tabulated here; declare it in the file",
            key="target.code",
            fix="add [vehicle_dust] with test_dust, concentration, duration and cycle "
            "from ISO 20653",
        )
    pid = f"dust-{n}k"
    return Procedure(
        id=pid,
        family="ingress",
        group="dust",
        code=f"IP{n}KX",
        title=f"Vehicle dust test {n}K",
        standard=ISO_20653,
        edition=ISO_EDITION,
        clause="as declared",
        status="planned",
        parameters=(
            Parameter("test_dust", text=vd.test_dust, provenance="declared"),
            Parameter(
                "concentration", value=vd.concentration_kg_m3, unit="kg/m^3", provenance="declared"
            ),
            Parameter("duration", value=vd.duration_h, unit="h", provenance="declared"),
            Parameter("cycle", text=vd.cycle, provenance="declared"),
        ),
        criteria=(
            Criterion(f"{pid}.duration", "duration", ">=", "at_end", unit="h", min=vd.duration_h),
            *_outcomes(campaign.acceptance, pid, dust=n),
        ),
        cautions=cautions("vehicle_dust"),
        specimen_state=(_installed(campaign.device), "service position, mounted as in use"),
        notes=(
            "Parameters declared in the campaign file from ISO 20653; check them against the "
            "standard's current edition.",
            "Run the dust test before any water test.",
        ),
        destructive=True,
        duration_h=vd.duration_h,
        order=20,
    )


def _need_area(device: Device, code: str) -> float:
    if device.surface_area_m2 is None:
        raise PlanningError(
            f"{code} needs the external surface area to set the spray time",
            key="device.surface_area",
            fix='add surface_area = "0.24 m^2" to [device]',
        )
    return device.surface_area_m2


def _water_params(
    n: int, campaign: Campaign
) -> tuple[list[Parameter], list[Criterion], float, str]:
    """Parameters, condition criteria, duration (h) and clause for second numeral n (1-9)."""
    device = campaign.device
    pid = f"water-{n}"
    p: list[Parameter] = []
    c: list[Criterion] = []
    if n in (1, 2):
        rate = 1.0 if n == 1 else 3.0
        p += [
            Parameter(
                "apparatus",
                text="drip box, spouts on a 20 mm square grid, outlet no more "
                "than 200 mm above the top of the specimen",
            ),
            Parameter("rainfall", value=rate, unit="mm/min", tolerance="+0.5/-0"),
        ]
        if n == 1:
            p += [
                Parameter("turntable_speed", value=1.0, unit="r/min"),
                Parameter(
                    "turntable_eccentricity",
                    value=100.0,
                    unit="mm",
                    tolerance="about",
                    provenance="from memory",
                ),
                Parameter("duration", value=10.0, unit="min"),
            ]
        else:
            p += [
                Parameter(
                    "tilt",
                    value=15.0,
                    unit="deg",
                    text="4 fixed positions, either side of vertical in two perpendicular planes",
                ),
                Parameter("time_per_position", value=2.5, unit="min"),
                Parameter("duration", value=10.0, unit="min"),
            ]
        c += [
            Criterion(
                f"{pid}.rainfall",
                "rainfall",
                "between",
                "per_period",
                unit="mm/min",
                min=rate,
                max=rate + 0.5,
            ),
            Criterion(f"{pid}.duration", "duration", ">=", "at_end", unit="min", min=10.0),
        ]
        return p, c, 10.0 / 60.0, f"14.2.{n}"
    if n in (3, 4):
        return _spray(n, campaign)
    if n in (5, 6):
        area = _need_area(device, f"IPX{n}")
        flow = 12.5 if n == 5 else 100.0
        minutes = spray_minutes(area, 3.0)
        p += [
            Parameter("nozzle_diameter", value=6.3 if n == 5 else 12.5, unit="mm"),
            Parameter("flow", value=flow, unit="L/min", tolerance="+/-5 %"),
            Parameter("distance", min=2.5, max=3.0, unit="m"),
            Parameter("directions", text="from all practicable directions"),
            Parameter(
                "duration",
                value=minutes,
                unit="min",
                provenance="computed",
                text="1 min per m^2 of surface, at least 3 min",
            ),
            Parameter(
                "core_of_stream",
                value=40.0 if n == 5 else 120.0,
                unit="mm",
                text="diameter of the substantial stream at 2.5 m; check before the test",
                provenance="from memory",
            ),
            Parameter("nozzle_pressure", text="adjusted to give the flow; record it as observed"),
        ]
        c += [
            Criterion(
                f"{pid}.flow",
                "flow",
                "between",
                "per_period",
                unit="L/min",
                min=round(flow * 0.95, 6),
                max=round(flow * 1.05, 6),
            ),
            Criterion(f"{pid}.duration", "duration", ">=", "at_end", unit="min", min=minutes),
        ]
        return p, c, minutes / 60.0, f"14.2.{n}"
    if n == 7:
        low, high = ipx7_depths_mm(device.height_mm)
        p += [
            Parameter("height", value=device.height_mm, unit="mm", provenance="declared"),
            Parameter(
                "lowest_point_depth",
                value=low,
                unit="mm",
                provenance="computed",
                text="1000 mm below the surface (enclosures under 850 mm tall)"
                if device.height_mm < IPX7_TALL_MM
                else "height + 150 mm (enclosures 850 mm or taller)",
            ),
            Parameter(
                "highest_point_depth",
                value=high,
                unit="mm",
                provenance="computed",
                text="at least 150 mm below the surface",
            ),
            Parameter("duration", value=30.0, unit="min"),
            Parameter(
                "water_temperature_difference",
                max=5.0,
                unit="K",
                text="water within 5 K of the specimen at the start",
            ),
        ]
        c += [
            Criterion(f"{pid}.depth", "lowest_point_depth", ">=", "whole_run", unit="mm", min=low),
            Criterion(f"{pid}.duration", "duration", ">=", "at_end", unit="min", min=30.0),
            Criterion(
                f"{pid}.temperature",
                "water_specimen_difference",
                "<=",
                "at_start",
                unit="K",
                max=5.0,
            ),
        ]
        if device.height_mm >= IPX7_TALL_MM:
            c.append(
                Criterion(
                    f"{pid}.top_depth",
                    "highest_point_depth",
                    ">=",
                    "whole_run",
                    unit="mm",
                    min=IPX7_TOP_COVER_MM,
                )
            )
        return p, c, 0.5, "14.2.7"
    if n == 8:
        return _ipx8(campaign)
    if n == 9:
        small = _need_largest(device, "IPX9", "choose its method") < 250.0
        p += [
            Parameter("nozzle", text="fan-jet nozzle; the verified jet-force distribution governs"),
            Parameter("water_temperature", value=80.0, unit="degC", tolerance="+/-5 K"),
            Parameter("flow", value=15.0, unit="L/min", tolerance="+/-1 L/min"),
            Parameter("distance", value=175.0, unit="mm", tolerance="+/-25 mm"),
            Parameter("impact_force", min=0.9, max=1.2, unit="N", text="on the measuring plate"),
        ]
        if small:
            p += [
                Parameter("turntable_speed", value=5.0, unit="r/min", tolerance="+/-1 r/min"),
                Parameter("angles", text="0, 30, 60 and 90 deg", unit="deg"),
                Parameter("time_per_position", value=30.0, unit="s"),
                Parameter(
                    "duration",
                    value=2.0,
                    unit="min",
                    provenance="computed",
                    text="largest dimension under 250 mm: turntable",
                ),
            ]
            minutes = 2.0
        else:
            area = _need_area(device, "IPX9")
            minutes = spray_minutes(area, 3.0)
            p.append(
                Parameter(
                    "duration",
                    value=minutes,
                    unit="min",
                    provenance="computed",
                    text="all practicable directions, as perpendicular as possible; "
                    "1 min per m^2, at least 3 min",
                )
            )
        c += [
            Criterion(
                f"{pid}.flow", "flow", "between", "per_period", unit="L/min", min=14.0, max=16.0
            ),
            Criterion(
                f"{pid}.water_temperature",
                "water_temperature",
                "between",
                "whole_run",
                unit="degC",
                min=75.0,
                max=85.0,
            ),
            Criterion(f"{pid}.duration", "duration", ">=", "at_end", unit="min", min=minutes),
        ]
        return p, c, minutes / 60.0, "14.2.9"
    raise PlanningError(f"second numeral {n} has no water test")  # pragma: no cover


def _spray(n: int, campaign: Campaign) -> tuple[list[Parameter], list[Criterion], float, str]:
    """IPX3/IPX4 by the oscillating tube (a) or the hand-held nozzle (b), as the lab chose.

    With no ``target.spray_method`` the tube is planned where a standard tube clears the
    specimen, else the nozzle. The tube needs the largest dimension; the nozzle the area.
    """
    device = campaign.device
    pid = f"water-{n}"
    chosen = campaign.target.spray_method
    radius: int | None = None
    too_large = ""
    if chosen != "nozzle":
        largest = _need_largest(device, f"IPX{n} by the oscillating tube", "size the tube")
        radius = tube_radius_mm(largest)
        if radius is None:
            if chosen == "tube":
                raise PlanningError(
                    f"the specimen ({largest:.0f} mm) does not clear the largest oscillating "
                    f"tube (1600 mm radius, {TUBE_CLEARANCE_MM:.0f} mm clearance)",
                    key="target.spray_method",
                    fix='set spray_method = "nozzle" in [target]',
                )
            too_large = (
                f"; the specimen ({largest:.0f} mm) does not clear the largest standard tube"
            )
    if radius is not None:
        holes = TUBE_HOLES[n][TUBE_RADII_MM.index(radius)]
        p = [
            Parameter(
                "method",
                text="oscillating tube"
                + (" (declared)" if chosen == "tube" else " (spray_method not declared)"),
                clause=f"14.2.{n} a)",
            ),
            Parameter(
                "tube_radius",
                value=radius,
                unit="mm",
                provenance="computed",
                text=f"smallest standard radius leaving at least {TUBE_CLEARANCE_MM:.0f} mm "
                "between the specimen, at the tube centre, and the tube; holes within about "
                "200 mm of it",
            ),
            Parameter("hole_diameter", value=0.4, unit="mm"),
            Parameter(
                "open_holes",
                value=holes,
                unit=None,
                provenance="confirmed" if n == 4 else "from memory",
                text="over the whole 180 deg arc" if n == 4 else "within +/-60 deg of vertical",
            ),
            Parameter("flow_per_hole", value=0.07, unit="L/min", tolerance="+/-5 %"),
            Parameter(
                "tube_flow",
                value=round(holes * 0.07, 4),
                unit="L/min",
                tolerance="+/-5 %",
                provenance="computed",
            ),
            Parameter(
                "swing",
                value=360.0 if n == 4 else 120.0,
                unit="deg",
                text="+/-180 deg, almost a full turn" if n == 4 else "+/-60 deg",
            ),
            Parameter(
                "double_swing_time",
                value=12.0 if n == 4 else 4.0,
                unit="s",
                provenance="from memory" if n == 4 else "confirmed",
            ),
            Parameter("duration", value=10.0, unit="min"),
        ]
        c = [
            Criterion(
                f"{pid}.flow",
                "tube_flow",
                "between",
                "per_period",
                unit="L/min",
                min=round(holes * 0.07 * 0.95, 6),
                max=round(holes * 0.07 * 1.05, 6),
            ),
            Criterion(f"{pid}.duration", "duration", ">=", "at_end", unit="min", min=10.0),
        ]
        return p, c, 10.0 / 60.0, f"14.2.{n} a)"
    area = _need_area(device, f"IPX{n} by the hand-held nozzle")
    minutes = spray_minutes(area, 5.0)
    p = [
        Parameter(
            "method",
            text="hand-held spray nozzle" + (" (declared)" if chosen == "nozzle" else too_large),
            clause=f"14.2.{n} b)",
        ),
        Parameter("nozzle_flow", value=10.0, unit="L/min", tolerance="+/-5 %"),
        Parameter("nozzle_pressure", min=50.0, max=150.0, unit="kPa", text="set to give the flow"),
        Parameter(
            "nozzle_shield",
            text="counterbalanced shield fitted; spray up to 60 deg from vertical"
            if n == 3
            else "shield removed; spray from all practicable directions",
        ),
        Parameter(
            "nozzle_time",
            value=minutes,
            unit="min",
            provenance="computed",
            text="1 min per m^2 of surface, at least 5 min",
        ),
        Parameter("duration", value=minutes, unit="min", provenance="computed"),
    ]
    c = [
        Criterion(f"{pid}.flow", "flow", "between", "per_period", unit="L/min", min=9.5, max=10.5),
        Criterion(f"{pid}.duration", "duration", ">=", "at_end", unit="min", min=minutes),
    ]
    return p, c, minutes / 60.0, f"14.2.{n} b)"


def ipx8_lowest_depth_m(campaign: Campaign) -> float:
    """Declared IPX8 depth at the lowest point, in metres of the declared water.

    Raises PlanningError when depth or duration is missing, the declared depth leaves part
    of the specimen out of the water, or the declared condition is less severe than this
    specimen's own IPX7 (depth max(1 m, H + 0.15 m), 30 min) in depth or in duration, or no
    more severe in either (IEC 60529 cl. 14.2.8).
    """
    t = campaign.target
    if t.immersion_depth_m is None:
        raise PlanningError(
            "numeral 8 needs the declared immersion depth",
            key="target.immersion_depth",
            fix='add immersion_depth = "2 m" to [target]',
        )
    if t.immersion_duration_h is None:
        raise PlanningError(
            "numeral 8 needs the declared immersion duration",
            key="target.immersion_duration",
            fix='add immersion_duration = "72 h" to [target]',
        )
    height_m = campaign.device.height_mm / 1000.0
    lowest = t.immersion_depth_m + (height_m if t.depth_reference == "highest point" else 0.0)
    if lowest <= height_m + 1e-9:
        raise PlanningError(
            f"numeral 8 must immerse the whole specimen: {lowest:.3g} m at the lowest point "
            f"leaves its highest point ({height_m:.3g} m up) at or above the surface",
            key="target.immersion_depth",
            fix=f"declare more than {height_m:.3g} m at the lowest point, or set "
            'depth_reference = "highest point"',
        )
    ipx7_low_mm, ipx7_top_mm = ipx7_depths_mm(campaign.device.height_mm)
    ipx7_low = ipx7_low_mm / 1000.0
    pressure_low = fresh_depth_for_sea_m(lowest) if t.service_water == "sea" else lowest
    hours = t.immersion_duration_h
    deeper = pressure_low > ipx7_low + 1e-9
    longer = hours > 0.5 + 1e-9
    shallower = pressure_low < ipx7_low - 1e-9
    shorter = hours < 0.5 - 1e-9
    less_cover = (
        campaign.device.height_mm >= IPX7_TALL_MM
        and (pressure_low - height_m) * 1000.0 < ipx7_top_mm - 1e-6
    )
    if shallower or shorter or less_cover or not (deeper or longer):
        raise PlanningError(
            f"numeral 8 must be more severe than this specimen's IPX7 ({ipx7_low:.3g} m at the "
            f"lowest point, {ipx7_top_mm / 1000.0:.3g} m over the highest, for 30 min) in depth "
            f"and in duration; declared {pressure_low:.3g} m at the lowest point for "
            f"{hours * 60:.3g} min",
            key=(
                "target.immersion_duration"
                if shorter and not shallower
                else "target.immersion_depth"
            ),
            fix=f"declare at least {ipx7_low:.3g} m at the lowest point and at least 30 min, "
            "with more of one of them",
        )
    return lowest


def _ipx8(campaign: Campaign) -> tuple[list[Parameter], list[Criterion], float, str]:
    t = campaign.target
    device = campaign.device
    pid = "water-8"
    lowest = ipx8_lowest_depth_m(campaign)
    assert t.immersion_duration_h is not None and t.immersion_depth_m is not None
    hours = t.immersion_duration_h
    p = [
        Parameter(
            "declared_depth",
            value=t.immersion_depth_m,
            unit="m",
            provenance="declared",
            text=f"at the {t.depth_reference}, in {t.service_water} water",
        ),
        Parameter("declared_duration", value=hours, unit="h", provenance="declared"),
        Parameter("height", value=device.height_mm, unit="mm", provenance="declared"),
    ]
    if t.service_water == "sea":
        test_low = fresh_depth_for_sea_m(lowest)
        p += [
            Parameter(
                "sea_lowest_point_depth", value=round(lowest, 6), unit="m", provenance="computed"
            ),
            Parameter(
                "seawater_density",
                value=RHO_SEA,
                unit="kg/m^3",
                provenance="confirmed",
                text="typical surface seawater, about 35 g/kg",
            ),
            Parameter(
                "pressure_at_lowest_point",
                value=round(hydrostatic_kpa(lowest, RHO_SEA), 4),
                unit="kPa",
                provenance="computed",
                text="gauge, rho*g*h in seawater",
            ),
        ]
    else:
        test_low = lowest
        p.append(
            Parameter(
                "pressure_at_lowest_point",
                value=round(hydrostatic_kpa(lowest), 4),
                unit="kPa",
                provenance="computed",
                text="gauge, rho*g*h in fresh water",
            )
        )
    low_mm = test_low * 1000.0
    p += [
        Parameter(
            "lowest_point_depth",
            value=round(low_mm, 3),
            unit="mm",
            provenance="computed",
            text="in the fresh-water test tank"
            + (
                ", the depth giving the declared seawater pressure"
                if t.service_water == "sea"
                else ""
            ),
        ),
        Parameter(
            "highest_point_depth",
            value=round(low_mm - device.height_mm, 3),
            unit="mm",
            provenance="computed",
        ),
        Parameter(
            "fresh_water_density",
            value=RHO_FRESH,
            unit="kg/m^3",
            text="at 20 degC; IEC 60529 water tests use fresh water",
        ),
        Parameter("duration", value=hours, unit="h", provenance="declared"),
        Parameter(
            "water_temperature_difference",
            max=5.0,
            unit="K",
            text="water within 5 K of the specimen at the start, as for IPX7",
            provenance="from memory",
        ),
        Parameter(
            "pressure_vessel_alternative",
            value=round(hydrostatic_kpa(test_low), 4),
            unit="kPa",
            provenance="computed",
            text="gauge pressure at the lowest point if a pressure vessel replaces the tank; "
            "only with the client's written agreement, recorded as a deviation",
        ),
    ]
    c = [
        Criterion(
            f"{pid}.depth", "lowest_point_depth", ">=", "whole_run", unit="mm", min=round(low_mm, 3)
        ),
        Criterion(f"{pid}.duration", "duration", ">=", "at_end", unit="h", min=hours),
        Criterion(
            f"{pid}.temperature", "water_specimen_difference", "<=", "at_start", unit="K", max=5.0
        ),
    ]
    return p, c, hours, "14.2.8"


SPLASH_4K_FLOW_PER_HOLE = 0.6  # L/min per open hole, +/-5 %


def _splash_4k_flow(holes: int | None) -> tuple[Parameter, Criterion]:
    """The 4K tube's total flow from its open holes: 0.6 L/min each, +/-5 %.

    The hole count belongs to the lab's tube, so it must come from the campaign file.
    Raises PlanningError without it.
    """
    if holes is None:
        raise PlanningError(
            "the 4K splash test's flow is set per open hole of the tube, and the number of "
            "open holes is not given",
            key="target.tube_holes_4k",
            fix="give the open holes of the lab's 4K tube, e.g. tube_holes_4k = 25 in [target]",
        )
    total = SPLASH_4K_FLOW_PER_HOLE * holes
    lo, hi = round(total * 0.95, 4), round(total * 1.05, 4)
    flow = Parameter(
        "tube_flow",
        value=round(total, 4),
        unit="L/min",
        tolerance="+/-5 %",
        text=f"{holes} open holes x {SPLASH_4K_FLOW_PER_HOLE} L/min",
        provenance="from memory",
    )
    band = Criterion(
        "water-4k.flow", "tube_flow", "between", "per_period", unit="L/min", min=lo, max=hi
    )
    return flow, band


@dataclass(frozen=True)
class KForm:
    """An ISO 20653 water test (K-form): parameters, duration and flow band."""

    title: str
    params: tuple[Parameter, ...]
    minutes: float
    flow: tuple[float, float] | None


K_WATER: dict[int, KForm] = {
    4: KForm(
        title="Pressurised splash water 4K",
        params=(
            Parameter("apparatus", text="oscillating tube no more than 200 mm from the specimen"),
            Parameter(
                "swing", min=320.0, max=360.0, unit="deg", text="+/-160 to 180 deg, about 60 deg/s"
            ),
            Parameter(
                "flow_per_hole",
                value=0.6,
                unit="L/min",
                tolerance="+/-5 %",
                provenance="from memory",
            ),
            Parameter("pressure", value=400.0, unit="kPa", tolerance="about"),
            Parameter(
                "duration",
                value=10.0,
                unit="min",
                text="5 min, rotate 90 deg about the vertical, 5 min more",
            ),
        ),
        minutes=10.0,
        flow=None,
    ),
    6: KForm(
        title="Pressurised powerful jet 6K",
        params=(
            Parameter("nozzle_diameter", value=6.3, unit="mm"),
            Parameter("flow", value=75.0, unit="L/min", tolerance="+/-5 %"),
            Parameter("pressure", value=1000.0, unit="kPa", tolerance="about"),
            Parameter("distance", min=2.5, max=3.0, unit="m"),
            Parameter("duration", value=3.0, unit="min", text="at least 3 min"),
        ),
        minutes=3.0,
        flow=(71.25, 78.75),
    ),
    9: KForm(
        title="High-pressure steam-jet cleaning 9K",
        params=(
            Parameter("turntable_speed", value=5.0, unit="r/min", tolerance="+/-1 r/min"),
            Parameter("distance", min=100.0, max=150.0, unit="mm"),
            Parameter("angles", text="0, 30, 60 and 90 deg", unit="deg"),
            Parameter("flow", min=14.0, max=16.0, unit="L/min"),
            Parameter("pressure", min=8000.0, max=10000.0, unit="kPa"),
            Parameter("water_temperature", value=80.0, unit="degC", tolerance="+/-5 K"),
            Parameter("time_per_position", value=30.0, unit="s"),
            Parameter("duration", value=2.0, unit="min"),
        ),
        minutes=2.0,
        flow=(14.0, 16.0),
    ),
}


def _water_procedures(campaign: Campaign) -> list[Procedure]:
    code = campaign.target.code
    test_implied = campaign.target.test_implied
    procs: list[Procedure] = []
    declared = set(code.seconds)
    implied = code.implied_seconds()
    wanted = sorted(declared | set(implied))
    for n in wanted:
        if n == 0:
            continue
        is_k = n in code.seconds_k
        planned = n in declared or test_implied
        pid = f"water-{n}k" if is_k else f"water-{n}"
        if is_k:
            spec = K_WATER[n]
            params = list(spec.params)
            minutes = spec.minutes
            crit = [
                Criterion(f"{pid}.duration", "duration", ">=", "at_end", unit="min", min=minutes)
            ]
            if spec.flow:
                lo, hi = spec.flow
                crit.insert(
                    0,
                    Criterion(
                        f"{pid}.flow", "flow", "between", "per_period", unit="L/min", min=lo, max=hi
                    ),
                )
            if n == 4:
                flow, band = _splash_4k_flow(campaign.target.tube_holes_4k)
                params.append(flow)
                crit.insert(0, band)
            if n == 9:
                crit.insert(
                    1,
                    Criterion(
                        f"{pid}.water_temperature",
                        "water_temperature",
                        "between",
                        "whole_run",
                        unit="degC",
                        min=75.0,
                        max=85.0,
                    ),
                )
            title = spec.title
            standard, edition, clause = ISO_20653, ISO_EDITION, "water tests, K-forms"
            hours = minutes / 60.0
        else:
            params, crit, hours, clause = _water_params(n, campaign)
            standard, edition = IEC_60529, IEC_EDITION
            title = {
                1: "Vertically dripping water",
                2: "Dripping water, tilted 15 deg",
                3: "Spraying water",
                4: "Splashing water",
                5: "Water jets",
                6: "Powerful water jets",
                7: "Temporary immersion",
                8: "Continuous immersion",
                9: "High-pressure, high-temperature jets",
            }[n]
        crit = [*crit, *_outcomes(campaign.acceptance, pid)]
        keys: list[str] = ["water_live"]
        if n in (5, 6) or (is_k and n in (4, 6)):
            keys.append("jets")
        if n == 9:
            keys.append("hot_jets")
        if n in (7, 8):
            keys.append("immersion")
        if n == 8:
            keys.append("pressure_vessel")
        notes = ["Before the next water test on the same specimen: inspect, dry and re-seal."]
        if not planned:
            notes.append(
                "Numerals up to 6 are cumulative; a lower one may be skipped when "
                "obviously met (cl. 6)."
            )
        procs.append(
            Procedure(
                id=pid,
                family="ingress",
                group="water",
                code=f"IPX{n}K" if is_k else f"IPX{n}",
                title=title,
                standard=standard,
                edition=edition,
                clause=clause,
                status="planned" if planned else "implied",
                implied_by=None if planned else f"IPX{max(s for s in declared if s <= 6)}",
                parameters=tuple(params),
                criteria=tuple(crit),
                cautions=cautions(*keys),
                specimen_state=_water_state(campaign.device, code, n in (7, 8)),
                notes=tuple(notes),
                destructive=True,
                duration_h=hours,
                order=30 + n * 2 + (1 if is_k else 0),
            )
        )
    return procs


def ingress_procedures(campaign: Campaign) -> list[Procedure]:
    """Every ingress procedure the target needs, in test order (probes, dust, water).

    Raises PlanningError, naming the key, when the file lacks a value a procedure needs.
    """
    code = campaign.target.code
    procs = _probe_procedures(code, campaign.target.test_implied)
    dust = _dust_procedure(campaign)
    if dust is not None:
        procs.append(dust)
    procs += _water_procedures(campaign)
    return sorted(procs, key=lambda p: (p.order, p.id))
