"""``testplan record``: run the planned runs at the bench and keep the evidence."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any

import typer

from testplan.cli.common import (
    CampaignOption,
    DbOption,
    KeyOption,
    QuietOption,
    command_group,
    load_signer,
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

MapOption = Annotated[
    list[str],
    typer.Option(
        "--map",
        help="SOURCE[UNIT]=QUANTITY@EQUIPMENT: a column (wide: its exact header text, quoted "
        "when it holds brackets, =, @ or #, or its 1-based number) or channel name (long), its "
        "unit (default: from the header), the plan quantity and the instrument; repeat for each "
        "channel.",
    ),
]

# Options that say how to read a logger file (record import and record preview).
TzRead = Annotated[
    str | None,
    typer.Option(
        "--tz",
        help="Logger time zone for time stamps without one: IANA name or +hh:mm offset.",
    ),
]
LayoutRead = Annotated[
    str, typer.Option("--layout", help="long, wide or auto (long if it has channel and value).")
]
TimeColumnRead = Annotated[
    str | None, typer.Option("--time-column", help="Default: time, date + time, or the first.")
]
ChannelColumnRead = Annotated[str, typer.Option("--channel-column")]
ValueColumnRead = Annotated[str, typer.Option("--value-column")]
DelimiterRead = Annotated[
    str, typer.Option("--delimiter", help="auto, one character, tab, \\t, semicolon.")
]
DecimalRead = Annotated[str, typer.Option("--decimal", help="Decimal mark: auto, . or ,")]
EncodingRead = Annotated[str, typer.Option("--encoding", help="auto: BOM, UTF-8, else cp1252.")]
SkipLinesRead = Annotated[
    int | None,
    typer.Option("--skip-lines", help="Lines before the header (default: found).", min=0),
]
SkipUnmappedRead = Annotated[
    bool, typer.Option("--skip-unmapped", help="Ignore channels not in --map.")
]
MissingRead = Annotated[
    list[str] | None,
    typer.Option("--missing", help="Another text that marks a missing reading."),
]
DateOrderRead = Annotated[
    str | None, typer.Option("--date-order", help="dmy or mdy when the data cannot tell.")
]
TimeFormatRead = Annotated[
    str | None, typer.Option("--time-format", help="strftime format of the time stamps.")
]
StartRead = Annotated[
    str | None, typer.Option("--start", help="Start time for elapsed-time files.")
]


READ_KEYS = (
    "tz", "layout", "time_column", "channel_column", "value_column", "delimiter", "decimal",
    "encoding", "skip_lines", "skip_unmapped", "missing", "date_order", "time_format", "start",
)  # fmt: skip
# Where a command takes the options above: reads_logger_files puts them there and hands
# the command one ReadOptions.
ReadingOptions = Any


def _logger_reading(
    tz: TzRead = None,
    layout: LayoutRead = "auto",
    time_column: TimeColumnRead = None,
    channel_column: ChannelColumnRead = "channel",
    value_column: ValueColumnRead = "value",
    delimiter: DelimiterRead = "auto",
    decimal: DecimalRead = "auto",
    encoding: EncodingRead = "auto",
    skip_lines: SkipLinesRead = None,
    skip_unmapped: SkipUnmappedRead = False,
    missing: MissingRead = None,
    date_order: DateOrderRead = None,
    time_format: TimeFormatRead = None,
    start: StartRead = None,
) -> None:
    """The logger-reading options of `record import` and `record preview`, in help order."""


def reads_logger_files(command: Callable[..., None]) -> Callable[..., None]:
    """Give a command the logger-reading options in place of its ``options`` parameter;
    it is called with them as one ``ReadOptions`` (one definition for both commands)."""
    import functools
    import inspect

    shared = inspect.signature(_logger_reading, eval_str=True).parameters
    own = inspect.signature(command, eval_str=True)
    params: list[inspect.Parameter] = []
    for p in own.parameters.values():
        params.extend(shared.values() if p.name == "options" else [p])

    @functools.wraps(command)
    def wrapper(**kwargs: Any) -> None:
        given = {k: kwargs.pop(k) for k in READ_KEYS}
        command(**kwargs, options=_read_options(given))

    wrapper.__signature__ = own.replace(parameters=params)  # type: ignore[attr-defined]
    wrapper.__annotations__ = {p.name: p.annotation for p in params}
    return wrapper


def _read_options(params: dict[str, Any]) -> Any:
    """ReadOptions from a command's file-reading options (shared by import and preview)."""
    from testplan.importers.logger_csv import ReadOptions

    given = {k: params[k] for k in READ_KEYS}
    given["missing"] = tuple(given["missing"] or ())
    given["timezone"] = given.pop("tz")
    return ReadOptions(**given)


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
    key: KeyOption = None,
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
        deviation_approver=(
            load_signer(approved_by, key, option="--approved-by")
            if deviation is not None and approved_by is not None
            else None
        ),
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
    key: KeyOption = None,
    covers: Annotated[
        str | None,
        typer.Option("--covers", help="The condition criterion whose failure it accepts."),
    ] = None,
    at: Annotated[
        str | None,
        typer.Option("--at", help="When it was made, ISO 8601 with zone (default: now)."),
    ] = None,
    campaign: CampaignOption = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Record a deviation from the method, with its reason and the approval of an
    authorised approver, signed with the approver's key (--key).

    Example: testplan record deviation water-8@aged-1 --description "tank at 1.9 m for 3 min while topping up" --reason "leak in the tank valve" --approved-by MO --key mo.pem --by AK
    """
    from testplan.store import records

    approver = load_signer(approved_by, key, option="--approved-by")
    when = parse_at(at)
    store = open_for_writing(db, quiet=quiet)

    def unit(session: Session) -> None:
        row = records.find_run(session, run, campaign=campaign)
        records.add_deviation(
            session,
            run=row,
            description=description,
            reason=reason,
            approver=approver,
            recorded_by=by,
            covers=covers,
            at=when,
        )

    store.write(unit)
    typer.echo(f"{run}: deviation recorded, approved by {approved_by}")


@app.command("import", epilog="Quantities (plan unit): " + CHANNEL_LIST)
@reports_errors
@reads_logger_files
def import_command(
    run: RunArg,
    file: Annotated[Path, typer.Argument(help="Logger CSV file, long or wide.")],
    map_: MapOption,
    by: ByOption,
    outside_run: Annotated[
        str | None,
        typer.Option(
            "--outside-run",
            help="keep or drop readings before the run's start or after its finish.",
        ),
    ] = None,
    options: ReadingOptions = None,
    campaign: CampaignOption = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Import a data-logger file into a run: kept byte for byte, samples in plan units.

    One all-or-nothing import: a bad line is named (file, line, column) and nothing is kept.

    Example: testplan record import water-8@aged-1 tank.csv --map "level[cm]=lowest_point_depth@LT-03" --tz Europe/London --by AK
    """
    from testplan.importers.logger_csv import parse_map, read_logger_file

    data = read_logger_file(file, [parse_map(m) for m in map_], options)
    from testplan.store import imports, records

    store = open_for_writing(db, quiet=quiet)

    def unit(session: Session) -> RawFile:
        row = records.find_run(session, run, campaign=campaign)
        with _progress(data.count, quiet) as advance:
            return imports.import_logger_data(
                session, run=row, data=data, by=by, progress=advance, outside_run=outside_run
            )

    raw = store.write(unit)
    typer.echo(
        f"{run}: imported {raw.samples} samples from {raw.name} "
        f"({raw.first_at:%Y-%m-%d %H:%M:%SZ} to {raw.last_at:%Y-%m-%d %H:%M:%SZ}), "
        f"sha256 {raw.sha256[:16]}, import {raw.id}"
    )


