"""Cycle-endurance procedures: the demonstration statistics and the design check.

Torques in N*mm, forces in N, lengths in mm, spring rates in N/mm, moduli in GPa.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

from testplan.domain.campaign import Endurance
from testplan.domain.cautions import cautions
from testplan.domain.plan import Criterion, Parameter, Procedure, Provenance
from testplan.domain.stats import (
    cycles_to_demonstrate,
    specimens_for_length,
    success_run_sample_size,
)
from testplan.errors import PlanningError

# Shear modulus G of spring materials, GPa, by wire diameter where it varies.
# Bands (upper wire diameter in mm, G, provenance): the usual spring-design handbook table;
# for the graded wires only the end bands were seen in a public source.
SHEAR_MODULUS_GPA: dict[str, tuple[tuple[float, float, Provenance], ...]] = {
    "music wire": (
        (0.8, 82.7, "confirmed"),
        (1.6, 81.7, "from memory"),
        (3.2, 81.0, "from memory"),
        (math.inf, 80.0, "confirmed"),
    ),
    "hard-drawn": (
        (0.8, 80.7, "confirmed"),
        (1.6, 80.0, "from memory"),
        (3.2, 79.3, "from memory"),
        (math.inf, 78.6, "confirmed"),
    ),
    "oil-tempered": ((math.inf, 77.2, "confirmed"),),
    "chrome-vanadium": ((math.inf, 77.2, "confirmed"),),
    "chrome-silicon": ((math.inf, 77.2, "confirmed"),),
    "stainless 302": ((math.inf, 69.0, "confirmed"),),
    "stainless 304": ((math.inf, 69.0, "confirmed"),),
    "stainless 316": ((math.inf, 69.0, "confirmed"),),
    "17-7 ph": ((math.inf, 72.4, "confirmed"),),
}


def shear_modulus_gpa(material: str, wire_mm: float) -> float:
    """Shear modulus (GPa) of a spring material for a wire diameter (mm).

    Raises PlanningError naming the known materials for an unknown one.
    """
    return shear_modulus_entry(material, wire_mm)[0]


def shear_modulus_entry(material: str, wire_mm: float) -> tuple[float, Provenance]:
    """Shear modulus (GPa) and the provenance of that table value.

    Raises PlanningError naming the known materials for an unknown one.
    """
    name = re.sub(r"\s+", " ", material.strip().lower())
    bands = SHEAR_MODULUS_GPA.get(name)
    if bands is None:
        raise PlanningError(
            f"unknown spring material {material!r}",
            fix="one of " + ", ".join(SHEAR_MODULUS_GPA) + ", or give shear_modulus instead",
        )
    for upper, g, provenance in bands:
        if wire_mm <= upper:
            return g, provenance
    return bands[-1][1], bands[-1][2]  # pragma: no cover - last band is unbounded


def spring_rate_n_per_mm(
    g_gpa: float, wire_mm: float, mean_diameter_mm: float, active: float
) -> float:
    """Helical compression spring rate k = G d^4 / (8 D^3 n_a), in N/mm."""
    if min(g_gpa, wire_mm, mean_diameter_mm, active) <= 0:
        raise PlanningError("spring dimensions and modulus must be greater than zero")
    if wire_mm >= mean_diameter_mm:
        raise PlanningError("the spring wire must be thinner than the mean coil diameter")
    g_n_mm2 = g_gpa * 1000.0
    return g_n_mm2 * wire_mm**4 / (8.0 * mean_diameter_mm**3 * active)


def friction_torque_n_mm(radius_mm: float, normal_force_n: float, mu: float) -> float:
    """Friction torque M = r * F_N * mu, in N*mm."""
    return radius_mm * normal_force_n * mu


@dataclass(frozen=True)
class DesignCheck:
    """The spring and friction design check for one endurance item."""

    shear_modulus_gpa: float
    modulus_source: Provenance
    spring_rate_n_mm: float
    normal_force_n: float
    torque_min_n_mm: float
    torque_max_n_mm: float


def design_check(item: Endurance, key: str) -> DesignCheck | None:
    """Compute the design check when the item gives its spring and friction data.

    Returns None when none of the design keys is given; raises PlanningError naming the
    first missing key when only some are.
    """
    needed = {
        "friction_radius": item.friction_radius_mm,
        "spring_wire": item.spring_wire_mm,
        "spring_mean_diameter": item.spring_mean_diameter_mm,
        "spring_active_coils": item.spring_active_coils,
        "spring_deflection": item.spring_deflection_mm,
        "friction_coefficient": item.friction_coefficient,
    }
    material_given = item.spring_material is not None or item.shear_modulus_gpa is not None
    if all(v is None for v in needed.values()) and not material_given:
        return None
    for name, value in needed.items():
        if value is None:
            raise PlanningError("the design check needs this key too", key=f"{key}.{name}")
    if not material_given:
        raise PlanningError(
            "the design check needs spring_material or shear_modulus", key=f"{key}.spring_material"
        )
    assert item.spring_wire_mm is not None and item.spring_mean_diameter_mm is not None
    assert item.spring_active_coils is not None and item.spring_deflection_mm is not None
    assert item.friction_radius_mm is not None and item.friction_coefficient is not None
    if item.shear_modulus_gpa is not None:
        g = item.shear_modulus_gpa
        source: Provenance = "declared"
    else:
        assert item.spring_material is not None
        try:
            g, source = shear_modulus_entry(item.spring_material, item.spring_wire_mm)
        except PlanningError as err:
            err.key = f"{key}.spring_material"
            raise
    try:
        k = spring_rate_n_per_mm(
            g, item.spring_wire_mm, item.spring_mean_diameter_mm, item.spring_active_coils
        )
    except PlanningError as err:
        err.key = f"{key}.spring_wire"
        raise
    force = k * item.spring_deflection_mm
    lo, hi = item.friction_coefficient
    return DesignCheck(
        shear_modulus_gpa=g,
        modulus_source=source,
        spring_rate_n_mm=k,
        normal_force_n=force,
        torque_min_n_mm=friction_torque_n_mm(item.friction_radius_mm, force, lo),
        torque_max_n_mm=friction_torque_n_mm(item.friction_radius_mm, force, hi),
    )


def slug(text: str) -> str:
    """Lower-case id fragment: 'mode selector knob' -> 'mode-selector-knob'."""
    return re.sub(r"[^a-z0-9]+", "-", text.lower()).strip("-") or "item"


LONG_EXTENSION_LIVES = 5.0  # the `reliability` package warns above this many lifetimes


def _long_extension_note(item: Endurance, cycles: int) -> tuple[str, ...]:
    """A note when each specimen runs several rated lives: the assumed shape carries it."""
    lives = cycles / item.rated_cycles
    if lives <= LONG_EXTENSION_LIVES:
        return ()
    r, c, beta, f = item.reliability, item.confidence, item.weibull_shape, item.allowed_failures
    options = ", ".join(
        f"{specimens_for_length(r, c, lives_each, beta, f)} specimens at {lives_each:g} rated lives"
        for lives_each in (1.0, 2.0, 3.0, LONG_EXTENSION_LIVES)
    )
    return (
        f"Each specimen runs {lives:.3g} rated lives (above {LONG_EXTENSION_LIVES:g}): the "
        f"assumed Weibull shape ({item.weibull_shape:g}) carries the demonstration, not the "
        f"test. Alternatives for the same R and C: {options}.",
    )


def endurance_procedure(item: Endurance) -> Procedure:
    """The cycle-endurance procedure for one item, with statistics and design check."""
    key = f"endurance[{item.index}]"
    n = item.rig_specimens
    try:
        cycles = cycles_to_demonstrate(
            item.rated_cycles,
            item.reliability,
            item.confidence,
            n,
            item.weibull_shape,
            item.allowed_failures,
        )
        cycles_r0 = cycles_to_demonstrate(
            item.rated_cycles, item.reliability, item.confidence, n, item.weibull_shape, 0
        )
        cycles_r1 = cycles_to_demonstrate(
            item.rated_cycles, item.reliability, item.confidence, n, item.weibull_shape, 1
        )
    except PlanningError as err:
        raise err.located(key=f"{key}.weibull_shape") from None
    n_success = success_run_sample_size(item.reliability, item.confidence)
    rig_hours = cycles / item.rate_per_min / 60.0
    pid = f"endurance-{slug(item.name)}"
    checkpoints = sorted(set(item.checkpoints) | {cycles})
    if any(c > cycles for c in item.checkpoints):
        raise PlanningError(
            f"a checkpoint lies beyond the {cycles} cycles to be run", key=f"{key}.checkpoints"
        )
    params: list[Parameter] = [
        Parameter("rated_cycles", value=item.rated_cycles, unit="cycle", provenance="declared"),
        Parameter("reliability", value=item.reliability, unit=None, provenance="declared"),
        Parameter("confidence", value=item.confidence, unit=None, provenance="declared"),
        Parameter(
            "weibull_shape",
            value=item.weibull_shape,
            unit=None,
            provenance="declared",
            text="assumed wear-out shape; customer-supplied",
        ),
        Parameter("rig_specimens", value=n, unit="specimens", provenance="declared"),
        Parameter(
            "allowed_failures", value=item.allowed_failures, unit=None, provenance="declared"
        ),
        Parameter(
            "test_cycles",
            value=cycles,
            unit="cycle",
            provenance="computed",
            text=f"per specimen, to show R = {item.reliability:g} at C = {item.confidence:g} "
            f"with {n} specimens and {item.allowed_failures} failure(s) allowed",
        ),
        Parameter(
            "test_cycles_zero_failures",
            value=cycles_r0,
            unit="cycle",
            provenance="computed",
            text="Weibull test extension: t0 * (ln(1-C) / (n ln R))^(1/beta)",
        ),
        Parameter(
            "test_cycles_one_failure",
            value=cycles_r1,
            unit="cycle",
            provenance="computed",
            text="chi-squared form with 4 degrees of freedom",
        ),
        Parameter(
            "success_run_specimens",
            value=n_success,
            unit="specimens",
            provenance="computed",
            text="zero-failure sample size if each is run only to the rated life",
        ),
        Parameter(
            "travel",
            value=item.travel_deg,
            unit="deg",
            provenance="declared",
            text="total travel of one operation",
        ),
        Parameter(
            "operations_per_cycle",
            value=item.operations_per_cycle,
            unit=None,
            provenance="declared",
        ),
        Parameter("rate", value=item.rate_per_min, unit="cycle/min", provenance="declared"),
        Parameter(
            "rig_time",
            value=round(rig_hours, 4),
            unit="h",
            provenance="computed",
            text=f"{cycles} cycles at {item.rate_per_min:g} cycle/min",
        ),
        Parameter(
            "checkpoints",
            text=", ".join(str(c) for c in checkpoints),
            unit="cycle",
            provenance="declared",
            value=None,
        ),
        Parameter("failure_definition", text=item.failure, provenance="declared"),
    ]
    criteria: list[Criterion] = [
        Criterion(
            f"{pid}.cycles", "cycles_reached", ">=", "at_end", unit="cycle", min=float(cycles)
        ),
        Criterion(
            f"{pid}.failures",
            "failures",
            "<=",
            "outcome",
            unit="count",
            max=float(item.allowed_failures),
            text=f"failure: {item.failure}; record the exact cycle count of any failure",
        ),
        Criterion(
            f"{pid}.failure_cycles",
            "failure_cycle_recorded",
            "pass",
            "outcome",
            text="for every failure, the cycle count at which it was found (the statistics use it)",
        ),
        Criterion(
            f"{pid}.seal_retest",
            "seal_ingress_retest",
            "pass",
            "outcome",
            text="the seals of the cycled specimens pass the leg's ingress retest afterwards",
        ),
    ]
    check = design_check(item, key)
    if check is not None:
        params += [
            Parameter(
                "shear_modulus",
                value=check.shear_modulus_gpa,
                unit="GPa",
                provenance=check.modulus_source,
                text=(
                    f"{item.spring_material}, {item.spring_wire_mm:g} mm wire: spring-wire G "
                    "table by wire size; published tables differ by a few percent for some "
                    "steels, declare shear_modulus to use the wire maker's figure"
                    if item.spring_material and item.shear_modulus_gpa is None
                    else "declared"
                ),
            ),
            Parameter(
                "spring_rate",
                value=round(check.spring_rate_n_mm, 6),
                unit="N/mm",
                provenance="computed",
                text="G d^4 / (8 D^3 n_a)",
            ),
            Parameter(
                "normal_force",
                value=round(check.normal_force_n, 6),
                unit="N",
                provenance="computed",
                text="spring rate x deflection",
            ),
            Parameter(
                "torque_band",
                min=round(check.torque_min_n_mm, 6),
                max=round(check.torque_max_n_mm, 6),
                unit="N*mm",
                provenance="computed",
                text="r x F_N x mu over the declared mu range",
            ),
        ]
    if item.torque_tolerance_pct is not None:
        tol = item.torque_tolerance_pct
        params.append(
            Parameter(
                "torque_tolerance",
                value=tol,
                unit="%",
                provenance="declared",
                text="of the torque measured at cycle 0",
            )
        )
        criteria.append(
            Criterion(
                f"{pid}.torque",
                "torque_change_from_cycle0",
                "between",
                "at_checkpoints",
                unit="%",
                min=-tol,
                max=tol,
                text="operating torque at every checkpoint",
            )
        )
    if check is not None:
        criteria.append(
            Criterion(
                f"{pid}.torque_cycle0",
                "torque_at_cycle0",
                "between",
                "at_start",
                unit="N*mm",
                min=round(check.torque_min_n_mm, 6),
                max=round(check.torque_max_n_mm, 6),
                text="first reading inside the design band",
            )
        )
    return Procedure(
        id=pid,
        family="endurance",
        group="endurance",
        code=f"{item.rated_cycles} cycles",
        title=f"Cycle endurance: {item.name}",
        standard="Reliability demonstration test (Weibull, zero-failure and chi-squared forms)",
        edition="",
        clause="",
        status="planned",
        parameters=tuple(params),
        criteria=tuple(criteria),
        cautions=cautions("moving_rig"),
        specimen_state=(
            "mounted on the rig as in service, operated through its full travel each operation",
            "specimen not energised unless the failure definition needs it monitored",
        ),
        notes=(
            "The specimens afterwards go on to the ingress retest of their seals.",
            "Demonstrated reliability from the cycles reached is an interpretation.",
            *_long_extension_note(item, cycles),
        ),
        duration_h=rig_hours,
        order=60,
    )
