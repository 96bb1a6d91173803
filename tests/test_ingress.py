"""Ingress procedures sized to the specimen, checked against the standards' numbers."""

from __future__ import annotations

import pytest

from testplan.domain.ingress import hydrostatic_kpa, ipx7_depths_mm
from testplan.errors import PlanningError
from tests.helpers import campaign, plan, value


@pytest.mark.parametrize(
    ("height", "lowest", "highest"),
    [
        ("310 mm", 1000.0, 690.0),  # common practice (no source): lowest point 1 m under
        ("849 mm", 1000.0, 151.0),  # common practice (no source)
        (
            "850 mm",
            1000.0,
            150.0,
        ),  # common practice (no source): 850 mm or taller, top 150 mm under
        ("1.2 m", 1350.0, 150.0),  # common practice (no source)
    ],
)
def test_ipx7_depths_from_height(height: str, lowest: float, highest: float) -> None:
    p = plan(device={"height": height}, target={"code": "IPX7"})
    assert value(p, "water-7", "lowest_point_depth") == pytest.approx(lowest)
    assert value(p, "water-7", "highest_point_depth") == pytest.approx(highest)
    assert value(p, "water-7", "duration") == 30.0  # common practice (no source): 30 min
    depth = next(c for c in p.procedure("water-7").criteria if c.quantity == "lowest_point_depth")
    assert depth.when == "whole_run" and depth.min == pytest.approx(lowest)


def test_ipx7_water_temperature_rule() -> None:
    # source: IEC 60529 cl. 14.2.7, water within 5 K of the specimen
    c = next(
        c
        for c in plan(target={"code": "IPX7"}).procedure("water-7").criteria
        if c.quantity == "water_specimen_difference"
    )
    assert (c.comparison, c.max, c.unit, c.when) == ("<=", 5.0, "K", "at_start")


def test_ipx7_rule_function() -> None:
    assert ipx7_depths_mm(849.9) == (1000.0, pytest.approx(150.1))
    assert ipx7_depths_mm(900.0) == (1050.0, 150.0)


def test_ipx8_fresh_declared_at_lowest_point() -> None:
    # common practice (no source): IPX8 depth and duration declared, at the lowest point
    p = plan(target={"code": "IPX8", "immersion_depth": "2 m", "immersion_duration": "72 h"})
    assert value(p, "water-8", "lowest_point_depth") == pytest.approx(2000.0)
    assert value(p, "water-8", "duration") == 72.0
    # source: hydrostatics p = rho g h, 998.2 kg/m^3 fresh water at 20 degC (handbook value)
    assert value(p, "water-8", "pressure_at_lowest_point") == pytest.approx(19.578, abs=1e-3)


def test_ipx8_declared_at_highest_point_adds_the_height() -> None:
    p = plan(
        target={
            "code": "IPX8",
            "immersion_depth": "1.5 m",
            "immersion_duration": "24 h",
            "depth_reference": "highest point",
        }
    )
    assert value(p, "water-8", "lowest_point_depth") == pytest.approx(1810.0)
    assert value(p, "water-8", "highest_point_depth") == pytest.approx(1500.0)


def test_hydrostatic_worked_values() -> None:
    # source: p = rho g h arithmetic (from memory): 1 m fresh 9.79 kPa, 1 m sea 10.05, 10 m 97.9
    assert hydrostatic_kpa(1.0) == pytest.approx(9.79, abs=0.005)
    assert hydrostatic_kpa(1.0, 1025.0) == pytest.approx(10.05, abs=0.005)
    assert hydrostatic_kpa(10.0) == pytest.approx(97.9, abs=0.05)


def test_ipx8_sea_water_matches_gsw_pressure() -> None:
    import gsw

    p = plan(
        target={
            "code": "IPX8",
            "immersion_depth": "2 m",
            "immersion_duration": "72 h",
            "service_water": "sea",
        }
    )
    fresh_mm = value(p, "water-8", "lowest_point_depth")
    # source: gsw.rho (TEOS-10), absolute salinity 35 g/kg, 15 degC, surface
    rho_sea = gsw.rho(35.0, 15.0, 0.0)
    expected_mm = 2000.0 * rho_sea / 998.2
    assert fresh_mm == pytest.approx(expected_mm, rel=2e-3)
    assert fresh_mm > 2000.0
    pressure = value(p, "water-8", "pressure_at_lowest_point")
    assert pressure == pytest.approx(rho_sea * 9.80665 * 2.0 / 1000.0, rel=2e-3)


