"""``testplan plan``: read a campaign file and print the procedures it needs."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from testplan.cli.errors import reports_errors
from testplan.domain.units import KEY_UNITS
from testplan.errors import TestplanError

PLAN_EPILOG = "Quantity keys (kind, plan unit): " + "; ".join(
    f"{k.key} ({k.kind}, {k.plan_unit})" for k in KEY_UNITS.values()
)


@reports_errors
def plan_command(
    campaign_file: Annotated[
        Path, typer.Argument(help="Campaign file (TOML).", show_default=False)
    ],
    as_json: Annotated[
        bool, typer.Option("--json", help="Print the plan as JSON (schema in testplan/schema).")
    ] = False,
    width: Annotated[
        int, typer.Option(help="Line width of the readable plan.", min=60, max=240)
    ] = 100,
    html: Annotated[
        Path | None,
        typer.Option("--html", help="Also write the plan as a printable HTML page to this file."),
    ] = None,
    templates: Annotated[
        Path | None,
        typer.Option(help="Folder of templates overriding the built-in ones."),
    ] = None,
    chart: Annotated[
        Path | None,
        typer.Option("--chart", help="Write the campaign calendar as a chart (.svg or .png)."),
    ] = None,
) -> None:
    """Plan the procedures, parameters and criteria a campaign file needs.

    Example: testplan plan sample_campaign/flood-gauge-node.toml --json
    """
    from testplan.domain.planner import build_plan
    from testplan.reader import read_campaign, with_location

    loaded = read_campaign(campaign_file)
    plan = with_location(loaded, lambda: build_plan(loaded.campaign))
    if chart is not None:
        if plan.schedule is None:
            raise TestplanError(
                "no calendar to draw: the file has no [[leg]] sections",
                file=campaign_file,
                fix="add [[leg]] and [calendar]",
            )
        suffix = chart.suffix.lower().lstrip(".")
        if suffix not in ("svg", "png"):
            raise typer.BadParameter(
                "the chart file must end in .svg or .png", param_hint="--chart"
            )
        from testplan.output import write_atomically
        from testplan.report.chart import calendar_chart

        title = f"{plan.campaign['reference']}: {plan.campaign['title']}"
        write_atomically(chart, calendar_chart(plan.schedule, title, suffix))
        typer.echo(f"wrote {chart}", err=True)
    if html is not None:
        from testplan.output import write_atomically
        from testplan.report.render import render

        page = render(
            "plan.html.j2",
            {
                "plan": plan,
                "planned": [p for p in plan.procedures if p.status == "planned"],
                "implied": [p for p in plan.procedures if p.status == "implied"],
            },
            templates,
        )
        write_atomically(html, page.encode("utf-8"))
        typer.echo(f"wrote {html}", err=True)
    if as_json:
        import json

        typer.echo(json.dumps(plan.to_json(), indent=2, ensure_ascii=False))
        return
    from testplan.cli.show_plan import print_plan

    print_plan(plan, width=width)
