"""Units in printed text as SI typography writes them."""

from __future__ import annotations

import pytest

from testplan.report.typography import si_text


@pytest.mark.parametrize(
    ("ascii_text", "printed"),
    [
        # source: SI Brochure, 9th edition (BIPM), unit symbols and their products and
        # powers; a space between the number and the unit (from memory)
        ("21.4 degC", "21.4 °C"),
        ("26 N*mm", "26 N·mm"),
        ("2.5 N*m", "2.5 N·m"),
        ("2100 Mohm to 2 Gohm, 10 kohm, 5 ohm", "2100 MΩ to 2 GΩ, 10 kΩ, 5 Ω"),
        ("0.05 m^3", "0.05 m³"),
        ("1.38 ml/80cm^2/h", "1.38 ml/80 cm²/h"),
        ("2 m^2", "2 m²"),
        ("cm^2 per m^2", "cm² per m²"),
        ("-3.9e-05 mbar*L/s", "-3.9e-05 mbar·L/s"),
        ("travel 120.0 deg", "travel 120.0°"),
        ("R >= 0.9, t <= 2 h, 1200 -> 1199.8", "R ≥ 0.9, t ≤ 2 h, 1200 → 1199.8"),
        ("w = r x U, w = 1 x U", "w = r × U, w = 1 × U"),
        # Not units: left alone.
        ("degCelsius, 2^3 and x^2y", "degCelsius, 2^3 and x^2y"),
        ("a degree, 5 * 3, 2x U, box Unit", "a degree, 5 * 3, 2x U, box Unit"),
    ],
)
def test_units_are_written_the_si_way(ascii_text: str, printed: str) -> None:
    assert si_text(ascii_text) == printed


@pytest.mark.parametrize(
    ("status", "css"),
    [
        ("conditional pass", "conditional-pass"),
        ("invalid: repeat", "invalid-repeat"),
        ("invalid, repeated as water-8@aged-1-repeat2", "invalid"),
        ("invalid, repeated as a new run (tank drawn down); the product is not judged", "invalid"),
        ("logged, no band", "logged"),
        ("not met", "not-met"),
    ],
)
def test_a_status_gives_its_css_class(status: str, css: str) -> None:
    from testplan.report.render import status_class

    assert status_class(status) == css
