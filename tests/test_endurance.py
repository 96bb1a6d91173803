"""Endurance statistics and the design check, against scipy, the reliability library and
hand-worked examples."""

from __future__ import annotations

import math
import tomllib
import warnings

import pytest
from hypothesis import given
from hypothesis import strategies as st

from testplan.domain.endurance import (
    friction_torque_n_mm,
    shear_modulus_gpa,
    spring_rate_n_per_mm,
)
from testplan.domain.plan import Procedure
from testplan.domain.planner import build_plan
from testplan.domain.stats import (
    chi2_quantile_even,
    cycles_to_demonstrate,
    demonstrated_reliability,
    length_ratio,
    success_run_sample_size,
)
from testplan.errors import CampaignFileError, PlanningError
from testplan.reader import campaign_from_dict
from tests.conftest import BASE

KNOB = {
    "name": "mode selector knob",
    "travel": "120 deg",
    "operations_per_cycle": 2,
    "rated_cycles": 20000,
    "reliability": 0.9,
    "confidence": 0.9,
    "weibull_shape": 2.0,
    "rig_specimens": 3,
    "rate": "10 cycle/min",
    "failure": "torque out of band",
    "checkpoints": [0, 1000, 5000, 10000],
}


def knob_data(**change: object) -> dict[str, object]:
    data = tomllib.loads(BASE)
    data["endurance"] = [dict(KNOB, **change)]
    return data


def knob(**change: object) -> Procedure:
    return build_plan(campaign_from_dict(knob_data(**change))).procedure(
        "endurance-mode-selector-knob"
    )


def reliability_lib():  # type: ignore[no-untyped-def]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        from reliability import Reliability_testing

    return Reliability_testing


@pytest.mark.parametrize(
    ("r", "c", "n"),
    # source: reliability Reliability_testing.sample_size_no_failures, n = ln(1-C)/ln(R)
    [(0.9, 0.9, 22), (0.95, 0.9, 45), (0.9, 0.95, 29), (0.999, 0.95, 2995)],
)
def test_success_run(r: float, c: float, n: int) -> None:
    assert success_run_sample_size(r, c) == n
    # source: reliability.Reliability_testing.sample_size_no_failures
    assert reliability_lib().sample_size_no_failures(reliability=r, CI=c, print_results=False) == n


@given(st.floats(0.5, 0.999), st.floats(0.5, 0.99), st.integers(1, 30), st.floats(0.5, 4.0))
def test_zero_failure_cycles_round_trip_through_reliability_lib(
    r: float, c: float, n: int, beta: float
) -> None:
    rated = 10000
    cycles = cycles_to_demonstrate(rated, r, c, n, beta)
    exact = rated * length_ratio(r, c, n, beta)
    assert exact - 1e-6 <= cycles < exact + 1
    lib = reliability_lib().sample_size_no_failures
    # source: reliability.Reliability_testing.sample_size_no_failures (lifetimes = t / t0);
    # one cycle either side keeps float ties at whole numbers out of the comparison
    assert (
        lib(
            reliability=r,
            CI=c,
            lifetimes=(cycles + 1) / rated,
            weibull_shape=beta,
            print_results=False,
        )
        <= n
    )
    if cycles - 1 < exact - 1e-3:
        assert (
            lib(
                reliability=r,
                CI=c,
                lifetimes=(cycles - 1) / rated,
                weibull_shape=beta,
                print_results=False,
            )
            >= n
        )


def test_lipson_worked_example() -> None:
    # source: reliability library docs, L=3, R=0.999, C=0.95, beta=1 -> 999 units
    assert math.ceil(math.log(0.05) / (3 * math.log(0.999))) == 999
    assert length_ratio(0.999, 0.95, 999, 1.0) <= 3.0 < length_ratio(0.999, 0.95, 998, 1.0)


def test_test_cycles_worked_example() -> None:
    # source: Weibull success run solved for t (from memory):
    # t0=1e5, R=0.9, C=0.9, n=10, beta=2 -> about 1.48e5
    assert cycles_to_demonstrate(100000, 0.9, 0.9, 10, 2.0) == pytest.approx(148000, rel=0.005)


