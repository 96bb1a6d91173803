"""Plot decimation keeps big logs small and short dips visible."""

from __future__ import annotations

import datetime as dt

import numpy as np

from testplan.domain.judge import Criterion, RunData, Series
from testplan.report.plots import BINS, condition_figure, envelope, quantity_label, time_unit


def test_a_72_hour_1_hz_log_keeps_a_two_minute_dip() -> None:
    t = np.arange(72 * 3600, dtype=float)
    depth = np.full(len(t), 2100.0)
    depth[30 * 3600 : 30 * 3600 + 120] = 1985.0  # two minutes at 1985 mm
    x, lo, hi = envelope(t, depth)
    assert len(x) <= BINS
    assert lo.min() == 1985.0
    assert hi.max() == 2100.0
    dip_bins = x[lo == 1985.0]
    assert len(dip_bins) in (1, 2)
    assert 30 * 3600 - 72 * 3600 / BINS <= dip_bins[0] <= 30 * 3600 + 120


def test_a_short_log_is_drawn_as_it_is() -> None:
    t = np.arange(100, dtype=float)
    v = np.sin(t)
    x, lo, hi = envelope(t, v)
    assert x is t and lo is v and hi is v


def _run(minutes: float) -> RunData:
    start = dt.datetime(2027, 1, 12, 8, 0, tzinfo=dt.UTC)
    end = start + dt.timedelta(minutes=minutes)
    t = np.linspace(start.timestamp() * 1e6, end.timestamp() * 1e6, 50).astype(np.int64)
    series = Series("flow", None, t, np.full(50, 100.0), "L/min")
    return RunData("water-6@x", {}, [], start, end, series=[series])


CRITERION = Criterion("water-6.flow", "flow", "between", "per_period", "L/min", 95.0, 105.0)


def test_the_time_axis_is_in_the_unit_that_suits_the_run() -> None:
    # common practice (no source): seconds for minutes-long runs, hours for days-long ones
    assert time_unit(_run(3)) == ("s", 1.0)
    assert time_unit(_run(90)) == ("min", 60.0)
    assert time_unit(_run(72 * 60)) == ("h", 3600.0)
    assert time_unit(_run(14 * 24 * 60)) == ("d", 86400.0)
    fig = condition_figure(_run(3), CRITERION)
    assert fig is not None
    assert "time from start (s)" in fig.svg and "hours" not in fig.svg
    # The axis label is the quantity in words with its unit, not a variable name.
    assert quantity_label("lowest_point_depth", "mm") == "lowest point depth (mm)"
    assert quantity_label("torque", "N*mm") == "torque (N·mm)"


def test_the_legend_stands_outside_the_data() -> None:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from testplan.report.plots import _axes, _legend

    fig, ax = _axes("flow (L/min)", "time from start (s)")
    ax.plot([0, 1], [0, 1], label="flow")
    _legend(ax)
    fig.canvas.draw()
    legend = ax.get_legend().get_window_extent()
    assert legend.x0 >= ax.get_window_extent().x1
    plt.close(fig)
