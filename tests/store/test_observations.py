"""`testplan record observe`: observations from options or a sheet, photos by SHA-256."""

from __future__ import annotations

import hashlib
import json
import shutil
from pathlib import Path

import pytest

from .conftest import START, Bench

RUN = "water-8@ip-verification-1"
PHOTO = Path(__file__).resolve().parents[1] / "data" / "photos" / "gland-after-immersion.png"

SHEET = """\
specimen = "QC-2027-014-S01"
checkpoint = "after 72 h immersion"

[ingress]
medium = "water"
found = true
where = "film of water under the cable gland nut"
live_parts = "clear"

[mass]
before = "1.2345 kg"
after = "1235.1 g"

[leak_test]
start_pressure = "1200 mbar"
end_pressure = "1199.2 mbar"
duration = "10 min"
start_temperature = "21.4 degC"
end_temperature = "21.3 degC"
barometric_pressure = "1012 mbar"
dead_volume = "50 mL"

[function]
result = "pass"

[insulation]
resistance = "0.42 Gohm"
test_voltage = "500 V"

[[photo]]
file = "gland-after-immersion.png"
caption = "gland nut after drying the outside"

[[note]]
specimen = "QC-2027-014-S02"
text = "no water seen"
"""


def started(bench: Bench) -> Bench:
    bench("record", "start", RUN, *START, "--at", "2027-01-12T16:05Z", "--quiet")
    return bench


def test_a_sheet_is_stored_in_plan_units_with_its_photo(bench: Bench) -> None:
    started(bench)
    shutil.copy(PHOTO, bench.folder / PHOTO.name)
    sheet = bench.write("s01.toml", SHEET)
    result = bench("record", "observe", RUN, "--sheet", str(sheet), "--by", "AK")
    assert result.stdout.strip() == f"{RUN}: 7 observation(s) recorded"
    rows = bench.sql(
        "SELECT o.kind, o.checkpoint, o.data_json, s.serial FROM observation o "
        "LEFT JOIN specimen s ON s.id = o.specimen_id ORDER BY o.recorded_at, o.kind"
    )
    data = {kind: (json.loads(d), serial) for kind, _, d, serial in rows}
    assert data["mass"][0] == {"before": 1234.5, "after": 1235.1}
    leak = data["leak_test"][0]
    assert leak["duration"] == 600.0 and leak["dead_volume"] == 0.05
    assert leak["start_pressure"] == 1200.0 and leak["end_pressure"] == 1199.2
    assert data["insulation"][0] == {"resistance": 420.0, "test_voltage": 500.0}
    assert data["ingress"][0]["found"] is True
    assert data["note"] == ({"text": "no water seen"}, "QC-2027-014-S02")
    assert all(cp == "after 72 h immersion" for _, cp, _, _ in rows)
    sha = hashlib.sha256(PHOTO.read_bytes()).hexdigest()
    assert bench.sql("SELECT sha256, media_type, size FROM attachment") == [
        (sha, "image/png", PHOTO.stat().st_size)
    ]


def test_the_same_photo_twice_is_stored_once(bench: Bench) -> None:
    started(bench)
    for _ in range(2):
        bench(
            "record",
            "observe",
            RUN,
            "--photo",
            str(PHOTO),
            "--checkpoint",
            "after",
            "--by",
            "AK",
            "--quiet",
        )
    assert bench.sql("SELECT count(*) FROM attachment") == [(1,)]
    assert bench.sql("SELECT count(*) FROM observation") == [(2,)]


def test_options_record_ingress_function_insulation_and_torque(bench: Bench) -> None:
    started(bench)
    bench(
        "record",
        "observe",
        RUN,
        "--specimen",
        "QC-2027-014-S02",
        "--ingress",
        "water:none",
        "--function",
        "pass",
        "--insulation",
        "420 Mohm",
        "--by",
        "AK",
        "--quiet",
    )
    kinds = [k for (k,) in bench.sql("SELECT kind FROM observation ORDER BY kind")]
    assert kinds == ["function", "ingress", "insulation"]


def test_bad_sheets_are_refused_naming_line_and_key(bench: Bench) -> None:
    started(bench)
    cases = {
        'after = "1235.1 g"': ('after = "1235.1 s"', ":12: mass.after: '1235.1 s' is not a mass"),
        'result = "pass"': ('result = "ok"', ":24: function.result: expected one of pass, fail"),
        'medium = "water"': ('medium = "steam"', ":5: ingress.medium: expected one of water"),
        "found = true": ('found = "yes"', ":6: ingress.found: expected true or false, got 'yes'"),
        'dead_volume = "50 mL"': (
            'dead_volume = "50 mL"\nleak = 3',
            ":22: leak_test.leak: unknown field 'leak' for leak_test",
        ),
        "[function]": ("[functon]", ":23: functon: unknown observation 'functon'"),
        'specimen = "QC-2027-014-S02"': (
            'specimen = "QC-2027-014-S09"',
            "specimen: specimen 'QC-2027-014-S09' is not on run",
        ),
    }
    shutil.copy(PHOTO, bench.folder / PHOTO.name)
    for old, (new, expected) in cases.items():
        sheet = bench.write("bad.toml", SHEET.replace(old, new))
        line = bench.fail("record", "observe", RUN, "--sheet", str(sheet), "--by", "AK")
        assert expected in line, (old, line)
    assert bench.sql("SELECT count(*) FROM observation") == [(0,)]
    assert bench.sql("SELECT count(*) FROM attachment") == [(0,)]


