"""The report fixture store: an immersion run with a dip (invalidated, its repeat planned)
and an endurance run, with every kind of bench observation, judged. Each report test module
builds it once (module scope) and renders it once: rendering is the slow part."""

from __future__ import annotations

import datetime as dt
from pathlib import Path

from tests.store.conftest import SAMPLE, START, Bench

RUN = "water-8@ip-verification-1"
KNOB = "endurance-mode-selector-knob@aged-1"

# Every field an observation can carry, on the immersion run (S01) and the rig (S03).
SHEET = """
specimen = "QC-2027-014-S01"
checkpoint = "after 72 h immersion"

[ingress]
medium = "water"
found = true
where = "drop under the lid seal at the cable entry"
amount = "about 0.2 mL"
live_parts = "clear"

[mass]
before = "412.35 g"
after = "412.61 g"

[leak_test]
start_pressure = "1200 mbar"
end_pressure = "1199.8 mbar"
duration = "10 min"
start_temperature = "21.4 degC"
end_temperature = "21.4 degC"
barometric_pressure = "1012 mbar"
dead_volume = "45 mL"
gauge = "PG-01"

[insulation]
resistance = "2.1 Gohm"
test_voltage = "500 V"
meter = "IR-04"

[note]
text = "lid screws re-torqued by the client before delivery"
"""

KNOB_SHEET = """
specimen = "QC-2027-014-S03"

[[torque]]
checkpoint = "cycle 0"
cycles = 0
value = "26 N*mm"

[[torque]]
checkpoint = "end"
cycles = 54000
value = "24.5 N*mm"

[[failure]]
cycles = 41000
description = "detent spring cracked"
"""

INSTRUMENTS = (
    ("LT-03", "lowest_point_depth", "4 mm", ()),
    ("TQ-11", "cycle_count", "0", ()),
    ("PG-01", "test_pressure", "0.05 mbar", ("800 mbar", "1600 mbar")),
    ("IR-04", "insulation_resistance", "20 Mohm", ("1 Mohm", "10000 Mohm")),
)


def build_store(folder: Path) -> Bench:
    """The fixture campaign, recorded and judged in a new SQLite store under ``folder``."""
    b = Bench(f"sqlite:///{folder / 'lab.db'}", folder)
    b.found()
    b.add("AK", "Anna Kowal", "operator")
    b.add("MO", "Mark Osei", "checker", "approver")
    b.enrol("MO")
    b("init", str(SAMPLE), "--quiet")
    b(
        *("record", "receive", "QC-2027-014-S01", "QC-2027-014-S02", "--on", "2027-01-06"),
        *("--condition", "new, sealed carton", "--by", "AK", "--quiet"),
    )
    for tag, channel, u, rng in INSTRUMENTS:
        b("equipment", "add", tag, "--description", f"{channel} sensor", "--quiet")
        b(
            *("equipment", "calibrate", tag, "--channel", channel, "--certificate", f"VC-{tag}"),
            *("--provider", "Gellimoor Calibration Ltd", "--calibrated", "2026-06-01"),
            *("--due", "2027-06-01", "--uncertainty", u, "--quiet"),
            *(("--range", *rng) if rng else ()),
        )
    b(
        *("record", "start", RUN, *START, "--at", "2027-01-12T16:05Z"),
        *("--deviation", "tank topped up during the run", "--deviation-reason", "evaporation"),
        *("--approved-by", "MO", "--key", b.key("MO"), "--quiet"),
    )
    t0 = dt.datetime(2027, 1, 12, 16, 5, tzinfo=dt.UTC)
    rows = ["time,depth"]
    for m in range(4400):
        depth = 2000.0 if m in (600, 601) else 2100.0
        rows.append(f"{t0 + dt.timedelta(minutes=m):%Y-%m-%dT%H:%M:%SZ},{depth}")
    tank = b.write("tank.csv", "\n".join(rows) + "\n")
    b(
        *("record", "import", RUN, str(tank), "--map", "depth[mm]=lowest_point_depth@LT-03"),
        *("--by", "AK", "--quiet"),
    )
    b("record", "observe", RUN, "--sheet", str(b.write("s01.toml", SHEET)), "--by", "AK", "--quiet")
    b("record", "finish", RUN, "--by", "AK", "--at", "2027-01-15T17:30Z", "--quiet")
    # The dip is a failed test condition: the run is declared invalid and its repeat planned.
    b("record", "invalidate", RUN, "--reason", "tank level dipped at hour 10", "--by", "MO")
    start = [a if a != "LT-03" else "TQ-11" for a in START]
    b("record", "start", KNOB, *start, "--at", "2027-01-12T11:00Z", "--quiet")
    k0 = dt.datetime(2027, 1, 12, 11, tzinfo=dt.UTC)
    rig = b.write(
        "rig.csv",
        "time,cycles\n"
        + "".join(
            f"{k0 + dt.timedelta(minutes=c / 10):%Y-%m-%dT%H:%M:%SZ},{c}\n"
            for c in range(0, 54_001, 1000)
        ),
    )
    b(
        *("record", "import", KNOB, str(rig), "--map", "cycles[cycle]=cycle_count@TQ-11"),
        *("--by", "AK", "--quiet"),
    )
    knob = b.write("knob.toml", KNOB_SHEET)
    b("record", "observe", KNOB, "--sheet", str(knob), "--by", "AK", "--quiet")
    b("record", "finish", KNOB, "--by", "AK", "--at", "2027-01-16T05:05Z", "--quiet")
    b("judge", "--quiet", ok=False)
    return b
