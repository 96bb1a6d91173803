"""Salt-mist procedures against the published method tables."""

from __future__ import annotations

import pytest

from testplan.errors import PlanningError
from tests.helpers import plan


def salt(**values: object) -> object:
    return plan(target={"code": "IPX7"}, salt_mist=dict(values)).procedure("salt-mist")


@pytest.mark.parametrize(
    ("method", "cycle_h", "cycles", "total_h"),
    [
        (1, 168.0, 4, 672.0),  # source: IEC 60068-2-52 Ed. 3 method 1: 2 h + 6 d 22 h, 4 cycles
        (2, 24.0, 3, 72.0),  # source: IEC 60068-2-52 Ed. 3 method 2: 2 h + 22 h, 3 cycles
        (3, 168.0, 1, 168.0),  # source: IEC 60068-2-52 Ed. 3 method 3: 4 x (2+22 h) + 3 d
        (4, 168.0, 2, 336.0),  # source: IEC 60068-2-52 Ed. 3 method 4
        (5, 168.0, 4, 672.0),  # source: IEC 60068-2-52 Ed. 3 method 5
        (6, 168.0, 8, 1344.0),  # source: IEC 60068-2-52 Ed. 3 method 6
    ],
)
def test_kb_methods(method: int, cycle_h: float, cycles: int, total_h: float) -> None:
    p = salt(standard="IEC 60068-2-52", test_method=method)
    assert p.parameter("cycle_length").value == cycle_h  # type: ignore[attr-defined]
    assert p.parameter("cycles").value == cycles  # type: ignore[attr-defined]
    assert p.parameter("total_duration").value == total_h  # type: ignore[attr-defined]
    assert p.duration_h == total_h  # type: ignore[attr-defined]


def test_kb_fallout_and_humid_storage() -> None:
    # source: IEC 60068-2-52 Ed. 3: 1.0-2.0 ml/80 cm^2/h; humid storage 40 +/-2 degC, 90-95 % RH
    p = salt(standard="IEC 60068-2-52", test_method=2)
    crit = {c.quantity: c for c in p.criteria}  # type: ignore[attr-defined]
    assert (crit["fog_collection"].min, crit["fog_collection"].max) == (1.0, 2.0)
    assert crit["fog_collection"].when == "per_period"
    assert (crit["humid_temperature"].min, crit["humid_temperature"].max) == (38.0, 42.0)
    assert (crit["humid_rh"].min, crit["humid_rh"].max) == (90.0, 95.0)
    assert (crit["solution_ph"].min, crit["solution_ph"].max) == (6.5, 7.2)


def test_kb_method_7_needs_cycles_and_8_needs_phases() -> None:
    # source: IEC 60068-2-52 Ed. 3 method 7: 2 h spray, 4 h dry 60 degC, 2 h wet 50 degC
    with pytest.raises(PlanningError) as info:
        salt(standard="IEC 60068-2-52", test_method=7)
    assert info.value.key == "salt_mist.cycles"
    p = salt(standard="IEC 60068-2-52", test_method=7, cycles=21)
    assert p.parameter("cycle_length").value == 8.0  # type: ignore[attr-defined]
    assert p.parameter("total_duration").value == 168.0  # type: ignore[attr-defined]
    with pytest.raises(PlanningError, match="not tabulated") as info:
        salt(standard="IEC 60068-2-52", test_method=8)
    assert info.value.key == "salt_mist.test_method"
    p = salt(
        standard="IEC 60068-2-52",
        test_method=8,
        cycles=2,
        phases=[
            {"name": "spray", "duration": "2 h", "temperature": "35 degC"},
            {"name": "dry", "duration": "6 h", "temperature": "60 degC", "humidity": "25 %"},
        ],
    )
    assert p.parameter("total_duration").value == 16.0  # type: ignore[attr-defined]


def test_iso_9227_nss_and_cass() -> None:
    # source: ISO 9227 NSS pH 6.5-7.2, 35 +/-2 degC; CASS pH 3.1-3.3, 50 +/-2 degC
    nss = salt(standard="ISO 9227", test_method="NSS", duration="480 h")
    crit = {c.quantity: c for c in nss.criteria}  # type: ignore[attr-defined]
    assert (crit["cabinet_temperature"].min, crit["cabinet_temperature"].max) == (33.0, 37.0)
    assert crit["duration"].min == 480.0
    cass = salt(standard="ISO 9227", test_method="CASS", duration="24 h")
    crit = {c.quantity: c for c in cass.criteria}  # type: ignore[attr-defined]
    assert (crit["solution_ph"].min, crit["solution_ph"].max) == (3.1, 3.3)
    assert (crit["cabinet_temperature"].min, crit["cabinet_temperature"].max) == (48.0, 52.0)


def test_ka_and_b117() -> None:
    # source: IEC 60068-2-11 Ka: 35 degC, 5 % NaCl; ASTM B117 duration by agreement
    ka = salt(standard="IEC 60068-2-11", test_method="Ka", duration="96 h")
    assert ka.edition == "Ed. 4 (2021)"  # type: ignore[attr-defined]
    b117 = salt(standard="ASTM B117", test_method="B117", duration="500 h")
    assert b117.duration_h == 500.0  # type: ignore[attr-defined]
    # source: ASTM B117-19, cabinet 35 +/-2 degC (from memory)
    assert b117.edition == "B117-19"  # type: ignore[attr-defined]
    band = b117.parameter("cabinet_temperature")  # type: ignore[attr-defined]
    assert (band.min, band.max, band.provenance) == (33.0, 37.0, "from memory")
    assert "B117-19" in band.text
    odd = salt(standard="IEC 60068-2-11", test_method="Ka", duration="100 h")
    assert any("not one of the usual" in n for n in odd.notes)  # type: ignore[attr-defined]


def test_continuous_needs_duration_and_known_method() -> None:
    with pytest.raises(PlanningError) as info:
        salt(standard="ISO 9227", test_method="NSS")
    assert info.value.key == "salt_mist.duration"
    with pytest.raises(PlanningError) as info:
        salt(standard="ISO 9227", test_method="XSS", duration="24 h")
    assert info.value.key == "salt_mist.test_method"
    with pytest.raises(PlanningError, match="unknown salt-mist standard"):
        salt(standard="MIL-STD-810", test_method=1)
    with pytest.raises(PlanningError):
        salt(standard="IEC 60068-2-52", test_method=9)


def test_acceptance_and_cautions() -> None:
    p = salt(standard="IEC 60068-2-52", test_method=1, corrosion_rating_min=9)
    crit = {c.quantity: c for c in p.criteria}  # type: ignore[attr-defined]
    assert crit["protection_rating"].min == 9.0
    text = " ".join(p.cautions)  # type: ignore[attr-defined]
    assert "Salt aerosol" in text and "Chamber heat" in text and "Electrical equipment" in text


def test_collection_period_and_retest_criteria() -> None:
    nss = salt(standard="ISO 9227", test_method="NSS", duration="480 h")
    assert nss.parameter("collection_period").min == 24.0  # type: ignore[attr-defined]
    assert any(c.quantity == "ingress_retest" for c in nss.criteria)  # type: ignore[attr-defined]
