"""Judging a run's criteria from its logged samples and observations.

Pure: the store loads a ``RunData`` and saves the ``Verdict`` list. Each criterion of the
plan (quantity, comparison, limits, when) is evaluated over whole arrays (numpy), never
one sample at a time in Python.

Decision rules (ISO/IEC 17025 cl. 7.8.6; ILAC-G8:09/2019):

* ``simple``: pass when the measured value is within the limit, fail otherwise (the
  uncertainty is reported beside it but does not move the limit);
* ``guarded``: the acceptance limit is moved inside the tolerance limit by w = r x U.
  Inside the acceptance limit: pass; between it and the tolerance limit: conditional
  pass; beyond the tolerance limit by up to w: conditional fail; further: fail.
  With no stated uncertainty a pass can only be conditional.

A criterion with no data, or whose data has a gap longer than 1.5 logging intervals
(a reading missed) in its evaluation window, is ``no data``, never a pass.
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np
    import numpy.typing as npt

    from testplan.domain.phases import PhaseSpan

PASS = "pass"
COND_PASS = "conditional pass"
COND_FAIL = "conditional fail"
FAIL = "fail"
NO_DATA = "no data"
NOT_RUN = "not run"
# A channel logged on the run for which the plan gives no band: shown, never judged.
LOGGED_NO_BAND = "logged, no band"
# Worst first: what a roll-up reports when verdicts differ.
SEVERITY = (FAIL, COND_FAIL, NO_DATA, NOT_RUN, COND_PASS, PASS, LOGGED_NO_BAND)
FAILING = {FAIL, COND_FAIL, NO_DATA}

GAP_FACTOR = 1.5
# Averaging period for per-period criteria logged continuously; others use each reading
# (a fog-collection reading is already the mean over its collection period).
PERIOD_S = {"flow": 60.0, "extraction_rate": 900.0}
# Criterion units that name a channel's unit another way.
UNIT_ALIASES = {"ml/80cm^2/h": "mL/h", "pH": "", "Rp": "", "count": "", "cycle": "cycle"}


@dataclass(frozen=True)
class Rule:
    """The decision rule declared for the campaign, and where the client agreed it."""

    name: str = "simple"
    guard_factor: float = 1.0
    agreement: str | None = None

    def shown(self) -> str:
        if self.name == "guarded":
            text = f"guarded acceptance, w = {self.guard_factor:g} x U (ILAC-G8)"
        else:
            text = "simple acceptance (ILAC-G8): pass or fail on the limit"
        if self.agreement:
            text += f"; agreed: {self.agreement}"
        return text


@dataclass
class Series:
    """One logged channel of one raw file, corrected by its calibration."""

    quantity: str
    specimen: str | None
    t_us: npt.NDArray[np.int64]
    value: npt.NDArray[np.float64]
    unit: str
    uncertainty: float | None = None
    coverage_k: float | None = None
    range_min: float | None = None
    range_max: float | None = None
    source: str = ""

    @property
    def interval_us(self) -> float:
        import numpy as np

        if len(self.t_us) < 2:
            return 0.0
        return float(np.median(np.diff(self.t_us)))


@dataclass(frozen=True)
class Obs:
    """One observation as judging needs it."""

    kind: str
    specimen: str | None
    data: dict[str, Any]
    at: dt.datetime
    source: str = ""
    uncertainty: float | None = None
    coverage_k: float | None = None


@dataclass
class RunData:
    """Everything recorded for one run, in plan units."""

    key: str
    procedure: dict[str, Any]
    specimens: list[str]
    started_at: dt.datetime
    finished_at: dt.datetime
    series: list[Series] = field(default_factory=list)
    observations: list[Obs] = field(default_factory=list)
    later_ingress: dict[str, list[tuple[str, bool]]] = field(default_factory=dict)
    free_volume_l: float | None = None


@dataclass
class Verdict:
    """One criterion judged: what was measured, against what, how sure, and the outcome."""

    criterion: str
    quantity: str
    outcome: str
    specimen: str | None = None
    measured: float | None = None
    unit: str | None = None
    limit_min: float | None = None
    limit_max: float | None = None
    accept_min: float | None = None
    accept_max: float | None = None
    margin: float | None = None
    uncertainty: float | None = None
    coverage_k: float | None = None
    window_start: dt.datetime | None = None
    window_end: dt.datetime | None = None
    detail: str = ""
    flags: list[str] = field(default_factory=list)
    sources: list[str] = field(default_factory=list)

    def to_json(self) -> dict[str, Any]:
        return {
            "criterion": self.criterion,
            "quantity": self.quantity,
            "specimen": self.specimen,
            "outcome": self.outcome,
            "measured": self.measured,
            "unit": self.unit,
            "limits": {"min": self.limit_min, "max": self.limit_max},
            "acceptance": {"min": self.accept_min, "max": self.accept_max},
            "margin": self.margin,
            "uncertainty": {"U": self.uncertainty, "k": self.coverage_k},
            "window": [
                self.window_start.isoformat() if self.window_start else None,
                self.window_end.isoformat() if self.window_end else None,
            ],
            "detail": self.detail,
            "flags": list(self.flags),
        }


def worst(outcomes: Sequence[str]) -> str:
    """The roll-up of several outcomes: the most severe one (pass if there are none)."""
    if not outcomes:
        return PASS
    return min(outcomes, key=SEVERITY.index)


def decide(
    measured: float, lo: float | None, hi: float | None, u: float | None, rule: Rule
) -> tuple[str, float | None, float | None, float]:
    """Outcome, acceptance limits and margin for a measured value against [lo, hi].

    The margin is the distance to the nearest tolerance limit, positive inside.
    """
    margins = []
    if lo is not None:
        margins.append(measured - lo)
    if hi is not None:
        margins.append(hi - measured)
    margin = min(margins)
    inside = margin >= 0
    if rule.name != "guarded":
        return (PASS if inside else FAIL), lo, hi, margin
    if u is None:
        return (COND_PASS if inside else FAIL), None, None, margin
    w = rule.guard_factor * u
    a_lo = lo + w if lo is not None else None
    a_hi = hi - w if hi is not None else None
    if margin >= w and (a_lo is None or a_hi is None or a_lo <= a_hi):
        outcome = PASS
    elif inside:
        outcome = COND_PASS
    elif margin >= -w:
        outcome = COND_FAIL
    else:
        outcome = FAIL
    return outcome, a_lo, a_hi, margin


def shown_limits(lo: float | None, hi: float | None, unit: str | None) -> str:
    """Limits as read: '>= 2053.7 mm', '<= 5 K', '1 to 2 mL/h'; '-' when there are none."""
    if lo is None and hi is None:
        return "-"
    if hi is None:
        return f">= {fmt(lo, unit)}"
    if lo is None:
        return f"<= {fmt(hi, unit)}"
    return f"{fmt(lo)} to {fmt(hi, unit)}"


def acceptance_margin(
    measured: float | None, accept_min: float | None, accept_max: float | None
) -> float | None:
    """Distance of ``measured`` to the nearest acceptance limit, positive inside (None when
    there is no value or no acceptance limit, as under a guarded rule without U)."""
    if measured is None or (accept_min is None and accept_max is None):
        return None
    margins = []
    if accept_min is not None:
        margins.append(measured - accept_min)
    if accept_max is not None:
        margins.append(accept_max - measured)
    return min(margins)


def coverage_probability(k: float) -> float:
    """The coverage probability of an expanded uncertainty U = k u when the measurand is
    taken as normally distributed: about 0.95 for k = 2."""
    return math.erf(k / math.sqrt(2.0))


def shown_uncertainty(u: float | None, k: float | None, unit: str | None) -> str:
    """'4 mm (k = 2, about 95 %)': U with its coverage factor and coverage probability."""
    if not u or k is None:
        return "-"
    return f"{fmt(u, unit)} (k = {k:g}, about {100 * coverage_probability(k):.0f} %)"


def _utc(t_us: float) -> dt.datetime:
    return dt.datetime.fromtimestamp(t_us / 1e6, dt.UTC)


def _us(t: dt.datetime) -> int:
    return round(t.timestamp() * 1e6)


def fmt(x: float | None, unit: str | None = None) -> str:
    """A number as a person reads it: no exponent between 0.001 and a million."""
    if x is None:
        return "-"
    if x == 0 or 1e3 <= abs(x) < 1e6:
        text = f"{x:.0f}" if float(x).is_integer() or abs(x) >= 1e4 else f"{x:.1f}"
    elif 1e-3 <= abs(x) < 1e3:
        text = f"{x:.4g}"
    else:
        text = f"{x:.3g}"
    shown_unit = UNIT_ALIASES.get(unit or "", unit) if unit in ("count", "Rp", "pH") else unit
    return f"{text} {shown_unit}" if shown_unit else text


def _gap(s: Series, lo_us: float, hi_us: float) -> str | None:
    """A gap longer than GAP_FACTOR logging intervals inside [lo, hi], described."""
    import numpy as np

    inside = (s.t_us >= lo_us) & (s.t_us <= hi_us)
    t = s.t_us[inside]
    if len(t) < 2:
        return None
    d = np.diff(t)
    interval = s.interval_us
    if interval <= 0:
        return None
    bad = d > GAP_FACTOR * interval
    if not bad.any():
        return None
    i = int(np.argmax(d))
    return (
        f"gap of {d[i] / 60e6:.3g} min in the {s.quantity} log from "
        f"{_utc(t[i]):%Y-%m-%d %H:%M:%SZ} (logging interval {interval / 1e6:.3g} s)"
    )


def _range_flag(s: Series, values: npt.NDArray[np.float64]) -> list[str]:
    import numpy as np

    out = np.zeros(len(values), dtype=bool)
    if s.range_min is not None:
        out |= values < s.range_min
    if s.range_max is not None:
        out |= values > s.range_max
    n = int(out.sum())
    if not n:
        return []
    return [
        f"{n} {s.quantity} reading(s) outside the calibrated range "
        f"{fmt(s.range_min)} to {fmt(s.range_max, s.unit)}"
    ]


@dataclass(frozen=True)
class Criterion:
    """A plan criterion as stored in the plan JSON."""

    id: str
    quantity: str
    comparison: str
    when: str
    unit: str | None
    min: float | None
    max: float | None
    text: str | None = None
    phase: str | None = None

    @classmethod
    def from_json(cls, c: dict[str, Any]) -> Criterion:
        lim = c.get("limits", {})
        return cls(
            c["id"],
            c["quantity"],
            c["comparison"],
            c["when"],
            lim.get("unit"),
            lim.get("min"),
            lim.get("max"),
            c.get("text"),
            c.get("phase"),
        )

    def shown_limits(self) -> str:
        """The limits as read: '>= 2053.7 mm', '<= 5 K', '1 to 2 mL/h'."""
        return shown_limits(*self.limits(), self.unit)

    def limits(self) -> tuple[float | None, float | None]:
        if self.comparison == ">=":
            return self.min, None
        if self.comparison == "<=":
            return None, self.max
        return self.min, self.max


def _verdict(c: Criterion, **kw: Any) -> Verdict:
    lo, hi = c.limits()
    return Verdict(
        criterion=c.id, quantity=c.quantity, unit=c.unit, limit_min=lo, limit_max=hi, **kw
    )


def _measured(
    c: Criterion,
    run: RunData,
    rule: Rule,
    value: float,
    u: float | None,
    k: float | None,
    *,
    specimen: str | None = None,
    window: tuple[float, float] | None = None,
    detail: str = "",
    flags: list[str] | None = None,
    sources: list[str] | None = None,
    exact: bool = False,
) -> Verdict:
    """A verdict for a measured value. ``exact`` values (counts, ratings) take no guard band."""
    lo, hi = c.limits()
    if exact:
        outcome, a_lo, a_hi, margin = decide(value, lo, hi, None, Rule("simple"))
    else:
        outcome, a_lo, a_hi, margin = decide(value, lo, hi, u, rule)
    text = f"{fmt(value, c.unit)} against {c.shown_limits()}"
    if detail:
        text += f"; {detail}"
    return _verdict(
        c,
        outcome=outcome,
        specimen=specimen,
        measured=value,
        accept_min=a_lo,
        accept_max=a_hi,
        margin=margin,
        uncertainty=u,
        coverage_k=k,
        window_start=_utc(window[0]) if window else None,
        window_end=_utc(window[1]) if window else None,
        detail=text,
        flags=flags or [],
        sources=sources or [],
    )


def _no_data(c: Criterion, why: str, specimen: str | None = None, **kw: Any) -> Verdict:
    return _verdict(c, outcome=NO_DATA, specimen=specimen, detail=why, **kw)


def in_unit(s: Series, unit: str | None) -> Series:
    """The series in the criterion's unit (converted when the two differ)."""
    want = UNIT_ALIASES.get(unit or "", unit or "")
    have = UNIT_ALIASES.get(s.unit, s.unit)
    if want == have:
        return s
    from testplan.domain.channels import CHANNELS
    from testplan.domain.units import linear_map

    scale, offset = linear_map(s.unit, CHANNELS[s.quantity].kind, want)
    u = s.uncertainty * abs(scale) if s.uncertainty is not None else None
    lo = s.range_min * scale + offset if s.range_min is not None else None
    hi = s.range_max * scale + offset if s.range_max is not None else None
    return Series(
        s.quantity,
        s.specimen,
        s.t_us,
        s.value * scale + offset,
        want,
        u,
        s.coverage_k,
        lo,
        hi,
        s.source,
    )


