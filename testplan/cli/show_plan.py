"""Print a plan as readable rich tables (stdout)."""

from __future__ import annotations

from rich.console import Console, Group, RenderableType
from rich.panel import Panel
from rich.table import Table
from rich.text import Text

from testplan.domain.plan import Plan, Procedure


def _procedure(proc: Procedure) -> Panel:
    params = Table(show_header=True, header_style="bold", box=None, pad_edge=False, expand=True)
    name_width = min(28, max((len(p.name) for p in proc.parameters), default=10))
    params.add_column("parameter", no_wrap=True, width=name_width)
    params.add_column("value", ratio=8)
    params.add_column("source", ratio=3, min_width=12)
    for p in proc.parameters:
        source = p.provenance + (
            f", cl. {p.clause}" if p.clause and p.clause != proc.clause else ""
        )
        params.add_row(p.name, p.shown(), source)
    crit = Table(show_header=True, header_style="bold", box=None, pad_edge=False, expand=True)
    crit.add_column("criterion", no_wrap=True, ratio=2)
    crit.add_column("passes when", ratio=7)
    for c in proc.criteria:
        crit.add_row(c.id.split(".", 1)[-1], c.shown())
    parts: list[RenderableType] = [params, Text(""), crit]
    if proc.specimen_state:
        parts.append(Text("\nSpecimen state", style="bold"))
        parts += [Text(f"- {s}") for s in proc.specimen_state]
    if proc.notes:
        parts.append(Text("\nNotes", style="bold"))
        parts += [Text(f"- {n}") for n in proc.notes]
    parts.append(Text("\nCautions", style="bold red"))
    # The general caution is printed once above the procedures.
    parts += [Text(f"! {c}") for c in proc.cautions[1:]]
    flags = " | destructive: opens the specimen" if proc.destructive else ""
    title = f"[bold]{proc.id}[/]  {proc.code}  {proc.title}"
    edition = f" {proc.edition}" if proc.edition else ""
    clause = f", cl. {proc.clause}" if proc.clause else ""
    subtitle = f"{proc.standard}{edition}{clause}{flags}"
    return Panel(
        Group(*parts), title=title, title_align="left", subtitle=subtitle, subtitle_align="left"
    )


def print_plan(plan: Plan, width: int = 100) -> None:
    """Print the readable plan: header, planned procedures, implied list, notes, precedence."""
    console = Console(width=width, highlight=False, soft_wrap=False)
    c = plan.campaign
    d = c["device"]
    t = c["target"]
    console.print(Text(f"{c['title']}  ({c['reference']})", style="bold"))
    console.print(f"Client: {c['client']}   Laboratory: {c['laboratory']}")
    maker = " ".join(x for x in (d.get("maker"), d.get("model")) if x)
    console.print(
        f"Device: {d['name']}{' - ' + maker if maker else ''}; height {d['height_mm']:g} mm"
    )
    depth = (
        f"; declared {t['immersion_depth_m']:g} m at the {t['depth_reference']} for "
        f"{t['immersion_duration_h']:g} h in {t['service_water']} water"
        if t["immersion_depth_m"] is not None and t["immersion_duration_h"] is not None
        else ""
    )
    console.print(f"Target: {t['code']}{depth}")
    console.print()
    planned = [p for p in plan.procedures if p.status == "planned"]
    if planned and planned[0].cautions:
        console.print(Text(f"Safety: {planned[0].cautions[0]}", style="bold red"))
        console.print()
    implied = [p for p in plan.procedures if p.status == "implied"]
    for proc in planned:
        console.print(_procedure(proc))
    if implied:
        table = Table(title="Implied, not tested", title_justify="left", expand=True)
        table.add_column("id", no_wrap=True)
        table.add_column("code", no_wrap=True)
        table.add_column("title")
        table.add_column("implied by")
        for p in implied:
            table.add_row(p.id, p.code, p.title, p.implied_by or "")
        console.print(table)
    if plan.specimens is not None and plan.schedule is not None:
        _print_layout(console, plan)
    for note in plan.notes:
        console.print(Text(f"Note: {note}"))
    console.print()
    console.print(Panel(Text(plan.closing_note), title="Governing documents", title_align="left"))


def _print_layout(console: Console, plan: Plan) -> None:
    """Legs, specimens, the calendar of runs, facility use and the due date."""
    assert plan.specimens is not None and plan.schedule is not None
    legs = Table(title="Specimens and legs", title_justify="left", expand=True)
    legs.add_column("serial", no_wrap=True)
    legs.add_column("leg", no_wrap=True)
    legs.add_column("runs, in order, and the steps between them")
    for s in plan.specimens:
        detail = " -> ".join(r.split("@")[0] for r in s["runs"]) or "-"
        if s["steps"]:
            detail += "\n" + "; ".join(s["steps"])
        legs.add_row(s["serial"], s["leg"], detail)
    console.print(legs)
    sched = plan.schedule
    cal = Table(title="Calendar", title_justify="left", expand=True)
    cal.add_column("start", no_wrap=True)
    cal.add_column("end", no_wrap=True)
    cal.add_column("run", no_wrap=True)
    cal.add_column("facility")
    cal.add_column("specimens")
    critical = set(sched["critical_path"])
    for r in sorted(sched["runs"], key=lambda r: (r["start"], r["id"])):
        mark = " *" if r["id"] in critical else ""
        cal.add_row(
            _when(r["start"], short=True),
            _when(r["end"], short=True),
            r["id"] + mark,
            r["facility"] or "-",
            ", ".join(x.rsplit("-", 1)[-1] for x in r["specimens"]),
        )
    console.print(cal)
    console.print("* on the critical path")
    use = Table(title="Facility use", title_justify="left")
    use.add_column("facility")
    use.add_column("capacity", justify="right")
    use.add_column("busy h", justify="right")
    use.add_column("idle h", justify="right")
    for f in sched["facilities"]:
        use.add_row(f["name"], str(f["capacity"]), f"{f['busy_h']:.1f}", f"{f['idle_h']:.1f}")
    console.print(use)
    console.print(Text(f"Last result due: {_when(sched['due'])}", style="bold"))


def _when(iso: str, short: bool = False) -> str:
    import datetime as dt

    t = dt.datetime.fromisoformat(iso)
    return t.strftime("%a %d %b %H:%M" if short else "%a %Y-%m-%d %H:%M")
