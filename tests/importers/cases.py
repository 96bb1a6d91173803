"""One small file per logger dialect, with what it must read as, worked out by hand.

Each case: file, options (only --map, plus --tz or --start where the file holds no zone or
no absolute time), and for the first mapped channel the UTC instants and plan-unit values.
"""

from __future__ import annotations

from pathlib import Path

DATA = Path(__file__).resolve().parents[1] / "data" / "loggers"

# (file, options, quantity, [(UTC instant, value in plan unit)], dialect facts)
CASES = [
    (
        # 4 March is winter time in London: local = UTC.
        "banner.csv",
        ["--map", '"Temp [°C]"=cabinet_temperature', "--tz", "Europe/London"],
        "cabinet_temperature",
        [
            ("2027-03-04T09:00:00Z", 35.2),
            ("2027-03-04T09:01:00Z", 35.1),
            ("2027-03-04T09:02:00Z", 35.3),
        ],
        {"header_line": 6, "skipped_above": 5, "footer_or_event_rows": 1},
    ),
    (
        # units row 'cm': x10 to mm; processing row 'Avg' skipped too.
        "units-row.csv",
        ["--map", "Level=lowest_point_depth"],
        "lowest_point_depth",
        [("2027-03-04T09:00:00Z", 205.0), ("2027-03-04T09:00:10Z", 206.0)],
        {"header_line": 1, "skipped_below": 2},
    ),
    (
        # +01:00 on each stamp: 10:00 local is 09:00 UTC.
        "utf16-tab.txt",
        ["--map", "2=water_temperature"],
        "water_temperature",
        [("2027-03-04T09:00:00Z", 12.5), ("2027-03-04T09:00:30Z", 12.4)],
        {"encoding": "utf-16", "delimiter": "\t", "header_line": 3},
    ),
    (
        "latin1.csv",
        ["--map", '"Temp (°C)"=cabinet_temperature', "--tz", "+01:00"],
        "cabinet_temperature",
        [("2027-03-04T09:00:00Z", 40.0), ("2027-03-04T09:05:00Z", 40.2)],
        {"encoding": "cp1252", "header_line": 2},
    ),
    (
        # CET in March before the clock change: UTC+1.
        "semicolon-comma.csv",
        ["--map", '"Druck [hPa]"=ambient_pressure', "--tz", "Europe/Berlin"],
        "ambient_pressure",
        [("2027-03-04T09:00:00Z", 1013.2), ("2027-03-04T09:01:00Z", 1013.4)],
        {"delimiter": ";", "decimal": ",", "time_format": "%d.%m.%Y %H:%M:%S"},
    ),
    (
        # 13/03 settles day first.
        "day-first.csv",
        ["--map", "2=lowest_point_depth", "--tz", "UTC"],
        "lowest_point_depth",
        [("2027-03-12T08:00:00Z", 150.0), ("2027-03-13T08:00:00Z", 151.0)],
        {"time_format": "%d/%m/%Y %H:%M:%S"},
    ),
    (
        # 03/13 settles month first.
        "month-first.csv",
        ["--map", "2=lowest_point_depth", "--tz", "UTC"],
        "lowest_point_depth",
        [("2027-03-12T08:00:00Z", 150.0), ("2027-03-13T08:00:00Z", 151.0)],
        {"time_format": "%m/%d/%Y %H:%M:%S"},
    ),
    (
        # US summer time starts 2027-03-14 02:00 (second Sunday of March): EDT = UTC-4.
        # degF -> degC: (68 - 32) * 5/9 = 20, (71.6 - 32) * 5/9 = 22, (77 - 32) * 5/9 = 25.
        "twelve-hour.csv",
        ["--map", "3=water_temperature", "--tz", "America/New_York"],
        "water_temperature",
        [
            ("2027-03-14T15:30:00Z", 20.0),
            ("2027-03-14T16:30:00Z", 22.0),
            ("2027-03-14T17:30:00Z", 25.0),
        ],
        {"time_format": "%m/%d/%Y %I:%M:%S %p"},
    ),
    (
        "date-time.csv",
        ["--map", "3=nozzle_pressure", "--tz", "Europe/London"],
        "nozzle_pressure",
        [("2027-03-04T09:00:00Z", 12.5), ("2027-03-04T09:00:05Z", 12.7)],
        {"time_columns": ["Date", "Time"]},
    ),
    (
        # 24:00 on the 4th is midnight starting the 5th.
        "midnight.csv",
        ["--map", "2=lowest_point_depth", "--tz", "UTC"],
        "lowest_point_depth",
        [
            ("2027-03-04T23:30:00Z", 210.0),
            ("2027-03-05T00:00:00Z", 211.0),
            ("2027-03-05T00:30:00Z", 212.0),
        ],
        {},
    ),
    (
        # start 09:00+01:00 = 08:00Z; then +10 s and +20.5 s.
        "elapsed.csv",
        ["--map", "2=lowest_point_depth", "--start", "2027-03-04T09:00:00+01:00"],
        "lowest_point_depth",
        [
            ("2027-03-04T08:00:00Z", 150.0),
            ("2027-03-04T08:00:10Z", 150.5),
            ("2027-03-04T08:00:20.500000Z", 151.0),
        ],
        {},
    ),
    (
        # 'GMT+01:00' in the banner: 10:00 local is 09:00 UTC.
        "header-zone.csv",
        ["--map", "2=ambient_temperature"],
        "ambient_temperature",
        [("2027-03-04T09:00:00Z", 21.0), ("2027-03-04T09:10:00Z", 21.5)],
        {"zone": "+01:00"},
    ),
    (
        # '---' and an empty cell are no reading; NaN and NA in the other column too.
        "missing.csv",
        ["--map", "2=cabinet_temperature", "--map", "3=humid_rh"],
        "cabinet_temperature",
        [("2027-03-04T09:00:00Z", 35.0), ("2027-03-04T09:02:00Z", 35.2)],
        {"missing": {"Temp [°C]": 2, "RH [%]": 2}},
    ),
    (
        # '1.013,25' with a decimal comma is 1013.25.
        "thousands.csv",
        ["--map", "2=ambient_pressure"],
        "ambient_pressure",
        [("2027-03-04T09:00:00Z", 1013.25), ("2027-03-04T09:01:00Z", 1012.75)],
        {"decimal": ",", "thousands": "."},
    ),
    (
        "trailing.csv",
        ["--map", "2=ambient_temperature"],
        "ambient_temperature",
        [("2027-03-04T09:00:00Z", 21.5), ("2027-03-04T09:01:00Z", 21.7)],
        {"header_line": 2, "skipped_above": 1},
    ),
]
