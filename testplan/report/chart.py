"""The campaign calendar as a Gantt-style chart (SVG or PNG), one row per facility."""

from __future__ import annotations

import datetime as dt
import io
from typing import Any


def calendar_chart(schedule: dict[str, Any], title: str, fmt: str = "svg") -> bytes:
    """Draw the schedule: a row per facility (runs without one per leg), bars per run,
    the due date as a vertical line. Returns the image bytes in ``fmt`` (svg or png)."""
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
    ax.tick_params(axis="x", labelsize=7)
    ax.grid(axis="x", color="#dddddd", linewidth=0.5)
    ax.set_title(title, fontsize=10, loc="left")
    handles = [Rectangle((0, 0), 1, 1, color=colour[leg]) for leg in legs]
    ax.legend(
        handles,
        legs,
        fontsize=7,
        loc="lower right",
        title="leg (black edge: critical)",
        title_fontsize=7,
    )
    fig.tight_layout()
    buf = io.BytesIO()
    fig.savefig(buf, format=fmt, metadata={"Date": None} if fmt == "svg" else None)
    plt.close(fig)
    return buf.getvalue()
