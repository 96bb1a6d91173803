"""How a logger file is written, decided from the file itself: encoding, delimiter, the
header line among banner lines, units rows under it, and a zone the header states.

Pure functions on bytes and text; no pandas. Every choice is reported back so that
``record preview`` can show it and ``record import`` can keep it with the raw file.
"""

from __future__ import annotations

import csv
import re
from collections import Counter
from dataclasses import dataclass

from testplan.errors import LoggerFileError
from testplan.importers.source import RawSource

DELIMITER_WORDS = {"tab": "\t", "\\t": "\t", "comma": ",", "semicolon": ";", "space": " "}
MISSING_MARKERS = ("", "NA", "NaN", "NAN", "nan", "-", "---", "N/A")
_HEAD_LINES = 200
_ZONE_IN_TEXT = re.compile(
    r"(?<![A-Za-z])(?:(?:UTC|GMT)\s*(?P<sign>[+-])\s*(?P<h>\d{1,2})(?::?(?P<m>\d\d))?"
    r"|(?P<utc>UTC|GMT)(?![A-Za-z+-]))"
)


@dataclass
class Dialect:
    """What was found: everything ``record preview`` shows under ``dialect``."""

    encoding: str
    delimiter: str
    header_line: int  # 1-based line of the header
    skipped_above: int  # banner and metadata lines (and a sep= hint) above the header
    skipped_below: int  # units or processing rows directly under the header
    header: list[str]
    units_row: list[str]
    zone: str | None = None
    zone_from: str | None = None


def delimiter_option(text: str) -> str | None:
    """``--delimiter`` as given: a word (``tab``, ``\\t``, ``semicolon``) or one character."""
    if text in ("", "auto"):
        return None
    word = DELIMITER_WORDS.get(text.lower(), text)
    if len(word) != 1 or word in '"\r\n':
        raise LoggerFileError(
            f"cannot use {text!r} as the delimiter",
            key="--delimiter",
            fix="give one character, or tab, comma, semicolon or space",
        )
    return word


def decode(
    content: bytes | RawSource, name: str, encoding: str, limit: int | None = None
) -> tuple[str, str]:
    """The file's text with one line end, and the encoding used (found when ``auto``).

    The whole file is checked to decode, a megabyte at a time; with ``limit`` only the text
    of about the first ``limit`` bytes is returned, ending at a line end (the head that
    detection reads), so a large file is never held whole as text.
    """
    source = content if isinstance(content, RawSource) else RawSource(data=content)
    start = source.head(3)
    if encoding == "auto":
        if start.startswith((b"\xff\xfe", b"\xfe\xff")):
            encoding = "utf-16"
        elif start.startswith(b"\xef\xbb\xbf"):
            encoding = "utf-8-sig"
        else:
            encoding = "utf-8"
            if _bad_byte(source, "utf-8") is not None:
                encoding = "cp1252" if _bad_byte(source, "cp1252") is None else "latin-1"
    try:
        bad = _bad_byte(source, encoding)
    except LookupError:
        raise LoggerFileError(f"unknown encoding {encoding!r}", key="--encoding") from None
    if bad is not None:
        byte, line = bad
        raise LoggerFileError(
            f"byte {byte:#04x} is not valid {encoding}",
            file=name,
            line=line,
            fix="give the file's encoding with --encoding, e.g. cp1252",
        )
    if limit is None or source.size <= limit:
        text = source.read().decode(encoding)
    else:
        import codecs

        text = codecs.getincrementaldecoder(encoding)().decode(source.head(limit))
        text = text[: text.rfind("\n") + 1] if "\n" in text else text
    text = text.removeprefix("\ufeff")
    if "\r" in text:
        # One line end for every reader here, so line numbers in messages agree with
        # the parser's (the stored bytes are kept as received).
        text = text.replace("\r\n", "\n").replace("\r", "\n")
    return text, encoding


def _bad_byte(source: RawSource, encoding: str) -> tuple[int, int] | None:
    """The first byte that does not decode and its line, or None; decoded a megabyte at a
    time so that checking a large file never holds its whole text."""
    import codecs

    decoder = codecs.getincrementaldecoder(encoding)()
    lines = 1
    done = 0
    for piece in source.pieces():
        held = decoder.getstate()[0]
        try:
            decoder.decode(piece, final=done + len(piece) >= source.size)
        except UnicodeDecodeError as err:
            joined = held + piece
            return joined[err.start], lines + joined.count(b"\n", 0, err.start) - held.count(b"\n")
        lines += piece.count(b"\n")
        done += len(piece)
    if done == 0:
        decoder.decode(b"", final=True)
    return None


def _fields(line: str, delimiter: str) -> list[str]:
    try:
        row = next(csv.reader([line], delimiter=delimiter), [])
    except csv.Error:
        return [line]
    while row and not row[-1].strip():
        row.pop()  # trailing delimiters
    return [c.strip() for c in row]


def _numberish(cell: str) -> bool:
    return bool(re.match(r"^[+-]?[\d.,: /-]+(?:[ T]?\d.*)?$", cell.strip())) and any(
        ch.isdigit() for ch in cell
    )


