"""``testplan equipment``: the equipment register and its calibrations per channel."""

from __future__ import annotations

from typing import TYPE_CHECKING, Annotated

import typer

from testplan.cli.common import (
    DbOption,
    QuietOption,
    command_group,
    open_for_reading,
    open_for_writing,
    parse_date,
)
from testplan.cli.errors import reports_errors
from testplan.errors import RecordError

if TYPE_CHECKING:  # pragma: no cover
    from sqlmodel import Session

    from testplan.store.tables import Calibration, Equipment

app = command_group("Register equipment and record its calibrations.")


@app.command("add")
@reports_errors
def add_command(
    tag: Annotated[str, typer.Argument(help="The lab's unique equipment id, e.g. LT-03.")],
    description: Annotated[str, typer.Option("--description", help="What it is.")],
    maker: Annotated[str | None, typer.Option("--maker")] = None,
    model: Annotated[str | None, typer.Option("--model")] = None,
    serial: Annotated[str | None, typer.Option("--serial")] = None,
    by: Annotated[str | None, typer.Option("--by", help="Initials of who is adding.")] = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Add an instrument to the equipment register.

    Example: testplan equipment add LT-03 --description "level transmitter" --serial 88213
    """
    from testplan.store import records
    from testplan.store.tables import Equipment

    store = open_for_writing(db, create=True, quiet=quiet)

    def unit(session: Session) -> Equipment:
        item = Equipment(tag=tag, description=description, maker=maker, model=model, serial=serial)
        return records.add_equipment(session, item=item, actor=records.actor_for(session, by))

    item = store.write(unit)
    typer.echo(f"added {item.tag}: {item.description}")


def _number(text: str, unit: str, key: str) -> float:
    """A reading in the calibration's unit: a bare number, or a quantity converted to it."""
    try:
        return float(text)
    except ValueError:
        pass
    from testplan.domain.units import linear_map

    parts = text.strip().split(None, 1)
    if len(parts) != 2:
        raise RecordError(f"cannot read {text!r} as a number", key=key)
    try:
        value = float(parts[0])
    except ValueError:
        raise RecordError(f"cannot read {text!r} as a number", key=key) from None
    from testplan.domain.channels import CHANNELS

    kind = next((c.kind for c in CHANNELS.values() if c.unit == unit), None)
    if kind is None:
        raise RecordError(f"give {key} as a bare number in {unit}", key=key)
    scale, offset = linear_map(parts[1], kind, unit, key=key)
    return value * scale + offset


@app.command("calibrate")
@reports_errors
def calibrate_command(
    tag: Annotated[str, typer.Argument(help="Equipment id in the register.")],
    channel: Annotated[
        str,
        typer.Option("--channel", help="Quantity this calibration covers, e.g. water_temperature."),
    ],
    certificate: Annotated[str, typer.Option("--certificate", help="Certificate number.")],
    provider: Annotated[str, typer.Option("--provider", help="Calibration laboratory.")],
    calibrated: Annotated[str, typer.Option("--calibrated", help="Calibration date, ISO.")],
    due: Annotated[str, typer.Option("--due", help="Date the next calibration is due, ISO.")],
    uncertainty: Annotated[
        str,
        typer.Option("--uncertainty", help="Expanded uncertainty U, in the channel's plan unit."),
    ],
    k: Annotated[float, typer.Option("--k", help="Coverage factor of U.")] = 2.0,
    offset: Annotated[
        str, typer.Option("--offset", help="Correction added to readings (plan unit).")
    ] = "0",
    gain: Annotated[float, typer.Option("--gain", help="Correction factor on readings.")] = 1.0,
    range_: Annotated[
        tuple[str, str] | None,
        typer.Option(
            "--range", help="Calibrated range, low and high (plan unit).", show_default=False
        ),
    ] = None,
    by: Annotated[str | None, typer.Option("--by", help="Initials of who records it.")] = None,
    db: DbOption = None,
    quiet: QuietOption = False,
) -> None:
    """Record a calibration of one channel of an instrument.

    Values are in the channel's plan unit (see `testplan record import --help`);
    a quantity with a unit such as "0.4 degC" is converted.

    Example: testplan equipment calibrate TT-07 --channel water_temperature --certificate C-4471 --provider "Gellimoor Calibration" --calibrated 2026-10-02 --due 2027-10-02 --uncertainty 0.3
    """
    from testplan.domain.channels import CHANNELS
    from testplan.store import records
    from testplan.store.tables import Calibration

    spec = CHANNELS.get(channel)
    if spec is None:
        from difflib import get_close_matches

        near = get_close_matches(channel, list(CHANNELS), n=1)
        raise RecordError(
            f"unknown channel {channel!r}",
            key="--channel",
            fix=f"did you mean {near[0]!r}?" if near else None,
        )
    cal = Calibration(
        equipment_id=None,  # type: ignore[arg-type]  # set by add_calibration
        channel=channel,
        unit=spec.unit,
        certificate=certificate,
        provider=provider,
        calibrated_on=parse_date(calibrated, "--calibrated"),
        due_on=parse_date(due, "--due"),
        gain=gain,
        offset=_spread(offset, spec.unit, spec.kind, "--offset"),
        uncertainty=_spread(uncertainty, spec.unit, spec.kind, "--uncertainty"),
        coverage_k=k,
        range_min=_number(range_[0], spec.unit, "--range") if range_ else None,
        range_max=_number(range_[1], spec.unit, "--range") if range_ else None,
    )
    store = open_for_writing(db, quiet=quiet)

    def unit(session: Session) -> Calibration:
        return records.add_calibration(
            session, tag=tag, calibration=cal, actor=records.actor_for(session, by)
        )

    done = store.write(unit)
    typer.echo(
        f"{tag} {done.channel}: calibrated {done.calibrated_on}, due {done.due_on}, "
        f"U = {done.uncertainty:g} {done.unit} (k = {done.coverage_k:g})"
    )


def _difference(text: str, key: str) -> float:
    """A temperature correction or uncertainty is a difference: '0.3', '0.3 K', '0.3 degC'."""
    try:
        return float(text)
    except ValueError:
        pass
    from testplan.domain.units import parse_quantity

    try:
        return parse_quantity(text, "temperature_difference", "K", key=key)
    except Exception as err:
        raise RecordError(f"cannot read {text!r} as a temperature difference", key=key) from err


def _spread(text: str, unit: str, kind: str, key: str) -> float:
    """A correction or an uncertainty: for temperatures a difference, else a plain reading."""
    if kind == "temperature":
        return _difference(text, key)
    return _number(text, unit, key)


@app.command("list")
@reports_errors
def list_command(db: DbOption = None) -> None:
    """List the equipment register with each channel's calibrations.

    Example: testplan equipment list --db lab.db
    """
    from testplan.store import records

    store = open_for_reading(db)
    with store.reading() as session:
        for item, cals in records.list_equipment(session):
            typer.echo(
                f"{item.tag:<10} {item.description}"
                + (f", s/n {item.serial}" if item.serial else "")
            )
            for c in cals:
                rng = (
                    f", range {c.range_min:g} to {c.range_max:g}"
                    if c.range_min is not None and c.range_max is not None
                    else ""
                )
                typer.echo(
                    f"    {c.channel:<22} {c.certificate} ({c.provider}) {c.calibrated_on} "
                    f"-> due {c.due_on}, U = {c.uncertainty:g} {c.unit} k={c.coverage_k:g}{rng}"
                )
