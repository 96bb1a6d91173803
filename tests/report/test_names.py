"""Printed names: record keys read as words, and run headings say each thing once."""

from __future__ import annotations

import pytest

from testplan.domain.channels import CHANNELS
from testplan.report.context import _heading
from testplan.report.names import criterion_words, words


@pytest.mark.parametrize(
    ("key", "quantity", "printed"),
    [
        ("knob.torque_cycle0", "torque", "operating torque at cycle 0"),
        ("jet.logged_nozzle_pressure", "nozzle_pressure", "nozzle pressure (logged, no band)"),
        ("salt.temperature", "cabinet_temperature", "cabinet temperature"),
        ("w8.temperature", "water_specimen_difference", "water minus specimen temperature"),
        ("salt.humid_rh", "humid_rh", "relative humidity, humid phase"),
        ("salt.ph", "solution_ph", "solution pH"),
        ("lever.seal_cycle12", "ingress", "seal at cycle 12"),
    ],
)
def test_criterion_keys_print_as_words(key: str, quantity: str, printed: str) -> None:
    assert criterion_words(key, quantity) == printed


def test_no_channel_or_parameter_prints_with_underscores() -> None:
    for name in [*CHANNELS, "rig_specimens", "weibull_shape", "some_new_rh_key"]:
        assert "_" not in words(name), name


@pytest.mark.parametrize(
    ("title", "code", "heading"),
    [
        ("Powerful water jets", "IPX6", "r: Powerful water jets (IPX6)"),
        (
            "Cycle endurance: mode selector knob",
            "20000 cycles",
            "r: Cycle endurance: mode selector knob (20000 cycles)",
        ),
        (
            "Cyclic salt mist, Kb method 2",
            "IEC 60068-2-52 Kb method 2",
            "r: Cyclic salt mist, Kb method 2",
        ),
        ("Own method", None, "r: Own method"),
    ],
)
def test_a_run_heading_names_the_code_once(title: str, code: str | None, heading: str) -> None:
    assert _heading("r", {"title": title, "code": code}) == heading
