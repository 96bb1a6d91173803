"""Data-logger CSV files, long or wide, into time-stamped samples in plan units.

* long: one row per reading, columns ``time``, ``channel``, ``value``;
* wide: ``time`` and one column per channel; an empty cell is no reading.

Time stamps are ISO 8601. They carry their zone (``Z`` or ``+01:00``), or all lack it
and ``timezone`` names the logger's zone (IANA name); a mix is refused. Times must rise
strictly per channel. Each value is converted from the unit given in the channel map to
the plan unit of its quantity (domain/channels.py). Every problem is raised as
LoggerFileError naming the file, line and column; nothing is half-read.

This module never touches the store and never prints.
"""

from __future__ import annotations

import datetime as dt
import io
import re
from collections.abc import Iterator
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any, Literal

from testplan.domain.channels import CHANNELS
from testplan.domain.units import linear_map
from testplan.errors import LoggerFileError, QuantityError
from testplan.importers.source import RawSource
from testplan.importers.spool import SampleSpool

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np
    import numpy.typing as npt
    import pandas as pd

Layout = Literal["auto", "long", "wide"]

_MAP = re.compile(
    r"^\s*(?P<source>\"[^\"]+\"|'[^']+'|[^=\[\]\"']+?)\s*(?:\[(?P<unit>[^\]]*)\])?\s*=\s*(?P<quantity>[A-Za-z_]\w*)"
    r"\s*(?:@\s*(?P<equipment>[^\s#]+))?\s*(?:\#\s*(?P<specimen>\S+))?\s*$"
)
_ZONE = r"(?:[Zz]|[+-]\d\d(?::?\d\d)?)$"
_STAMP = r"\d{4}-\d\d-\d\d(?:[T ]\d\d:\d\d(?::\d\d(?:[.,]\d+)?)?)?(?:[Zz]|[+-]\d\d(?::?\d\d)?)?$"


@dataclass(frozen=True)
class ChannelMapping:
    """One ``--map`` entry: where the values are, in what unit, which quantity, which instrument."""

    source: str
    unit: str
    quantity: str
    equipment: str | None
    scale: float
    offset: float
    specimen: str | None = None
    position: int | None = None  # a 1-based column number given instead of a name

    @property
    def plan_unit(self) -> str:
        return CHANNELS[self.quantity].unit

    def shown(self) -> str:
        by = f"@{self.equipment}" if self.equipment else ""
        on = f"#{self.specimen}" if self.specimen else ""
        return f"{self.source}[{self.unit}]={self.quantity}{by}{on}"


def parse_map(text: str) -> ChannelMapping:
    """Read ``SOURCE[UNIT]=QUANTITY@EQUIPMENT#SPECIMEN`` (unit, equipment, specimen optional).

    ``#SPECIMEN`` names the specimen a channel measures when one file logs several
    (a torque sensor per rig station, a thermocouple per specimen in the tank).
    """
    m = _MAP.match(text)
    if m is None:
        raise LoggerFileError(
            f"cannot read the channel map {text!r}",
            key="--map",
            fix="write SOURCE[UNIT]=QUANTITY@EQUIPMENT#SPECIMEN, e.g. "
            "'level[cm]=lowest_point_depth@LT-03'",
        )
    quantity = m["quantity"]
    if quantity not in CHANNELS:
        from difflib import get_close_matches

        near = get_close_matches(quantity, list(CHANNELS), n=1)
        raise LoggerFileError(
            f"unknown quantity {quantity!r} in {text!r}",
            key="--map",
            fix=f"did you mean {near[0]!r}?" if near else "see `testplan record import --help`",
        )
    spec = CHANNELS[quantity]
    unit = (m["unit"] or "").strip()
    source = m["source"]
    position = None
    if source[0] in "\"'":
        source = source[1:-1]
    elif source.isdigit():
        position = int(source)
        if position < 1:
            raise LoggerFileError(
                f"column numbers start at 1 in {text!r}", key="--map", fix="write e.g. '2=...'"
            )
    if not unit and spec.unit:
        # the header or a units row may say; resolved once the file is read
        return ChannelMapping(
            source, "", quantity, m["equipment"], float("nan"), 0.0, m["specimen"], position
        )
    try:
        scale, offset = linear_map(unit, spec.kind, spec.unit, key="--map")
    except QuantityError as err:
        raise LoggerFileError(f"{text!r}: {err.message}", key="--map", fix=err.fix) from err
    return ChannelMapping(
        source, unit, quantity, m["equipment"], scale, offset, m["specimen"], position
    )


def resolve_map(
    m: ChannelMapping, header: list[str], units_row: list[str], name: str, line: int
) -> ChannelMapping:
    """A mapping with its column name (for a column number) and its unit (from the header)."""
    from dataclasses import replace

    from testplan.importers.dialect import unit_of

    if m.position is not None:
        if m.position > len(header):
            raise LoggerFileError(
                f"no column {m.position} (the header has {len(header)})",
                file=name,
                line=line,
                key="--map",
            )
        m = replace(m, source=header[m.position - 1])
    if m.unit or not CHANNELS[m.quantity].unit:
        return m
    where = header.index(m.source) if m.source in header else -1
    cell = units_row[where] if 0 <= where < len(units_row) else None
    unit = unit_of(m.source, cell)
    spec = CHANNELS[m.quantity]
    if unit is None:
        raise LoggerFileError(
            f"no unit for {m.source!r} in the map or the header",
            file=name,
            line=line,
            key="--map",
            fix=f"give it in the map, e.g. '{m.source}[{spec.unit}]={m.quantity}'",
        )
    try:
        scale, offset = linear_map(unit, spec.kind, spec.unit, key="--map")
    except QuantityError as err:
        raise LoggerFileError(
            f"{m.source!r}: {err.message}", file=name, line=line, key="--map", fix=err.fix
        ) from err
    return replace(m, unit=unit, scale=scale, offset=offset)


@dataclass
class LoggerData:
    """What a logger file holds once read: samples in plan units, in sequence order.

    The samples live in ``samples`` (on disk for a large file); ``t_us``, ``channel`` and
    ``value`` load them whole, for small files and tests.
    """

    name: str
    source: RawSource
    sha256: str
    layout: Literal["long", "wide"]
    timezone: str
    channels: list[ChannelMapping]
    samples: SampleSpool
    options: dict[str, Any] = field(default_factory=dict)
    dialect: dict[str, Any] = field(default_factory=dict)

    @property
    def count(self) -> int:
        return self.samples.count

    @property
    def content(self) -> bytes:
        """The file's bytes as received (loaded whole; the store streams ``source``)."""
        return self.source.read()

    @property
    def t_us(self) -> npt.NDArray[np.int64]:
        return self.samples.whole()[0]  # type: ignore[no-any-return]

    @property
    def channel(self) -> npt.NDArray[np.int32]:
        return self.samples.whole()[1]  # type: ignore[no-any-return]

    @property
    def value(self) -> npt.NDArray[np.float64]:
        return self.samples.whole()[2]  # type: ignore[no-any-return]