def detect(
    text: str,
    delimiter: str | None,
    skip_lines: int | None,
    encoding: str,
    names: tuple[str, ...] = (),
) -> Dialect:
    """Find the delimiter, the header among banner lines and the units rows below it."""
    head = text.split("\n", _HEAD_LINES)[:_HEAD_LINES]
    hint = 0
    if head and re.match(r"^\s*\"?sep=(.)\"?\s*$", head[0]):
        if delimiter is None:
            delimiter = re.match(r"^\s*\"?sep=(.)", head[0])[1]  # type: ignore[index]
        hint = 1
    body = [ln for ln in head[hint:] if ln.strip()]
    if delimiter is None:
        delimiter = _guess_delimiter(body)
    widths = [len(_fields(ln, delimiter)) for ln in head]
    if skip_lines is None:
        named = next(
            (
                i
                for i in range(hint, len(head))
                if names and set(names) <= set(_fields(head[i], delimiter))
            ),
            None,
        )
        skip_lines = named if named is not None else _find_header(head, widths, hint, delimiter)
    header = _fields(head[skip_lines], delimiter) if skip_lines < len(head) else []
    below = 0
    units_row: list[str] = []
    for ln in head[skip_lines + 1 :]:
        cells = _fields(ln, delimiter)
        if not cells or not ln.strip() or _numberish(cells[0]):
            break
        if not units_row:
            units_row = cells
        below += 1
    zone, zone_from = None, None
    for i, ln in enumerate(head[: skip_lines + 1]):
        z = zone_in(ln)
        if z is not None:
            zone, zone_from = z, f"line {i + 1}: {ln.strip()[:60]}"
            break
    return Dialect(
        encoding=encoding,
        delimiter=delimiter,
        header_line=skip_lines + 1,
        skipped_above=skip_lines,
        skipped_below=below,
        header=header,
        units_row=units_row,
        zone=zone,
        zone_from=zone_from,
    )


def _find_header(head: list[str], widths: list[int], hint: int, delimiter: str) -> int:
    """The header: above the first data line, the last line of as many fields that is not a
    units or processing row (banner and metadata lines above it have fewer fields or come
    before it)."""
    common = Counter(w for w in widths[hint:] if w > 1).most_common(1)
    width = common[0][0] if common else 1
    rows = [_fields(ln, delimiter) for ln in head]
    first_data = next(
        (
            i
            for i in range(hint, len(head))
            if widths[i] >= width and rows[i] and _numberish(rows[i][0])
        ),
        len(head),
    )
    i = first_data - 1
    header = None
    while i >= hint and widths[i] >= min(width, 2) and head[i].strip():
        if not all(_units_like(c) for c in rows[i]):
            header = i
            break
        i -= 1
    if header is None:
        return next((i for i in range(hint, len(head)) if widths[i] >= width), hint)
    return header


_PROCESSING = {"avg", "min", "max", "smp", "mean", "sample", "inst", "actual", "unit", "units"}


def _units_like(cell: str) -> bool:
    low = cell.strip().lower()
    return (
        low == "" or low in UNIT_WORDS or low in _PROCESSING or bool(_UNIT_IN_HEADER.fullmatch(low))
    )


def zone_in(text: str) -> str | None:
    """A zone written in a header or banner line (``GMT+01:00``, ``UTC``) as ``+hh:mm``."""
    m = _ZONE_IN_TEXT.search(text)
    if m is None:
        return None
    if m["utc"]:
        return "+00:00"
    return f"{m['sign']}{int(m['h']):02d}:{m['m'] or '00'}"


def _guess_delimiter(lines: list[str]) -> str:
    sample = "\n".join(lines[-50:])
    try:
        return csv.Sniffer().sniff(sample, delimiters=",;\t|").delimiter
    except csv.Error:
        counts = {d: sample.count(d) for d in (";", "\t", ",")}
        best = max(counts, key=lambda d: counts[d])
        return best if counts[best] else ","


UNIT_WORDS = {
    "°c": "degC",
    "c": "degC",
    "degc": "degC",
    "°f": "degF",
    "f": "degF",
    "degf": "degF",
    "%": "percent",
    "%rh": "percent",
    "rh%": "percent",
    "kpa": "kPa",
    "hpa": "hPa",
    "pa": "Pa",
    "mbar": "mbar",
    "bar": "bar",
    "psi": "psi",
    "m": "m",
    "cm": "cm",
    "mm": "mm",
    "v": "V",
    "n·m": "N*m",
    "nm": "N*m",
}
_UNIT_IN_HEADER = re.compile(r"[\[(]\s*([^\])]+?)\s*[\])]\s*$")


def unit_of(header: str, units_row_cell: str | None) -> str | None:
    """The unit a header (``Temp [°C]``, ``RH(%)``) or its units-row cell states."""
    for text in (units_row_cell, header):
        if not text:
            continue
        m = _UNIT_IN_HEADER.search(text)
        word = (m[1] if m else text).strip().lower()
        if word in UNIT_WORDS:
            return UNIT_WORDS[word]
    return None
