"""The as-run calendar: drawn from the runs' recorded start and finish, every bar labelled."""

from __future__ import annotations

import datetime as dt

from testplan.report.chart import as_run_chart, bar_spans, duration_text

T0 = dt.datetime(2027, 1, 12, 8, 5, tzinfo=dt.UTC)
RUNS = [
    {
        "key": "water-6@aged-1",
        "facility": "jet booth",
        "start": T0,
        "end": T0 + dt.timedelta(minutes=3),
    },
    {
        "key": "water-8@aged-1",
        "facility": "immersion tank",
        "start": T0 + dt.timedelta(hours=2),
        "end": T0 + dt.timedelta(hours=74),
    },
    {"key": "salt-mist@aged-1", "facility": None, "start": T0 + dt.timedelta(days=3), "end": None},
]


def test_bars_run_from_the_recorded_start_and_a_short_run_stays_visible() -> None:
    first, span, bars = bar_spans(RUNS)
    assert first == T0
    # The running salt-mist run reaches the latest finish known (74 h after the first start).
    assert span == 74 * 3600
    assert bars[1] == (2 * 3600, 72 * 3600)
    # 3 minutes of a 74-hour span would be a hairline: drawn 1/150 of the span wide instead.
    assert bars[0] == (0, 74 * 3600 / 150)
    assert bars[2][0] == 72 * 3600


def test_each_bar_is_labelled_with_its_run_key_and_length() -> None:
    svg = as_run_chart(RUNS, "Calendar as carried out").decode()
    for run in RUNS:
        assert run["key"] in svg
    assert "180 s" in svg and "72 h" in svg and "still running" in svg
    # 74 h is more than 3 days: read in days. The legend names facilities ("no facility"
    # for a run without one).
    assert "time from the first start, 2027-01-12 08:05 UTC (d)" in svg
    assert "no facility" in svg


def test_durations_read_in_the_unit_that_suits_them() -> None:
    assert duration_text(180) == "180 s"
    assert duration_text(240) == "240 s"
    assert duration_text(3600) == "60 min"
    assert duration_text(72 * 3600) == "72 h"
    assert duration_text(4 * 86400) == "4 d"


def test_the_legend_stands_below_the_data() -> None:
    import matplotlib.pyplot as plt

    from testplan.report.chart import as_run_figure

    fig = as_run_figure(RUNS, "Calendar as carried out")
    try:
        fig.canvas.draw()
        ax = fig.axes[0]
        legend = ax.get_legend().get_window_extent()
        axes = ax.get_window_extent()
        assert legend.y1 < axes.y0  # wholly below the plotting area: no bar behind it
        assert [t.get_text() for t in ax.get_legend().get_texts()] == [
            "immersion tank",
            "jet booth",
            "no facility",
        ]
    finally:
        plt.close(fig)


def test_the_planned_calendar_keeps_its_legend_right_of_the_data() -> None:
    import matplotlib.pyplot as plt

    from testplan.domain.planner import build_plan
    from testplan.reader import read_campaign
    from testplan.report.chart import calendar_chart, calendar_figure
    from tests.store.conftest import SAMPLE

    schedule = build_plan(read_campaign(SAMPLE).campaign).to_json()["schedule"]
    fig = calendar_figure(schedule, "Calendar as planned")
    try:
        fig.canvas.draw()
        ax = fig.axes[0]
        assert ax.get_legend().get_window_extent().x0 > ax.get_window_extent().x1
    finally:
        plt.close(fig)
    # The saved picture keeps the legend (cropped to what is drawn) and its text as text.
    svg = calendar_chart(schedule, "Calendar as planned").decode()
    assert "leg (black edge: critical)" in svg and "ip-verification" in svg