@dataclass(frozen=True)
class ReadOptions:
    """How to read a logger file: layout, time zone, column names and CSV dialect."""

    layout: Layout = "auto"
    timezone: str | None = None
    time_column: str | None = None  # None: "time", else date + time columns, else the first
    channel_column: str = "channel"
    value_column: str = "value"
    delimiter: str = "auto"
    decimal: str = "auto"
    encoding: str = "auto"
    skip_lines: int | None = None  # None: the header is found among banner lines
    skip_unmapped: bool = False
    missing: tuple[str, ...] = ()
    date_order: str | None = None
    time_format: str | None = None
    start: str | None = None


# Data rows parsed at a time. Peak memory follows this, not the file: a chunk of long
# rows is a few tens of MB of pandas objects. Tests force many chunks on small files.
CHUNK_ROWS = 200_000
# The head that dialect detection reads (200 lines, the decimal-mark sample, the preview).
HEAD_BYTES = 1 << 20


def read_logger_file(
    path: Path,
    maps: list[ChannelMapping],
    options: ReadOptions | None = None,
    *,
    chunk_rows: int | None = None,
) -> LoggerData:
    """Read a logger CSV file from disk, piece by piece (never held whole); see
    ``read_logger_bytes``."""
    try:
        if path.is_dir():
            raise IsADirectoryError
        with path.open("rb") as f:
            f.read(1)
        source = RawSource(path=path)
    except FileNotFoundError:
        raise LoggerFileError("no such file", file=path) from None
    except IsADirectoryError:
        raise LoggerFileError("is a folder, not a file", file=path) from None
    except OSError as err:
        raise LoggerFileError(f"cannot read: {err.strerror}", file=path) from None
    return _Body(source, str(path), maps, options or ReadOptions(), chunk_rows or CHUNK_ROWS).read()


def read_logger_bytes(
    content: bytes,
    name: str,
    maps: list[ChannelMapping],
    options: ReadOptions | None = None,
    *,
    chunk_rows: int | None = None,
) -> LoggerData:
    """Read a logger CSV held in memory. ``name`` is used in messages.

    The dialect is detected from the head; the body is parsed ``chunk_rows`` data rows at a
    time (default ``CHUNK_ROWS``) and each chunk's samples go to a ``SampleSpool``, so
    memory does not grow with the file. Decisions that need the whole time column (the
    date order, the format, a ``24:00`` anywhere) are made in a first pass over it.
    Any problem, in whichever chunk, raises LoggerFileError naming the file's own line.
    """
    source = RawSource(data=content)
    return _Body(source, name, maps, options or ReadOptions(), chunk_rows or CHUNK_ROWS).read()