@pytest.mark.parametrize(
    ("depth", "duration", "height"),
    [("1 m", "30 min", "310 mm"), ("0.5 m", "20 min", "310 mm"), ("1.05 m", "30 min", "900 mm")],
)
def test_ipx8_no_more_severe_than_ipx7_is_refused(depth: str, duration: str, height: str) -> None:
    # source: IEC 60529 cl. 14.2.8, conditions more severe than numeral 7
    with pytest.raises(PlanningError, match="more severe") as info:
        plan(
            device={"height": height},
            target={"code": "IPX8", "immersion_depth": depth, "immersion_duration": duration},
        )
    assert info.value.key == "target.immersion_depth"


def test_ipx8_must_immerse_the_whole_specimen() -> None:
    # source: IEC 60529 cl. 14.2.8, continuous immersion of the whole enclosure
    with pytest.raises(PlanningError, match="immerse the whole specimen") as info:
        plan(
            device={"height": "1.2 m"},
            target={"code": "IPX8", "immersion_depth": "1.1 m", "immersion_duration": "72 h"},
        )
    assert info.value.key == "target.immersion_depth"
    assert "depth_reference" in info.value.one_line()


@pytest.mark.parametrize(
    ("height", "depth", "duration", "ipx7", "key"),
    [
        ("310 mm", "0.8 m", "72 h", "1 m at the lowest point", "target.immersion_depth"),
        ("310 mm", "3 m", "20 min", "for 30 min", "target.immersion_duration"),
        ("1.2 m", "1.3 m", "72 h", "1.35 m at the lowest point", "target.immersion_depth"),
    ],
)
def test_ipx8_less_severe_than_ipx7_in_depth_or_duration_is_refused(
    height: str, depth: str, duration: str, ipx7: str, key: str
) -> None:
    # source: IEC 60529 cl. 14.2.7 and 14.2.8, numeral 8 more severe than numeral 7
    with pytest.raises(PlanningError, match="more severe") as info:
        plan(
            device={"height": height},
            target={"code": "IPX8", "immersion_depth": depth, "immersion_duration": duration},
        )
    line = info.value.one_line()
    assert ipx7 in line
    assert info.value.key == key
    assert "\n" not in line


def test_ipx8_tall_specimen_keeps_ipx7_cover_over_the_top() -> None:
    # source: IEC 60529 cl. 14.2.7, 850 mm or taller: highest point 150 mm under
    p = plan(
        device={"height": "1.2 m"},
        target={"code": "IPX8", "immersion_depth": "1.35 m", "immersion_duration": "72 h"},
    )
    assert value(p, "water-8", "highest_point_depth") == pytest.approx(150.0)


def test_ipx8_longer_than_ipx7_at_same_depth_is_accepted() -> None:
    p = plan(target={"code": "IPX8", "immersion_depth": "1 m", "immersion_duration": "2 h"})
    assert value(p, "water-8", "duration") == 2.0


def test_ipx8_missing_duration() -> None:
    with pytest.raises(PlanningError) as info:
        plan(target={"code": "IPX8", "immersion_depth": "2 m"})
    assert info.value.key == "target.immersion_duration"


def test_jets_time_from_surface_area() -> None:
    # source: IEC 60529 cl. 14.2.5/14.2.6, 1 min/m^2, at least 3 min
    small = plan(device={"surface_area": "0.24 m^2"}, target={"code": "IPX6"})
    large = plan(device={"surface_area": "4.5 m^2"}, target={"code": "IPX5"})
    assert value(small, "water-6", "duration") == 3.0
    assert value(large, "water-5", "duration") == pytest.approx(4.5)
    flow6 = next(c for c in small.procedure("water-6").criteria if c.quantity == "flow")
    # source: IEC 60529 cl. 14.2.6, 100 l/min +/-5 %
    assert (flow6.min, flow6.max) == (95.0, 105.0)
    flow5 = next(c for c in large.procedure("water-5").criteria if c.quantity == "flow")
    # source: IEC 60529 cl. 14.2.5, 12.5 l/min +/-5 %
    assert (flow5.min, flow5.max) == pytest.approx((11.875, 13.125))
    assert value(large, "water-5", "nozzle_diameter") == 6.3


