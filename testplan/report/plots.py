"""Plots of a run's logged conditions against their criterion bands (SVG for the report).

Long logs are decimated to a min/max envelope per time bin, so a 1 Hz log over 72 h stays
small while a two-minute dip still shows: the bin's minimum keeps it.
"""

from __future__ import annotations

import io
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from testplan.domain import judge as J
from testplan.report.typography import si_text

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np
    import numpy.typing as npt

BINS = 600
WIDTH_IN, HEIGHT_IN = 6.6, 2.3
LEGEND_IN = 1.55  # room right of the axes for the legend, clear of the data and bands
# The time axis in the unit that suits the run's length: (up to seconds, unit, seconds each).
TIME_UNITS = ((600.0, "s", 1.0), (3 * 3600.0, "min", 60.0), (3 * 86400.0, "h", 3600.0))
LIMIT_STYLE = {"color": "#b22222", "linestyle": "--", "linewidth": 0.9}


@dataclass(frozen=True)
class Figure:
    """One plot: a caption and its SVG markup."""

    caption: str
    svg: str


def envelope(
    x: npt.NDArray[np.float64], y: npt.NDArray[np.float64], bins: int = BINS
) -> tuple[npt.NDArray[np.float64], npt.NDArray[np.float64], npt.NDArray[np.float64]]:
    """Bin centres with the minimum and maximum of ``y`` in each bin (x sorted).

    Short series come back as they are (min = max = y).
    """
    import numpy as np

    if len(x) <= 2 * bins:
        return x, y, y
    edges = np.linspace(x[0], x[-1], bins + 1)
    starts = np.searchsorted(x, edges[:-1], side="left")
    starts = np.unique(starts[starts < len(x)])
    lo = np.minimum.reduceat(y, starts)
    hi = np.maximum.reduceat(y, starts)
    centres = x[starts]
    return centres, lo, hi


def _svg(fig: Any) -> str:
    import matplotlib.pyplot as plt

    buf = io.StringIO()
    fig.savefig(buf, format="svg", metadata={"Date": None, "Creator": None})
    plt.close(fig)
    text = buf.getvalue()
    return text[text.index("<svg") :]


def _axes(ylabel: str, xlabel: str) -> tuple[Any, Any]:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    plt.rcParams.update(
        {
            "svg.fonttype": "none",
            "font.family": "DejaVu Sans",
            "font.size": 7.5,
            "axes.linewidth": 0.6,
            "svg.hashsalt": "testplan",
        }
    )
    # Fixed margins (room for seven-character tick labels): a layout engine would draw
    # every figure twice, doubling the cost of a hundred-plot report.
    fig, ax = plt.subplots(figsize=(WIDTH_IN, HEIGHT_IN))
    fig.subplots_adjust(
        left=0.8 / WIDTH_IN,
        right=1 - LEGEND_IN / WIDTH_IN,
        bottom=0.42 / HEIGHT_IN,
        top=1 - 0.1 / HEIGHT_IN,
    )
    ax.set_xlabel(xlabel)
    ax.set_ylabel(ylabel)
    ax.grid(True, linewidth=0.3, color="#cccccc")
    return fig, ax


def _limits(ax: Any, c: J.Criterion, label: bool = True) -> None:
    lo, hi = c.limits()
    for value in (lo, hi):
        if value is not None:
            ax.axhline(
                value,
                **LIMIT_STYLE,
                label=si_text(f"limit {J.fmt(value, c.unit)}") if label else None,
            )


def span_unit(length_s: float) -> tuple[str, float]:
    """The time unit a span of ``length_s`` seconds reads best in, and the unit's length
    in seconds: s, min, h or d."""
    for up_to, unit, seconds in TIME_UNITS:
        if length_s <= up_to:
            return unit, seconds
    return "d", 86400.0


def time_unit(run: J.RunData) -> tuple[str, float]:
    """The time unit for a run's plots and its length in seconds: s, min, h or d."""
    return span_unit((run.finished_at - run.started_at).total_seconds())


def _since_start(run: J.RunData, t_us: Any) -> Any:
    return (t_us - run.started_at.timestamp() * 1e6) / (time_unit(run)[1] * 1e6)


def _time_label(run: J.RunData) -> str:
    return f"time from start ({time_unit(run)[0]})"


def quantity_label(quantity: str, unit: str | None) -> str:
    """An axis label: the quantity's name in words, with its unit in SI typography."""

    words = quantity.replace("_", " ")
    return si_text(f"{words} ({unit})") if unit else words


def _legend(ax: Any) -> None:
    """The legend outside the data, right of the axes."""
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=6.5, frameon=False)