@pytest.mark.parametrize("p", [0.5, 0.8, 0.9, 0.95, 0.99])
@pytest.mark.parametrize("dof", [2, 4, 6, 10])
def test_chi2_quantile_matches_scipy(p: float, dof: int) -> None:
    from scipy.stats import chi2

    # source: scipy.stats.chi2
    assert chi2_quantile_even(p, dof) == pytest.approx(chi2.ppf(p, dof), rel=1e-9)


def test_one_failure_chi_squared_form() -> None:
    from scipy.stats import chi2

    # source: chi-squared Weibull form (from memory):
    # R=0.9, C=0.9, beta=1, L=1, r=1 -> 36.9 -> 37 units
    need = chi2.ppf(0.9, 4) / (2 * -math.log(0.9))
    assert need == pytest.approx(36.9, abs=0.05)
    assert length_ratio(0.9, 0.9, 37, 1.0, failures=1) <= 1.0 < length_ratio(0.9, 0.9, 36, 1.0, 1)
    # r = 0 reduces exactly to the success-run formula
    assert chi2.ppf(0.9, 2) / (2 * -math.log(0.9)) == pytest.approx(math.log(0.1) / math.log(0.9))


def test_demonstrated_reliability_round_trip() -> None:
    cycles = cycles_to_demonstrate(20000, 0.9, 0.9, 3, 2.0)
    assert demonstrated_reliability([cycles] * 3, 20000, 0.9, 2.0) >= 0.9
    assert demonstrated_reliability([cycles - 50] * 3, 20000, 0.9, 2.0) < 0.9


def test_plan_statistics_for_the_knob() -> None:
    pr = knob()
    # t = t0 (ln(1-C) / (n ln R))^(1/beta) = 20000 * sqrt(ln 0.1 / (3 ln 0.9))
    expected = math.ceil(20000 * math.sqrt(math.log(0.1) / (3 * math.log(0.9))))
    assert pr.parameter("test_cycles").value == expected == 53981
    assert pr.parameter("success_run_specimens").value == 22
    assert pr.parameter("rig_time").value == pytest.approx(expected / 10 / 60, abs=1e-3)
    assert pr.parameter("checkpoints").text == "0, 1000, 5000, 10000, 53981"


def test_spring_rate_hand_worked() -> None:
    # source: k = G d^4 / (8 D^3 n_a) (helical spring rate); hand-worked: G = 69 GPa,
    # d = 0.8 mm, D = 5 mm, n_a = 7 -> 69000 * 0.4096 / (8 * 125 * 7) = 28262.4 / 7000 N/mm
    assert spring_rate_n_per_mm(69.0, 0.8, 5.0, 7) == pytest.approx(4.0374857, rel=1e-7)
    # source: Shigley, Mechanical Engineering Design, G by wire size: stainless 302
    # 69.0 GPa; music wire 81.7 GPa for 0.8-1.6 mm (from memory; the 82.7 and 80.0 ends
    # are in the textbook table)
    assert shear_modulus_gpa("music wire", 1.0) == 81.7
    assert shear_modulus_gpa("Stainless  302", 0.8) == 69.0
    with pytest.raises(PlanningError, match="unknown spring material"):
        shear_modulus_gpa("unobtainium", 1.0)


def test_friction_torque_and_material_radius_ratio() -> None:
    # common practice (no source): M = r x F_N x mu
    assert friction_torque_n_mm(3.7, 6.0, 1.2) == pytest.approx(26.64)
    # common practice (no source): mu ABS/ABS about 0.11-0.46, Al/Al about 1.05-1.35,
    # so an aluminium friction element can be about 2.3x smaller in radius for the same torque
    # (the lowest aluminium mu against the highest ABS mu: the band stays covered)
    r_abs = 10.0
    r_al = friction_torque_n_mm(r_abs, 5.0, 0.46) / (5.0 * 1.05)
    assert friction_torque_n_mm(r_al, 5.0, 1.05) == pytest.approx(
        friction_torque_n_mm(r_abs, 5.0, 0.46)
    )
    assert r_abs / r_al == pytest.approx(2.3, abs=0.05)


