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

import hashlib
import io
import re
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any, Literal

from testplan.domain.channels import CHANNELS
from testplan.domain.units import linear_map
from testplan.errors import LoggerFileError, QuantityError

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np
    import numpy.typing as npt
    import pandas as pd

Layout = Literal["auto", "long", "wide"]

_MAP = re.compile(
    r"^\s*(?P<source>[^=\[\]]+?)\s*(?:\[(?P<unit>[^\]]*)\])?\s*=\s*(?P<quantity>[A-Za-z_]\w*)"
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
    try:
        scale, offset = linear_map(unit, spec.kind, spec.unit, key="--map")
    except QuantityError as err:
        raise LoggerFileError(f"{text!r}: {err.message}", key="--map", fix=err.fix) from err
    return ChannelMapping(
        m["source"], unit, quantity, m["equipment"], scale, offset, specimen=m["specimen"]
    )


@dataclass
class LoggerData:
    """What a logger file holds once read: samples in plan units, in sequence order."""

    name: str
    content: bytes
    sha256: str
    layout: Literal["long", "wide"]
    timezone: str
    channels: list[ChannelMapping]
    t_us: npt.NDArray[np.int64]
    channel: npt.NDArray[np.int32]
    value: npt.NDArray[np.float64]
    options: dict[str, Any] = field(default_factory=dict)

    @property
    def count(self) -> int:
        return len(self.t_us)


@dataclass(frozen=True)
class ReadOptions:
    """How to read a logger file: layout, time zone, column names and CSV dialect."""

    layout: Layout = "auto"
    timezone: str | None = None
    time_column: str = "time"
    channel_column: str = "channel"
    value_column: str = "value"
    delimiter: str = ","
    decimal: str = "."
    encoding: str = "utf-8"
    skip_lines: int = 0
    skip_unmapped: bool = False


def read_logger_file(
    path: Path, maps: list[ChannelMapping], options: ReadOptions | None = None
) -> LoggerData:
    """Read a logger CSV file from disk; see ``read_logger_bytes``."""
    try:
        content = path.read_bytes()
    except FileNotFoundError:
        raise LoggerFileError("no such file", file=path) from None
    except IsADirectoryError:
        raise LoggerFileError("is a folder, not a file", file=path) from None
    except OSError as err:
        raise LoggerFileError(f"cannot read: {err.strerror}", file=path) from None
    return read_logger_bytes(content, str(path), maps, options)


def read_logger_bytes(
    content: bytes, name: str, maps: list[ChannelMapping], options: ReadOptions | None = None
) -> LoggerData:
    """Read a logger CSV held in memory. ``name`` is used in messages."""
    import numpy as np
    import pandas as pd

    opt = options or ReadOptions()
    layout, timezone = opt.layout, opt.timezone
    time_column, channel_column, value_column = (
        opt.time_column,
        opt.channel_column,
        opt.value_column,
    )
    delimiter, decimal, encoding = opt.delimiter, opt.decimal, opt.encoding
    skip_lines, skip_unmapped = opt.skip_lines, opt.skip_unmapped
    if layout not in ("auto", "long", "wide"):
        raise LoggerFileError(
            f"unknown layout {layout!r}", key="--layout", fix="long, wide or auto"
        )
    if not maps:
        raise LoggerFileError("no channels mapped", key="--map", fix="give at least one --map")
    sources = [m.source for m in maps]
    dupes = {s for s in sources if sources.count(s) > 1}
    if dupes:
        raise LoggerFileError(f"channel {sorted(dupes)[0]!r} mapped twice", key="--map")
    if delimiter == decimal:
        raise LoggerFileError("the delimiter and the decimal mark are the same", key="--decimal")
    zone = _check_zone(timezone)
    header_line = skip_lines + 1
    text = _decode(content, name, encoding)
    if not text.strip():
        raise LoggerFileError("the file is empty", file=name)
    _first_row_fits(text, delimiter, skip_lines, name)
    header = _header(text, delimiter, skip_lines)
    if layout == "auto":
        layout = "long" if {channel_column, value_column} <= set(header) else "wide"
    # Numbers are parsed by pandas' C reader; only the empty cell is missing, so a 'nan'
    # or other text leaves the column as text and is found and named below.
    dtypes: dict[str, Any] = {c: str for c in header}
    for c in header:
        if (layout == "long" and c == value_column) or (
            layout == "wide" and c in {m.source for m in maps}
        ):
            dtypes.pop(c)
    if layout == "long" and channel_column in dtypes:
        dtypes[channel_column] = "category"

    def read(types: Any) -> pd.DataFrame:
        return pd.read_csv(
            io.StringIO(text),
            sep=delimiter,
            decimal=decimal,
            skiprows=skip_lines,
            dtype=types,
            keep_default_na=False,
            na_values=[""],
            skip_blank_lines=False,
            skipinitialspace=True,
            index_col=False,
            engine="c",
        )

    try:
        df = read(dtypes)
    except pd.errors.ParserError as err:
        raise LoggerFileError(_parser_message(err, skip_lines), file=name) from None
    except pd.errors.EmptyDataError:
        raise LoggerFileError("no header line", file=name, line=header_line) from None
    except (ValueError, TypeError):
        # A text value in a number column makes pandas refuse the dtype; read all as text.
        df = read(str)
    df.columns = [str(c).strip() for c in df.columns]
    if time_column not in df.columns:
        raise LoggerFileError(
            f"no {time_column!r} column (columns are: {', '.join(df.columns)})",
            file=name,
            line=header_line,
            fix="name it with --time-column",
        )
    blank = df.isna().all(axis=1).to_numpy()
    if blank.all():
        raise LoggerFileError("no data lines", file=name, line=header_line + 1)
    lines = np.arange(len(df)) + header_line + 1  # file line of each data row
    if blank.any():
        keep = ~blank
        df = df.loc[keep].reset_index(drop=True)
        lines = lines[keep]
    source_lines = _Lines(text)
    t_us = _times(df[time_column], lines, name, time_column, zone)
    if layout == "long":
        t, ch, val = _long(
            df,
            lines,
            t_us,
            maps,
            name,
            channel_column,
            value_column,
            decimal,
            skip_unmapped,
            source_lines,
            header_line,
        )
    else:
        t, ch, val = _wide(
            df,
            lines,
            t_us,
            maps,
            name,
            time_column,
            decimal,
            skip_unmapped,
            header_line,
            source_lines,
        )
    if len(t) == 0:
        raise LoggerFileError("no readings in the mapped channels", file=name)
    return LoggerData(
        name=Path(name).name,
        content=content,
        sha256=hashlib.sha256(content).hexdigest(),
        layout=layout,
        timezone=zone or "as written in the file",
        channels=list(maps),
        t_us=t,
        channel=ch,
        value=val,
        options={**asdict(opt), "layout": layout, "maps": [m.shown() for m in maps]},
    )


def _check_zone(timezone: str | None) -> str | None:
    if timezone is None:
        return None
    from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

    try:
        ZoneInfo(timezone)
    except (ZoneInfoNotFoundError, ValueError):
        raise LoggerFileError(
            f"unknown time zone {timezone!r}",
            key="--tz",
            fix="give an IANA name such as 'Europe/London' or 'UTC'",
        ) from None
    return timezone


def _decode(content: bytes, name: str, encoding: str) -> str:
    try:
        text = content.decode(encoding)
    except LookupError:
        raise LoggerFileError(f"unknown encoding {encoding!r}", key="--encoding") from None
    except UnicodeDecodeError as err:
        line = content[: err.start].count(b"\n") + 1
        raise LoggerFileError(
            f"byte {content[err.start]:#04x} is not valid {encoding}",
            file=name,
            line=line,
            fix="give the file's encoding with --encoding, e.g. cp1252",
        ) from None
    text = text.removeprefix("\ufeff")
    if "\r" in text:
        # Windows (CRLF) and old Mac (CR) line ends: one line end for every reader here,
        # so line numbers in messages agree with the parser's (the stored bytes are kept).
        text = text.replace("\r\n", "\n").replace("\r", "\n")
    return text


def _head(text: str, n: int) -> list[str]:
    """The first ``n`` lines, without splitting the whole (possibly huge) text."""
    return text.split("\n", n)[:n]


class _Lines:
    """A file's lines, split only if a message needs one (logs can be millions of lines)."""

    def __init__(self, text: str) -> None:
        self.text = text
        self._lines: list[str] | None = None

    def __getitem__(self, i: int) -> str:
        if self._lines is None:
            self._lines = self.text.split("\n")  # as the parser counts lines
        return self._lines[i]


def _header(text: str, delimiter: str, skip_lines: int) -> list[str]:
    import csv

    try:
        for row in csv.reader(_head(text, skip_lines + 1)[skip_lines:], delimiter=delimiter):
            return [c.strip() for c in row]
    except csv.Error:
        pass  # the parser names the line
    return []


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


def _times(
    col: pd.Series[Any], lines: npt.NDArray[Any], name: str, column: str, zone: str | None
) -> npt.NDArray[np.int64]:
    import numpy as np
    import pandas as pd

    empty = col.isna().to_numpy()
    if empty.any():
        i = int(np.argmax(empty))
        raise LoggerFileError("empty time stamp", file=name, line=int(lines[i]), key=column)
    raw = col.astype(str)
    zoned = _zoned(raw)

    def unreadable(i: int) -> LoggerFileError | None:
        if pd.isna(pd.to_datetime(raw.iloc[i], format="ISO8601", errors="coerce", utc=True)):
            return LoggerFileError(
                f"cannot read {raw.iloc[i]!r} as an ISO 8601 time stamp",
                file=name,
                line=int(lines[i]),
                key=column,
            )
        return None

    if zoned.any() and not zoned.all():
        i = int(np.argmax(zoned != zoned[0]))
        raise (
            unreadable(i)
            or unreadable(0)
            or LoggerFileError(
                "some time stamps carry a time zone and others do not",
                file=name,
                line=int(lines[i]),
                key=column,
                fix="write every time stamp the same way",
            )
        )
    if not zoned[0] and zone is None:
        bad_first = unreadable(0)
        if bad_first is not None:
            raise bad_first
    if not zoned[0] and zone is None:
        raise LoggerFileError(
            f"time stamp {raw.iloc[0]!r} has no time zone",
            file=name,
            line=int(lines[0]),
            key=column,
            fix="give the logger's zone with --tz, e.g. --tz Europe/London, or write offsets",
        )
    parsed = pd.to_datetime(raw, format="ISO8601", errors="coerce", utc=bool(zoned[0]))
    bad = parsed.isna().to_numpy()
    if bad.any():
        i = int(np.argmax(bad))
        raise LoggerFileError(
            f"cannot read {raw.iloc[i]!r} as an ISO 8601 time stamp",
            file=name,
            line=int(lines[i]),
            key=column,
        )
    if not zoned[0]:
        try:
            parsed = parsed.dt.tz_localize(zone, ambiguous="raise", nonexistent="raise")
        except (ValueError, TypeError) as err:  # pytz-style ambiguous/nonexistent errors
            stamp = str(err).split(":")[-1].strip() if ":" in str(err) else str(err)
            where = _first_line_of(raw, lines, stamp)
            raise LoggerFileError(
                f"time {stamp} does not exist or is ambiguous in {zone} (clock change)",
                file=name,
                line=where,
                key=column,
                fix="log in UTC or with offsets",
            ) from None
        parsed = parsed.dt.tz_convert("UTC")
    out = parsed.dt.tz_localize(None).dt.as_unit("us").to_numpy().view("int64")
    return np.asarray(out, dtype=np.int64)


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


def _first_line_of(raw: pd.Series[Any], lines: npt.NDArray[Any], stamp: str) -> int | None:
    hits = raw.str.replace("T", " ").str.startswith(stamp.replace("T", " ")[:16]).to_numpy()
    return int(lines[hits.argmax()]) if hits.any() else None


def _cell(source_lines: _Lines, line: int, column: str, header_line: int) -> str:
    """The text of one cell as written in the file (for messages)."""
    import csv

    try:
        header = next(csv.reader([source_lines[header_line - 1]]))
        row = next(csv.reader([source_lines[line - 1]]))
        return row[[h.strip() for h in header].index(column)].strip()
    except (IndexError, ValueError, StopIteration, csv.Error):
        return ""


def _numbers(
    col: pd.Series[Any],
    lines: npt.NDArray[Any],
    name: str,
    column: str,
    decimal: str,
    *,
    allow_empty: bool,
    source_lines: _Lines,
    header_line: int,
) -> npt.NDArray[np.float64]:
    import numpy as np
    import pandas as pd

    if pd.api.types.is_float_dtype(col.dtype) or pd.api.types.is_integer_dtype(col.dtype):
        values = col.to_numpy(dtype=float)
        missing = np.isnan(values)
        if missing.any():
            # pandas reads 'nan' text as a number; only a truly empty cell is no reading.
            idx = np.flatnonzero(missing)
            texts = [_cell(source_lines, int(lines[i]), column, header_line) for i in idx]
            empty = np.zeros(len(values), dtype=bool)
            empty[idx] = [t == "" for t in texts]
        else:
            empty = missing
    else:
        raw = col.astype(str).str.strip().where(~col.isna(), "")
        if decimal != ".":
            raw = raw.str.replace(decimal, ".", regex=False)
        empty = (raw == "").to_numpy()
        values = pd.to_numeric(raw.where(~empty, "nan"), errors="coerce").to_numpy(dtype=float)
    bad = ~np.isfinite(values) & ~empty
    if not allow_empty:
        bad |= empty
    if bad.any():
        i = int(np.argmax(bad))
        shown = _cell(source_lines, int(lines[i]), column, header_line)
        what = "empty value" if empty[i] else f"{shown!r} is not a finite number"
        raise LoggerFileError(what, file=name, line=int(lines[i]), key=column)
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


def _long(
    df: pd.DataFrame,
    lines: npt.NDArray[Any],
    t_us: npt.NDArray[np.int64],
    maps: list[ChannelMapping],
    name: str,
    channel_column: str,
    value_column: str,
    decimal: str,
    skip_unmapped: bool,
    source_lines: _Lines,
    header_line: int,
) -> tuple[npt.NDArray[np.int64], npt.NDArray[np.int32], npt.NDArray[np.float64]]:
    import numpy as np
    import pandas as pd

    for col in (channel_column, value_column):
        if col not in df.columns:
            raise LoggerFileError(
                f"no {col!r} column for a long-format file (columns are: {', '.join(df.columns)})",
                file=name,
                line=lines[0] - 1,
            )
    col = df[channel_column]
    if not isinstance(col.dtype, pd.CategoricalDtype):
        col = col.astype("category")
    index = {m.source: i for i, m in enumerate(maps)}
    categories = [str(c).strip() for c in col.cat.categories]
    lookup = np.array([index.get(c, -1) for c in categories] + [-1], dtype=np.int64)
    cat_codes = col.cat.codes.to_numpy()  # -1 for an empty cell
    codes = lookup[np.where(cat_codes < 0, len(categories), cat_codes)]
    unmapped = codes < 0
    present = {categories[c] for c in np.unique(cat_codes[cat_codes >= 0])}
    if unmapped.any() and not skip_unmapped:
        i = int(np.argmax(unmapped))
        raise LoggerFileError(
            f"channel {str(col.iloc[i]).strip()!r} is not in the channel map",
            file=name,
            line=int(lines[i]),
            key=channel_column,
            fix="map it with --map, or pass --skip-unmapped",
        )
    missing = [m.source for m in maps if m.source not in present]
    if missing:
        raise LoggerFileError(
            f"mapped channel {missing[0]!r} has no readings in the file", file=name, key="--map"
        )
    keep = ~unmapped
    values = _numbers(
        df[value_column][keep],
        lines[keep],
        name,
        value_column,
        decimal,
        allow_empty=False,
        source_lines=source_lines,
        header_line=header_line,
    )
    ch = codes[keep].astype(np.int32)
    t = t_us[keep]
    _rising(t, ch, lines[keep], name, df.columns[0], maps)
    return t, ch, _in_plan_units(values, ch, lines[keep], maps, name, value_column)


def _wide(
    df: pd.DataFrame,
    lines: npt.NDArray[Any],
    t_us: npt.NDArray[np.int64],
    maps: list[ChannelMapping],
    name: str,
    time_column: str,
    decimal: str,
    skip_unmapped: bool,
    header_line: int,
    source_lines: _Lines,
) -> tuple[npt.NDArray[np.int64], npt.NDArray[np.int32], npt.NDArray[np.float64]]:
    import numpy as np

    for m in maps:
        if m.source not in df.columns:
            raise LoggerFileError(
                f"no column {m.source!r} (columns are: {', '.join(df.columns)})",
                file=name,
                line=header_line,
                key="--map",
            )
    others = [c for c in df.columns if c != time_column and c not in {m.source for m in maps}]
    if others and not skip_unmapped:
        raise LoggerFileError(
            f"column {others[0]!r} is not in the channel map",
            file=name,
            line=header_line,
            fix="map it with --map, or pass --skip-unmapped",
        )
    n, k = len(df), len(maps)
    block = np.empty((n, k), dtype=np.float64)
    for j, m in enumerate(maps):
        block[:, j] = _numbers(
            df[m.source],
            lines,
            name,
            m.source,
            decimal,
            allow_empty=True,
            source_lines=source_lines,
            header_line=header_line,
        )
    dt_ok = np.diff(t_us) > 0
    if not dt_ok.all():
        i = int(np.argmin(dt_ok))
        verb = "repeats" if t_us[i + 1] == t_us[i] else "goes back from"
        raise LoggerFileError(
            f"time stamp {verb} the one on line {int(lines[i])}",
            file=name,
            line=int(lines[i + 1]),
            key=time_column,
            fix="times must rise; remove duplicated or out-of-order lines",
        )
    flat = block.reshape(-1)
    present = ~np.isnan(flat)
    t = np.repeat(t_us, k)[present]
    ch = np.tile(np.arange(k, dtype=np.int32), n)[present]
    row_lines = np.repeat(lines, k)[present]
    return t, ch, _in_plan_units(flat[present], ch, row_lines, maps, name, None)


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
    """The header, first ``rows`` rows and the mappable sources of a logger file.

    Raises LoggerFileError when the file cannot be decoded or has no header.
    """
    import csv

    opt = options or ReadOptions()
    text = _decode(content, name, opt.encoding)
    columns = _header(text, opt.delimiter, opt.skip_lines)
    if not columns or columns == [""]:
        raise LoggerFileError("no header line", file=Path(name), key="--skip-lines")
    layout = opt.layout
    if layout == "auto":
        layout = "long" if {opt.channel_column, opt.value_column} <= set(columns) else "wide"
    head = _head(text, opt.skip_lines + 1 + PREVIEW_SCAN)[opt.skip_lines + 1 :]
    body = [r for r in csv.reader(head, delimiter=opt.delimiter) if r]
    if layout == "long" and opt.channel_column in columns:
        at = columns.index(opt.channel_column)
        sources = list(dict.fromkeys(r[at].strip() for r in body if len(r) > at))
    else:
        sources = [c for c in columns if c != opt.time_column]
    return Preview(layout=layout, columns=columns, rows=body[:rows], sources=sources)