class _Body:
    """One logger file being read: what the head decided, and the state carried from one
    chunk to the next (last time per channel, counts, the time format)."""

    def __init__(
        self,
        source: RawSource,
        name: str,
        maps: list[ChannelMapping],
        opt: ReadOptions,
        chunk_rows: int,
    ) -> None:
        from testplan.importers.dialect import MISSING_MARKERS, decode, delimiter_option, detect

        if chunk_rows < 1:
            raise ValueError("chunk_rows must be at least 1")
        self.source, self.name, self.opt, self.chunk_rows = source, name, opt, chunk_rows
        _ = source.sha256  # hashed before it is parsed: the store checks the bytes it keeps
        layout = opt.layout
        if layout not in ("auto", "long", "wide"):
            raise LoggerFileError(
                f"unknown layout {layout!r}", key="--layout", fix="long, wide or auto"
            )
        if opt.date_order not in (None, "dmy", "mdy", "ymd"):
            raise LoggerFileError(
                f"unknown date order {opt.date_order!r}",
                key="--date-order",
                fix="dmy, mdy or ymd",
            )
        if not maps:
            raise LoggerFileError("no channels mapped", key="--map", fix="give at least one --map")
        self.zone = _check_zone(opt.timezone)
        given_delimiter = delimiter_option(opt.delimiter)
        text, encoding = decode(source, name, opt.encoding, limit=HEAD_BYTES)
        if not text.strip() and source.size <= HEAD_BYTES:
            raise LoggerFileError("the file is empty", file=name)
        self.encoding = encoding
        named = tuple(m.source for m in maps if m.position is None)
        long_names: tuple[str, ...]
        if opt.layout == "long" or (
            opt.layout == "auto" and {opt.channel_column, opt.value_column} & set(named) == set()
        ):
            long_names = (opt.time_column or "time", opt.channel_column, opt.value_column)
        else:
            long_names = ()
        dialect = detect(text, given_delimiter, opt.skip_lines, encoding, named)
        if long_names and not set(long_names) <= set(dialect.header):
            again = detect(text, given_delimiter, opt.skip_lines, encoding, long_names)
            if set(long_names) <= set(again.header):
                dialect = again
        self.dialect = dialect
        self.delimiter = delimiter = dialect.delimiter
        self.skip_lines = skip_lines = dialect.skipped_above
        self.header_line = header_line = skip_lines + 1
        self.header = header = dialect.header
        maps = [resolve_map(m, header, dialect.units_row, name, header_line) for m in maps]
        sources = [m.source for m in maps]
        dupes = {s for s in sources if sources.count(s) > 1}
        if dupes:
            raise LoggerFileError(f"channel {sorted(dupes)[0]!r} mapped twice", key="--map")
        self.maps, self.sources = maps, sources
        decimal = opt.decimal
        if decimal == "auto":
            sample = "\n".join(text.split("\n", 60)[header_line:60])
            decimal = "," if delimiter != "," and re.search(r"\d,\d", sample) else "."
        if delimiter == decimal:
            raise LoggerFileError(
                "the delimiter and the decimal mark are the same", key="--decimal"
            )
        self.decimal = decimal
        if not opt.skip_lines:
            _first_row_fits(text, delimiter, skip_lines + dialect.skipped_below, name)
        if layout == "auto":
            layout = "long" if {opt.channel_column, opt.value_column} <= set(header) else "wide"
        self.layout: Literal["long", "wide"] = "long" if layout == "long" else "wide"
        self.time_columns = _time_columns(opt.time_column, header, name, header_line)
        self.markers = [*MISSING_MARKERS, *opt.missing]
        self.skip = list(range(skip_lines)) + list(
            range(header_line, header_line + dialect.skipped_below)
        )
        self.first_data = header_line + dialect.skipped_below
        self.source_lines = _Lines(source, encoding)
        self.numbers = _NumberReader(
            decimal, self.markers, name, self.source_lines, delimiter, header
        )
        self.numbers.decimal_given = opt.decimal != "auto"
        self.zone_text = self.zone
        self.footers = 0
        self.time_format = ""
        self.mode = ""  # "elapsed", "local" or "iso", from the first data row
        self.local_format: str | None = None
        self.first_unreadable: LoggerFileError | None = None
        self.zoned_first = False
        self.first_stamp: tuple[str, int] | None = None
        self.start_us: Any = None
        # the last time stamp and its line per channel (long) or of the last row (wide)
        self.last: dict[int, tuple[int, int]] = {}
        self.present: set[str] = set()
        self.wide_columns_checked = False

    # -- the chunks ---------------------------------------------------------------------

    def _chunks(self) -> Iterator[pd.DataFrame]:
        """The body, ``chunk_rows`` rows at a time, as pandas' C reader parses it."""
        import pandas as pd

        def reader(types: Any, f: Any) -> Any:
            return pd.read_csv(
                f,
                encoding=self.encoding,
                sep=self.delimiter,
                decimal=self.decimal,
                skiprows=self.skip,
                dtype=types,
                keep_default_na=False,
                na_values=self.markers,
                skip_blank_lines=False,
                skipinitialspace=True,
                index_col=False,
                engine="c",
                chunksize=self.chunk_rows,
            )

        # Numbers are parsed by the C reader where a column holds only numbers and markers;
        # a column with other text comes back as text and is read (or named) by _NumberReader.
        text_columns: Any = {
            c: str for c in self.header if c in self.time_columns or c == self.opt.channel_column
        }
        if self.opt.decimal == "auto" and self.decimal == "." and self.delimiter == ";":
            text_columns = str  # '1.013' may group thousands: _NumberReader decides from the text
        try:
            with self.source.open() as f:
                try:
                    chunks = reader(text_columns, f)
                    first = next(chunks, None)
                except (ValueError, TypeError) as err:
                    if isinstance(err, pd.errors.ParserError | pd.errors.EmptyDataError):
                        raise
                    f.seek(0)
                    chunks = reader(str, f)
                    first = next(chunks, None)
                if first is None:
                    raise LoggerFileError(
                        "no data lines", file=self.name, line=self.header_line + 1
                    )
                yield first
                yield from chunks
        except pd.errors.ParserError as err:
            raise LoggerFileError(_parser_message(err, self.skip_lines), file=self.name) from None
        except pd.errors.EmptyDataError:
            raise LoggerFileError("no header line", file=self.name, line=self.header_line) from None

    def _frames(
        self, *, count: bool = False
    ) -> Iterator[tuple[pd.Series[Any], pd.DataFrame, npt.NDArray[Any]]]:
        """Per chunk: the time stamp text, the rows that hold data, and their file lines.
        Counts footer and event rows (when ``count``); refuses a file with no data lines."""
        import numpy as np

        rows_before = kept = footers = 0
        time_columns = self.time_columns
        for df in self._chunks():
            df.columns = [str(c).strip() for c in df.columns]
            # a trailing delimiter gives an unnamed, empty last column
            df = df.loc[
                :, [not (c.startswith("Unnamed: ") and df[c].isna().all()) for c in df.columns]
            ]
            lines = np.arange(len(df)) + self.first_data + 1 + rows_before  # file line of each
            rows_before += len(df)
            absent = [c for c in time_columns if c not in df.columns]
            if absent:
                raise LoggerFileError(
                    f"no {absent[0]!r} column (columns are: {', '.join(df.columns)})",
                    file=self.name,
                    line=self.header_line,
                    fix="name it with --time-column",
                )
            values_cols = [c for c in df.columns if c not in time_columns]
            blank = df.isna().all(axis=1).to_numpy()
            # footers and event rows: no time stamp, or nothing but markers in every reading
            no_reading = df[values_cols].isna().all(axis=1).to_numpy() if values_cols else blank
            no_stamp = df[time_columns[0]].isna().to_numpy()
            drop = blank | (no_reading & layout_is_wide(self.layout)) | (no_stamp & no_reading)
            footers += int(drop.sum() - blank.sum())
            if drop.any():
                keep = ~drop
                df = df.loc[keep].reset_index(drop=True)
                lines = lines[keep]
            if not len(df):
                continue
            kept += len(df)
            for c in time_columns:
                df[c] = df[c].fillna("").astype(str).str.strip()
            stamp = df[time_columns[0]]
            for extra in time_columns[1:]:
                stamp = stamp + " " + df[extra]
            yield stamp, df, lines
        if not kept:
            raise LoggerFileError("no data lines", file=self.name, line=self.header_line + 1)
        if count:
            self.footers = footers

    # -- reading ------------------------------------------------------------------------

    def read(self) -> LoggerData:
        """Both passes; the samples in a spool, the dialect found."""
        spool = SampleSpool()
        for stamp, df, lines in self._frames(count=True):
            if self.first_stamp is None:
                self._decide_times(stamp, lines)
            t_us = self._times(stamp, lines)
            if self.layout == "long":
                t, ch, val = self._long(df, lines, t_us)
            else:
                t, ch, val = self._wide(df, lines, t_us)
            spool.append(t, ch, val)
        self.numbers.finish()
        if self.layout == "long":
            missing = [m.source for m in self.maps if m.source not in self.present]
            if missing:
                raise LoggerFileError(
                    f"mapped channel {missing[0]!r} has no readings in the file",
                    file=self.name,
                    key="--map",
                )
        if spool.count == 0:
            raise LoggerFileError("no readings in the mapped channels", file=self.name)
        return self._data(spool)

    def _data(self, spool: SampleSpool) -> LoggerData:
        opt, maps, header, dialect = self.opt, self.maps, self.header, self.dialect
        zone, zone_text = self.zone, self.zone_text
        value_column = opt.value_column
        zone_from = "--tz" if zone else dialect.zone_from if dialect.zone else "each time stamp"
        found = {
            "encoding": self.encoding,
            "delimiter": self.delimiter,
            "decimal": self.decimal,
            "thousands": self.numbers.thousands,
            "header_line": self.header_line,
            "skipped_above": self.skip_lines,
            "skipped_below": dialect.skipped_below,
            "footer_or_event_rows": self.footers,
            "time_columns": self.time_columns,
            "time_format": self.time_format,
            "zone": zone_text or "as written on each time stamp",
            "zone_from": zone_from if not opt.start or zone_text else "--start",
            "missing": self.numbers.missing_counts(maps),
            "columns": {
                m.source: header.index(m.source if self.layout == "wide" else value_column) + 1
                for m in maps
                if (m.source if self.layout == "wide" else value_column) in header
            },
            "unmapped": [
                c for c in header if c and c not in self.time_columns and c not in self.sources
            ]
            if self.layout == "wide"
            else [],
        }
        return LoggerData(
            name=Path(self.name).name,
            source=self.source,
            sha256=self.source.sha256,
            layout=self.layout,
            timezone=zone_text or "as written in the file",
            channels=list(maps),
            samples=spool,
            options={**asdict(opt), "layout": self.layout, "maps": [m.shown() for m in maps]},
            dialect=found,
        )

    # -- time stamps --------------------------------------------------------------------

    def _decide_times(self, stamp: pd.Series[Any], lines: npt.NDArray[Any]) -> None:
        """From the first data rows: the zone check and how stamps are read. A local format
        (and the day/month order) is decided by a first pass over the whole time column."""
        import pandas as pd

        from testplan.importers.stamps import is_elapsed

        name, opt, dialect = self.name, self.opt, self.dialect
        column = " + ".join(self.time_columns)
        first, line0 = str(stamp.iloc[0]), int(lines[0])
        self.first_stamp = (first, line0)
        if dialect.zone is not None:
            if self.zone is not None and not _same_zone(self.zone, dialect.zone, first):
                raise LoggerFileError(
                    f"--tz {self.zone} contradicts the file's zone {dialect.zone} "
                    f"({dialect.zone_from})",
                    file=name,
                    key="--tz",
                    fix="leave out --tz, or correct it",
                )
            self.zone_text = self.zone_text or dialect.zone
        _no_empty_stamp(stamp, lines, name, column)
        if opt.start is not None or is_elapsed(stamp):
            if opt.start is None:
                raise LoggerFileError(
                    f"time stamp {first!r} is time since the start, not a date and time",
                    file=name,
                    line=line0,
                    key=column,
                    fix="give the start with --start, e.g. --start 2027-01-12T09:00:00+01:00",
                )
            start = pd.Timestamp(opt.start)
            if start.tzinfo is None:
                if self.zone_text is None:
                    raise LoggerFileError(
                        f"--start {opt.start} has no time zone",
                        key="--start",
                        fix="write an offset, e.g. +01:00, or give --tz",
                    )
                start = start.tz_localize(_zone_object(self.zone_text))
            self.start_us = start.tz_convert("UTC").tz_localize(None)
            self.mode, self.time_format = "elapsed", "elapsed since --start"
            return
        iso = re.match(_STAMP, first) is not None
        plain_iso = iso and not opt.time_format and not opt.date_order
        if not plain_iso or (self._may_hold_midnight() and self._first_pass(choose=False)[0]):
            fmt = self._first_pass(choose=True)[1]
            if self.zone_text is None:
                raise _no_zone(first, line0, name, column)
            self.mode, self.local_format, self.time_format = "local", fmt, fmt
            return
        self.mode = "iso"
        self.first_unreadable = _unreadable(stamp, lines, 0, name, column)
        self.zoned_first = bool(_zoned(stamp.iloc[:1])[0])
        if not self.zoned_first and self.zone_text is None:
            bad_first = _unreadable(stamp, lines, 0, name, column)
            if bad_first is not None:
                raise bad_first
            raise _no_zone(first, line0, name, column)
        self.time_format = "ISO 8601 with zone" if self.zoned_first else "ISO 8601"

    def _may_hold_midnight(self) -> bool:
        """Whether '24:00' may appear anywhere (a cheap look at the bytes, or True)."""
        if self.encoding.replace("-", "").lower() in ("utf8", "utf8sig", "cp1252", "latin1"):
            return self.source.find(b"24:00")
        return True

    def _first_pass(self, *, choose: bool) -> tuple[bool, str]:
        """Over the whole time column, chunk by chunk: whether a '24:00' appears, and (when
        ``choose``) the format and date order that read every stamp (``stamps.FormatChoice``).
        An ISO 8601 column with '24:00' anywhere is read by format, as before."""
        from testplan.importers.stamps import FormatChoice

        column = " + ".join(self.time_columns)
        choice = FormatChoice(self.name, column, self.opt.date_order, self.opt.time_format)
        midnight = False
        for stamp, _, lines in self._frames():
            _no_empty_stamp(stamp, lines, self.name, column)
            midnight = midnight or bool(stamp.str.contains(r"[ T]24:00", regex=True).any())
            if choose:
                choice.feed(stamp, lines)
        return midnight, choice.decided() if choose else ""

    def _times(self, raw: pd.Series[Any], lines: npt.NDArray[Any]) -> npt.NDArray[np.int64]:
        """One chunk's time stamps as int64 microseconds UTC, read as decided."""
        import numpy as np
        import pandas as pd

        from testplan.importers.stamps import elapsed_us, parse_local

        name, column = self.name, " + ".join(self.time_columns)
        _no_empty_stamp(raw, lines, name, column)
        if self.mode == "elapsed":
            td, bad = elapsed_us(raw)
            if bad.any():
                raise self._at(raw, lines, int(np.argmax(bad)), "as time since the start")
            return _as_us((self.start_us + td).to_numpy())
        if self.mode == "local":
            parsed, _ = parse_local(raw, lines, name, column, None, self.local_format)
            return _localized(parsed, lines, name, column, self.zone_text)
        zoned = _zoned(raw)
        if (zoned != self.zoned_first).any():
            i = int(np.argmax(zoned != self.zoned_first))
            raise (
                _unreadable(raw, lines, i, name, column)
                or self.first_unreadable
                or LoggerFileError(
                    "some time stamps carry a time zone and others do not",
                    file=name,
                    line=int(lines[i]),
                    key=column,
                    fix="write every time stamp the same way",
                )
            )
        parsed = pd.to_datetime(raw, format="ISO8601", errors="coerce", utc=self.zoned_first)
        bad = parsed.isna().to_numpy()
        if bad.any():
            i = int(np.argmax(bad))
            raise self._at(raw, lines, i, "as a time stamp", "give its format with --time-format")
        if self.zoned_first:
            return _as_us(parsed.dt.tz_localize(None).to_numpy())
        return _localized(parsed, lines, name, column, self.zone_text)

    def _at(
        self, raw: pd.Series[Any], lines: Any, i: int, what: str, fix: str | None = None
    ) -> LoggerFileError:
        """The refusal of time stamp ``i`` of a chunk, by its line."""
        return LoggerFileError(
            f"cannot read {raw.iloc[i]!r} {what}",
            file=self.name,
            line=int(lines[i]),
            key=" + ".join(self.time_columns),
            fix=fix,
        )

    # -- readings -----------------------------------------------------------------------

    def _long(
        self, df: pd.DataFrame, lines: npt.NDArray[Any], t_us: npt.NDArray[np.int64]
    ) -> tuple[npt.NDArray[np.int64], npt.NDArray[np.int32], npt.NDArray[np.float64]]:
        import numpy as np
        import pandas as pd

        name, maps = self.name, self.maps
        channel_column, value_column = self.opt.channel_column, self.opt.value_column
        for col in (channel_column, value_column):
            if col not in df.columns:
                raise LoggerFileError(
                    f"no {col!r} column for a long-format file "
                    f"(columns are: {', '.join(df.columns)})",
                    file=name,
                    line=self.first_data,
                )
        col = df[channel_column].where(df[channel_column] != "", None)
        if not isinstance(col.dtype, pd.CategoricalDtype):
            col = col.astype("category")
        index = {m.source: i for i, m in enumerate(maps)}
        categories = [str(c).strip() for c in col.cat.categories]
        lookup = np.array([index.get(c, -1) for c in categories] + [-1], dtype=np.int64)
        cat_codes = col.cat.codes.to_numpy()  # -1 for an empty cell
        codes = lookup[np.where(cat_codes < 0, len(categories), cat_codes)]
        unmapped = codes < 0
        self.present |= {categories[c] for c in np.unique(cat_codes[cat_codes >= 0])}
        if unmapped.any() and not self.opt.skip_unmapped:
            i = int(np.argmax(unmapped))
            raise LoggerFileError(
                f"channel {str(col.iloc[i]).strip()!r} is not in the channel map",
                file=name,
                line=int(lines[i]),
                key=channel_column,
                fix="map it with --map, or pass --skip-unmapped",
            )
        keep = ~unmapped
        values = self.numbers.read(
            df[value_column][keep], lines[keep], value_column, allow_empty=False
        )
        ch = codes[keep].astype(np.int32)
        t = t_us[keep]
        kept_lines = lines[keep]
        self._rising_long(t, ch, kept_lines, df.columns[0])
        return t, ch, _in_plan_units(values, ch, kept_lines, maps, name, value_column)

    def _rising_long(
        self, t: npt.NDArray[np.int64], ch: npt.NDArray[np.int32], lines: Any, column: str
    ) -> None:
        """Times rise per channel, within this chunk and from the one before."""
        import numpy as np

        carried = sorted(self.last)
        ct = np.array([self.last[c][0] for c in carried], dtype=np.int64)
        cl = np.array([self.last[c][1] for c in carried], dtype=np.int64)
        cc = np.array(carried, dtype=np.int32)
        _rising(
            np.concatenate([ct, t]),
            np.concatenate([cc, ch]),
            np.concatenate([cl, np.asarray(lines, dtype=np.int64)]),
            self.name,
            column,
            self.maps,
        )
        if len(t):
            # the last stamp of each channel seen in this chunk
            rev = ch[::-1]
            seen, at = np.unique(rev, return_index=True)
            for c, j in zip(seen.tolist(), at.tolist(), strict=True):
                k = len(ch) - 1 - j
                self.last[int(c)] = (int(t[k]), int(lines[k]))

    def _wide(
        self, df: pd.DataFrame, lines: npt.NDArray[Any], t_us: npt.NDArray[np.int64]
    ) -> tuple[npt.NDArray[np.int64], npt.NDArray[np.int32], npt.NDArray[np.float64]]:
        import numpy as np

        name, maps = self.name, self.maps
        for m in maps:
            if m.source not in df.columns:
                raise LoggerFileError(
                    f"no column {m.source!r} (columns are: {', '.join(df.columns)})",
                    file=name,
                    line=self.header_line,
                    key="--map",
                )
        time_column = " + ".join(self.time_columns)
        n, k = len(df), len(maps)
        block = np.empty((n, k), dtype=np.float64)
        for j, m in enumerate(maps):
            block[:, j] = self.numbers.read(df[m.source], lines, m.source, allow_empty=True)
        before = self.last.get(-1)
        t_all = t_us if before is None else np.concatenate([[before[0]], t_us])
        l_all = lines if before is None else np.concatenate([[before[1]], lines])
        dt_ok = np.diff(t_all) > 0
        if not dt_ok.all():
            i = int(np.argmin(dt_ok))
            verb = "repeats" if t_all[i + 1] == t_all[i] else "goes back from"
            raise LoggerFileError(
                f"time stamp {verb} the one on line {int(l_all[i])}",
                file=name,
                line=int(l_all[i + 1]),
                key=time_column,
                fix="times must rise; remove duplicated or out-of-order lines",
            )
        self.last[-1] = (int(t_us[-1]), int(lines[-1]))
        flat = block.reshape(-1)
        present = ~np.isnan(flat)
        t = np.repeat(t_us, k)[present]
        ch = np.tile(np.arange(k, dtype=np.int32), n)[present]
        row_lines = np.repeat(lines, k)[present]
        return t, ch, _in_plan_units(flat[present], ch, row_lines, maps, name, None)