def test_option_refusals(bench: Bench) -> None:
    started(bench)
    assert "error: --ingress: cannot read 'water'" in bench.fail(
        "record", "observe", RUN, "--ingress", "water", "--by", "AK"
    )
    assert "--insulation: '420' has no unit" in bench.fail(
        "record", "observe", RUN, "--insulation", "420", "--by", "AK"
    )
    assert "nothing to record" in bench.fail("record", "observe", RUN, "--by", "AK")
    assert "cannot read the photo" in bench.fail(
        "record", "observe", RUN, "--photo", "nowhere.jpg", "--by", "AK"
    )
    assert "error: --rating: 11 is above 10" in bench.fail(
        "record", "observe", RUN, "--rating", "11", "--by", "AK"
    )


@pytest.mark.parametrize(
    ("name", "content", "why"),
    [
        ("notes.jpg", b"not a photo at all", "not a JPEG, PNG, WebP, TIFF or HEIC image"),
        ("gland\u202egnp.exe", PHOTO.read_bytes(), "its name holds the character U+202E"),
        ("tab\tname.png", PHOTO.read_bytes(), "its name holds the character U+0009"),
        ("folder.png", None, "not a regular file"),
    ],
)
def test_only_image_files_are_taken_as_photos(
    bench: Bench, name: str, content: bytes | None, why: str
) -> None:
    bench("record", "start", RUN, *START, "--quiet")
    path = bench.folder / name
    if content is None:
        path.mkdir()
    else:
        path.write_bytes(content)
    line = bench.fail("record", "observe", RUN, "--photo", str(path), "--by", "AK")
    shown = path.with_name(name.encode("unicode_escape").decode("ascii"))
    assert line.startswith(f"error: {shown}: photo.file: not taken as a photo: {why}"), line
    assert bench.sql("SELECT count(*) FROM attachment") == [(0,)]


def test_image_types_by_their_first_bytes() -> None:
    from testplan.domain.observations import photo_type

    # source: JPEG (ITU-T T.81), PNG (ISO/IEC 15948), RIFF WebP, TIFF 6.0 and ISO/IEC 23008-12
    # file signatures (from memory)
    assert photo_type(b"\xff\xd8\xff\xe0\x00\x10JFIF") == "image/jpeg"
    assert photo_type(b"\x89PNG\r\n\x1a\n\x00\x00") == "image/png"
    assert photo_type(b"RIFF\x10\x00\x00\x00WEBPVP8 ") == "image/webp"
    assert photo_type(b"II*\x00\x08\x00\x00\x00") == "image/tiff"
    assert photo_type(b"MM\x00*\x00\x00\x00\x08") == "image/tiff"
    assert photo_type(b"\x00\x00\x00\x18ftypheic") == "image/heic"
    assert photo_type(b"%PDF-1.7") is None
    assert photo_type(b"\x00\x00\x00\x18ftypisom") is None  # an MP4 video


def test_an_observation_or_deviation_is_dated_with_at_not_before_the_run_started(
    bench: Bench,
) -> None:
    started(bench)
    observe = ["record", "observe", RUN, "--specimen", "QC-2027-014-S01", "--ingress",
               "water:none", "--by", "AK", "--quiet"]  # fmt: skip
    early = bench.fail(*observe, "--at", "2027-01-12T16:00Z")
    assert early == (
        "error: --at: observation time 2027-01-12 16:00 UTC is before run "
        f"{RUN} started (2027-01-12 16:05 UTC)"
    ), early
    assert bench.sql("SELECT count(*) FROM observation") == [(0,)]
    bench(*observe, "--at", "2027-01-15T16:10Z")
    assert [str(t)[:16] for (t,) in bench.sql("SELECT recorded_at FROM observation")] == [
        "2027-01-15 16:10"
    ]
    deviation = ["record", "deviation", RUN, "--description", "tank topped up for 3 min",
                 "--reason", "slow leak at the tank valve", "--approved-by", "MO",
                 "--key", bench.key("MO"), "--by", "AK", "--quiet"]  # fmt: skip
    early = bench.fail(*deviation, "--at", "2027-01-12T15:00Z")
    assert "deviation time 2027-01-12 15:00 UTC is before run" in early, early
    assert bench.sql("SELECT count(*) FROM deviation") == [(0,)]
    bench(*deviation, "--at", "2027-01-13T10:00Z")
    assert [str(t)[:16] for (t,) in bench.sql("SELECT recorded_at FROM deviation")] == [
        "2027-01-13 10:00"
    ]
