"""Logger imports of a run: the raw file byte for byte, its channel map, its samples.

A run holds one import per file content (SHA-256); the detected dialect and every
option used go with the raw file. Functions here never commit.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable
from typing import TYPE_CHECKING, Any, cast

import sqlalchemy as sa
from sqlmodel import Session, col, select

from testplan import __version__
from testplan.errors import RecordError
from testplan.store import audit
from testplan.store.identity import require_role
from testplan.store.records import _open, _state, find_equipment, run_specimens
from testplan.store.tables import Calibration, LoggerChannel, RawFile, RunEquipment, RunRecord

if TYPE_CHECKING:  # pragma: no cover
    from testplan.importers.logger_csv import LoggerData
    from testplan.importers.source import RawSource


def import_logger_data(
    session: Session,
    *,
    run: RunRecord,
    data: LoggerData,
    by: str,
    progress: Callable[[int], None] | None = None,
    outside_run: str | None = None,
) -> RawFile:
    """Store a logger file byte for byte, its channel map and its samples, as one unit.

    Readings before the run's start or after its finish are refused unless ``outside_run``
    is ``keep`` or ``drop``; the count and the choice go on the record.
    """
    from testplan.store.samples import digest_source, insert_source

    _open(session, run.campaign_id)
    _state(run, ("running", "finished"), "import data into")
    operator = require_role(session, by, "operator")
    used = {
        (e.equipment_id, c.channel): c
        for e, c in session.exec(
            select(RunEquipment, Calibration)
            .join(Calibration, col(Calibration.id) == col(RunEquipment.calibration_id))
            .where(RunEquipment.run_id == run.id)
        ).all()
    }
    serials = {s.serial: s.id for s in run_specimens(session, run)}
    channel_rows = []
    for number, m in enumerate(data.channels):
        equipment_id = calibration_id = None
        specimen_id = None
        if m.specimen is not None:
            specimen_id = serials.get(m.specimen)
            if specimen_id is None:
                raise RecordError(
                    f"specimen {m.specimen!r} is not on run {run.key} "
                    f"(it has {', '.join(serials)})",
                    key="--map",
                )
        if m.equipment is not None:
            item = find_equipment(session, m.equipment, key="--map")
            cal = used.get((item.id, m.quantity))
            if cal is None:
                raise RecordError(
                    f"{m.equipment} was not recorded on run {run.key} with a {m.quantity} "
                    "calibration",
                    key="--map",
                    fix="name the equipment when starting the run, or map another instrument",
                )
            equipment_id, calibration_id = item.id, cal.id
        channel_rows.append((number, m, equipment_id, calibration_id, specimen_id))
    earlier = session.exec(
        select(RawFile).where(
            RawFile.run_id == run.id,
            RawFile.sha256 == data.sha256,
            col(RawFile.withdrawn_at).is_(None),
        )
    ).first()
    if earlier is not None:
        raise RecordError(
            f"{data.name} (sha256 {data.sha256[:16]}) is already imported into run {run.key}: "
            f"import {earlier.id} of {earlier.imported_at:%Y-%m-%d %H:%M:%SZ} ({earlier.name})",
            key="FILE",
            fix="the same bytes are stored once per run",
        )
    outside, samples = _outside_run(run, data, outside_run)
    options = {**data.options, "outside_run": outside}
    assert samples.t_min is not None and samples.t_max is not None
    first = dt.datetime.fromtimestamp(samples.t_min / 1e6, dt.UTC)
    last = dt.datetime.fromtimestamp(samples.t_max / 1e6, dt.UTC)
    sqlite = session.get_bind().dialect.name == "sqlite"
    raw = RawFile(
        run_id=run.id,
        name=data.name,
        sha256=data.sha256,
        size=data.source.size,
        # SQLite copies a bound blob twice over; the bytes are streamed in below instead
        content=cast(bytes, sa.func.zeroblob(data.source.size))
        if sqlite
        else data.source.verified(),
        layout=data.layout,
        timezone=data.timezone,
        read_options_json=audit.canonical({**options, "dialect": data.dialect}),
        tool_version=__version__,
        operator_id=operator.id,
        samples=samples.count,
        first_at=first,
        last_at=last,
        samples_sha256=digest_source(samples),
    )
    session.add(raw)
    session.flush()
    if sqlite:
        _write_content_sqlite(session, raw, data.source)
    session.flush()
    for number, m, equipment_id, calibration_id, specimen_id in channel_rows:
        session.add(
            LoggerChannel(
                raw_file_id=raw.id,
                number=number,
                quantity=m.quantity,
                source=m.source,
                source_unit=m.unit,
                unit=m.plan_unit,
                scale=m.scale,
                offset=m.offset,
                equipment_id=equipment_id,
                calibration_id=calibration_id,
                specimen_id=specimen_id,
            )
        )
    session.flush()
    insert_source(session, raw.id, samples, progress=progress)
    audit.append(
        session,
        actor=operator.initials,
        action="data.import",
        entity="raw_file",
        entity_id=raw.id,
        campaign_id=run.campaign_id,
        new={
            "run": run.key,
            "name": raw.name,
            "sha256": raw.sha256,
            "samples": raw.samples,
            "samples_sha256": raw.samples_sha256,
            "channels": [m.shown() for m in data.channels],
            "tool_version": __version__,
        },
    )
    return raw


def _write_content_sqlite(session: Session, raw: RawFile, source: RawSource) -> None:
    """Fill the raw file's zeroblob a megabyte at a time from the file, on the unit's own
    connection, so the file's bytes are never held whole here."""
    table: sa.Table = RawFile.__table__  # type: ignore[attr-defined]
    query = sa.select(sa.literal_column("rowid", sa.Integer)).where(table.c.id == raw.id)
    rowid: int = session.connection().execute(query).scalar_one()
    dbapi = session.connection().connection.dbapi_connection
    assert dbapi is not None
    with dbapi.blobopen("raw_file", "content", rowid) as blob:
        for piece in source.verified_pieces():
            blob.write(piece)
    # ``raw.content`` stays expired (it was an SQL expression): loaded only if read