def test_design_band_in_plan() -> None:
    pr = knob(
        friction_radius="3.7 mm",
        spring_wire="0.8 mm",
        spring_mean_diameter="5 mm",
        spring_active_coils=7,
        spring_deflection="1.5 mm",
        spring_material="stainless 302",
        friction_coefficient=[1.05, 1.35],
        torque_tolerance="20 %",
    )
    band = pr.parameter("torque_band")
    force = 28262.4 / 7000 * 1.5
    assert band.min == pytest.approx(3.7 * force * 1.05, abs=1e-5)
    assert band.max == pytest.approx(3.7 * force * 1.35, abs=1e-5)
    torque = next(c for c in pr.criteria if c.quantity == "torque_change_from_cycle0")
    assert (torque.min, torque.max, torque.when) == (-20.0, 20.0, "at_checkpoints")
    # common practice (no source): an operating lever travels +/-60 deg, 120 deg in total
    assert pr.parameter("travel").value == 120.0


@pytest.mark.parametrize(
    ("change", "key"),
    [
        ({"reliability": 1.0}, "endurance[1].reliability"),
        ({"confidence": 0.0}, "endurance[1].confidence"),
        ({"rig_specimens": 0}, "endurance[1].rig_specimens"),
        ({"travel": "0 deg"}, "endurance[1].travel"),
        ({"rate": "0 cycle/min"}, "endurance[1].rate"),
        ({"weibull_shape": -1.0}, "endurance[1].weibull_shape"),
        ({"checkpoints": [0, 5000, 1000]}, "endurance[1].checkpoints"),
    ],
)
def test_impossible_inputs_are_refused(change: dict[str, object], key: str) -> None:
    with pytest.raises(CampaignFileError) as info:
        campaign_from_dict(knob_data(**change))
    assert info.value.key == key


def test_partial_design_check_names_missing_key() -> None:
    with pytest.raises(PlanningError) as info:
        knob(friction_radius="3.7 mm")
    assert info.value.key == "endurance[1].spring_wire"


def test_endurance_records_failure_cycles_and_seal_retest() -> None:
    quantities = {c.quantity for c in knob().criteria}
    assert {
        "cycles_reached",
        "failures",
        "failure_cycle_recorded",
        "seal_ingress_retest",
    } <= quantities


def test_modulus_provenance_follows_the_table() -> None:
    # source: Shigley, Mechanical Engineering Design, G of A228 music wire: 82.7 and 80.0 ends
    # of music wire only, so a 1.0 mm wire's 81.7 GPa is from memory
    spec = dict(
        friction_radius="3.7 mm",
        spring_mean_diameter="8 mm",
        spring_active_coils=7,
        spring_deflection="1.5 mm",
        friction_coefficient=[1.05, 1.35],
    )
    mid = knob(spring_wire="1.0 mm", spring_material="music wire", **spec)
    end = knob(spring_wire="0.5 mm", spring_material="music wire", **spec)
    assert mid.parameter("shear_modulus").provenance == "from memory"
    assert end.parameter("shear_modulus").provenance == "confirmed"
    assert end.parameter("shear_modulus").value == 82.7
    assert "published tables differ" in (mid.parameter("shear_modulus").text or "")


def test_long_weibull_extension_notes_the_shape_and_the_alternatives() -> None:
    # source: reliability Reliability_testing.sample_size_no_failures (warns above 5 lifetimes)
    lib = reliability_lib()
    p = knob(rig_specimens=1, weibull_shape=1.0, checkpoints=[0])
    note = next(n for n in p.notes if "rated lives" in n)
    assert "carries the demonstration" in note
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for lives in (1, 2, 3, 5):
            expected = lib.sample_size_no_failures(
                reliability=0.9, CI=0.9, lifetimes=lives, weibull_shape=1.0, print_results=False
            )
            assert f"{expected} specimens at {lives:g} rated lives" in note
    assert not any("rated lives" in n for n in knob().notes)