@app.command("withdraw")
@reports_errors
def withdraw_command(
    run: RunArg,
    import_id: Annotated[str, typer.Argument(metavar="IMPORT", help="Import id from import.")],
    why: Annotated[str, typer.Option("--why", help="Why the import is withdrawn.")],
    by: ByOption,
    campaign: CampaignOption = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Withdraw a wrong import until the run's data check: it stays stored and audited,
    marked withdrawn, and judging ignores it.

    Example: testplan record withdraw water-8@aged-1 3f2c... --why "wrong logger file" --by AK
    """
    from testplan.store import imports, records

    store = open_for_writing(db, quiet=quiet)

    def unit(session: Session) -> str:
        row = records.find_run(session, run, campaign=campaign)
        return imports.withdraw_import(session, run=row, import_id=import_id, why=why, by=by).name

    name = store.write(unit)
    typer.echo(f"{run}: import {import_id} ({name}) withdrawn")


@app.command("preview", epilog="Quantities (plan unit): " + CHANNEL_LIST)
@reports_errors
@reads_logger_files
def preview_command(
    file: Annotated[Path, typer.Argument(help="Logger CSV file, long or wide.")],
    map_: MapOption,
    options: ReadingOptions = None,
    json_out: Annotated[bool, typer.Option("--json", help="Print JSON.")] = False,
) -> None:
    """Read a logger file exactly as `record import` would and show what was found; stores nothing.

    Example: testplan record preview tank.csv --map "2=water_temperature" --tz +01:00
    """
    import json

    from testplan.importers.logger_csv import parse_map, preview, read_logger_file

    data = read_logger_file(file, [parse_map(m) for m in map_], options)
    shown = preview(data)
    if json_out:
        typer.echo(json.dumps(shown, indent=2, ensure_ascii=False))
        return
    d = shown["dialect"]
    delim = {"\t": "tab", ",": "comma", ";": "semicolon"}.get(d["delimiter"], d["delimiter"])
    typer.echo(
        f"{file.name}: encoding {d['encoding']}, delimiter {delim}, decimal {d['decimal']!r}"
        + (f", thousands {d['thousands']!r}" if d["thousands"] else "")
    )
    typer.echo(
        f"header on line {d['header_line']}; {d['skipped_above']} lines above and "
        f"{d['skipped_below']} under it skipped"
    )
    typer.echo(
        f"time: {' + '.join(d['time_columns'])}, {d['time_format']}; "
        f"zone {d['zone']} (from {d['zone_from']})"
    )
    for c in shown["channels"]:
        unit = c["unit"] or "no unit"
        typer.echo(
            f"column {c['column']} {c['source']!r} [{c['source_unit'] or '-'}] -> {c['quantity']}"
            f" ({unit}): {c['count']} readings, first {c['first']['value']:g} at "
            f"{c['first']['time']}, last {c['last']['value']:g} at {c['last']['time']}, "
            f"min {c['min']:g}, max {c['max']:g}"
        )
    for w in shown["warnings"]:
        typer.echo(f"warning: {w}")


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
    at: Annotated[
        str | None,
        typer.Option("--at", help="When it was made, ISO 8601 with zone (default: now)."),
    ] = None,
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
            content = _read_photo(path)
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
    when = parse_at(at)
    store = open_for_writing(db, quiet=quiet)

    def unit(session: Session) -> int:
        row = records.find_run(session, run, campaign=campaign)
        return len(records.add_observations(session, run=row, items=items, by=by, at=when))

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
    key: KeyOption = None,
    campaign: CampaignOption = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Record the data check of a finished run by a second authorised person, signed with
    the checker's own key (--key).

    Example: testplan record check water-8@aged-1 --by MO --key mo.pem
    """
    from testplan.store import judging, records

    when = parse_at(at)
    checker = load_signer(by, key)
    store = open_for_writing(db, quiet=quiet)

    def unit(session: Session) -> None:
        row = records.find_run(session, run, campaign=campaign)
        records.check_run(session, run=row, by=checker, note=note, at=when)
        judging.require_disposition(session, row, actor=by)  # else the check rolls back

    store.write(unit)
    typer.echo(f"{run}: data checked by {by}")


def _read_photo(path: Path) -> bytes:
    """A photo's bytes: a regular file of an image type (by its first bytes, not its name)
    up to 50 MB, whose name has no control or bidi characters; else one RecordError."""
    import stat

    from testplan.domain.observations import PHOTO_MAX_BYTES, name_problem, photo_type

    def refuse(why: str) -> RecordError:
        return RecordError(why, file=path, key="photo.file")

    problem = name_problem(path.name)
    if problem:  # the name shown escaped, so the message itself is not reordered
        shown = path.with_name(path.name.encode("unicode_escape").decode("ascii"))
        raise RecordError(f"not taken as a photo: {problem}", file=shown, key="photo.file")
    try:
        info = path.stat()
        if not stat.S_ISREG(info.st_mode):
            raise refuse("not taken as a photo: not a regular file")
        if info.st_size > PHOTO_MAX_BYTES:
            raise refuse(f"not taken as a photo: {info.st_size} bytes, more than 50 MB")
        with path.open("rb") as f:
            content = f.read(PHOTO_MAX_BYTES + 1)
    except OSError:
        raise refuse("cannot read the photo") from None
    if len(content) > PHOTO_MAX_BYTES:
        raise refuse("not taken as a photo: more than 50 MB")
    if photo_type(content[:16]) is None:
        raise refuse("not taken as a photo: not a JPEG, PNG, WebP, TIFF or HEIC image")
    return content