def test_spray_nozzle_minimum_five_minutes_and_tube_size() -> None:
    # source: IEC 60529 cl. 14.2.4, nozzle 1 min/m^2 minimum 5 min; IPX4 tube open holes per
    # radius, IEC 60529 cl. 14.2.4 a)
    p = plan(
        device={"surface_area": "0.24 m^2", "largest_dimension": "700 mm"}, target={"code": "IPX4"}
    )
    assert value(p, "water-4", "tube_radius") == 400
    assert value(p, "water-4", "open_holes") == 25
    assert value(p, "water-4", "tube_flow") == pytest.approx(1.75)
    nozzle = plan(
        device={"surface_area": "0.24 m^2"}, target={"code": "IPX4", "spray_method": "nozzle"}
    )
    assert value(nozzle, "water-4", "nozzle_time") == 5.0
    assert value(nozzle, "water-4", "nozzle_flow") == 10.0


@pytest.mark.parametrize(("largest", "radius"), [("800 mm", 600), ("700 mm", 400), ("290 mm", 200)])
def test_oscillating_tube_clears_the_specimen(largest: str, radius: int) -> None:
    # source: IEC 60529 cl. 14.2.3 a), standard radii 200-1600 mm in 200 mm steps (from
    # memory); the 50 mm clearance is common practice (no source)
    p = plan(device={"largest_dimension": largest}, target={"code": "IPX3"})
    w = p.procedure("water-3")
    assert w.parameter("tube_radius").value == radius
    assert radius - float(largest.split()[0]) / 2 >= 50.0
    assert "50 mm" in (w.parameter("tube_radius").text or "")


def test_tube_needs_no_surface_area_but_the_largest_dimension() -> None:
    # source: IEC 60529 cl. 14.2.3 a), tube duration 10 min whatever the area
    p = plan(device={"surface_area": None}, target={"code": "IPX4"})
    assert value(p, "water-4", "duration") == 10.0
    with pytest.raises(PlanningError) as info:
        plan(device={"largest_dimension": None}, target={"code": "IPX4"})
    assert info.value.key == "device.largest_dimension"
    with pytest.raises(PlanningError) as info:
        plan(device={"surface_area": None}, target={"code": "IPX4", "spray_method": "nozzle"})
    assert info.value.key == "device.surface_area"


def test_specimen_too_large_for_any_tube_plans_the_nozzle() -> None:
    # source: IEC 60529 cl. 14.2.4 b), hand-held nozzle 10 l/min, 1 min/m^2, at least 5 min
    p = plan(
        device={"largest_dimension": "3.2 m", "surface_area": "8 m^2"}, target={"code": "IPX4"}
    )
    w = p.procedure("water-4")
    assert "nozzle" in (w.parameter("method").text or "")
    assert w.parameter("nozzle_time").value == 8.0
    assert not any(c.quantity == "tube_flow" for c in w.criteria)
    with pytest.raises(PlanningError) as info:
        plan(device={"largest_dimension": "3.2 m"}, target={"code": "IPX4", "spray_method": "tube"})
    assert info.value.key == "target.spray_method"


def test_ipx9_method_needs_the_largest_dimension() -> None:
    # source: IEC 60529 cl. 14.2.9, the method depends on the largest dimension (250 mm)
    with pytest.raises(PlanningError) as info:
        plan(device={"largest_dimension": None}, target={"code": "IPX9"})
    assert info.value.key == "device.largest_dimension"


def test_dust_extraction_sized_to_enclosure() -> None:
    # source: IEC 60529 cl. 13.5: 40-60 volumes/h, 80 volumes, 2 kPa, 2 h or up to 8 h
    p = plan(device={"enclosure_volume": "2.4 L"}, target={"code": "IP6X"})
    dust = p.procedure("dust-6")
    assert (dust.parameter("extraction_rate").min, dust.parameter("extraction_rate").max) == (
        pytest.approx(96.0),
        pytest.approx(144.0),
    )
    assert dust.parameter("air_drawn").min == pytest.approx(192.0)
    assert dust.parameter("depression_max").value == 2.0
    assert dust.parameter("duration").value == 2.0
    assert dust.parameter("duration_max").value == 8.0
    # common practice (no source): a 6 for dust means no ingress even with a depression inside
    ingress = next(c for c in dust.criteria if c.quantity == "dust_ingress")
    assert ingress.comparison == "none_found"
    assert any(c.quantity == "depression" and c.max == 2.0 for c in dust.criteria)