def _outside_run(
    run: RunRecord, data: LoggerData, how: str | None
) -> tuple[dict[str, object], Any]:
    if how not in (None, "keep", "drop"):
        raise RecordError(f"unknown choice {how!r}", key="--outside-run", fix="keep or drop")
    samples = data.samples
    lo = 0 if run.started_at is None else int(run.started_at.timestamp() * 1e6)
    hi = None if run.finished_at is None else int(run.finished_at.timestamp() * 1e6)

    def outside(t: Any) -> Any:
        mask = t < lo
        if hi is not None:
            mask |= t > hi
        return mask

    count, first_at = 0, None
    for t, _, _ in samples.slices(1 << 20):
        mask = outside(t)
        n = int(mask.sum())
        if n and first_at is None:
            first_at = int(t[mask.argmax()])
        count += n
    if count and how is None:
        assert first_at is not None
        at = dt.datetime.fromtimestamp(first_at / 1e6, dt.UTC)
        end = f" to {run.finished_at:%Y-%m-%d %H:%M:%SZ}" if run.finished_at else ""
        raise RecordError(
            f"{data.name}: {count} readings lie outside run {run.key} "
            f"({run.started_at:%Y-%m-%d %H:%M:%SZ}{end}), the first at {at:%Y-%m-%d %H:%M:%SZ}",
            key="--outside-run",
            fix="say --outside-run keep or --outside-run drop",
        )
    if count and how == "drop":
        if count == samples.count:
            raise RecordError(
                f"{data.name}: every reading lies outside run {run.key}", key="--outside-run"
            )
        samples = samples.filtered(lambda t: ~outside(t))
    return {"how": how, "count": count}, samples


def withdraw_import(
    session: Session, *, run: RunRecord, import_id: str, why: str, by: str
) -> RawFile:
    """Mark an import withdrawn (until the run's data check): kept, audited, not judged."""
    import uuid

    _open(session, run.campaign_id)
    person = require_role(session, by, "operator")
    if run.checked_at is not None:
        raise RecordError(
            f"run {run.key} has had its data check; its imports can no longer be withdrawn",
            key="IMPORT",
            fix="record a deviation instead",
        )
    if not why.strip():
        raise RecordError("say why the import is withdrawn", key="--why")
    try:
        wanted = uuid.UUID(import_id)
    except ValueError:
        wanted = None
    raw = session.get(RawFile, wanted) if wanted else None
    if raw is None or raw.run_id != run.id:
        raise RecordError(
            f"no import {import_id!r} on run {run.key}",
            key="IMPORT",
            fix="give the import id that `record import` printed",
        )
    if raw.withdrawn_at is not None:
        raise RecordError(
            f"import {raw.id} was already withdrawn by {raw.withdrawn_by}", key="IMPORT"
        )
    raw.withdrawn_at = dt.datetime.now(dt.UTC)
    raw.withdrawn_by = person.initials
    raw.withdrawn_why = why
    session.add(raw)
    session.flush()
    audit.append(
        session,
        actor=person.initials,
        action="data.withdraw",
        entity="raw_file",
        entity_id=raw.id,
        campaign_id=run.campaign_id,
        why=why,
        old={"withdrawn": False},
        new={"withdrawn": True, "run": run.key, "name": raw.name, "sha256": raw.sha256},
    )
    return raw
