"""The campaign calendar as a Gantt-style chart (SVG or PNG), one row per facility."""

from __future__ import annotations

import datetime as dt
import io
from typing import Any


def _style(ax: Any, title: str) -> None:
    """The calendars' shared look: small time ticks, a light vertical grid, the title left."""
    ax.tick_params(axis="x", labelsize=7)
    ax.grid(axis="x", color="#dddddd", linewidth=0.5)
    ax.set_title(title, fontsize=10, loc="left")


def _image(fig: Any, fmt: str) -> bytes:
    """A calendar figure as image bytes in ``fmt`` (svg or png), its text kept as text and
    the legend outside the axes kept in the picture; the figure is closed."""
    import matplotlib
    import matplotlib.pyplot as plt

    buf = io.BytesIO()
    with matplotlib.rc_context({"svg.fonttype": "none"}):  # labels stay text in the PDF
        fig.savefig(
            buf, format=fmt, bbox_inches="tight", metadata={"Date": None} if fmt == "svg" else None
        )
    plt.close(fig)
    return buf.getvalue()


def calendar_chart(schedule: dict[str, Any], title: str, fmt: str = "svg") -> bytes:
    """The planned calendar (``calendar_figure``) as image bytes in ``fmt`` (svg or png)."""
    return _image(calendar_figure(schedule, title), fmt)


def calendar_figure(schedule: dict[str, Any], title: str) -> Any:
    """Draw the schedule: a row per facility (runs without one per leg), bars per run,
    the due date as a vertical line, the legend right of the axes. Returns the matplotlib
    figure (``_image`` closes it)."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.dates as mdates
    import matplotlib.pyplot as plt
    from matplotlib.patches import Rectangle

    runs = schedule["runs"]
    rows: list[str] = []
    for r in runs:
        row = r["facility"] or f"leg {r['leg']}"
        if row not in rows:
            rows.append(row)
    fig_h = 1.2 + 0.55 * max(1, len(rows))
    fig, ax = plt.subplots(figsize=(10.5, fig_h))
    palette = ["#4c72b0", "#55a868", "#c44e52", "#8172b2", "#ccb974", "#64b5cd", "#8c8c8c"]
    legs = sorted({r["leg"] for r in runs})
    colour = {leg: palette[i % len(palette)] for i, leg in enumerate(legs)}
    critical = set(schedule["critical_path"])
    first = min(dt.datetime.fromisoformat(r["start"]) for r in runs)
    last = max(dt.datetime.fromisoformat(r["end"]) for r in runs)
    span_days = max((last - first).total_seconds() / 86400.0, 1.0)
    points_per_day = 8.5 * 72 / span_days  # plot area about 8.5 in wide
    for r in runs:
        start = dt.datetime.fromisoformat(r["start"])
        end = dt.datetime.fromisoformat(r["end"])
        y = rows.index(r["facility"] or f"leg {r['leg']}")
        width = max((end - start).total_seconds() / 86400.0, 0.04)
        ax.barh(
            y,
            width,
            left=mdates.date2num(start),
            height=0.6,
            color=colour[r["leg"]],
            edgecolor="black" if r["id"] in critical else "white",
            linewidth=1.4 if r["id"] in critical else 0.5,
        )
        if width * points_per_day > len(r["procedure"]) * 7 * 0.62:
            ax.text(
                mdates.date2num(start) + width / 2,
                y,
                r["procedure"],
                ha="center",
                va="center",
                fontsize=7,
                color="white",
                clip_on=True,
            )
    due = dt.datetime.fromisoformat(schedule["due"])
    ax.axvline(mdates.date2num(due), color="#c00000", linestyle="--", linewidth=1.2)
    ax.text(
        mdates.date2num(due),
        -0.55,
        f"due {due:%a %d %b %H:%M} ",
        color="#c00000",
        fontsize=8,
        va="bottom",
        ha="right",
    )
    ax.set_yticks(range(len(rows)), rows, fontsize=8)
    ax.invert_yaxis()
    ax.xaxis.set_major_locator(mdates.DayLocator(interval=max(1, round(span_days / 14))))
    ax.xaxis.set_major_formatter(mdates.DateFormatter("%a\n%d %b"))
    _style(ax, title)
    handles = [Rectangle((0, 0), 1, 1, color=colour[leg]) for leg in legs]
    ax.legend(
        handles,
        legs,
        fontsize=7,
        loc="upper left",
        bbox_to_anchor=(1.01, 1.0),
        title="leg (black edge: critical)",
        title_fontsize=7,
        frameon=False,
    )
    fig.tight_layout()
    return fig


def duration_text(seconds: float) -> str:
    """A run's length in the unit that suits it: '4 min', '72 h', '3.01 d'."""
    from testplan.report.plots import span_unit

    name, size = span_unit(seconds)
    return f"{seconds / size:.3g} {name}"