def _series(run: RunData, quantity: str) -> list[Series]:
    return [s for s in run.series if s.quantity == quantity and len(s.t_us)]


def _in_run(run: RunData, s: Series) -> npt.NDArray[np.bool_]:
    """Samples recorded between the run's start and finish."""
    return (s.t_us >= _us(run.started_at)) & (s.t_us <= _us(run.finished_at))


# --- logged conditions -------------------------------------------------------------------


def exposure(s: Series, lo: float) -> tuple[int, int] | None:
    """First and last index at or beyond ``lo``: the exposure a '>=' condition is judged on."""
    import numpy as np

    ok = np.flatnonzero(s.value >= lo)
    if not len(ok):
        return None
    return int(ok[0]), int(ok[-1])


def condition(c: Criterion, run: RunData, rule: Rule) -> list[Verdict]:
    """A logged condition held over the whole run, per averaging period, or at the start."""
    import numpy as np

    found = _series(run, c.quantity)
    if not found:
        return [_no_data(c, f"not logged: no {c.quantity} on this run")]
    if c.phase is not None:
        return [in_phases(c, run, rule, in_unit(x, c.unit)) for x in found]
    out = []
    for s in (in_unit(x, c.unit) for x in found):
        lo, hi = c.limits()
        flags: list[str] = []
        src = [s.source]
        if c.when == "whole_run" and c.comparison == ">=" and lo is not None:
            span = exposure(s, lo)
            if span is None:
                deepest = float(s.value.max())
                out.append(
                    _measured(
                        c,
                        run,
                        rule,
                        deepest,
                        s.uncertainty,
                        s.coverage_k,
                        specimen=s.specimen,
                        sources=src,
                        detail=f"never reached; deepest {fmt(deepest, c.unit)}",
                    )
                )
                continue
            i, j = span
            t, v = s.t_us[i : j + 1], s.value[i : j + 1]
        else:
            keep = _in_run(run, s)
            t, v = s.t_us[keep], s.value[keep]
            if not len(t):
                out.append(
                    _no_data(
                        c,
                        f"no {c.quantity} reading between the run's start and finish",
                        specimen=s.specimen,
                    )
                )
                continue
        window = (float(t[0]), float(t[-1]))
        if c.when == "at_start":
            t, v = t[:1], v[:1]
        else:
            gap = _gap(s, *window)
            if gap:
                out.append(
                    _no_data(
                        c,
                        gap,
                        specimen=s.specimen,
                        sources=src,
                        window_start=_utc(window[0]),
                        window_end=_utc(window[1]),
                    )
                )
                continue
        flags += _range_flag(s, v)
        detail = ""
        if c.when == "per_period" and c.quantity in PERIOD_S:
            period = PERIOD_S[c.quantity] * 1e6
            bins = ((t - t[0]) // period).astype(np.int64)
            v = np.bincount(bins, weights=v) / np.bincount(bins)
            v = v[np.isfinite(v)]
            detail = f"{len(v)} periods of {PERIOD_S[c.quantity] / 60:g} min"
        elif c.when == "per_period":
            detail = f"{len(v)} collection periods"
        worst_i, value = _worst(v, lo, hi)
        if c.when == "whole_run" and c.comparison == ">=":
            below = t[v < lo] if lo is not None else t[:0]
            detail = "over the exposure"
            if len(below):
                minutes = len(below) * s.interval_us / 60e6
                detail = (
                    f"below the limit for about {minutes:.3g} min in the exposure, first at "
                    f"{_utc(below[0]):%Y-%m-%d %H:%M:%SZ}"
                )
        out.append(
            _measured(
                c,
                run,
                rule,
                value,
                s.uncertainty,
                s.coverage_k,
                specimen=s.specimen,
                window=window,
                detail=detail,
                flags=flags,
                sources=src,
            )
        )
    return out


def phase_windows(run: RunData, phase: str) -> list[tuple[PhaseSpan, int, int, bool]]:
    """Each occurrence of ``phase`` in the run's schedule as (span, start us, end us, closed
    end), placed from the run's recorded start."""
    from testplan.domain.phases import schedule

    t0 = _us(run.started_at)
    return [
        (p, t0 + round(p.start_h * 3600e6), t0 + round(p.end_h * 3600e6), p.last)
        for p in schedule(run.procedure)
        if p.name == phase
    ]


def _in_window(s: Series, a: int, b: int, closed: bool) -> npt.NDArray[np.bool_]:
    """Readings from ``a`` up to ``b`` (``b`` itself only for the schedule's last phase)."""
    return (s.t_us >= a) & ((s.t_us <= b) if closed else (s.t_us < b))


def _phase_gap(s: Series, t: npt.NDArray[np.int64], lo: int, hi: int) -> str | None:
    """A reading missed inside a phase window, at its start or its end, described."""
    interval = s.interval_us
    if interval <= 0:
        return None
    limit = GAP_FACTOR * interval
    if t[0] - lo > limit:
        return f"first {s.quantity} reading {(t[0] - lo) / 60e6:.3g} min after the phase began"
    if hi - t[-1] > limit:
        return f"last {s.quantity} reading {(hi - t[-1]) / 60e6:.3g} min before the phase ended"
    return _gap(s, float(t[0]), float(t[-1]))


def in_phases(c: Criterion, run: RunData, rule: Rule, s: Series) -> Verdict:
    """A condition band judged in every occurrence of its phase: the worst reading over all
    of them, shown with the phase it fell in. A phase with no reading, or with a reading
    missed, makes the criterion ``no data``."""
    import numpy as np

    assert c.phase is not None
    lo, hi = c.limits()
    src = [s.source]
    windows = phase_windows(run, c.phase)
    if not windows:
        return _no_data(
            c, f"the run's phase schedule has no {c.phase.replace('_', ' ')} phase", s.specimen
        )
    best: tuple[float, float, PhaseSpan, int, int] | None = None
    outside_us = 0.0
    first_out: int | None = None
    for span, a, b, closed in windows:
        keep = _in_window(s, a, b, closed)
        t, v = s.t_us[keep], s.value[keep]
        missing = f"no {c.quantity} reading" if not len(t) else _phase_gap(s, t, a, b)
        if missing:
            return _no_data(
                c,
                f"{missing} in {span.shown()}",
                s.specimen,
                sources=src,
                window_start=_utc(a),
                window_end=_utc(b),
            )
        _, value = _worst(v, lo, hi)
        margin = min(
            value - lo if lo is not None else math.inf, hi - value if hi is not None else math.inf
        )
        bad = np.zeros(len(v), dtype=bool)
        if lo is not None:
            bad |= v < lo
        if hi is not None:
            bad |= v > hi
        if bad.any():
            outside_us += int(bad.sum()) * s.interval_us
            if first_out is None:
                first_out = int(t[bad][0])
        if best is None or margin < best[0]:
            best = (margin, value, span, a, b)
    assert best is not None
    _, value, span, a, b = best
    keep_all = np.zeros(len(s.t_us), dtype=bool)
    for _, wa, wb, closed in windows:
        keep_all |= _in_window(s, wa, wb, closed)
    detail = f"worst in {span.shown()} ({len(windows)} such phase(s) judged)"
    if first_out is not None:
        detail += (
            f"; outside the band for about {outside_us / 60e6:.3g} min, first at "
            f"{_utc(first_out):%Y-%m-%d %H:%M:%SZ}"
        )
    return _measured(
        c,
        run,
        rule,
        value,
        s.uncertainty,
        s.coverage_k,
        specimen=s.specimen,
        window=(float(a), float(b)),
        detail=detail,
        flags=_range_flag(s, s.value[keep_all]),
        sources=src,
    )


def _worst(v: npt.NDArray[np.float64], lo: float | None, hi: float | None) -> tuple[int, float]:
    """Index and value of the reading nearest to (or furthest beyond) a limit."""
    import numpy as np

    margin = np.full(len(v), np.inf)
    if lo is not None:
        margin = np.minimum(margin, v - lo)
    if hi is not None:
        margin = np.minimum(margin, hi - v)
    i = int(np.argmin(margin))
    return i, float(v[i])


# --- quantities worked out from several channels -----------------------------------------


def _combined(*parts: tuple[float | None, float | None]) -> tuple[float | None, float | None]:
    """U (k = 2) of a sum or difference of readings, from each reading's U and k."""
    var = 0.0
    for u, k in parts:
        if u is None or not k:
            return None, None
        var += (u / k) ** 2
    return 2.0 * math.sqrt(var), 2.0


def water_specimen_difference(c: Criterion, run: RunData, rule: Rule) -> list[Verdict]:
    """|water - specimen| temperature at the start of the exposure, per specimen."""
    import numpy as np

    water = _series(run, "water_temperature")
    specs = _series(run, "specimen_temperature")
    if not water or not specs:
        missing = "water_temperature" if not water else "specimen_temperature"
        return [_no_data(c, f"no {missing} logged on this run")]
    w = water[0]
    start = float(_us(run.started_at))
    depth = _series(run, "lowest_point_depth") or _series(run, "highest_point_depth")
    if depth:
        lo = _depth_limit(run)
        span = exposure(depth[0], lo) if lo is not None else None
        if span is not None:
            start = float(depth[0].t_us[span[0]])
    out = []
    for s in specs:
        if not (s.t_us[0] - s.interval_us * GAP_FACTOR <= start <= s.t_us[-1]) or not (
            w.t_us[0] - w.interval_us * GAP_FACTOR <= start <= w.t_us[-1]
        ):
            out.append(
                _no_data(c, "no temperature reading at the start of immersion", specimen=s.specimen)
            )
            continue
        tw = float(np.interp(start, w.t_us, w.value))
        ts = float(np.interp(start, s.t_us, s.value))
        u, k = _combined((w.uncertainty, w.coverage_k), (s.uncertainty, s.coverage_k))
        out.append(
            _measured(
                c,
                run,
                rule,
                abs(tw - ts),
                u,
                k,
                specimen=s.specimen,
                window=(start, start),
                sources=[w.source, s.source],
                detail=f"water {tw:.2f} degC, specimen {ts:.2f} degC at "
                f"{_utc(start):%Y-%m-%d %H:%M:%SZ}",
            )
        )
    return out


def _depth_limit(run: RunData) -> float | None:
    for raw in run.procedure.get("criteria", []):
        if raw["quantity"] in ("lowest_point_depth", "highest_point_depth"):
            value = raw["limits"].get("min")
            return float(value) if value is not None else None
    return None


def _primary(run: RunData) -> tuple[Series, Callable[[Any], Any], str] | None:
    """The logged condition whose holding defines the exposure (depth for immersion, flow
    for jets), as (series, test of each reading, description)."""
    for raw in run.procedure.get("criteria", []):
        crit = Criterion.from_json(raw)
        if crit.when not in ("whole_run", "per_period") or crit.quantity == "depression":
            continue
        found = _series(run, crit.quantity)
        if not found:
            continue
        lo, hi = crit.limits()

        def holds(v: Any, lo: float | None = lo, hi: float | None = hi) -> Any:
            ok = v == v
            if lo is not None:
                ok = ok & (v >= lo)
            if hi is not None:
                ok = ok & (v <= hi)
            return ok

        return found[0], holds, crit.quantity
    return None


def duration(c: Criterion, run: RunData, rule: Rule) -> list[Verdict]:
    """How long the exposure condition held without a break (or the recorded run times)."""
    import numpy as np

    to_unit = {"h": 3600e6, "min": 60e6, "s": 1e6}.get(c.unit or "h", 3600e6)
    primary = _primary(run)
    if primary is None:
        seconds = (run.finished_at - run.started_at).total_seconds()
        return [
            _measured(
                c,
                run,
                rule,
                seconds * 1e6 / to_unit,
                None,
                None,
                window=(_us(run.started_at), _us(run.finished_at)),
                detail="from the recorded start and finish; nothing logged shows it",
            )
        ]
    s, holds, name = primary
    ok = holds(s.value)
    interval = s.interval_us
    breaks = np.ones(len(ok), dtype=bool)
    breaks[1:] = (~ok[1:]) | (~ok[:-1]) | (np.diff(s.t_us) > GAP_FACTOR * interval)
    seg = np.cumsum(breaks)
    best = (0.0, 0, 0)
    if ok.any():
        ids = seg[ok]
        first = np.full(seg.max() + 1, np.iinfo(np.int64).max)
        last = np.zeros(seg.max() + 1, dtype=np.int64)
        np.minimum.at(first, ids, s.t_us[ok])
        np.maximum.at(last, ids, s.t_us[ok])
        spans = np.where(last >= first, last - first + interval, 0)
        i = int(np.argmax(spans))
        best = (float(spans[i]), int(first[i]), int(last[i]))
    value = best[0] / to_unit
    u = interval / to_unit
    held = np.count_nonzero(np.diff(seg[ok]) > 0) + 1 if ok.any() else 0
    detail = f"longest unbroken stretch with {name} within its limit"
    if held > 1:
        detail += f" ({held} stretches: the condition was broken {held - 1} time(s))"
    return [
        _measured(
            c,
            run,
            rule,
            value,
            u,
            1.0,
            window=(best[1], best[2]),
            detail=detail,
            sources=[s.source],
        )
    ]


def air_drawn(c: Criterion, run: RunData, rule: Rule) -> list[Verdict]:
    """Total air drawn: the running-total channel, else the extraction rate integrated."""
    import numpy as np

    total = _series(run, "air_drawn")
    if total:
        s = total[0]
        keep = _in_run(run, s)
        if keep.any():
            drawn = float(s.value[keep][-1] - s.value[keep][0])
            return [
                _measured(
                    c,
                    run,
                    rule,
                    drawn,
                    s.uncertainty,
                    s.coverage_k,
                    sources=[s.source],
                    detail="difference of the running total",
                )
            ]
    rate = _series(run, "extraction_rate")
    if not rate:
        return [_no_data(c, "neither air_drawn nor extraction_rate logged on this run")]
    s = rate[0]
    keep = _in_run(run, s)
    t, v = s.t_us[keep], s.value[keep]
    if len(t) < 2:
        return [_no_data(c, "too few extraction_rate readings to integrate")]
    gap = _gap(s, float(t[0]), float(t[-1]))
    if gap:
        return [_no_data(c, gap)]
    hours = np.diff(t) / 3600e6
    litres = float(np.sum((v[1:] + v[:-1]) / 2 * hours))
    u = s.uncertainty * float(hours.sum()) if s.uncertainty is not None else None
    return [
        _measured(
            c,
            run,
            rule,
            litres,
            u,
            s.coverage_k,
            window=(float(t[0]), float(t[-1])),
            detail="extraction rate integrated over time",
            sources=[s.source],
        )
    ]


def dust_end(c: Criterion, run: RunData, rule: Rule) -> list[Verdict]:
    """Dust category 1 end condition (IEC 60529 cl. 13.5): at least 80 enclosure volumes
    drawn, or, when the rate cannot reach 40 volumes/h, the plan's ``duration_max`` (8 h)
    with the logged depression at its limit (the plan's ``depression_at_limit`` band)."""
    import numpy as np

    (drawn,) = air_drawn(c, run, rule)
    params = run.procedure.get("parameters", {})
    hours_max = params.get("duration_max", {}).get("value")
    band = params.get("depression_at_limit", {})
    found = _series(run, "depression")
    if drawn.outcome == PASS or drawn.measured is None or hours_max is None or not found:
        return [drawn]
    s = found[0]
    keep = _in_run(run, s)
    t, v = s.t_us[keep], s.value[keep]
    if len(t) < 2:
        return [drawn]
    gap = _gap(s, float(t[0]), float(t[-1]))
    if gap:
        return [_no_data(c, f"{drawn.detail}; depression: {gap}")]
    at = (v >= band.get("min", -math.inf)) & (v <= band.get("max", math.inf))
    both = at[1:] & at[:-1]
    hours = float(np.sum(np.diff(t)[both])) / 3600e6
    outcome, _, _, _ = decide(hours, float(hours_max), None, s.interval_us / 3600e6, rule)
    if outcome == FAIL:
        return [drawn]
    return [
        _verdict(
            c,
            outcome=outcome,
            measured=drawn.measured,
            uncertainty=drawn.uncertainty,
            coverage_k=drawn.coverage_k,
            window_start=_utc(float(t[0])),
            window_end=_utc(float(t[-1])),
            detail=f"{fmt(drawn.measured, c.unit)} drawn, below {c.shown_limits()}, so the "
            f"rate stayed under 40 volumes/h; {fmt(hours, 'h')} with the depression at its "
            f"limit ({fmt(band.get('min'))} to {fmt(band.get('max'), 'kPa')}) against "
            f"{fmt(float(hours_max), 'h')}: the test ended on time",
            sources=[*drawn.sources, s.source],
        )
    ]


def cycles_completed(c: Criterion, run: RunData, rule: Rule) -> list[Verdict]:
    """Salt-mist cycles: the recorded exposure time over the cycle length."""
    length = run.procedure.get("parameters", {}).get("cycle_length", {}).get("value")
    if not length:
        return [_no_data(c, "the plan gives no cycle length")]
    hours = (run.finished_at - run.started_at).total_seconds() / 3600
    return [
        _measured(
            c,
            run,
            rule,
            hours / float(length),
            None,
            None,
            exact=True,
            window=(_us(run.started_at), _us(run.finished_at)),
            detail=f"{hours:.4g} h recorded / {length} h a cycle",
        )
    ]


def _cycles_at(run: RunData, s: Series) -> npt.NDArray[np.float64] | None:
    """The rig's cycle count at each reading of ``s`` (interpolated in time)."""
    import numpy as np

    counter = _series(run, "cycle_count")
    if not counter:
        return None
    k = counter[0]
    return np.interp(s.t_us, k.t_us, k.value)


def cycles_reached(c: Criterion, run: RunData, rule: Rule) -> list[Verdict]:
    counter = _series(run, "cycle_count")
    if counter:
        s = counter[0]
        return [
            _measured(
                c,
                run,
                rule,
                float(s.value.max()),
                s.uncertainty,
                s.coverage_k,
                exact=not s.uncertainty,
                sources=[s.source],
                window=(float(s.t_us[0]), float(s.t_us[-1])),
                detail="highest count logged by the rig",
            )
        ]
    counts = [o.data["cycles"] for o in run.observations if o.kind in ("torque", "failure")]
    if not counts:
        return [_no_data(c, "no cycle_count logged and no torque or failure observation")]
    return [
        _measured(
            c,
            run,
            rule,
            float(max(counts)),
            None,
            None,
            exact=True,
            detail="highest cycle count in the observations",
        )
    ]


def _checkpoints(run: RunData) -> list[int]:
    raw = run.procedure.get("parameters", {}).get("checkpoints", {}).get("text", "")
    return [int(x) for x in str(raw).replace(" ", "").split(",") if x.isdigit()]


def _torque_points(
    run: RunData, specimen: str, points: list[int]
) -> dict[int, tuple[float, Series | None]]:
    """Torque of one specimen at each checkpoint: from its logged channel (nearest reading
    in cycles) or from torque observations."""
    import numpy as np

    out: dict[int, tuple[float, Series | None]] = {}
    for s in _series(run, "torque"):
        if s.specimen != specimen:
            continue
        cyc = _cycles_at(run, s)
        if cyc is None:
            continue
        step = float(np.median(np.diff(cyc))) if len(cyc) > 1 else 0.0
        for p in points:
            i = int(np.argmin(np.abs(cyc - p)))
            if abs(cyc[i] - p) <= max(0.02 * p, GAP_FACTOR * step, 1.0):
                out[p] = (float(s.value[i]), s)
    for o in run.observations:
        if o.kind == "torque" and o.specimen == specimen and o.data["cycles"] in points:
            out.setdefault(int(o.data["cycles"]), (float(o.data["value"]), None))
    return out


def torque(c: Criterion, run: RunData, rule: Rule) -> list[Verdict]:
    """Torque at cycle 0 within its band, or its change from cycle 0 at every checkpoint."""
    points = _checkpoints(run) or [0]
    out = []
    for spec in run.specimens:
        found = _torque_points(run, spec, points)
        if 0 not in found:
            out.append(_no_data(c, "no torque reading at cycle 0", specimen=spec))
            continue
        t0, s0 = found[0]
        u0, k0 = (s0.uncertainty, s0.coverage_k) if s0 else (None, None)
        src = [s0.source] if s0 else []
        if c.quantity == "torque_at_cycle0":
            out.append(
                _measured(c, run, rule, t0, u0, k0, specimen=spec, sources=src, detail="at cycle 0")
            )
            continue
        reached = max(found)
        changes = {p: (v - t0) / t0 * 100.0 for p, (v, _) in found.items() if p > 0}
        missing = [p for p in points if p > 0 and p not in found and p <= reached]
        if missing:
            out.append(
                _no_data(c, f"no torque reading at checkpoint {missing[0]} cycles", specimen=spec)
            )
            continue
        if not changes:
            out.append(_no_data(c, "no checkpoint after cycle 0 reached", specimen=spec))
            continue
        lo, hi = c.limits()
        p_worst = min(
            changes,
            key=lambda p: min(changes[p] - (lo or -math.inf), (hi or math.inf) - changes[p]),
        )
        u, k = _combined((u0, k0), (u0, k0))
        u_pct = u / t0 * 100.0 if u is not None else None
        listed = ", ".join(f"{p}: {changes[p]:+.1f} %" for p in sorted(changes))
        out.append(
            _measured(
                c,
                run,
                rule,
                changes[p_worst],
                u_pct,
                k,
                specimen=spec,
                sources=src,
                detail=f"worst at {p_worst} cycles (cycle 0: {t0:.3g} N*mm; {listed})",
            )
        )
    return out


# --- outcomes from observations ----------------------------------------------------------


def _latest(run: RunData, kind: str, specimen: str, **match: Any) -> Obs | None:
    found = [
        o
        for o in run.observations
        if o.kind == kind
        and o.specimen == specimen
        and all(o.data.get(k) == v for k, v in match.items())
    ]
    return max(found, key=lambda o: o.at) if found else None


def ingress(c: Criterion, run: RunData, rule: Rule) -> list[Verdict]:
    """Water, dust or probe contact: none found (or none harmful), per specimen."""
    kind, match = (
        ("contact", {})
        if c.quantity == "hazardous_part_contact"
        else ("ingress", {"medium": "dust" if c.quantity == "dust_ingress" else "water"})
    )
    out = []
    for spec in run.specimens:
        o = _latest(run, kind, spec, **match)
        if o is None:
            out.append(_no_data(c, f"no {kind} observation for this specimen", specimen=spec))
            continue
        where = f" ({o.data['where']})" if o.data.get("where") else ""
        if not o.data["found"]:
            outcome, detail = PASS, "none found"
        elif c.comparison == "none_found":
            outcome, detail = FAIL, f"found{where}"
        elif "harmful" not in o.data:
            outcome, detail = NO_DATA, f"found{where}; record whether it is harmful"
        else:
            outcome = FAIL if o.data["harmful"] else PASS
            detail = f"found{where}, {'harmful' if o.data['harmful'] else 'not harmful'}"
        if o.data.get("live_parts") == "reached":
            detail += "; reached live parts"
        out.append(_verdict(c, outcome=outcome, specimen=spec, detail=detail, sources=[o.source]))
    return out


def _each_specimen(
    c: Criterion, run: RunData, kind: str, missing: str, make: Callable[[str, Obs], Verdict]
) -> list[Verdict]:
    """One verdict per specimen from its latest observation of ``kind`` (no data without)."""
    out = []
    for spec in run.specimens:
        o = _latest(run, kind, spec)
        out.append(_no_data(c, missing, specimen=spec) if o is None else make(spec, o))
    return out


def function(c: Criterion, run: RunData, rule: Rule) -> list[Verdict]:
    def make(spec: str, o: Obs) -> Verdict:
        detail = o.data["result"] + (f": {o.data['detail']}" if o.data.get("detail") else "")
        outcome = PASS if o.data["result"] == "pass" else FAIL
        return _verdict(c, outcome=outcome, specimen=spec, detail=detail, sources=[o.source])

    return _each_specimen(c, run, "function", "no functional check recorded", make)


def insulation(c: Criterion, run: RunData, rule: Rule) -> list[Verdict]:
    def make(spec: str, o: Obs) -> Verdict:
        volts = f" at {o.data['test_voltage']:g} V" if o.data.get("test_voltage") else ""
        named = "" if o.uncertainty is not None else "; no meter calibration named"
        return _measured(
            c,
            run,
            rule,
            float(o.data["resistance"]),
            o.uncertainty,
            o.coverage_k,
            specimen=spec,
            sources=[o.source],
            detail=f"measured{volts}{named}",
        )

    return _each_specimen(c, run, "insulation", "no insulation resistance recorded", make)


def leak_rate(obs: Obs, free_volume_l: float) -> tuple[float, float | None]:
    """Pressure-decay leak rate (mbar*L/s) and its U (k = 2) from one leak-test observation.

    Q = (V / dt) * (p1 - p2 * T1 / T2), V = free volume + test-circuit dead volume, absolute
    pressures, kelvin temperatures: the end pressure is brought to the start temperature
    before the decay is taken.
    """
    d = obs.data
    volume = free_volume_l + d["dead_volume"]
    t1, t2 = d["start_temperature"] + 273.15, d["end_temperature"] + 273.15
    q = volume / d["duration"] * (d["start_pressure"] - d["end_pressure"] * t1 / t2)
    if obs.uncertainty is None or not obs.coverage_k:
        return q, None
    u_p = obs.uncertainty / obs.coverage_k
    u_q = volume / d["duration"] * math.hypot(u_p, u_p * t1 / t2)
    return q, 2.0 * u_q


def leak(c: Criterion, run: RunData, rule: Rule) -> list[Verdict]:
    def make(spec: str, o: Obs) -> Verdict:
        if run.free_volume_l is None:
            return _no_data(c, "the campaign gives no free volume", specimen=spec)
        q, u = leak_rate(o, run.free_volume_l)
        d = o.data
        detail = (
            f"pressure decay {d['start_pressure']:g} -> {d['end_pressure']:g} mbar in "
            f"{d['duration']:g} s, {d['start_temperature']:g} -> {d['end_temperature']:g} "
            f"degC, volume {run.free_volume_l:g} + {d['dead_volume']:g} L"
        )
        if u is None:
            detail += "; no gauge calibration named"
        return _measured(
            c,
            run,
            rule,
            q,
            u,
            2.0 if u is not None else None,
            specimen=spec,
            detail=detail,
            sources=[o.source],
        )

    return _each_specimen(c, run, "leak_test", "no leak test recorded", make)


def rating(c: Criterion, run: RunData, rule: Rule) -> list[Verdict]:
    def make(spec: str, o: Obs) -> Verdict:
        return _measured(
            c,
            run,
            rule,
            float(o.data["rating"]),
            None,
            None,
            specimen=spec,
            exact=True,
            detail="protection rating",
            sources=[o.source],
        )

    return _each_specimen(c, run, "corrosion", "no corrosion rating recorded", make)


def failures(c: Criterion, run: RunData, rule: Rule) -> list[Verdict]:
    found = [o for o in run.observations if o.kind == "failure"]
    if c.quantity == "failure_cycle_recorded":
        return [
            _verdict(
                c,
                outcome=PASS,
                detail=f"{len(found)} failure(s), each with its cycle count",
                sources=[o.source for o in found],
            )
        ]
    detail = (
        "; ".join(
            f"{o.specimen or 'rig'} at {o.data['cycles']} cycles: {o.data['description']}"
            for o in found
        )
        or "none recorded"
    )
    return [
        _measured(
            c,
            run,
            rule,
            float(len(found)),
            None,
            None,
            exact=True,
            detail=detail,
            sources=[o.source for o in found],
        )
    ]


def retest(c: Criterion, run: RunData, rule: Rule) -> list[Verdict]:
    """The ingress retest after ageing: each specimen's later water test found no ingress."""
    out = []
    for spec in run.specimens:
        later = run.later_ingress.get(spec, [])
        if not later:
            out.append(
                _no_data(c, "no later water test with an ingress observation yet", specimen=spec)
            )
            continue
        found = [key for key, f in later if f]
        out.append(
            _verdict(
                c,
                outcome=FAIL if found else PASS,
                specimen=spec,
                detail=f"ingress found in {', '.join(found)}"
                if found
                else f"none found in {', '.join(k for k, _ in later)}",
            )
        )
    return out


JUDGES: dict[str, Callable[[Criterion, RunData, Rule], list[Verdict]]] = {
    "water_specimen_difference": water_specimen_difference,
    "duration": duration,
    "air_drawn": air_drawn,
    "dust_end": dust_end,
    "cycles_completed": cycles_completed,
    "cycles_reached": cycles_reached,
    "torque_at_cycle0": torque,
    "torque_change_from_cycle0": torque,
    "water_ingress": ingress,
    "dust_ingress": ingress,
    "hazardous_part_contact": ingress,
    "probe_entry": ingress,
    "function": function,
    "insulation_resistance": insulation,
    "leak_rate": leak,
    "protection_rating": rating,
    "failures": failures,
    "failure_cycle_recorded": failures,
    "ingress_retest": retest,
    "seal_ingress_retest": retest,
}


# Channels a worked-out criterion reads besides its own quantity: a channel one of these
# reads has a band (through that criterion) and is not "logged, no band".
READS: dict[str, tuple[str, ...]] = {
    "water_specimen_difference": (
        "water_temperature",
        "specimen_temperature",
        "lowest_point_depth",
        "highest_point_depth",
    ),
    "air_drawn": ("air_drawn", "extraction_rate"),
    "dust_end": ("air_drawn", "extraction_rate", "depression"),
    "cycles_reached": ("cycle_count",),
    "torque_at_cycle0": ("torque", "cycle_count"),
    "torque_change_from_cycle0": ("torque", "cycle_count"),
}


def banded(procedure: dict[str, Any]) -> set[str]:
    """The channels the procedure's criteria judge or read."""
    out: set[str] = set()
    for raw in procedure.get("criteria", []):
        out.add(raw["quantity"])
        out.update(READS.get(raw["quantity"], ()))
    return out


def unbanded(run: RunData) -> list[Verdict]:
    """One ``logged, no band`` verdict per channel (and specimen) logged on the run that no
    criterion of its plan judges: reported with its range, never silently left out."""
    have = banded(run.procedure)
    pid = run.procedure.get("id", "run")
    out = []
    for s in run.series:
        if s.quantity in have or not len(s.t_us):
            continue
        keep = _in_run(run, s)
        v = s.value[keep] if keep.any() else s.value
        out.append(
            Verdict(
                criterion=f"{pid}.logged_{s.quantity}",
                quantity=s.quantity,
                outcome=LOGGED_NO_BAND,
                specimen=s.specimen,
                unit=s.unit,
                window_start=_utc(float(s.t_us[0])),
                window_end=_utc(float(s.t_us[-1])),
                detail=f"{len(v)} reading(s) from {fmt(float(v.min()))} to "
                f"{fmt(float(v.max()), s.unit)}; the plan gives this channel no band",
                sources=[s.source],
            )
        )
    return out


def judge_run(run: RunData, rule: Rule) -> list[Verdict]:
    """Every criterion of the run's procedure, judged from its data, then every logged
    channel the plan gives no band (``logged, no band``)."""
    out: list[Verdict] = []
    for raw in run.procedure.get("criteria", []):
        c = Criterion.from_json(raw)
        judge = JUDGES.get(c.quantity, condition)
        out.extend(judge(c, run, rule))
    return out + unbanded(run)


# --- run validity and roll-up --------------------------------------------------------------

# Criteria on the product itself. Every other criterion is a test condition: when one fails,
# the test was not done as the method asks, so the run is invalid (to be repeated) for the
# specimens in it, unless a deviation accepted by an authorised approver covers it.
PRODUCT_QUANTITIES = frozenset(
    {
        "water_ingress",
        "dust_ingress",
        "hazardous_part_contact",
        "probe_entry",
        "function",
        "insulation_resistance",
        "leak_rate",
        "protection_rating",
        "failures",
        "failure_cycle_recorded",
        "ingress_retest",
        "seal_ingress_retest",
        "torque_at_cycle0",
        "torque_change_from_cycle0",
    }
)
# Roll-up outcomes of a specimen, a leg or a claim, worst first.
FAILED = "failed"
INVALID = "invalid: repeat"
INCOMPLETE = "incomplete"
NOT_STARTED = "not started"
PASSED = "passed"
CONTROL = "control, not tested"
STATUS_ORDER = (FAILED, INVALID, INCOMPLETE, NOT_STARTED, PASSED, CONTROL)
# Statement of conformity per claim (ISO/IEC 17025 cl. 7.8.6.2).
MET = "met"
NOT_MET = "not met"
NOT_EVALUATED = "not evaluated"


def is_product(quantity: str) -> bool:
    """Whether a criterion judges the product (True) or a test condition (False)."""
    return quantity in PRODUCT_QUANTITIES


def uncovered_conditions(verdicts: Sequence[tuple[str, str, str]], covered: set[str]) -> list[str]:
    """Condition criteria (id, quantity, outcome) that failed and no deviation covers."""
    return sorted(
        {c for c, q, o in verdicts if not is_product(q) and o in FAILING and c not in covered}
    )


def product_outcome(outcomes: Sequence[str]) -> str:
    """A specimen's product outcome in one valid run: failed, passed or incomplete."""
    if any(o in (FAIL, COND_FAIL) for o in outcomes):
        return FAILED
    if any(o in (NO_DATA, NOT_RUN) for o in outcomes):
        return INCOMPLETE
    return PASSED


def specimen_status(run_states: Sequence[str]) -> tuple[str, str]:
    """A specimen's roll-up from the state of each of its runs, and the words shown.

    Each state is ``passed``, ``failed``, ``incomplete`` (judged, a product criterion has no
    data), ``invalid: repeat`` (a condition failed, no repeat yet) or ``not started``.
    A product failure wins; then an invalid run; then ``k of n runs done``.
    """
    n = len(run_states)
    done = sum(1 for s in run_states if s == PASSED)
    if FAILED in run_states:
        return FAILED, FAILED
    if INVALID in run_states:
        return INVALID, INVALID
    if n and done == n:
        return PASSED, PASSED
    if all(s == NOT_STARTED for s in run_states):
        return NOT_STARTED, NOT_STARTED
    return INCOMPLETE, f"incomplete ({done} of {n} runs done)"


def worst_status(statuses: Sequence[str]) -> str:
    """The roll-up of several specimen statuses: the most severe one."""
    tested = [s for s in statuses if s != CONTROL]
    if not tested:
        return NOT_STARTED
    return min(tested, key=STATUS_ORDER.index)


def claim_status(run_states: Sequence[str]) -> str:
    """Met when every run the claim rests on passed; not met on a product failure."""
    if FAILED in run_states:
        return NOT_MET
    if run_states and all(s == PASSED for s in run_states):
        return MET
    return NOT_EVALUATED