def test_ip6x_always_category_1_with_note() -> None:
    # source: IEC 60529 cl. 13.4, IP6X always tested as category 1
    p = plan(device={"dust_category": 2}, target={"code": "IP6X"})
    dust = p.procedure("dust-6")
    assert dust.parameter("category").value == 1
    assert any("category 2" in n for n in dust.notes)


def test_ip5x_category_2_is_eight_hours_without_vacuum() -> None:
    # source: IEC 60529 cl. 13.6, category 2: 8 h, no vacuum
    p = plan(device={"dust_category": 2, "enclosure_volume": None}, target={"code": "IP5X"})
    dust = p.procedure("dust-5")
    assert dust.parameter("category").value == 2
    assert dust.parameter("duration").value == 8.0
    with pytest.raises(KeyError):
        dust.parameter("depression_max")


def test_dust_category_1_needs_the_volume() -> None:
    with pytest.raises(PlanningError) as info:
        plan(device={"enclosure_volume": None}, target={"code": "IP5X"})
    assert info.value.key == "device.enclosure_volume"


def test_dual_code_planned_and_implied() -> None:
    # source: IEC 60529 cl. 6: up to 6 cumulative; 7-9 need dual coding
    p = plan(target={"code": "IP66/IP68", "immersion_depth": "2 m", "immersion_duration": "72 h"})
    status = {pr.id: pr.status for pr in p.procedures}
    assert status["water-6"] == status["water-8"] == status["dust-6"] == "planned"
    assert [pid for pid, s in status.items() if pid.startswith("water") and s == "implied"] == [
        "water-1",
        "water-2",
        "water-3",
        "water-4",
        "water-5",
    ]
    assert "water-7" not in status
    assert status["probe-access-d"] == "planned"  # 5 and 6 also keep the 1.0 mm wire out
    assert all(status[f"probe-object-{n}"] == "implied" for n in range(1, 5))


def test_test_implied_plans_them() -> None:
    p = plan(
        target={
            "code": "IP66/IP68",
            "immersion_depth": "2 m",
            "immersion_duration": "72 h",
            "test_implied": True,
        }
    )
    assert all(pr.status == "planned" for pr in p.procedures)


def test_ipx7_alone_implies_nothing() -> None:
    p = plan(target={"code": "IPX7"})
    assert [pr.id for pr in p.procedures] == ["water-7"]


def test_probe_forces_with_tolerance() -> None:
    # source: IEC 60529 Table 7: 12.5 mm sphere 30 N, +/-10 %
    p = plan(target={"code": "IP2X"})
    probe = p.procedure("probe-object-2")
    assert probe.parameter("probe_diameter").value == 12.5
    assert probe.parameter("force").value == 30.0
    force = next(c for c in probe.criteria if c.quantity == "probe_force")
    assert (force.min, force.max) == (27.0, 33.0)
    # source: IEC 60529 cl. 12, jointed test finger 10 N
    assert p.procedure("probe-access-b").parameter("force").value == 10.0


def test_letter_adds_access_probe() -> None:
    p = plan(target={"code": "IP20C"})
    assert p.procedure("probe-access-c").status == "planned"
    assert p.procedure("probe-access-b").status == "implied"


def test_ipx9_small_enclosure_turntable() -> None:
    # source: IEC 60529 cl. 14.2.9: under 250 mm, 4 angles x 30 s, 80 degC, 15 l/min
    p = plan(device={"height": "120 mm", "largest_dimension": "120 mm"}, target={"code": "IPX9"})
    w = p.procedure("water-9")
    assert w.parameter("duration").value == 2.0
    assert w.parameter("water_temperature").value == 80.0
    assert any("80 degC" in c for c in w.cautions)


def test_ipx9_large_enclosure_area_time() -> None:
    p = plan(device={"height": "300 mm", "surface_area": "3.6 m^2"}, target={"code": "IPX9"})
    assert value(p, "water-9", "duration") == pytest.approx(3.6)


