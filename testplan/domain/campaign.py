"""The campaign as the domain sees it: plain dataclasses, values in their plan units.

Units of every float field are in its name's suffix (``height_mm``, ``duration_h``).
The reader (testplan/reader.py) builds these from a campaign file; nothing here reads files.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field

from testplan.domain.ipcode import IPCode


@dataclass(frozen=True)
class CampaignInfo:
    """Who the campaign is for and who runs it."""

    title: str
    reference: str
    client: str
    laboratory: str
    location: str | None = None
    laboratory_address: str | None = None
    client_contact: str | None = None
    decision_rule: str = "simple"  # "simple" or "guarded" (ILAC-G8 guard band w = r x U)
    guard_factor: float = 1.0
    decision_rule_agreement: str | None = None


@dataclass(frozen=True)
class Device:
    """The specimen's declared geometry and how it is installed (customer-supplied data)."""

    name: str
    height_mm: float
    maker: str | None = None
    model: str | None = None
    largest_dimension_mm: float | None = None
    surface_area_m2: float | None = None
    enclosure_volume_l: float | None = None
    free_volume_l: float | None = None
    dust_category: int = 1
    dust_category_declared: bool = False
    mounting: str | None = None
    cable: str | None = None
    gland_torque_nm: float | None = None


@dataclass(frozen=True)
class Target:
    """The declared protection target."""

    code: IPCode
    immersion_depth_m: float | None = None
    depth_reference: str = "lowest point"
    immersion_duration_h: float | None = None
    service_water: str = "fresh"
    test_implied: bool = False
    spray_method: str | None = None
    tube_holes_4k: int | None = None  # open holes of the 4K tube; its flow is per hole


@dataclass(frozen=True)
class Acceptance:
    """What decides an ingress result (IEC 60529 leaves this to the product standard)."""

    water_ingress: str = "no harmful"
    dust_ingress: str = "no harmful"
    leak_rate_max_mbar_l_s: float | None = None
    functional_check: str | None = None
    insulation_resistance_min_mohm: float | None = None
    dielectric_test: str | None = None
    declared: frozenset[str] = field(default_factory=frozenset)


@dataclass(frozen=True)
class VehicleDust:
    """ISO 20653 5K/6K dust parameters, which must come from the file (not confirmed here)."""

    test_dust: str
    concentration_kg_m3: float
    duration_h: float
    cycle: str


@dataclass(frozen=True)
class SaltPhase:
    """One phase of a salt-mist cycle given in the file (for methods not tabulated here)."""

    name: str
    duration_h: float
    temperature_c: float | None
    humidity_pct: float | None


@dataclass(frozen=True)
class SaltMist:
    """The salt-mist section: standard, method and acceptance."""

    standard: str
    test_method: str
    duration_h: float | None = None
    corrosion_rating_min: int | None = None
    cycles: int | None = None
    phases: tuple[SaltPhase, ...] = ()


@dataclass(frozen=True)
class Endurance:
    """One cycle-endurance item (a knob, a latch) with its statistics and design check."""

    name: str
    travel_deg: float
    operations_per_cycle: int
    rated_cycles: int
    reliability: float
    confidence: float
    weibull_shape: float
    rig_specimens: int
    rate_per_min: float
    failure: str
    checkpoints: tuple[int, ...] = ()
    allowed_failures: int = 0
    friction_radius_mm: float | None = None
    spring_wire_mm: float | None = None
    spring_mean_diameter_mm: float | None = None
    spring_active_coils: float | None = None
    spring_deflection_mm: float | None = None
    spring_material: str | None = None
    shear_modulus_gpa: float | None = None
    friction_coefficient: tuple[float, float] | None = None
    torque_tolerance_pct: float | None = None
    index: int = 1


@dataclass(frozen=True)
class Leg:
    """A group of specimens that see the same tests in order."""

    name: str
    specimens: int
    tests: tuple[str, ...]


@dataclass(frozen=True)
class Facility:
    """A chamber, tank or rig that serves some procedure groups, with its capacity."""

    name: str
    serves: tuple[str, ...]
    capacity: int


@dataclass(frozen=True)
class Calendar:
    """When the campaign starts and which weekdays hands-on steps may start on."""

    start: dt.date
    workdays: tuple[int, ...] = (0, 1, 2, 3, 4)
    day_start_h: int = 8
    day_end_h: int = 17
    between_tests_h: float = 4.0
    timezone: str = "UTC"


@dataclass(frozen=True)
class Campaign:
    """A whole campaign file, read and checked."""

    info: CampaignInfo
    device: Device
    target: Target
    acceptance: Acceptance = field(default_factory=Acceptance)
    vehicle_dust: VehicleDust | None = None
    salt_mist: SaltMist | None = None
    endurance: tuple[Endurance, ...] = ()
    legs: tuple[Leg, ...] = ()
    facilities: tuple[Facility, ...] = ()
    calendar: Calendar | None = None
