"""Time stamps that are not ISO 8601: the format and the date order decided from the data.

A day field above 12 settles day/month against month/day; when the whole file stays
ambiguous the reader refuses and asks for ``--date-order``. ``24:00`` is the next
midnight. Elapsed seconds or ``HH:MM:SS`` since the start need ``--start``.
"""

from __future__ import annotations

import datetime as dt
import re
from typing import TYPE_CHECKING, Any

from testplan.errors import LoggerFileError

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

DATES = {
    "ymd": ("%Y/%m/%d", "%Y.%m.%d", "%Y-%m-%d"),
    "dmy": ("%d/%m/%Y", "%d.%m.%Y", "%d-%m-%Y", "%d/%m/%y", "%d.%m.%y"),
    "mdy": ("%m/%d/%Y", "%m-%d-%Y", "%m/%d/%y"),
}
TIMES = ("%H:%M:%S", "%H:%M", "%H:%M:%S.%f", "%I:%M:%S %p", "%I:%M %p")
_ELAPSED = re.compile(r"^\s*(?:\d+(?:\.\d+)?|\d+:\d\d:\d\d(?:\.\d+)?)\s*$")
_OFFSET = re.compile(r"^(?:UTC|GMT)?\s*([+-])(\d\d):?(\d\d)$")


def fixed_offset(text: str) -> dt.timezone | None:
    """``+01:00`` / ``-0500`` / ``UTC+01:00`` as a fixed zone; None when not an offset."""
    m = _OFFSET.match(text.strip())
    if m is None:
        return None
    minutes = int(m[2]) * 60 + int(m[3])
    if minutes > 18 * 60:
        return None
    return dt.timezone(dt.timedelta(minutes=minutes if m[1] == "+" else -minutes))


def is_elapsed(raw: pd.Series[Any]) -> bool:
    """Whether a time column holds elapsed seconds or ``HH:MM:SS`` rather than dates."""
    return bool(raw.str.match(_ELAPSED).all())


def elapsed_us(raw: pd.Series[Any]) -> Any:
    """Elapsed seconds or ``HH:MM:SS(.f)`` as integer microseconds since the start."""
    import numpy as np
    import pandas as pd

    text = raw.str.strip()
    if text.str.contains(":").any():
        td = pd.to_timedelta(text, errors="coerce")
        return td, td.isna().to_numpy()
    sec = pd.to_numeric(text, errors="coerce")
    bad = sec.isna().to_numpy()
    return pd.to_timedelta(np.where(bad, 0, sec), unit="s"), bad


def parse_local(
    raw: pd.Series[Any],
    lines: Any,
    name: str,
    column: str,
    date_order: str | None,
    time_format: str | None,
) -> tuple[pd.Series[Any], str]:
    """Naive date-times from stamps in any of the formats above; returns them and the format."""
    import numpy as np
    import pandas as pd

    text, midnight = _midnight(raw)
    candidates = _candidates(date_order, time_format)
    found: dict[str, tuple[pd.Series[Any], str]] = {}
    for order, formats in candidates.items():
        for f in formats:
            try:
                parsed = pd.to_datetime(text, format=f, errors="coerce")
            except ValueError:
                raise _bad_format(time_format) from None
            if not parsed.isna().any():
                found[order] = (parsed, f)
                break
    if "dmy" in found and "mdy" in found and not found["dmy"][0].equals(found["mdy"][0]):
        raise LoggerFileError(
            f"day and month cannot be told apart in any time stamp (first {raw.iloc[0]!r})",
            file=name,
            line=int(lines[0]),
            key=column,
            fix="say which with --date-order dmy or --date-order mdy",
        )
    if not found:
        # name the first stamp that no candidate reads
        best = None
        for formats in candidates.values():
            for f in formats:
                parsed = pd.to_datetime(text, format=f, errors="coerce")
                bad = parsed.isna().to_numpy()
                first_bad = int(np.argmax(bad))
                if best is None or first_bad > best:
                    best = first_bad
        i = best or 0
        raise LoggerFileError(
            f"cannot read {raw.iloc[i]!r} as a time stamp",
            file=name,
            line=int(lines[i]),
            key=column,
            fix="give its format with --time-format, e.g. '%d/%m/%Y %H:%M:%S'",
        )
    parsed, fmt = next(iter(found.values()))
    if midnight.any():
        parsed = parsed + pd.to_timedelta(midnight.to_numpy().astype(int), unit="D")
    return parsed, fmt


