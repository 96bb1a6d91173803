"""The dust test's end condition for a tight enclosure, judged from the logged depression."""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import numpy as np
import pytest

from testplan.domain import judge as J
from testplan.domain.planner import build_plan
from testplan.reader import read_campaign

SAMPLE = Path(__file__).resolve().parents[1] / "sample_campaign" / "flood-gauge-node.toml"
DUST = next(
    p
    for p in build_plan(read_campaign(SAMPLE).campaign).to_json()["procedures"]
    if p["id"] == "dust-6"
)
T0 = dt.datetime(2027, 1, 12, 8, 0, tzinfo=dt.UTC)
MIN = 60_000_000


def logged(quantity: str, minutes: np.ndarray, values: np.ndarray, unit: str) -> J.Series:
    t = (T0.timestamp() * 1e6 + minutes * MIN).astype(np.int64)
    return J.Series(quantity, None, t, values.astype(float), unit, source=quantity)


def end_verdict(hours: float, depression_kpa: float, rate_l_h: float) -> J.Verdict:
    minutes = np.arange(0, int(hours * 60) + 1, dtype=float)
    data = J.RunData(
        key="dust-6@leg-1",
        procedure=DUST,
        specimens=["S01"],
        started_at=T0,
        finished_at=T0 + dt.timedelta(hours=hours),
        series=[
            logged("depression", minutes, np.full(len(minutes), depression_kpa), "kPa"),
            logged("extraction_rate", minutes, np.full(len(minutes), rate_l_h), "L/h"),
        ],
        observations=[],
    )
    (v,) = (v for v in J.judge_run(data, J.Rule("simple")) if v.quantity == "dust_end")
    return v


def test_a_tight_enclosure_ends_after_8_h_at_the_depression_limit() -> None:
    # The sample enclosure holds 2.4 L: 80 volumes are 192 L. At 10 L/h (about 4 volumes
    # per hour, below 40) 8 h draw 80 L; at 1.9 kPa the test ends at 8 h, whichever first.
    # source: IEC 60529 cl. 13.5 (80 volumes or 8 h when 40 volumes/h is not reached at 2 kPa)
    v = end_verdict(8.0, 1.9, 10.0)
    assert v.outcome == J.PASS
    assert v.measured == pytest.approx(80.0)
    assert "8 h with the depression at its limit" in v.detail


def test_eight_hours_well_below_the_depression_limit_do_not_end_the_test() -> None:
    # 8 h at 1 kPa: the pump was not run at the limit, so only the 80 volumes end the test.
    # source: IEC 60529 cl. 13.5
    assert end_verdict(8.0, 1.0, 10.0).outcome == J.FAIL


def test_a_short_run_at_the_limit_that_drew_too_little_fails() -> None:
    # 4 h at 1.9 kPa and 10 L/h: 40 L of 192 L, and neither end condition met.
    # source: IEC 60529 cl. 13.5
    assert end_verdict(4.0, 1.9, 10.0).outcome == J.FAIL


def test_eighty_volumes_drawn_end_the_test_at_any_depression() -> None:
    # 2 h at 120 L/h (50 volumes per hour) draw 240 L, over 192 L.
    # source: IEC 60529 cl. 13.5
    v = end_verdict(2.0, 1.0, 120.0)
    assert v.outcome == J.PASS and v.measured == pytest.approx(240.0)
