"""``testplan record``: run the planned runs at the bench and keep the evidence."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any

import typer

from testplan.cli.common import (
    CampaignOption,
    DbOption,
    QuietOption,
    command_group,
    open_for_reading,
    open_for_writing,
    parse_at,
    say,
)
from testplan.cli.errors import reports_errors
from testplan.domain.channels import CHANNELS
from testplan.errors import RecordError, TestplanError

if TYPE_CHECKING:  # pragma: no cover
    from sqlmodel import Session

    from testplan.store.tables import RawFile

app = command_group(
    "Record runs at the bench: start, logger data, observations, finish, data check."
)

RunArg = Annotated[str, typer.Argument(help="Run id from the plan, e.g. water-8@aged-1.")]
ByOption = Annotated[str, typer.Option("--by", help="Initials of the person recording.")]

# Which option gave each observation field, so a refusal names the option.
OPTION_OF = {
    ("ingress", ""): "--ingress",
    ("ingress", "where"): "--where",
    ("ingress", "live_parts"): "--live-parts",
    ("mass", "before"): "--mass-before",
    ("mass", "after"): "--mass-after",
    ("mass", ""): "--mass-before",
    ("function", ""): "--function",
    ("insulation", ""): "--insulation",
    ("corrosion", ""): "--rating",
    ("torque", "cycles"): "--cycles",
    ("torque", ""): "--torque",
    ("failure", "cycles"): "--cycles",
    ("failure", ""): "--failure",
    ("photo", ""): "--photo",
    ("note", ""): "--note",
}

CHANNEL_LIST = "; ".join(f"{c.name} ({c.unit or 'no unit'})" for c in CHANNELS.values())


@app.command("list")
@reports_errors
def list_command(campaign: CampaignOption = None, db: DbOption = None) -> None:
    """List a campaign's runs with their planned times and state.

    Example: testplan record list --campaign QC-2027-014
    """
    from testplan.store import records

    store = open_for_reading(db)
    with store.reading() as session:
        for run in records.list_runs(session, campaign):
            start = run.planned_start.strftime("%Y-%m-%d %H:%MZ")
            typer.echo(f"{run.key:<44} {start}  {run.state}")


def _quantity(text: str, kind: str, unit: str, key: str) -> float:
    from testplan.domain.units import parse_quantity

    return parse_quantity(text, kind, unit, key=key)


def _state_notes(items: list[str]) -> tuple[tuple[int, str], ...]:
    out = []
    for item in items:
        number, sep, text = item.partition(":")
        if not sep or not number.strip().isdigit() or not text.strip():
            raise RecordError(
                f"cannot read {item!r}",
                key="--state-differs",
                fix="write 'N: how the specimen differs', N from the checklist",
            )
        out.append((int(number), text.strip()))
    return tuple(out)


@app.command("receive")
@reports_errors
def receive_command(
    serials: Annotated[list[str], typer.Argument(help="Specimen serials.", show_default=False)],
    on: Annotated[str, typer.Option("--on", help="Date of receipt, ISO.")],
    condition: Annotated[str, typer.Option("--condition", help="Condition on receipt.")],
    by: ByOption,
    campaign: CampaignOption = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Record the date of receipt and the condition of specimens as received.

    Example: testplan record receive QC-2027-014-S01 QC-2027-014-S02 --on 2027-01-06 --condition "new, sealed in carton" --by AK
    """
    from testplan.cli.common import parse_date
    from testplan.store import records

    day = parse_date(on, "--on")
    store = open_for_writing(db, quiet=quiet)

    def unit(session: Session) -> int:
        return len(
            records.receive_specimens(
                session, campaign=campaign, serials=serials, on=day, condition=condition, by=by
            )
        )

    n = store.write(unit)
    typer.echo(f"{n} specimen(s) received on {day}")