def test_k_forms() -> None:
    # source: ISO 20653 IPX9K: 14-16 l/min, 80 degC, 4 positions x 30 s
    p = plan(target={"code": "IPX9K"})
    w = p.procedure("water-9k")
    assert w.standard == "ISO 20653"
    assert w.parameter("duration").value == 2.0
    assert w.parameter("pressure").min == 8000.0


def test_vehicle_dust_needs_its_parameters() -> None:
    with pytest.raises(PlanningError, match="declare it in the file") as info:
        plan(target={"code": "IP6K9K"})
    assert info.value.key == "target.code"
    p = plan(
        target={"code": "IP6K9K"},
        vehicle_dust={
            "test_dust": "Arizona test dust, fine",
            "concentration": "2 kg/m^3",
            "duration": "8 h",
            "cycle": "as ISO 20653 clause for 6K",
        },
    )
    assert p.procedure("dust-6k").parameter("duration").provenance == "declared"


def test_order_dust_before_water_and_destructive_flags() -> None:
    p = plan(target={"code": "IP66/IP68", "immersion_depth": "2 m", "immersion_duration": "72 h"})
    ids = [pr.id for pr in p.procedures if pr.status == "planned"]
    assert ids.index("dust-6") < ids.index("water-6") < ids.index("water-8")
    assert p.procedure("dust-6").destructive and p.procedure("water-8").destructive
    assert not p.procedure("probe-access-d").destructive
    assert all(
        "inspect, dry and re-seal" in " ".join(pr.notes)
        for pr in p.procedures
        if pr.group == "water"
    )


def test_acceptance_turns_into_outcome_criteria() -> None:
    p = plan(
        target={"code": "IPX7"},
        acceptance={
            "water_ingress": "none",
            "leak_rate_max": "1e-3 mbar*L/s",
            "functional_check": "reads level",
            "insulation_resistance_min": "100 Mohm",
        },
    )
    crit = {c.quantity: c for c in p.procedure("water-7").criteria}
    assert crit["water_ingress"].comparison == "none_found"
    assert crit["leak_rate"].max == pytest.approx(1e-3)
    assert crit["insulation_resistance"].min == 100.0
    assert crit["function"].text == "reads level"


def test_supplementary_letters_set_moving_parts() -> None:
    p = plan(target={"code": "IPX5M"})
    assert any("letter M" in s for s in p.procedure("water-5").specimen_state)


def test_every_planned_procedure_has_cautions_and_the_plan_the_precedence_note() -> None:
    p = plan(target={"code": "IP66/IP68", "immersion_depth": "2 m", "immersion_duration": "72 h"})
    assert all(len(pr.cautions) >= 2 for pr in p.procedures)
    assert "take precedence" in p.closing_note
    assert "current edition" in p.closing_note
    assert campaign().device.height_mm == 310.0


def test_spray_method_other_than_tube_or_nozzle_is_one_line() -> None:
    # common practice (no source): a choice key names its allowed values
    from testplan.errors import CampaignFileError

    with pytest.raises(CampaignFileError) as info:
        campaign(target={"code": "IPX4", "spray_method": "hose"})
    assert info.value.key == "target.spray_method"
    assert "'tube', 'nozzle'" in info.value.one_line()


def test_splash_4k_flow_from_the_tube_open_holes_is_planned_and_judged_per_period() -> None:
    # source: ISO 20653 4K pressurised splash, 0.6 L/min per hole +/-5 % (per-hole basis from
    # memory)
    p = plan(target={"code": "IPX4K", "tube_holes_4k": 25})
    assert value(p, "water-4k", "tube_flow") == pytest.approx(15.0)
    [flow] = [c for c in p.procedure("water-4k").criteria if c.id == "water-4k.flow"]
    assert flow.quantity == "tube_flow" and flow.when == "per_period"
    assert flow.min == pytest.approx(14.25)
    assert flow.max == pytest.approx(15.75)


def test_splash_4k_without_the_tube_holes_is_refused_naming_the_key() -> None:
    with pytest.raises(PlanningError) as info:
        plan(target={"code": "IPX4K"})
    assert info.value.key == "target.tube_holes_4k"
    assert "open holes" in info.value.message
