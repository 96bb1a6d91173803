"""Salt-mist procedures: IEC 60068-2-11 (Ka), ISO 9227 (NSS, AASS, CASS), ASTM B117 and
IEC 60068-2-52 (Kb, cyclic). Times in h, temperatures in degC, fallout in ml per 80 cm^2 per h.
"""

from __future__ import annotations

from dataclasses import dataclass

from testplan.domain.campaign import SaltMist
from testplan.domain.cautions import cautions
from testplan.domain.plan import Criterion, Parameter, Procedure, Provenance
from testplan.errors import PlanningError


@dataclass(frozen=True)
class Phase:
    """One phase of a salt-mist cycle."""

    name: str
    hours: float
    temperature: str
    humidity: str | None = None


@dataclass(frozen=True)
class KbMethod:
    """An IEC 60068-2-52 test method: one cycle's phases and how many cycles."""

    method: int
    phases: tuple[Phase, ...]
    cycles: int | None  # None: set by the relevant specification (must be in the file)
    guidance: str


SPRAY = Phase("salt spray", 2.0, "15 to 35 degC")
HUMID_1D = Phase("humid storage", 22.0, "40 +/-2 degC", "93 % RH (90 to 95 %)")
HUMID_7D = Phase("humid storage", 166.0, "40 +/-2 degC", "93 % RH (90 to 95 %)")
STD_ATM = Phase("standard atmosphere", 72.0, "23 +/-2 degC", "50 +/-5 % RH")
WEEK = (SPRAY, HUMID_1D) * 4 + (STD_ATM,)

KB_METHODS: dict[int, KbMethod] = {
    1: KbMethod(1, (SPRAY, HUMID_7D), 4, "marine and near-sea exposure"),
    2: KbMethod(2, (SPRAY, HUMID_1D), 3, "marine and near-sea exposure"),
    3: KbMethod(3, WEEK, 1, "alternating salt and dry, e.g. road vehicles"),
    4: KbMethod(4, WEEK, 2, "alternating salt and dry, e.g. road vehicles"),
    5: KbMethod(5, WEEK, 4, "alternating salt and dry, e.g. road vehicles"),
    6: KbMethod(6, WEEK, 8, "alternating salt and dry, e.g. road vehicles"),
    7: KbMethod(
        7,
        (
            Phase("salt spray", 2.0, "35 degC"),
            Phase("dry", 4.0, "60 degC", "below 30 % RH"),
            Phase("wet", 2.0, "50 degC", "above 95 % RH"),
        ),
        None,
        "automotive-type wet and dry cycle",
    ),
}

FALLOUT = (1.0, 2.0)

# The condition bands of the tabulated Kb phases (methods 1 to 6), judged in each phase of
# the run's schedule (domain/phases.py): (phase, criterion, channel, min, max, unit).
PHASE_BANDS_METHODS = (1, 2, 3, 4, 5, 6)
PHASE_BANDS = (
    ("salt spray", "spray_temperature", "cabinet_temperature", 15.0, 35.0, "degC"),
    ("humid storage", "humid_temperature", "humid_temperature", 38.0, 42.0, "degC"),
    ("humid storage", "humid_rh", "humid_rh", 90.0, 95.0, "%"),
    ("standard atmosphere", "storage_temperature", "storage_temperature", 21.0, 25.0, "degC"),
    ("standard atmosphere", "storage_rh", "storage_rh", 45.0, 55.0, "%"),
)


def phase_bands(pid: str, phases: set[str]) -> list[Criterion]:
    """One condition criterion per band of each phase the cycle has."""
    return [
        Criterion(
            f"{pid}.{key}",
            channel,
            "between",
            "whole_run",
            unit=unit,
            min=lo,
            max=hi,
            phase=phase.replace(" ", "_"),
        )
        for phase, key, channel, lo, hi, unit in PHASE_BANDS
        if phase in phases
    ]


@dataclass(frozen=True)
class Continuous:
    """A continuous neutral or acidified salt-spray method."""

    standard: str
    edition: str
    variant: str
    solution: str
    ph: tuple[float, float]
    ph_note: str
    temperature: tuple[float, float]
    durations: tuple[float, ...]
    rinse: str
    clause: str
    collection_h: float = 16.0
    provenance: str = "confirmed"
    temperature_note: str = "continuous exposure"
    temperature_provenance: Provenance = "confirmed"


