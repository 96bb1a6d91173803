"""Quantity parsing with per-key dimensions."""

from __future__ import annotations

import pytest
from hypothesis import given
from hypothesis import strategies as st

from testplan.domain.units import KEY_UNITS, parse_key, parse_quantity
from testplan.errors import QuantityError


def test_feet_are_a_length() -> None:
    # source: 1 ft = 0.3048 m exactly (international foot)
    assert parse_key("6.5 ft", "device.height") == pytest.approx(1981.2)


def test_litres_and_square_metres() -> None:
    assert parse_key("2.4 L", "device.enclosure_volume") == pytest.approx(2.4)
    assert parse_key("2400 cm^3", "device.enclosure_volume") == pytest.approx(2.4)
    assert parse_key("0.24 m^2", "device.surface_area") == pytest.approx(0.24)


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("5 kg", "is not a length"),
        ("310", "has no unit"),
        ("310 furlongz", "unknown unit"),
        ("tall", "cannot read"),
        ("", "cannot read"),
    ],
)
def test_bad_heights_name_the_key(text: str, message: str) -> None:
    with pytest.raises(QuantityError) as info:
        parse_key(text, "device.height")
    assert message in info.value.message
    assert info.value.key == "device.height"


def test_an_area_takes_an() -> None:
    # common practice (no source): English indefinite article before a vowel
    with pytest.raises(QuantityError) as info:
        parse_key("5 kg", "device.surface_area")
    assert "is not an area" in info.value.one_line()
    assert "give an area" in info.value.one_line()


def test_bare_number_from_toml_is_refused() -> None:
    with pytest.raises(QuantityError, match="quantity string"):
        parse_key(310, "device.height")


def test_cycle_is_a_count_not_an_angle() -> None:
    # 10 cycles per minute is 600 per hour, not 600 turns of 2 pi radians
    assert parse_key("10 cycle/min", "endurance.rate") == pytest.approx(10.0)
    assert parse_quantity("600 cycle/h", "rate", "1/min") == pytest.approx(10.0)


def test_angles_are_not_ratios_and_ratios_are_not_angles() -> None:
    assert parse_key("120 deg", "endurance.travel") == pytest.approx(120.0)
    assert parse_key("2.0943951 rad", "endurance.travel") == pytest.approx(120.0, rel=1e-6)
    with pytest.raises(QuantityError):
        parse_key("20 %", "endurance.travel")
    with pytest.raises(QuantityError):
        parse_key("20 deg", "endurance.torque_tolerance")
    assert parse_key("20 %", "endurance.torque_tolerance") == pytest.approx(20.0)


def test_temperature_points_and_differences() -> None:
    assert parse_quantity("35 degC", "temperature", "degC") == pytest.approx(35.0)
    assert parse_quantity("308.15 K", "temperature", "degC") == pytest.approx(35.0)
    # a difference of 9 degF is 5 K, not -12.8 degC
    assert parse_quantity("9 degF", "temperature_difference", "K") == pytest.approx(5.0)
    assert parse_quantity("5 degC", "temperature_difference", "K") == pytest.approx(5.0)


def test_leak_rate_units() -> None:
    # source: 1 mbar*l/s = 0.1 Pa*m^3/s (from memory; 100 Pa x 1e-3 m^3/s)
    assert parse_key("0.1 Pa*m^3/s", "acceptance.leak_rate_max") == pytest.approx(1.0)


def test_every_key_has_a_working_example() -> None:
    from testplan.domain.units import KINDS

    for spec in KEY_UNITS.values():
        parse_key(KINDS[spec.kind].example, spec.key)


@given(st.one_of(st.text(max_size=40), st.integers(), st.floats(), st.none(), st.booleans()))
def test_parser_raises_only_our_error(value: object) -> None:
    for key in ("device.height", "endurance.rate", "endurance.travel", "acceptance.leak_rate_max"):
        try:
            result = parse_key(value, key)
        except QuantityError:
            continue
        assert isinstance(result, float)


@given(
    st.floats(allow_nan=False, allow_infinity=False, min_value=-1e9, max_value=1e9),
    st.sampled_from(["mm", "m", "in", "ft", "km", "kg", "s", "%", "deg", "degC", "m^2", "L"]),
)
def test_number_unit_pairs_parse_or_refuse(value: float, unit: str) -> None:
    try:
        result = parse_key(f"{value!r} {unit}", "device.height")
    except QuantityError:
        assert unit not in ("mm", "m", "in", "ft", "km")
        return
    assert unit in ("mm", "m", "in", "ft", "km")
    assert result == pytest.approx(
        value * {"mm": 1, "m": 1000, "in": 25.4, "ft": 304.8, "km": 1e6}[unit], rel=1e-9, abs=1e-9
    )