def _no_empty_stamp(raw: pd.Series[Any], lines: npt.NDArray[Any], name: str, column: str) -> None:
    import numpy as np

    empty = (raw == "").to_numpy()
    if empty.any():
        i = int(np.argmax(empty))
        raise LoggerFileError("empty time stamp", file=name, line=int(lines[i]), key=column)


def _unreadable(
    raw: pd.Series[Any], lines: npt.NDArray[Any], i: int, name: str, column: str
) -> LoggerFileError | None:
    import pandas as pd

    if pd.isna(pd.to_datetime(raw.iloc[i], format="ISO8601", errors="coerce", utc=True)):
        return LoggerFileError(
            f"cannot read {raw.iloc[i]!r} as a time stamp",
            file=name,
            line=int(lines[i]),
            key=column,
            fix="give its format with --time-format",
        )
    return None


def layout_is_wide(layout: str) -> bool:
    """Whether a row without readings is an event row (wide) rather than an error (long)."""
    return layout == "wide"


def _time_columns(given: str | None, header: list[str], name: str, line: int) -> list[str]:
    if given is not None:
        if given not in header:
            raise LoggerFileError(
                f"no {given!r} column (columns are: {', '.join(header)})",
                file=name,
                line=line,
                fix="name it with --time-column",
            )
        return [given]
    if "time" in header:
        return ["time"]
    low = [h.lower() for h in header]
    dates = [i for i, h in enumerate(low) if "date" in h and "time" not in h]
    times = [i for i, h in enumerate(low) if "time" in h and "date" not in h]
    if dates and times and times[0] == dates[0] + 1:
        return [header[dates[0]], header[times[0]]]
    for i, h in enumerate(low):
        if any(word in h for word in ("time", "date", "zeit", "datum", "stamp")):
            return [header[i]]
    if not header:
        raise LoggerFileError("no header line", file=name, line=line)
    return [header[0]]