def _candidates(date_order: str | None, time_format: str | None) -> dict[str, list[str]]:
    if time_format is not None:
        return {"given": [time_format]}
    orders = [date_order] if date_order else list(DATES)
    return {o: [f"{d} {t}" for d in DATES[o] for t in TIMES] for o in orders if o in DATES}


class FormatChoice:
    """The format of a time column fed chunk by chunk, decided as ``parse_local`` decides
    it over the whole column: per date order the first format that reads every stamp;
    day-first and month-first both reading the column differently is refused. A large
    file's column is never held whole."""

    def __init__(
        self, name: str, column: str, date_order: str | None, time_format: str | None
    ) -> None:
        self.name, self.column, self.time_format = name, column, time_format
        self.alive = _candidates(date_order, time_format)
        # per format that failed: (index in the column, the stamp, its line)
        self.failed: dict[str, tuple[int, str, int]] = {}
        self.differ: set[tuple[str, str]] = set()
        self.seen = 0
        self.first: tuple[str, int] | None = None

    def feed(self, raw: pd.Series[Any], lines: Any) -> None:
        """Try the formats still in the running on the next stamps (in file order)."""
        import numpy as np
        import pandas as pd

        if self.first is None:
            self.first = (str(raw.iloc[0]), int(lines[0]))
        text, _ = _midnight(raw)
        parsed: dict[str, pd.Series[Any]] = {}
        for formats in self.alive.values():
            for f in list(formats):
                try:
                    p = pd.to_datetime(text, format=f, errors="coerce")
                except ValueError:
                    raise _bad_format(self.time_format) from None
                bad = p.isna().to_numpy()
                if bad.any():
                    i = int(np.argmax(bad))
                    self.failed[f] = (self.seen + i, str(raw.iloc[i]), int(lines[i]))
                    formats.remove(f)
                else:
                    parsed[f] = p
        for fd in self.alive.get("dmy", []):
            for fm in self.alive.get("mdy", []):
                if not parsed[fd].equals(parsed[fm]):
                    self.differ.add((fd, fm))
        self.seen += len(raw)
        if not any(self.alive.values()):
            raise self._unreadable()

    def decided(self) -> str:
        """The format that read every stamp fed; raises when none or when ambiguous."""
        found = {o: fs[0] for o, fs in self.alive.items() if fs}
        if "dmy" in found and "mdy" in found and (found["dmy"], found["mdy"]) in self.differ:
            first, line = self.first or ("", 0)
            raise LoggerFileError(
                f"day and month cannot be told apart in any time stamp (first {first!r})",
                file=self.name,
                line=line,
                key=self.column,
                fix="say which with --date-order dmy or --date-order mdy",
            )
        if not found:
            raise self._unreadable()
        return next(iter(found.values()))

    def _unreadable(self) -> LoggerFileError:
        # the stamp that the format reading furthest into the column stopped at
        _, shown, line = max(self.failed.values(), key=lambda f: f[0])
        return LoggerFileError(
            f"cannot read {shown!r} as a time stamp",
            file=self.name,
            line=line,
            key=self.column,
            fix="give its format with --time-format, e.g. '%d/%m/%Y %H:%M:%S'",
        )


def _midnight(raw: pd.Series[Any]) -> tuple[pd.Series[Any], Any]:
    """Stamps with '24:00' written as '00:00', and where it was (the next day follows)."""
    text = raw.str.strip()
    midnight = text.str.contains(r"(?:^|\s)24:00(?::00)?(?:\s|$)", regex=True)
    if midnight.any():
        text = text.str.replace(r"(^|\s)24:00(:00)?", r"\g<1>00:00\g<2>", regex=True)
    return text, midnight


def _bad_format(time_format: str | None) -> LoggerFileError:
    return LoggerFileError(
        f"cannot use {time_format!r} as a time format",
        key="--time-format",
        fix="give strftime codes, e.g. '%d/%m/%Y %H:%M:%S'",
    )
