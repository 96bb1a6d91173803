"""Bench observations: the kinds, their fields, and checking a sheet or options against them.

An observation sheet is a small TOML file; the same keys can be given as options of
``testplan record observe``. Quantities are strings with units (``"1.2345 kg"``) and are
stored in the plan unit listed here. Every problem names the sheet line and key.

```toml
specimen = "QC-2027-014-S01"      # default for the entries below
checkpoint = "after immersion"

[ingress]
medium = "water"                  # water or dust
found = true
where = "film of water inside the cable gland"
live_parts = "clear"              # reached, clear or none inside
harmful = false                   # the observer's call where "no harmful" is allowed

[leak_test]
start_pressure = "1200 mbar"      # absolute
end_pressure = "1199.2 mbar"
duration = "10 min"
start_temperature = "21.4 degC"
end_temperature = "21.3 degC"
barometric_pressure = "1012 mbar"
dead_volume = "0.05 L"            # test circuit, added to the free volume
gauge = "PG-01"                   # optional: its test_pressure calibration gives U

[[photo]]
file = "photos/s01-gland.jpg"
```
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from testplan.domain.units import parse_quantity
from testplan.errors import CampaignFileError, QuantityError


@dataclass(frozen=True)
class FieldSpec:
    """One field of an observation: how it is read and whether it must be there."""

    name: str
    kind: str  # a units kind, or "text", "bool", "int", "choice", "file"
    unit: str | None = None
    required: bool = False
    choices: tuple[str, ...] = ()
    minimum: int | None = None
    maximum: int | None = None


KINDS: dict[str, tuple[FieldSpec, ...]] = {
    "ingress": (
        FieldSpec("medium", "choice", required=True, choices=("water", "dust")),
        FieldSpec("found", "bool", required=True),
        FieldSpec("where", "text"),
        FieldSpec("live_parts", "choice", choices=("reached", "clear", "none inside")),
        FieldSpec("harmful", "bool"),
        FieldSpec("amount", "text"),
    ),
    "probe_entry": (
        FieldSpec("found", "bool", required=True),
        FieldSpec("probe", "text"),
        FieldSpec("detail", "text"),
    ),
    "contact": (
        FieldSpec("found", "bool", required=True),
        FieldSpec("probe", "text"),
        FieldSpec("detail", "text"),
    ),
    "mass": (
        FieldSpec("before", "mass", "g", required=True),
        FieldSpec("after", "mass", "g", required=True),
    ),
    "leak_test": (
        FieldSpec("start_pressure", "pressure", "mbar", required=True),
        FieldSpec("end_pressure", "pressure", "mbar", required=True),
        FieldSpec("duration", "time", "s", required=True),
        FieldSpec("start_temperature", "temperature", "degC", required=True),
        FieldSpec("end_temperature", "temperature", "degC", required=True),
        FieldSpec("barometric_pressure", "pressure", "mbar", required=True),
        FieldSpec("dead_volume", "volume", "L", required=True),
        FieldSpec("gauge", "text"),
    ),
    "function": (
        FieldSpec("result", "choice", required=True, choices=("pass", "fail")),
        FieldSpec("detail", "text"),
    ),
    "insulation": (
        FieldSpec("resistance", "resistance", "Mohm", required=True),
        FieldSpec("test_voltage", "voltage", "V"),
        FieldSpec("meter", "text"),
    ),
    "corrosion": (
        FieldSpec("rating", "int", required=True, minimum=0, maximum=10),
        FieldSpec("detail", "text"),
    ),
    "torque": (
        FieldSpec("cycles", "int", required=True, minimum=0),
        FieldSpec("value", "torque", "N*mm", required=True),
    ),
    "failure": (
        FieldSpec("cycles", "int", required=True, minimum=0),
        FieldSpec("description", "text", required=True),
    ),
    "photo": (
        FieldSpec("file", "file", required=True),
        FieldSpec("caption", "text"),
    ),
    "note": (FieldSpec("text", "text", required=True),),
}

COMMON = ("specimen", "checkpoint")


@dataclass(frozen=True)
class Entry:
    """One checked observation: kind, values in plan units, and where it applies."""

    kind: str
    data: dict[str, Any]
    specimen: str | None
    checkpoint: str | None


def _bad(message: str, key: str, fix: str | None = None) -> CampaignFileError:
    return CampaignFileError(message, key=key, fix=fix)


def check_entry(
    kind: str, raw: dict[str, Any], *, key: str, specimen: str | None, checkpoint: str | None
) -> Entry:
    """Check one table of a sheet (or the options for one kind) and convert its values."""
    if kind not in KINDS:
        from difflib import get_close_matches

        near = get_close_matches(kind, list(KINDS), n=1)
        raise _bad(
            f"unknown observation {kind!r}",
            key,
            f"did you mean {near[0]!r}?" if near else "kinds: " + ", ".join(KINDS),
        )
    if not isinstance(raw, dict):
        raise _bad("expected a table of fields", key)
    specs = {f.name: f for f in KINDS[kind]}
    for name in raw:
        if name not in specs and name not in COMMON:
            raise _bad(
                f"unknown field {name!r} for {kind}", f"{key}.{name}", "fields: " + ", ".join(specs)
            )
    data: dict[str, Any] = {}
    for spec in specs.values():
        k = f"{key}.{spec.name}"
        if spec.name not in raw:
            if spec.required:
                raise _bad(f"missing {spec.name!r}", k)
            continue
        data[spec.name] = _value(spec, raw[spec.name], k)
    if kind == "mass" and data["after"] < 0 or kind == "mass" and data["before"] <= 0:
        raise _bad("masses must be positive", f"{key}.before")
    if kind == "leak_test":
        for p in ("start_pressure", "end_pressure", "barometric_pressure"):
            if data[p] <= 0:
                raise _bad("absolute pressures must be above zero", f"{key}.{p}")
        if data["duration"] <= 0:
            raise _bad("the duration must be above zero", f"{key}.duration")
        if data["dead_volume"] < 0:
            raise _bad("cannot be negative", f"{key}.dead_volume")
    if kind == "insulation" and data["resistance"] < 0:
        raise _bad("cannot be negative", f"{key}.resistance")
    spec_ = raw.get("specimen", specimen)
    point = raw.get("checkpoint", checkpoint)
    for name, val in (("specimen", spec_), ("checkpoint", point)):
        if val is not None and not isinstance(val, str):
            raise _bad("expected text", f"{key}.{name}")
    return Entry(kind, data, spec_, point)


def _value(spec: FieldSpec, value: Any, key: str) -> Any:
    if spec.kind in ("text", "file"):
        if not isinstance(value, str) or not value.strip():
            raise _bad("expected non-empty text", key)
        return value
    if spec.kind == "bool":
        if not isinstance(value, bool):
            raise _bad(f"expected true or false, got {value!r}", key)
        return value
    if spec.kind == "choice":
        if value not in spec.choices:
            raise _bad(f"expected one of {', '.join(spec.choices)}, got {value!r}", key)
        return value
    if spec.kind == "int":
        if isinstance(value, bool) or not isinstance(value, int):
            raise _bad(f"expected a whole number, got {value!r}", key)
        if spec.minimum is not None and value < spec.minimum:
            raise _bad(f"{value} is below {spec.minimum}", key)
        if spec.maximum is not None and value > spec.maximum:
            raise _bad(f"{value} is above {spec.maximum}", key)
        return value
    assert spec.unit is not None
    try:
        return parse_quantity(value, spec.kind, spec.unit, key=key)
    except QuantityError as err:
        raise err.located(key=key) from None


def check_sheet(data: dict[str, Any]) -> list[Entry]:
    """Check a parsed observation sheet; raises CampaignFileError with the key at fault."""
    specimen = data.get("specimen")
    checkpoint = data.get("checkpoint")
    for name, val in (("specimen", specimen), ("checkpoint", checkpoint)):
        if val is not None and not isinstance(val, str):
            raise _bad("expected text", name)
    out = []
    for kind, body in data.items():
        if kind in COMMON:
            continue
        tables = body if isinstance(body, list) else [body]
        for i, table in enumerate(tables):
            key = f"{kind}[{i + 1}]" if isinstance(body, list) else kind
            out.append(check_entry(kind, table, key=key, specimen=specimen, checkpoint=checkpoint))
    if not out:
        raise _bad("the sheet holds no observation", "sheet", "kinds: " + ", ".join(KINDS))
    return out


# --- photos -------------------------------------------------------------------------------

PHOTO_MAX_BYTES = 50 * 1024 * 1024
# (offset, signature, media type); HEIC is an ISO-BMFF "ftyp" box with a HEIF brand
PHOTO_MAGIC = (
    (0, b"\xff\xd8\xff", "image/jpeg"),
    (0, b"\x89PNG\r\n\x1a\n", "image/png"),
    (0, b"II*\x00", "image/tiff"),
    (0, b"MM\x00*", "image/tiff"),
)
HEIF_BRANDS = (b"heic", b"heix", b"hevc", b"hevx", b"heim", b"heis", b"mif1", b"msf1")


def photo_type(head: bytes) -> str | None:
    """The image type of a file from its first bytes (JPEG, PNG, WebP, TIFF, HEIC), or None."""
    for offset, magic, media in PHOTO_MAGIC:
        if head[offset : offset + len(magic)] == magic:
            return media
    if head[:4] == b"RIFF" and head[8:12] == b"WEBP":
        return "image/webp"
    if head[4:8] == b"ftyp" and head[8:12] in HEIF_BRANDS:
        return "image/heic"
    return None


def name_problem(name: str) -> str | None:
    """What is wrong with a file name kept in the records: control or bidi characters."""
    import unicodedata

    for ch in name:
        if unicodedata.category(ch) in ("Cc", "Cf") or unicodedata.bidirectional(ch) in (
            "LRE", "RLE", "LRO", "RLO", "PDF", "LRI", "RLI", "FSI", "PDI"
        ):  # fmt: skip
            return f"its name holds the character U+{ord(ch):04X}; rename the file"
    return None