def bar_spans(runs: list[dict[str, Any]]) -> tuple[dt.datetime, float, list[tuple[float, float]]]:
    """The as-run bars: first start, span (s) and per run its left edge and drawn width in
    seconds from the first start. A run shorter than 1/150 of the span is drawn that wide;
    one still running reaches the latest time known."""
    first = min(r["start"] for r in runs)
    last = max(r["end"] or r["start"] for r in runs)
    span = max((last - first).total_seconds(), 60.0)
    bars = []
    for r in runs:
        real = ((r["end"] or last) - r["start"]).total_seconds()
        bars.append(((r["start"] - first).total_seconds(), max(real, span / 150.0)))
    return first, span, bars


def as_run_chart(runs: list[dict[str, Any]], title: str, fmt: str = "svg") -> bytes:
    """The campaign as carried out (``as_run_figure``) as image bytes in ``fmt``."""
    return _image(as_run_figure(runs, title), fmt)


def as_run_figure(runs: list[dict[str, Any]], title: str) -> Any:
    """The campaign as carried out: one row per run (labelled with its key), a bar from its
    real start to its finish coloured by facility, its length written beside it; a run
    shorter than 1/150 of the span is drawn that wide so it stays visible. The time axis is
    in the unit that suits the span (from the first start); the legend sits below the plot.
    ``runs``: key, facility, start, end (aware datetimes; end None while running). Returns
    the matplotlib figure (the caller closes it)."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.patches import Rectangle

    from testplan.report.plots import span_unit

    first, span, bars = bar_spans(runs)
    last = max(r["end"] or r["start"] for r in runs)
    unit, size = span_unit(span)
    facilities = sorted({r["facility"] or "no facility" for r in runs})
    palette = ["#4c72b0", "#55a868", "#c44e52", "#8172b2", "#ccb974", "#64b5cd", "#8c8c8c"]
    colour = {f: palette[i % len(palette)] for i, f in enumerate(facilities)}
    fig, ax = plt.subplots(figsize=(10.5, 1.4 + 0.28 * len(runs)))
    for y, (r, (start, width)) in enumerate(zip(runs, bars, strict=True)):
        real = ((r["end"] or last) - r["start"]).total_seconds()
        ax.barh(
            y,
            width / size,
            left=start / size,
            height=0.6,
            color=colour[r["facility"] or "no facility"],
            edgecolor="black",
            linewidth=0.4,
            hatch="//" if r["end"] is None else None,
        )
        ax.text(
            (start + width) / size + span / size / 200.0,
            y,
            duration_text(real) + ("" if r["end"] is not None else ", still running"),
            va="center",
            fontsize=6.5,
        )
    ax.set_yticks(range(len(runs)), [r["key"] for r in runs], fontsize=7)
    ax.invert_yaxis()
    ax.set_xlim(0, span / size * 1.12)
    ax.set_xlabel(f"time from the first start, {first:%Y-%m-%d %H:%M} UTC ({unit})", fontsize=8)
    _style(ax, title)
    handles = [Rectangle((0, 0), 1, 1, color=colour[f]) for f in facilities]
    ax.legend(
        handles,
        facilities,
        fontsize=7,
        title="facility",
        title_fontsize=7,
        loc="upper center",
        bbox_to_anchor=(0.5, -0.9 / (1.4 + 0.28 * len(runs))),
        ncol=min(len(facilities), 4),
        frameon=False,
    )
    fig.tight_layout()
    return fig