def _same_zone(tz: str, offset: str, first_stamp: str) -> bool:
    """Whether ``--tz`` gives the same UTC offset as the file at its first time stamp."""
    import datetime as dt

    from testplan.importers.stamps import fixed_offset

    fixed = fixed_offset(offset)
    mine = _zone_object(tz)
    try:
        import pandas as pd

        when = pd.Timestamp(first_stamp).to_pydatetime().replace(tzinfo=None)
    except (ValueError, TypeError):
        when = dt.datetime(2000, 1, 1)
    assert fixed is not None
    return mine.utcoffset(when) == fixed.utcoffset(when)


def _zone_object(tz: str) -> dt.tzinfo:
    from zoneinfo import ZoneInfo

    from testplan.importers.stamps import fixed_offset

    return fixed_offset(tz) or ZoneInfo(tz)


def _check_zone(timezone: str | None) -> str | None:
    if timezone is None:
        return None
    from zoneinfo import ZoneInfoNotFoundError

    try:
        _zone_object(timezone)
    except (ZoneInfoNotFoundError, ValueError):
        raise LoggerFileError(
            f"unknown time zone {timezone!r}",
            key="--tz",
            fix="give an IANA name such as 'Europe/London' or a fixed offset such as '+01:00'",
        ) from None
    return timezone