def condition_figure(run: J.RunData, c: J.Criterion) -> Figure | None:
    """A logged condition over time, each series as a min/max envelope, with the limits."""
    found = [J.in_unit(s, c.unit) for s in run.series if s.quantity == c.quantity and len(s.t_us)]
    if not found:
        return None
    fig, ax = _axes(quantity_label(c.quantity, c.unit), _time_label(run))
    for s in found:
        x, lo, hi = envelope(_since_start(run, s.t_us), s.value)
        name = s.specimen or s.quantity
        if c.when == "per_period" and len(x) < 60:
            ax.plot(x, hi, "o", markersize=3, label=name)
        elif lo is hi:
            ax.plot(x, hi, linewidth=0.8, label=name)
        else:
            ax.fill_between(x, lo, hi, alpha=0.35, linewidth=0, step="mid")
            ax.plot(x, lo, linewidth=0.5, label=f"{name} (min/max per bin)")
            ax.plot(x, hi, linewidth=0.5)
    _limits(ax, c)
    note = ""
    lo_lim, _ = c.limits()
    if c.when == "whole_run" and c.comparison == ">=" and lo_lim is not None:
        # Zoom on the exposure so a shallow dip shows; lowering and raising run off-scale.
        inside = []
        for s in found:
            span = J.exposure(s, lo_lim)
            if span is not None:
                inside.append(s.value[span[0] : span[1] + 1])
        if inside:
            low = min(min(float(v.min()) for v in inside), lo_lim)
            high = max(max(float(v.max()) for v in inside), lo_lim)
            pad = max((high - low) * 0.25, abs(lo_lim) * 0.01)
            ax.set_ylim(low - pad, high + pad)
            note = "; zoomed on the exposure, lowering and raising run off-scale"
    _legend(ax)
    when = {"whole_run": "over the run", "per_period": "per period", "at_start": "at the start"}
    words = c.quantity.replace("_", " ")
    caption = f"{run.key}: {words} {when.get(c.when, '')} against {c.shown_limits()}{note}"
    return Figure(caption, _svg(fig))


def difference_figure(run: J.RunData, c: J.Criterion) -> Figure | None:
    """Water minus specimen temperature over time, with the +/- limit band."""
    import numpy as np

    water = [s for s in run.series if s.quantity == "water_temperature"]
    specs = [s for s in run.series if s.quantity == "specimen_temperature"]
    if not water or not specs:
        return None
    w = water[0]
    fig, ax = _axes("water minus specimen temperature (K)", _time_label(run))
    for s in specs:
        diff = np.interp(s.t_us, w.t_us, w.value) - s.value
        x, lo, hi = envelope(_since_start(run, s.t_us), diff)
        ax.plot(x, lo, linewidth=0.7, label=s.specimen or "specimen")
        if lo is not hi:
            ax.plot(x, hi, linewidth=0.5)
    _, hi_lim = c.limits()
    if hi_lim is not None:
        for v in (hi_lim, -hi_lim):
            ax.axhline(v, **LIMIT_STYLE)
    _legend(ax)
    return Figure(
        f"{run.key}: water minus specimen temperature; judged where immersion starts "
        f"against {c.shown_limits()}",
        _svg(fig),
    )


def torque_figure(run: J.RunData, c: J.Criterion) -> Figure | None:
    """Torque against cycles per specimen, with each specimen's band around its cycle-0 torque."""
    import numpy as np

    counter = [s for s in run.series if s.quantity == "cycle_count"]
    torques = [s for s in run.series if s.quantity == "torque"]
    if not counter or not torques:
        return None
    k = counter[0]
    lo_pct, hi_pct = c.limits()
    fig, ax = _axes("operating torque (N·mm)", "cycles completed")
    for s in torques:
        cycles = np.interp(s.t_us, k.t_us, k.value)
        x, lo, hi = envelope(cycles, s.value)
        (line,) = ax.plot(x, lo, linewidth=0.7, label=s.specimen or "torque")
        if lo is not hi:
            ax.plot(x, hi, linewidth=0.5, color=line.get_color())
        t0 = float(s.value[int(np.argmin(np.abs(cycles)))])
        for pct in (lo_pct, hi_pct):
            if pct is not None:
                ax.axhline(
                    t0 * (1 + pct / 100), color=line.get_color(), linestyle="--", linewidth=0.7
                )
    _legend(ax)
    return Figure(
        f"{run.key}: operating torque against cycles; dashed: {c.shown_limits()} "
        "around each specimen's cycle-0 torque",
        _svg(fig),
    )


def run_figures(run: J.RunData) -> list[Figure]:
    """The plots an engineer would look at for this run, one per logged criterion."""
    out = []
    seen: set[str] = set()
    for raw in run.procedure.get("criteria", []):
        c = J.Criterion.from_json(raw)
        if c.quantity in seen:
            continue
        seen.add(c.quantity)
        fig: Figure | None = None
        if c.quantity == "water_specimen_difference":
            fig = difference_figure(run, c)
        elif c.quantity == "torque_change_from_cycle0":
            fig = torque_figure(run, c)
        elif c.quantity not in J.JUDGES:
            fig = condition_figure(run, c)
        if fig is not None:
            out.append(fig)
    return out
