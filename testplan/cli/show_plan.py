"""Print a plan as readable plain-text tables (stdout).

Plain text wrapped with textwrap: it reads the same in a terminal, a pipe or a log file, and
costs nothing at start-up (a terminal-drawing library took a quarter of the plan command).
"""

from __future__ import annotations

import datetime as dt
import textwrap
from collections.abc import Sequence

import typer

from testplan.domain.plan import Plan, Procedure, cite, shown_provenance

GAP = "  "


def _table(
    headers: Sequence[str],
    rows: Sequence[Sequence[str]],
    width: int,
    *,
    fixed: Sequence[int | None],
    indent: str = "",
) -> list[str]:
    """Columns padded to width; ``fixed`` gives a column's width, None shares the rest
    equally. Cells wrap at spaces; fixed columns are sized to fit their widest cell."""
    n = len(headers)
    widths = [max(f, len(headers[i])) if f is not None else 0 for i, f in enumerate(fixed)]
    free = [i for i in range(n) if fixed[i] is None]
    room = width - len(indent) - sum(widths) - len(GAP) * (n - 1)
    for i in free:
        widths[i] = max(12, room // max(len(free), 1))
    out = []
    for row in [list(headers), *[list(r) for r in rows]]:
        cells = [
            textwrap.wrap(str(cell), widths[i], break_on_hyphens=False) or [""]
            for i, cell in enumerate(row)
        ]
        for k in range(max(len(c) for c in cells)):
            parts = [(c[k] if k < len(c) else "").ljust(widths[i]) for i, c in enumerate(cells)]
            out.append((indent + GAP.join(parts)).rstrip())
    return out


def _fit(values: Sequence[str], cap: int) -> int:
    return min(cap, max((len(v) for v in values), default=4))


def _bullets(title: str, items: Sequence[str], mark: str, width: int) -> list[str]:
    lines = ["", f"  {title}"]
    for item in items:
        lines += textwrap.wrap(
            item, width, initial_indent=f"  {mark} ", subsequent_indent="    "
        ) or [f"  {mark}"]
    return lines


def _procedure(proc: Procedure, width: int) -> list[str]:
    edition = f" {proc.edition}" if proc.edition else ""
    clause = f", {cite(proc.clause)}" if proc.clause else ""
    flags = " | destructive: opens the specimen" if proc.destructive else ""
    head = f"{proc.id}  {proc.code}  {proc.title}"
    lines = ["=" * width, head, f"{proc.standard}{edition}{clause}{flags}", "-" * width]
    rows = []
    for p in proc.parameters:
        source = shown_provenance(p.provenance) + (
            f", {cite(p.clause)}" if p.clause and p.clause != proc.clause else ""
        )
        rows.append((p.name, p.shown(), source))
    names = [r[0] for r in rows]
    lines += _table(
        ("parameter", "value", "source"),
        rows,
        width,
        fixed=(_fit(names, 28), None, 24),
        indent="  ",
    )
    lines.append("")
    crit = [(c.id.split(".", 1)[-1], c.shown()) for c in proc.criteria]
    lines += _table(
        ("criterion", "passes when"),
        crit,
        width,
        fixed=(_fit([c[0] for c in crit], 24), None),
        indent="  ",
    )
    if proc.specimen_state:
        lines += _bullets("Specimen state", proc.specimen_state, "-", width)
    if proc.notes:
        lines += _bullets("Notes", proc.notes, "-", width)
    # The general caution is printed once above the procedures.
    lines += _bullets("Cautions", proc.cautions[1:], "!", width)
    lines.append("")
    return lines


def print_plan(plan: Plan, width: int = 100) -> None:
    """Print the readable plan: header, planned procedures, implied list, notes, precedence."""
    lines: list[str] = []
    c = plan.campaign
    d = c["device"]
    t = c["target"]
    wrap = textwrap.TextWrapper(width=width, subsequent_indent="  ")
    lines += wrap.wrap(f"{c['title']}  ({c['reference']})")
    lines += wrap.wrap(f"Client: {c['client']}   Laboratory: {c['laboratory']}")
    maker = " ".join(x for x in (d.get("maker"), d.get("model")) if x)
    lines += wrap.wrap(
        f"Device: {d['name']}{' - ' + maker if maker else ''}; height {d['height_mm']:g} mm"
    )
    depth = (
        f"; declared {t['immersion_depth_m']:g} m at the {t['depth_reference']} for "
        f"{t['immersion_duration_h']:g} h in {t['service_water']} water"
        if t["immersion_depth_m"] is not None and t["immersion_duration_h"] is not None
        else ""
    )
    lines += wrap.wrap(f"Target: {t['code']}{depth}")
    lines.append("")
    planned = [p for p in plan.procedures if p.status == "planned"]
    if planned and planned[0].cautions:
        lines += wrap.wrap(f"Safety: {planned[0].cautions[0]}")
        lines.append("")
    for proc in planned:
        lines += _procedure(proc, width)
    implied = [p for p in plan.procedures if p.status == "implied"]
    if implied:
        rows = [(p.id, p.code, p.title, p.implied_by or "") for p in implied]
        lines += ["Implied, not tested", "-" * width]
        lines += _table(
            ("id", "code", "title", "implied by"),
            rows,
            width,
            fixed=(_fit([r[0] for r in rows], 30), _fit([r[1] for r in rows], 12), None, None),
        )
        lines.append("")
    if plan.specimens is not None and plan.schedule is not None:
        lines += _layout(plan, width)
    for note in plan.notes:
        lines += wrap.wrap(f"Note: {note}")
    lines += ["", "Governing documents", "-" * width]
    lines += textwrap.wrap(plan.closing_note, width)
    typer.echo("\n".join(lines))


def _layout(plan: Plan, width: int) -> list[str]:
    """Legs, specimens, the calendar of runs, facility use and the due date."""
    assert plan.specimens is not None and plan.schedule is not None
    lines = ["Specimens and legs", "-" * width]
    rows = []
    for s in plan.specimens:
        detail = " -> ".join(r.split("@")[0] for r in s["runs"]) or "-"
        if s["steps"]:
            detail += "; then " + "; ".join(s["steps"])
        rows.append((s["serial"], s["leg"], detail))
    lines += _table(
        ("serial", "leg", "runs, in order, and the steps between them"),
        rows,
        width,
        fixed=(_fit([r[0] for r in rows], 24), _fit([r[1] for r in rows], 20), None),
    )
    sched = plan.schedule
    critical = set(sched["critical_path"])
    runs: list[tuple[str, ...]] = []
    for r in sorted(sched["runs"], key=lambda r: (r["start"], r["id"])):
        runs.append(
            (
                _when(r["start"], short=True),
                _when(r["end"], short=True),
                r["id"] + (" *" if r["id"] in critical else ""),
                r["facility"] or "-",
                ", ".join(x.rsplit("-", 1)[-1] for x in r["specimens"]),
            )
        )
    lines += ["", "Calendar (* on the critical path)", "-" * width]
    lines += _table(
        ("start", "end", "run", "facility", "specimens"),
        runs,
        width,
        fixed=(16, 16, _fit([r[2] for r in runs], 40), None, None),
    )
    lines += ["", "Facility use", "-" * width]
    lines += _table(
        ("facility", "capacity", "busy h", "idle h"),
        [
            (f["name"], str(f["capacity"]), f"{f['busy_h']:.1f}", f"{f['idle_h']:.1f}")
            for f in sched["facilities"]
        ],
        width,
        fixed=(_fit([f["name"] for f in sched["facilities"]], 30), 8, 8, 8),
    )
    lines += ["", f"Last result due: {_when(sched['due'])}", ""]
    return lines


def _when(iso: str, short: bool = False) -> str:
    t = dt.datetime.fromisoformat(iso)
    return t.strftime("%a %d %b %H:%M" if short else "%a %Y-%m-%d %H:%M")