def _head(text: str, n: int) -> list[str]:
    """The first ``n`` lines, without splitting the whole (possibly huge) text."""
    return text.split("\n", n)[:n]


class _Lines:
    """A file's lines, found only if a message needs one (logs can be millions of lines):
    read from the bytes line by line, with the parser's line ends."""

    def __init__(self, source: RawSource, encoding: str) -> None:
        self.source, self.encoding = source, encoding

    def cell(self, line: int, column: str, delimiter: str, header: list[str]) -> str:
        """The text of one cell as written in the file (for messages)."""
        import csv

        try:
            row = next(csv.reader([self[line - 1]], delimiter=delimiter))
            return row[header.index(column)].strip()
        except (IndexError, ValueError, StopIteration, csv.Error):
            return ""

    def __getitem__(self, i: int) -> str:
        with io.TextIOWrapper(self.source.open(), encoding=self.encoding, newline=None) as f:
            for k, text in enumerate(f):
                if k == i:
                    return text.removesuffix("\n").removeprefix("\ufeff")
        raise IndexError(i)


def _first_row_fits(text: str, delimiter: str, skip_lines: int, name: str) -> None:
    """pandas would take a first data row longer than the header as an index; refuse it."""
    import csv

    head = _head(text, skip_lines + 2)[skip_lines:]
    if len(head) < 2 or not head[1].strip():
        return
    try:
        header, first = csv.reader(head, delimiter=delimiter)
    except csv.Error:
        return  # the parser names the line
    if len(first) > len(header):
        raise LoggerFileError(
            f"line {skip_lines + 2}: expected {len(header)} fields, found {len(first)} "
            "(check the delimiter and the decimal mark)",
            file=name,
        )


def _parser_message(err: Exception, skip_lines: int) -> str:
    text = str(err).strip()
    m = re.search(r"Expected (\d+) fields in line (\d+), saw (\d+)", text)
    if m:
        return (
            f"line {int(m[2]) + skip_lines}: expected {m[1]} fields, found {m[3]} "
            "(check the delimiter and the decimal mark)"
        )
    return f"cannot read as CSV: {text.splitlines()[0]}"


def _no_zone(first: str, line: int, name: str, column: str) -> LoggerFileError:
    return LoggerFileError(
        f"time stamp {first!r} has no time zone",
        file=name,
        line=line,
        key=column,
        fix="give the logger's zone with --tz, e.g. --tz Europe/London or --tz +01:00",
    )


def _as_us(values: Any) -> npt.NDArray[np.int64]:
    import numpy as np

    return np.asarray(np.asarray(values).astype("datetime64[us]").view("int64"), dtype=np.int64)


def _localized(
    parsed: pd.Series[Any],
    lines: npt.NDArray[Any],
    name: str,
    column: str,
    zone: str | None,
) -> npt.NDArray[np.int64]:
    """Naive lab times in ``zone`` as UTC; a clock-change gap or repeat is refused by line."""
    import numpy as np

    assert zone is not None
    try:
        local = parsed.dt.tz_localize(_zone_object(zone), ambiguous="raise", nonexistent="raise")
    except (ValueError, TypeError) as err:  # ambiguous/nonexistent errors
        message = str(err)
        stamp = message.split(":", 1)[-1].strip() if ":" in message else message
        m = re.search(r"\d{4}-\d\d-\d\d \d\d:\d\d(?::\d\d)?", message)
        where = None
        if m is not None:
            stamp = m[0]
            hits = (parsed.dt.strftime("%Y-%m-%d %H:%M:%S").str.startswith(stamp)).to_numpy()
            where = int(lines[int(np.argmax(hits))]) if hits.any() else None
        raise LoggerFileError(
            f"local time {stamp} does not exist or is ambiguous in {zone} (clock change)",
            file=name,
            line=where,
            key=column,
            fix="log in UTC or with offsets, or give --tz as a fixed offset such as +01:00",
        ) from None
    return _as_us(local.dt.tz_convert("UTC").dt.tz_localize(None).to_numpy())