@app.command("start")
@reports_errors
def start_command(
    run: RunArg,
    operator: Annotated[str, typer.Option("--operator", help="Initials of the operator.")],
    equipment: Annotated[
        list[str], typer.Option("--equipment", help="Equipment id used; repeat for each.")
    ],
    ambient_temperature: Annotated[
        str, typer.Option("--ambient-temperature", help='Lab air, e.g. "21.5 degC".')
    ],
    ambient_humidity: Annotated[str, typer.Option("--ambient-humidity", help='e.g. "48 %".')],
    ambient_pressure: Annotated[str, typer.Option("--ambient-pressure", help='e.g. "1012 hPa".')],
    state_ok: Annotated[
        bool,
        typer.Option(
            "--state-ok",
            help="The specimens are as the plan's checklist requires, except items "
            "named in --state-differs.",
        ),
    ] = False,
    state_differs: Annotated[
        list[str] | None,
        typer.Option("--state-differs", help="'N: how' for checklist item N that differs."),
    ] = None,
    precondition: Annotated[
        str | None, typer.Option("--precondition", help="Pre-conditioning done, as text.")
    ] = None,
    at: Annotated[
        str | None, typer.Option("--at", help="Start time with zone (default: now).")
    ] = None,
    deviation: Annotated[
        str | None, typer.Option("--deviation", help="A departure from the method.")
    ] = None,
    deviation_reason: Annotated[
        str | None, typer.Option("--deviation-reason", help="Why the deviation is needed.")
    ] = None,
    approved_by: Annotated[
        str | None,
        typer.Option("--approved-by", help="Initials of the approver allowing the deviation."),
    ] = None,
    external_provider: Annotated[
        str | None,
        typer.Option("--external-provider", help="Laboratory that ran it, if not this one."),
    ] = None,
    campaign: CampaignOption = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Start a run: operator, equipment, specimen checklist, pre-conditioning, lab ambient.

    Refused when any equipment's calibration is not valid through the run's planned end.

    Example: testplan record start water-8@aged-1 --operator AK --equipment LT-03 --equipment TT-07 --ambient-temperature "21 degC" --ambient-humidity "45 %" --ambient-pressure "1012 hPa" --state-ok
    """
    from testplan.store import records

    sheet = records.StartSheet(
        operator=operator,
        equipment=tuple(equipment),
        ambient_temperature_c=_quantity(
            ambient_temperature, "temperature", "degC", "--ambient-temperature"
        ),
        ambient_humidity_pct=_quantity(ambient_humidity, "ratio", "%", "--ambient-humidity"),
        ambient_pressure_hpa=_quantity(ambient_pressure, "pressure", "hPa", "--ambient-pressure"),
        state_ok=state_ok,
        state_notes=_state_notes(state_differs or []),
        preconditioning=precondition,
        at=parse_at(at),
        deviation=deviation,
        deviation_reason=deviation_reason,
        deviation_approver=approved_by,
        external_provider=external_provider,
    )
    store = open_for_writing(db, quiet=quiet)

    def unit(session: Session) -> list[str]:
        row = records.find_run(session, run, campaign=campaign)
        return records.start_run(session, run=row, sheet=sheet)

    warnings = store.write(unit)
    for w in warnings:
        say(f"warning: {w}", quiet=quiet)
    typer.echo(f"{run}: started")


@app.command("deviation")
@reports_errors
def deviation_command(
    run: RunArg,
    description: Annotated[
        str, typer.Option("--description", help="What departs from the method.")
    ],
    reason: Annotated[str, typer.Option("--reason", help="Why.")],
    approved_by: Annotated[str, typer.Option("--approved-by", help="Initials of the approver.")],
    by: ByOption,
    covers: Annotated[
        str | None,
        typer.Option("--covers", help="The condition criterion whose failure it accepts."),
    ] = None,
    campaign: CampaignOption = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Record a deviation from the method, with its reason and an authorised approver.

    Example: testplan record deviation water-8@aged-1 --description "tank at 1.9 m for 3 min while topping up" --reason "leak in the tank valve" --approved-by MO --by AK
    """
    from testplan.store import records

    store = open_for_writing(db, quiet=quiet)

    def unit(session: Session) -> None:
        row = records.find_run(session, run, campaign=campaign)
        records.add_deviation(
            session,
            run=row,
            description=description,
            reason=reason,
            approver=approved_by,
            recorded_by=by,
            covers=covers,
        )

    store.write(unit)
    typer.echo(f"{run}: deviation recorded, approved by {approved_by}")


@app.command("import", epilog="Quantities (plan unit): " + CHANNEL_LIST)
@reports_errors
def import_command(
    run: RunArg,
    file: Annotated[Path, typer.Argument(help="Logger CSV file, long or wide.")],
    map_: Annotated[
        list[str],
        typer.Option(
            "--map",
            help="SOURCE[UNIT]=QUANTITY@EQUIPMENT: a column (wide) or channel name (long), its "
            "unit, the plan quantity and the instrument; repeat for each channel.",
        ),
    ],
    by: ByOption,
    tz: Annotated[
        str | None,
        typer.Option("--tz", help="Logger time zone (IANA) for time stamps without one."),
    ] = None,
    layout: Annotated[
        str, typer.Option("--layout", help="long, wide or auto (long if it has channel and value).")
    ] = "auto",
    time_column: Annotated[str, typer.Option("--time-column")] = "time",
    channel_column: Annotated[str, typer.Option("--channel-column")] = "channel",
    value_column: Annotated[str, typer.Option("--value-column")] = "value",
    delimiter: Annotated[str, typer.Option("--delimiter")] = ",",
    decimal: Annotated[str, typer.Option("--decimal", help="Decimal mark: . or ,")] = ".",
    encoding: Annotated[str, typer.Option("--encoding")] = "utf-8",
    skip_lines: Annotated[
        int, typer.Option("--skip-lines", help="Lines before the header.", min=0)
    ] = 0,
    skip_unmapped: Annotated[
        bool, typer.Option("--skip-unmapped", help="Ignore channels not in --map.")
    ] = False,
    campaign: CampaignOption = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Import a data-logger file into a run: kept byte for byte, samples in plan units.

    One all-or-nothing import: a bad line is named (file, line, column) and nothing is kept.

    Example: testplan record import water-8@aged-1 tank.csv --map "level[cm]=lowest_point_depth@LT-03" --tz Europe/London --by AK
    """
    from testplan.importers.logger_csv import ReadOptions, parse_map, read_logger_file

    options = ReadOptions(
        layout=layout,  # type: ignore[arg-type]  # checked by the reader
        timezone=tz,
        time_column=time_column,
        channel_column=channel_column,
        value_column=value_column,
        delimiter=delimiter,
        decimal=decimal,
        encoding=encoding,
        skip_lines=skip_lines,
        skip_unmapped=skip_unmapped,
    )
    data = read_logger_file(file, [parse_map(m) for m in map_], options)
    from testplan.store import records

    store = open_for_writing(db, quiet=quiet)

    def unit(session: Session) -> RawFile:
        row = records.find_run(session, run, campaign=campaign)
        with _progress(data.count, quiet) as advance:
            return records.import_logger_data(session, run=row, data=data, by=by, progress=advance)

    raw = store.write(unit)
    typer.echo(
        f"{run}: imported {raw.samples} samples from {raw.name} "
        f"({raw.first_at:%Y-%m-%d %H:%M:%SZ} to {raw.last_at:%Y-%m-%d %H:%M:%SZ}), "
        f"sha256 {raw.sha256[:16]}"
    )


class _progress:
    """A progress bar on stderr while samples are written (silent with --quiet)."""

    def __init__(self, total: int, quiet: bool) -> None:
        self.total, self.quiet = total, quiet
        self.bar: Any = None

    def __enter__(self) -> Any:
        if self.quiet or self.total < 200_000:
            return None
        from rich.progress import Progress

        self.bar = Progress(transient=True, console=_stderr_console())
        self.bar.start()
        task = self.bar.add_task("writing samples", total=self.total)
        return lambda n: self.bar.advance(task, n)

    def __exit__(self, *exc: object) -> None:
        if self.bar is not None:
            self.bar.stop()


def _stderr_console() -> Any:
    from rich.console import Console

    return Console(stderr=True)


@app.command("observe")
@reports_errors
def observe_command(
    run: RunArg,
    by: ByOption,
    sheet: Annotated[
        Path | None, typer.Option("--sheet", help="Observation sheet (TOML); see DEVELOPERS.md.")
    ] = None,
    specimen: Annotated[str | None, typer.Option("--specimen", help="Specimen serial.")] = None,
    checkpoint: Annotated[
        str | None, typer.Option("--checkpoint", help="When, e.g. 'after 72 h'.")
    ] = None,
    ingress: Annotated[
        str | None,
        typer.Option("--ingress", help="MEDIUM:none or MEDIUM:found, medium water or dust."),
    ] = None,
    where: Annotated[str | None, typer.Option("--where", help="Where ingress was found.")] = None,
    live_parts: Annotated[
        str | None, typer.Option("--live-parts", help="reached, clear or 'none inside'.")
    ] = None,
    mass_before: Annotated[str | None, typer.Option("--mass-before")] = None,
    mass_after: Annotated[str | None, typer.Option("--mass-after")] = None,
    function: Annotated[str | None, typer.Option("--function", help="pass or fail.")] = None,
    insulation: Annotated[
        str | None, typer.Option("--insulation", help='Insulation resistance, e.g. "250 Mohm".')
    ] = None,
    rating: Annotated[
        int | None, typer.Option("--rating", help="Corrosion protection rating 0-10.")
    ] = None,
    torque: Annotated[
        str | None, typer.Option("--torque", help='Operating torque, e.g. "26 N*mm".')
    ] = None,
    cycles: Annotated[
        int | None, typer.Option("--cycles", help="Cycles reached (for --torque, --failure).")
    ] = None,
    failure: Annotated[
        str | None, typer.Option("--failure", help="A failure seen, described.")
    ] = None,
    photo: Annotated[Path | None, typer.Option("--photo", help="Photo file.")] = None,
    note: Annotated[str | None, typer.Option("--note", help="A free-text note.")] = None,
    campaign: CampaignOption = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Record observations: ingress, mass, leak test, function, insulation, rating, photos.

    From options, or all at once from --sheet (the leak test only from a sheet).

    Example: testplan record observe water-8@aged-1 --specimen QC-2027-014-S03 --ingress water:none --function pass --insulation "420 Mohm" --by AK
    """
    from testplan.domain.observations import check_entry, check_sheet

    base: Path = Path.cwd()
    if sheet is not None:
        from testplan.reader import load_toml, locate

        data, _, lines = load_toml(sheet, "observation sheet")
        try:
            entries = check_sheet(data)
        except TestplanError as err:
            raise err.located(file=sheet, line=locate(lines, err.key)) from None
        base = sheet.parent
    else:
        tables: dict[str, dict[str, Any]] = {}
        if ingress is not None:
            medium, _, found = ingress.partition(":")
            if found not in ("none", "found"):
                raise RecordError(
                    f"cannot read {ingress!r}",
                    key="--ingress",
                    fix="write water:none, water:found, dust:none or dust:found",
                )
            tables["ingress"] = {"medium": medium, "found": found == "found"}
            if where is not None:
                tables["ingress"]["where"] = where
            if live_parts is not None:
                tables["ingress"]["live_parts"] = live_parts
        if mass_before is not None or mass_after is not None:
            tables["mass"] = {
                k: v for k, v in (("before", mass_before), ("after", mass_after)) if v is not None
            }
        if function is not None:
            tables["function"] = {"result": function}
        if insulation is not None:
            tables["insulation"] = {"resistance": insulation}
        if rating is not None:
            tables["corrosion"] = {"rating": rating}
        if torque is not None:
            tables["torque"] = {
                "value": torque,
                **({"cycles": cycles} if cycles is not None else {}),
            }
        if failure is not None:
            tables["failure"] = {
                "description": failure,
                **({"cycles": cycles} if cycles is not None else {}),
            }
        if photo is not None:
            tables["photo"] = {"file": str(photo)}
        if note is not None:
            tables["note"] = {"text": note}
        if not tables:
            raise RecordError("nothing to record", fix="give observations as options or --sheet")
        entries = []
        for kind, fields in tables.items():
            try:
                entries.append(
                    check_entry(kind, fields, key=kind, specimen=specimen, checkpoint=checkpoint)
                )
            except TestplanError as err:
                field = (err.key or kind).partition(".")[2]
                err.key = OPTION_OF.get((kind, field), OPTION_OF.get((kind, ""), err.key))
                raise
    from testplan.store import records

    items = []
    for e in entries:
        content = name = None
        if e.kind == "photo":
            path = Path(e.data["file"])
            path = path if path.is_absolute() else base / path
            try:
                content = path.read_bytes()
            except OSError:
                raise RecordError("cannot read the photo", file=path, key="photo.file") from None
            name = path.name
            e.data["file"] = name
        items.append(
            records.ObservationIn(
                kind=e.kind,
                data=e.data,
                specimen=e.specimen,
                checkpoint=e.checkpoint,
                photo_name=name,
                photo=content,
            )
        )
    store = open_for_writing(db, quiet=quiet)

    def unit(session: Session) -> int:
        row = records.find_run(session, run, campaign=campaign)
        return len(records.add_observations(session, run=row, items=items, by=by))

    n = store.write(unit)
    typer.echo(f"{run}: {n} observation(s) recorded")


@app.command("finish")
@reports_errors
def finish_command(
    run: RunArg,
    by: ByOption,
    at: Annotated[
        str | None, typer.Option("--at", help="End time with zone (default: now).")
    ] = None,
    note: Annotated[str | None, typer.Option("--note")] = None,
    campaign: CampaignOption = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Finish a run.

    Example: testplan record finish water-8@aged-1 --by AK
    """
    from testplan.store import records

    when = parse_at(at)
    store = open_for_writing(db, quiet=quiet)

    def unit(session: Session) -> None:
        row = records.find_run(session, run, campaign=campaign)
        records.finish_run(session, run=row, by=by, at=when, note=note)

    store.write(unit)
    typer.echo(f"{run}: finished")


@app.command("invalidate")
@reports_errors
def invalidate_command(
    run: RunArg,
    reason: Annotated[str, typer.Option("--reason", help="Which test condition was not met.")],
    by: ByOption,
    campaign: CampaignOption = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Declare a finished run invalid (a test condition failed) and plan its repeat.

    Example: testplan record invalidate water-8@aged-1 --reason "tank drawn down 4 min" --by MO
    """
    from testplan.store import judging, records

    store = open_for_writing(db, quiet=quiet)
    made: list[str] = []

    def unit(session: Session) -> None:
        row = records.find_run(session, run, campaign=campaign)
        made.append(judging.invalidate_run(session, run=row, by=by, reason=reason).key)

    store.write(unit)
    typer.echo(f"{run}: invalid; repeat planned as {made[-1]}")


@app.command("check")
@reports_errors
def check_command(
    run: RunArg,
    by: ByOption,
    note: Annotated[str | None, typer.Option("--note")] = None,
    at: Annotated[
        str | None, typer.Option("--at", help="When checked, with zone (default: now).")
    ] = None,
    campaign: CampaignOption = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Record the data check of a finished run by a second authorised person.

    Example: testplan record check water-8@aged-1 --by MO
    """
    from testplan.store import judging, records

    when = parse_at(at)
    store = open_for_writing(db, quiet=quiet)

    def unit(session: Session) -> None:
        row = records.find_run(session, run, campaign=campaign)
        records.check_run(session, run=row, by=by, note=note, at=when)
        judging.require_disposition(session, row, actor=by)  # else the check rolls back

    store.write(unit)
    typer.echo(f"{run}: data checked by {by}")