RINSE_IEC = (
    "wash in running tap water for about 5 min, rinse in distilled or deionised water, "
    "shake or blow off droplets; recover 1 to 2 h at standard atmosphere before the "
    "final checks (the relevant specification may differ)"
)
RINSE_ISO = (
    "rinse gently in clean running water no warmer than 40 degC, then dry at once "
    "(e.g. in an air stream)"
)

CONTINUOUS: dict[tuple[str, str], Continuous] = {
    ("IEC 60068-2-11", "KA"): Continuous(
        "IEC 60068-2-11",
        "Ed. 4 (2021)",
        "Ka",
        "NaCl 5 % by mass (+/-1 %), distilled or deionised water",
        (6.5, 7.2),
        "reference temperature as Ed. 4 specifies",
        (33.0, 37.0),
        (16, 24, 48, 96, 168, 336, 672),
        RINSE_IEC,
        "test Ka",
    ),
    ("ISO 9227", "NSS"): Continuous(
        "ISO 9227",
        "2022",
        "NSS",
        "NaCl 50 +/-5 g/l in distilled or deionised water",
        (6.5, 7.2),
        "measured at 25 +/-2 degC",
        (33.0, 37.0),
        (2, 6, 24, 48, 72, 96, 144, 168, 240, 480, 720, 1008),
        RINSE_ISO,
        "NSS",
        collection_h=24.0,
    ),
    ("ISO 9227", "AASS"): Continuous(
        "ISO 9227",
        "2022",
        "AASS",
        "NSS solution acidified with glacial acetic acid",
        (3.1, 3.3),
        "measured at 25 +/-2 degC",
        (33.0, 37.0),
        (2, 6, 24, 48, 72, 96, 144, 168, 240, 480, 720, 1008),
        RINSE_ISO,
        "AASS",
        collection_h=24.0,
    ),
    ("ISO 9227", "CASS"): Continuous(
        "ISO 9227",
        "2022",
        "CASS",
        "AASS solution with copper(II) chloride dihydrate about 0.26 g/l",
        (3.1, 3.3),
        "measured at 25 +/-2 degC",
        (48.0, 52.0),
        (2, 6, 24, 48, 72, 96, 144, 168, 240, 480, 720, 1008),
        RINSE_ISO,
        "CASS",
        collection_h=24.0,
    ),
    ("ASTM B117", "B117"): Continuous(
        "ASTM B117",
        "B117-19",
        "B117",
        "5 parts NaCl to 95 parts water by mass, ASTM D1193 type IV water",
        (6.5, 7.2),
        "measured at 25 +/-2 degC",
        (33.0, 37.0),
        (),
        RINSE_ISO,
        "cabinet conditions",
        temperature_note="continuous exposure; 35 +/-2 degC as in ASTM B117-19, the edition "
        "this band follows (older editions used 35 +1.1/-1.7 degC)",
        temperature_provenance="from memory",
    ),
}
STANDARDS = ("IEC 60068-2-52", "IEC 60068-2-11", "ISO 9227", "ASTM B117")


def cycle_hours(phases: tuple[Phase, ...]) -> float:
    """Length of one cycle in hours."""
    return sum(p.hours for p in phases)


def _common_outcomes(pid: str, sm: SaltMist, functional: str | None) -> list[Criterion]:
    out: list[Criterion] = []
    if sm.corrosion_rating_min is not None:
        out.append(
            Criterion(
                f"{pid}.corrosion",
                "protection_rating",
                ">=",
                "outcome",
                unit="Rp",
                min=float(sm.corrosion_rating_min),
                text="ISO 10289 protection rating, photographs of each face",
            )
        )
    if functional:
        out.append(Criterion(f"{pid}.function", "function", "pass", "outcome", text=functional))
    return out