def _zoned(raw: pd.Series[Any]) -> npt.NDArray[np.bool_]:
    """Which time stamps carry a zone (Z, +hh:mm, +hhmm, +hh), over the whole column at once."""
    import numpy as np

    try:
        b = raw.to_numpy(dtype=object).astype("S")
    except UnicodeEncodeError:
        return np.asarray(raw.str.contains(_ZONE, regex=True).to_numpy(), dtype=bool)
    n, width = len(b), b.dtype.itemsize
    u8 = np.frombuffer(b.tobytes(), dtype=np.uint8).reshape(n, width)
    lens = np.char.str_len(b)
    rows = np.arange(n)

    def back(k: int) -> npt.NDArray[np.uint8]:
        return u8[rows, np.clip(lens - k, 0, width - 1)]

    def sign(c: npt.NDArray[np.uint8]) -> npt.NDArray[np.bool_]:
        return np.asarray((c == ord("+")) | (c == ord("-")), dtype=bool)

    timed = lens > 13  # a time follows the date; a bare date's '-dd' is not an offset
    last = back(1)
    zoned = (last == ord("Z")) | (last == ord("z"))
    zoned |= timed & sign(back(6)) & (back(3) == ord(":"))
    zoned |= timed & sign(back(5)) & (back(3) != ord(":"))
    zoned |= timed & sign(back(3)) & (back(6) == ord(":"))
    return np.asarray(zoned, dtype=bool)


class _NumberReader:
    """Cells to numbers: a decimal comma, a thousands separator found in the data (refused
    where ambiguous), missing markers skipped and counted, other text named by its line."""

    def __init__(
        self,
        decimal: str,
        markers: list[str],
        name: str,
        source_lines: _Lines,
        delimiter: str,
        header: list[str],
    ) -> None:
        self.decimal, self.markers, self.name = decimal, markers, name
        self.source_lines, self.delimiter, self.header = source_lines, delimiter, header
        self.thousands: str | None = None
        self.decimal_given = True
        self.missing: dict[str, int] = {}
        # Refusals that depend on the whole column, decided once every chunk is read:
        # '1.013' in a semicolon file (unless some cell of the column is plainly decimal)
        # and a grouping mark in a column where no cell shows the decimal mark.
        self.dotted_pending: dict[str, LoggerFileError] = {}
        self.dotted_plain: set[str] = set()
        self.grouped_pending: dict[str, LoggerFileError] = {}
        self.has_decimal: set[str] = set()

    def finish(self) -> None:
        """Raise a refusal that only the whole column could settle (see ``__init__``)."""
        for column, err in self.dotted_pending.items():
            if column not in self.dotted_plain:
                raise err
        for column, err in self.grouped_pending.items():
            if column not in self.has_decimal:
                raise err

    def ambiguous(self, cell: str, mark: str, line: int, column: str) -> LoggerFileError:
        """The refusal of a cell whose ``mark`` may group thousands or be the decimal mark."""
        return LoggerFileError(
            f"{cell!r}: {mark!r} may be a thousands separator or a decimal mark",
            file=self.name,
            line=line,
            key=column,
            fix="say which is the decimal mark with --decimal . or --decimal ,",
        )

    def missing_counts(self, maps: list[ChannelMapping]) -> dict[str, int]:
        """Missing markers skipped, per mapped column."""
        return {m.source: self.missing.get(m.source, 0) for m in maps}

    def read(
        self, col: pd.Series[Any], lines: npt.NDArray[Any], column: str, *, allow_empty: bool
    ) -> npt.NDArray[np.float64]:
        """The column's readings as floats; NaN where a missing marker stands."""
        import numpy as np
        import pandas as pd

        if pd.api.types.is_float_dtype(col.dtype) or pd.api.types.is_integer_dtype(col.dtype):
            values = col.to_numpy(dtype=float)
            empty = np.isnan(values)
            with np.errstate(invalid="ignore"):
                if self.decimal != "." and np.any(values[~empty] % 1 != 0):
                    # parsed as numbers in this chunk: a fraction shows the decimal mark
                    self.has_decimal.add(column)
            return self._checked(values, empty, col, lines, column, allow_empty)
        raw = col.fillna("").astype(str).str.strip()
        empty = raw.isin(self.markers).to_numpy()
        text = raw.where(~empty, "nan")
        if not self.decimal_given and self.decimal == "." and self.delimiter == ";":
            # a semicolon file often writes a decimal comma: '1.013' may mean 1013
            dotted = text.str.contains(".", regex=False)
            if dotted.any():
                if not text[dotted].str.match(r"^[+-]?\d{1,3}(?:\.\d{3})+$").all():
                    self.dotted_plain.add(column)
                elif column not in self.dotted_pending:
                    i = int(np.argmax(dotted.to_numpy()))
                    self.dotted_pending[column] = self.ambiguous(
                        raw.iloc[i], ".", int(lines[i]), column
                    )
        other = "." if self.decimal == "," else ","
        if text.str.contains(self.decimal).any():  # as a pattern, as before: '.' is any text
            self.has_decimal.add(column)
        has_other = text.str.contains(other, regex=False)
        if has_other.any():
            grouping = (
                r"^[+-]?\d{1,3}(?:"
                + re.escape(other)
                + r"\d{3})+(?:"
                + re.escape(self.decimal)
                + r"\d*)?$"
            )
            wrong = (has_other & ~text.str.match(grouping)).to_numpy()
            if wrong.any():
                i = int(np.argmax(wrong))
                raise self.ambiguous(raw.iloc[i], other, int(lines[i]), column)
            if not self.decimal_given and column not in self.grouped_pending:
                i = int(np.argmax(has_other.to_numpy()))
                self.grouped_pending[column] = self.ambiguous(
                    raw.iloc[i], other, int(lines[i]), column
                )
            self.thousands = other
            text = text.str.replace(other, "", regex=False)
        if self.decimal != ".":
            text = text.str.replace(self.decimal, ".", regex=False)
        values = pd.to_numeric(text, errors="coerce").to_numpy(dtype=float)
        return self._checked(values, empty, raw, lines, column, allow_empty)

    def _checked(
        self,
        values: npt.NDArray[np.float64],
        empty: npt.NDArray[np.bool_],
        raw: pd.Series[Any],
        lines: npt.NDArray[Any],
        column: str,
        allow_empty: bool,
    ) -> npt.NDArray[np.float64]:
        import numpy as np

        bad = ~np.isfinite(values) & ~empty
        if not allow_empty:
            bad |= empty
        if bad.any():
            i = int(np.argmax(bad))
            shown = str(raw.iloc[i]).strip()
            if not isinstance(raw.iloc[i], str):
                shown = self.source_lines.cell(int(lines[i]), column, self.delimiter, self.header)
            what = "empty value" if empty[i] else f"{shown!r} is not a finite number"
            fix = None if empty[i] else "if it marks a missing reading, pass --missing TEXT"
            raise LoggerFileError(what, file=self.name, line=int(lines[i]), key=column, fix=fix)
        self.missing[column] = self.missing.get(column, 0) + int(empty.sum())
        return np.asarray(values, dtype=np.float64)


def _in_plan_units(
    values: npt.NDArray[np.float64],
    ch: npt.NDArray[np.int32],
    lines: npt.NDArray[Any],
    maps: list[ChannelMapping],
    name: str,
    column: str | None,
) -> npt.NDArray[np.float64]:
    """Readings converted with their channel's scale and offset. A finite reading can
    overflow in the plan unit (1e308 cm in mm): that one is named by its line."""
    import numpy as np

    scale = np.array([m.scale for m in maps])[ch]
    offset = np.array([m.offset for m in maps])[ch]
    with np.errstate(over="ignore", invalid="ignore"):  # named just below
        converted = values * scale + offset
    bad = ~np.isfinite(converted)
    if bad.any():
        i = int(np.argmax(bad))
        m = maps[int(ch[i])]
        raise LoggerFileError(
            f"the {m.source!r} reading is out of range once converted to {m.plan_unit}",
            file=name,
            line=int(lines[i]),
            key=column or m.source,
        )
    return np.asarray(converted, dtype=np.float64)


def _rising(
    t: npt.NDArray[np.int64],
    ch: npt.NDArray[np.int32],
    lines: npt.NDArray[Any],
    name: str,
    column: str,
    maps: list[ChannelMapping],
) -> None:
    import numpy as np

    order = np.argsort(ch, kind="stable")
    ts, cs = t[order], ch[order]
    same = cs[1:] == cs[:-1]
    bad = same & (ts[1:] <= ts[:-1])
    if bad.any():
        j = int(np.argmax(bad))
        here, before = int(lines[order[j + 1]]), int(lines[order[j]])
        verb = "repeats" if ts[j + 1] == ts[j] else "goes back from"
        raise LoggerFileError(
            f"time stamp {verb} the one on line {before} for channel {maps[cs[j]].source!r}",
            file=name,
            line=here,
            key=column,
            fix="times must rise for each channel; remove duplicated or out-of-order lines",
        )


Reading = tuple[int, float]


def _channel_stats(
    data: LoggerData,
) -> list[tuple[int, Reading | None, Reading | None, float | None, float | None]]:
    """Per mapped channel: count, first and last reading (in file order), min and max;
    gathered slice by slice from the spool."""
    import numpy as np

    k = len(data.channels)
    count = [0] * k
    first: list[Reading | None] = [None] * k
    last: list[Reading | None] = [None] * k
    low: list[float | None] = [None] * k
    high: list[float | None] = [None] * k
    for t, c, v in data.samples.slices(1 << 20):
        for i in np.unique(c).tolist():
            mine = np.flatnonzero(c == i)
            vals = v[mine]
            count[i] += len(mine)
            if first[i] is None:
                first[i] = (int(t[mine[0]]), float(vals[0]))
            last[i] = (int(t[mine[-1]]), float(vals[-1]))
            lo, hi = float(vals.min()), float(vals.max())
            low[i] = lo if low[i] is None else min(low[i], lo)
            high[i] = hi if high[i] is None else max(high[i], hi)
    return list(zip(count, first, last, low, high, strict=True))


def preview(data: LoggerData) -> dict[str, Any]:
    """What ``record preview --json`` prints: per channel its column, unit, count, first and
    last reading (UTC) and min/max in plan units; the dialect found; warnings."""

    def stamp(us: int) -> str:
        return dt.datetime.fromtimestamp(us / 1e6, dt.UTC).isoformat().replace("+00:00", "Z")

    stats = _channel_stats(data)
    channels = []
    for i, m in enumerate(data.channels):
        count, first, last, low, high = stats[i]
        channels.append(
            {
                "column": data.dialect.get("columns", {}).get(m.source),
                "source": m.source,
                "quantity": m.quantity,
                "unit": m.plan_unit,
                "source_unit": m.unit,
                "count": count,
                "first": None if first is None else {"time": stamp(first[0]), "value": first[1]},
                "last": None if last is None else {"time": stamp(last[0]), "value": last[1]},
                "min": low,
                "max": high,
            }
        )
    warnings = []
    for source, n in data.dialect.get("missing", {}).items():
        if n:
            warnings.append(f"{source}: {n} missing readings skipped")
    if data.dialect.get("footer_or_event_rows"):
        n = data.dialect["footer_or_event_rows"]
        warnings.append(f"{n} footer or event rows without readings skipped")
    for c in data.dialect.get("unmapped", []):
        warnings.append(f"column {c!r} is not mapped and was not read")
    return {"channels": channels, "dialect": data.dialect, "warnings": warnings}


@dataclass(frozen=True)
class Preview:
    """The head of a logger file as the reader sees it, for picking the channel map.

    ``sources`` are what a map entry's SOURCE may name: the value columns of a wide file,
    or the channel names seen in the first ``PREVIEW_SCAN`` lines of a long one.
    """

    layout: str
    columns: list[str]
    rows: list[list[str]]
    sources: list[str]


PREVIEW_SCAN = 2000


def preview_logger_bytes(
    content: bytes, name: str, options: ReadOptions | None = None, rows: int = 8
) -> Preview:
    """The header, first ``rows`` rows and the mappable sources of a logger file, found by the
    same dialect detection as ``read_logger_bytes`` (encoding, delimiter, banner, units rows).

    Raises LoggerFileError when the file cannot be decoded or has no header.
    """
    import csv

    from testplan.importers.dialect import decode, delimiter_option, detect

    opt = options or ReadOptions()
    text, encoding = decode(content, name, opt.encoding, limit=4 * HEAD_BYTES)
    found = detect(text, delimiter_option(opt.delimiter), opt.skip_lines, encoding)
    columns = found.header
    if not columns or columns == [""]:
        raise LoggerFileError("no header line", file=Path(name), key="--skip-lines")
    layout = opt.layout
    if layout == "auto":
        layout = "long" if {opt.channel_column, opt.value_column} <= set(columns) else "wide"
    first = found.header_line + found.skipped_below
    head = _head(text, first + PREVIEW_SCAN)[first:]
    body = [r for r in csv.reader(head, delimiter=found.delimiter) if r]
    if layout == "long" and opt.channel_column in columns:
        at = columns.index(opt.channel_column)
        sources = list(dict.fromkeys(r[at].strip() for r in body if len(r) > at))
    else:
        time_names = {opt.time_column or "time", "date", "time"}
        sources = [c for c in columns if c.strip() and c.strip().lower() not in time_names]
    return Preview(layout=layout, columns=columns, rows=body[:rows], sources=sources)