def salt_mist_procedure(sm: SaltMist, functional_check: str | None = None) -> Procedure:
    """The salt-mist procedure for the declared standard and method.

    Raises PlanningError (key ``salt_mist.*``) for an unknown standard or method, a
    continuous method without a duration, or a Kb method whose cycle is not tabulated
    here and not given as phases in the file.
    """
    std = sm.standard.strip()
    if std not in STANDARDS:
        raise PlanningError(
            f"unknown salt-mist standard {sm.standard!r}",
            key="salt_mist.standard",
            fix="one of " + ", ".join(STANDARDS),
        )
    pid = "salt-mist"
    base_params = [
        Parameter(
            "fog_collection",
            min=FALLOUT[0],
            max=FALLOUT[1],
            unit="ml/80cm^2/h",
            text="at least two collectors beside the specimens, averaged over each "
            "collection period",
        ),
        Parameter(
            "collectors",
            value=2,
            unit=None,
            text="at least; one near the nozzle side, one away from it",
            provenance="from memory",
        ),
        Parameter(
            "orientation",
            text="as in service; significant faces 15 to 30 deg from the "
            "vertical where the specification allows; specimens not touching each other",
            provenance="from memory",
        ),
        Parameter(
            "specimen_state",
            text="not energised during exposure unless the relevant specification says so",
        ),
    ]
    notes: list[str] = []
    if std == "IEC 60068-2-52":
        if isinstance(sm.test_method, str) and not sm.test_method.isdigit():
            raise PlanningError(
                f"Kb methods are numbered 1 to 8, got {sm.test_method!r}",
                key="salt_mist.test_method",
            )
        method = int(sm.test_method)
        if not 1 <= method <= 8:
            raise PlanningError(
                f"Kb methods are numbered 1 to 8, got {method}", key="salt_mist.test_method"
            )
        kb = KB_METHODS.get(method)
        if sm.phases:
            phases = tuple(
                Phase(
                    p.name,
                    p.duration_h,
                    f"{p.temperature_c:g} degC" if p.temperature_c is not None else "-",
                    f"{p.humidity_pct:g} % RH" if p.humidity_pct is not None else None,
                )
                for p in sm.phases
            )
            provenance: Provenance = "declared"
            notes.append("Cycle phases declared in the campaign file.")
        elif kb is None:
            raise PlanningError(
                f"Kb method {method}: its cycle is not tabulated here; give its phases",
                key="salt_mist.test_method",
                fix="add phases = [{name, duration, temperature, humidity}, ...] and cycles "
                "to [salt_mist] from the standard",
            )
        else:
            phases = kb.phases
            provenance = "confirmed"
        cycles = sm.cycles or (kb.cycles if kb and not sm.phases else None)
        if cycles is None:
            raise PlanningError(
                f"Kb method {method}: the number of cycles comes from the relevant specification",
                key="salt_mist.cycles",
                fix="add cycles = N to [salt_mist]",
            )
        if sm.duration_h is not None:
            notes.append("salt_mist.duration is not used: a Kb method sets its own length.")
        one = cycle_hours(phases)
        total = one * cycles
        params = [
            Parameter(
                "method",
                value=method,
                unit=None,
                provenance="declared",
                text=kb.guidance if kb else "phases as declared",
            ),
            Parameter(
                "solution",
                text="neutral NaCl 5 % by mass (+/-1 %), distilled or deionised water",
                provenance="from memory",
            ),
            Parameter(
                "solution_ph",
                min=6.5,
                max=7.2,
                unit="pH",
                text="measured on the prepared solution and on the collected fog",
            ),
            *base_params,
            Parameter(
                "collection_period",
                text="each spray phase, averaged over the phase",
                provenance="from memory",
            ),
        ]
        for i, ph in enumerate(phases, start=1):
            cond = ph.temperature + (f", {ph.humidity}" if ph.humidity else "")
            params.append(
                Parameter(
                    f"phase_{i}_{ph.name.replace(' ', '_')}",
                    value=ph.hours,
                    unit="h",
                    text=cond,
                    provenance=provenance,
                )
            )
        params += [
            Parameter("cycle_length", value=one, unit="h", provenance="computed"),
            Parameter(
                "cycles",
                value=cycles,
                unit=None,
                provenance="declared" if sm.cycles else "confirmed",
            ),
            Parameter("total_duration", value=total, unit="h", provenance="computed"),
            Parameter(
                "transfer",
                text="move specimens to the next phase without drying them; "
                "method 7 transitions: spray to dry within 30 min, dry to wet within 15 min, "
                "wet to spray within 30 min"
                if method == 7
                else "move specimens to humid storage straight after spraying, without drying",
                provenance="confirmed" if method == 7 else "from memory",
            ),
            Parameter("rinse_and_recovery", text=RINSE_IEC, provenance="from memory"),
        ]
        criteria = [
            Criterion(
                f"{pid}.fallout",
                "fog_collection",
                "between",
                "per_period",
                unit="ml/80cm^2/h",
                min=FALLOUT[0],
                max=FALLOUT[1],
                text="per spray phase, every collector",
            ),
            Criterion(
                f"{pid}.ph", "solution_ph", "between", "at_start", unit="pH", min=6.5, max=7.2
            ),
            Criterion(
                f"{pid}.cycles", "cycles_completed", ">=", "at_end", unit="cycle", min=float(cycles)
            ),
        ]
        if kb is not None and not sm.phases and method in PHASE_BANDS_METHODS:
            criteria += phase_bands(pid, {ph.name for ph in phases})
        title = f"Cyclic salt mist, Kb method {method}"
        standard, edition, clause = "IEC 60068-2-52", "Ed. 3 (2017)", f"test method {method}"
    else:
        variant = str(sm.test_method).upper()
        if std == "IEC 60068-2-11":
            variant = "KA"
        elif std == "ASTM B117":
            variant = "B117"
        spec = CONTINUOUS.get((std, variant))
        if spec is None:
            raise PlanningError(
                f"unknown method {sm.test_method!r} for {std}",
                key="salt_mist.test_method",
                fix="ISO 9227 takes NSS, AASS or CASS",
            )
        if sm.duration_h is None:
            raise PlanningError(
                f"{std} {spec.variant}: the exposure time comes from the product specification",
                key="salt_mist.duration",
                fix='add duration = "480 h" to [salt_mist]',
            )
        total = sm.duration_h
        if spec.durations and round(total, 6) not in {float(d) for d in spec.durations}:
            notes.append(
                f"{total:g} h is not one of the usual durations "
                f"({', '.join(f'{d:g}' for d in spec.durations)} h)."
            )
        params = [
            Parameter("method", text=spec.variant, provenance="declared"),
            Parameter(
                "solution",
                text=spec.solution,
                provenance="from memory" if spec.variant != "Ka" else "confirmed",
            ),
            Parameter("solution_ph", min=spec.ph[0], max=spec.ph[1], unit="pH", text=spec.ph_note),
            Parameter(
                "cabinet_temperature",
                min=spec.temperature[0],
                max=spec.temperature[1],
                unit="degC",
                text=spec.temperature_note,
                provenance=spec.temperature_provenance,
            ),
            *base_params,
            Parameter(
                "collection_period",
                min=spec.collection_h,
                unit="h",
                text="average the fog collection over periods at least this long",
                provenance="from memory",
            ),
            Parameter("duration", value=total, unit="h", provenance="declared"),
            Parameter(
                "rinse_and_recovery",
                text=RINSE_IEC if std.startswith("IEC") else RINSE_ISO,
                provenance="from memory",
            ),
        ]
        criteria = [
            Criterion(
                f"{pid}.fallout",
                "fog_collection",
                "between",
                "per_period",
                unit="ml/80cm^2/h",
                min=FALLOUT[0],
                max=FALLOUT[1],
                text="every collector, each collection period",
            ),
            Criterion(
                f"{pid}.temperature",
                "cabinet_temperature",
                "between",
                "per_period",
                unit="degC",
                min=spec.temperature[0],
                max=spec.temperature[1],
                phase="exposure",
            ),
            Criterion(
                f"{pid}.ph",
                "solution_ph",
                "between",
                "at_start",
                unit="pH",
                min=spec.ph[0],
                max=spec.ph[1],
            ),
            Criterion(f"{pid}.duration", "duration", ">=", "at_end", unit="h", min=total),
        ]
        title = f"Salt spray, {spec.variant}"
        standard, edition, clause = spec.standard, spec.edition, spec.clause
    criteria += _common_outcomes(pid, sm, functional_check)
    criteria.append(
        Criterion(
            f"{pid}.ingress_retest",
            "ingress_retest",
            "pass",
            "outcome",
            text="the specimens pass the leg's ingress retest after recovery",
        )
    )
    notes.append(
        "The salt-mist standards give no pass criterion; the criteria here come from "
        "the campaign file."
    )
    return Procedure(
        id=pid,
        family="salt_mist",
        group="salt_mist",
        code=f"{standard} {title.split(', ')[-1]}",
        title=title,
        standard=standard,
        edition=edition,
        clause=clause,
        status="planned",
        parameters=tuple(params),
        criteria=tuple(criteria),
        cautions=cautions("salt_aerosol", "chamber_heat", "saline_electrics"),
        specimen_state=(
            "covers, seals and glands fitted as in service",
            "not energised unless the relevant specification requires it",
        ),
        notes=tuple(notes),
        duration_h=total,
        order=50,
    )
