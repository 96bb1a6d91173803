"""Invented bench data for the demo: logger files and observation sheets for the Quorrel Q-Brook
Q-Brook 7 flood-gauge node. Nothing here was measured; it only exercises the tool.

    python sample_campaign/bench_data.py OUT_DIR

writes the files `record_demo.sh` imports. The same seed gives the same files. One run
is made to fail: on the aged leg's immersion the tank is topped up at hour 30 and the
lowest point rises above the required depth for four minutes, and specimen S04 lets
water in under its cable-gland nut.
"""

from __future__ import annotations

import datetime as dt
import math
import random
import sys
from pathlib import Path

RNG = random.Random(20270111)


def _stamp(t: dt.datetime, zoned: bool) -> str:
    return t.isoformat(timespec="seconds") if zoned else t.strftime("%Y-%m-%d %H:%M:%S")


def immersion(path: Path, start: dt.datetime, hours: float, dip_at_h: float | None) -> None:
    """Tank logger, wide, local time without zone, one line a minute: depth in cm, temps in C."""
    lines = ["timestamp,depth_cm,water_C,s1_C,s2_C"]
    minutes = int(hours * 60) + 18  # lowering, 72 h 10 min held, raising
    for m in range(minutes + 1):
        t = start + dt.timedelta(minutes=m)
        if m < 4:
            depth = 53.0 * m  # lowering
        elif m > minutes - 4:
            depth = 53.0 * (minutes - m)
        else:
            depth = 212.0 + RNG.gauss(0, 0.15)
        if dip_at_h is not None and dip_at_h * 60 <= m < dip_at_h * 60 + 4:
            depth = 198.5 + RNG.gauss(0, 0.1)  # topping up: level drawn down
        water = 12.0 + 0.3 * math.sin(m / 720) + RNG.gauss(0, 0.03)
        s1 = water + 3.6 * math.exp(-m / 40) + RNG.gauss(0, 0.05)
        s2 = water + 3.9 * math.exp(-m / 45) + RNG.gauss(0, 0.05)
        lines.append(f"{_stamp(t, False)},{depth:.1f},{water:.2f},{s1:.2f},{s2:.2f}")
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def jet(path: Path, start: dt.datetime) -> None:
    """Jet booth flow meter, long format with offsets, every 5 s: flow L/min, pressure bar."""
    lines = ["time,channel,value"]
    for i in range(0, 3 * 60 + 5, 5):
        t = start + dt.timedelta(seconds=i)
        lines.append(f"{_stamp(t, True)},Q1,{100.0 + RNG.gauss(0, 0.9):.2f}")
        lines.append(f"{_stamp(t, True)},P1,{1.02 + RNG.gauss(0, 0.01):.3f}")
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def endurance(path: Path, start: dt.datetime, cycles: int, rate_per_min: float) -> None:
    """Cycling rig, wide, UTC with Z, a line every 200 cycles: cycles and torque per station."""
    lines = ["time,cycles,tq_st1,tq_st2,tq_st3"]
    base = (26.4, 27.1, 25.8)
    for c in range(0, cycles + 1, 200):
        t = start + dt.timedelta(minutes=c / rate_per_min)
        wear = c / cycles
        tq = [b * (1 - 0.06 * wear) + RNG.gauss(0, 0.25) for b in base]
        lines.append(f"{t.strftime('%Y-%m-%dT%H:%M:%SZ')},{c},{tq[0]:.2f},{tq[1]:.2f},{tq[2]:.2f}")
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


# The spray cabinet's heater overshoots in the second cycle's spray after the door was
# opened: above 35 C (the spray phase's upper limit) for 40 min, up to 35.7 C.
OVERSHOOT = (35.1, 35.3, 35.5, 35.7, 35.6, 35.4, 35.2, 35.1)


def _cabinet(k: int, noise: float) -> float:
    """Cabinet temperature at the k-th 5-minute reading: 34.4 C as each spray starts,
    34.45 to 34.95 C after, and the overshoot from the 40th minute of the second spray."""
    cycle, step = divmod(k, 24 * 12)
    if step == 0:
        return 34.4
    if cycle == 1 and 8 <= step < 8 + len(OVERSHOOT):
        return OVERSHOOT[step - 8]
    return min(34.95, max(34.45, 34.7 + noise))


def salt_mist(cabinet: Path, fog: Path, start: dt.datetime, cycles: int) -> None:
    """Cabinet logger every 5 min (long, UTC) and the fog collection read after each spray."""
    lines = ["time,channel,value"]
    for k in range(cycles * 24 * 12):
        t = start + dt.timedelta(minutes=5 * k)
        stamp = f"{t:%Y-%m-%dT%H:%M:%SZ}"
        if (k * 5 / 60) % 24 < 2:  # the spray cabinet, logged while spraying
            lines.append(f"{stamp},cab_T,{_cabinet(k, RNG.gauss(0, 0.1)):.2f}")
        # the humidity chamber runs on at 40 C and 93 %RH throughout
        lines.append(f"{stamp},hum_T,{40.0 + RNG.gauss(0, 0.4):.2f}")
        lines.append(f"{stamp},hum_RH,{93.0 + RNG.gauss(0, 0.6):.1f}")
    cabinet.write_text("\n".join(lines) + "\n", encoding="utf-8")
    rows = ["time,fog_ml_h,ph"]
    for c in range(cycles):
        t = start + dt.timedelta(hours=24 * c + 2)
        rows.append(
            f"{t:%Y-%m-%dT%H:%M:%SZ},{1.45 + RNG.gauss(0, 0.12):.2f},{6.8 + RNG.gauss(0, 0.05):.2f}"
        )
    fog.write_text("\n".join(rows) + "\n", encoding="utf-8")


def sheet_pass(what: str, specimens: list[str]) -> str:
    """After-test observations of specimens that kept the water out."""
    parts = [f'checkpoint = "after {what}"\n']
    for i, s in enumerate(specimens):
        drop = 0.18 + 0.04 * i
        parts.append(
            f"""
[[ingress]]
specimen = "{s}"
medium = "water"
found = false

[[leak_test]]
specimen = "{s}"
start_pressure = "1200.00 mbar"
end_pressure = "{1200 - drop:.2f} mbar"
duration = "10 min"
start_temperature = "21.4 degC"
end_temperature = "21.4 degC"
barometric_pressure = "1012 mbar"
dead_volume = "45 mL"
gauge = "PG-01"

[[function]]
specimen = "{s}"
result = "pass"

[[insulation]]
specimen = "{s}"
resistance = "{2.4 - 0.3 * i:.1f} Gohm"
test_voltage = "500 V"
meter = "IR-04"
"""
        )
    return "".join(parts)


SHEET_FAIL = (
    sheet_pass("72 h immersion", ["QC-2027-014-S03"])
    + """

[[ingress]]
specimen = "QC-2027-014-S04"
medium = "water"
found = true
where = "film of water under the cable-gland nut, about 0.3 mL"
live_parts = "clear"

[[mass]]
specimen = "QC-2027-014-S04"
before = "1234.5 g"
after = "1234.8 g"

[[function]]
specimen = "QC-2027-014-S04"
result = "pass"

[[insulation]]
specimen = "QC-2027-014-S04"
resistance = "38 Mohm"
test_voltage = "500 V"
meter = "IR-04"

[[photo]]
specimen = "QC-2027-014-S04"
file = "s04-gland.png"
caption = "S04 cable-gland nut, water film at the thread"
"""
)


def photo(path: Path) -> None:
    """A small drawing standing in for the bench photo of S04's gland."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(3, 2), dpi=80)
    ax.add_patch(plt.Circle((0.5, 0.5), 0.35, fill=False, lw=3))
    ax.add_patch(plt.Circle((0.5, 0.5), 0.12, color="0.3"))
    ax.annotate("water film", (0.72, 0.3), (0.95, 0.05), arrowprops={"arrowstyle": "->"})
    ax.set_xlim(0, 1.2)
    ax.set_ylim(0, 1)
    ax.axis("off")
    fig.savefig(path, metadata={"Software": None})
    plt.close(fig)


# Jet tests of the other specimens: S02 on the verification leg, S03-S05 after salt mist.
JETS = {
    f"ip{n}" if leg == "ip-verification" else f"aged{n}": dt.datetime(
        2027, 1, d, h, 5, tzinfo=dt.UTC
    )
    for leg, n, d, h in (
        ("ip-verification", 2, 12, 9),
        ("aged", 1, 21, 9),
        ("aged", 2, 21, 10),
        ("aged", 3, 21, 11),
    )
}
JET_SPECIMEN = {
    "ip2": "QC-2027-014-S02",
    "aged1": "QC-2027-014-S03",
    "aged2": "QC-2027-014-S04",
    "aged3": "QC-2027-014-S05",
}


def main(out: Path) -> None:
    out.mkdir(parents=True, exist_ok=True)
    utc = dt.UTC
    jet(out / "jet-ip1.csv", dt.datetime(2027, 1, 12, 8, 5, tzinfo=utc))
    immersion(out / "tank-ip1.csv", dt.datetime(2027, 1, 12, 16, 10), 72, None)
    endurance(out / "rig-knob.csv", dt.datetime(2027, 1, 12, 11, 0, tzinfo=utc), 54000, 10)
    salt_mist(out / "cabinet.csv", out / "fog.csv", dt.datetime(2027, 1, 18, 8, 0, tzinfo=utc), 3)
    immersion(out / "tank-aged1.csv", dt.datetime(2027, 1, 21, 14, 10), 72, 30.0)
    immersion(out / "tank-aged2.csv", dt.datetime(2027, 1, 25, 8, 10), 72, None)
    # The repeat of the invalid water-8@aged-1 (its tank was drawn down at hour 30).
    immersion(out / "tank-aged1-repeat.csv", dt.datetime(2027, 1, 28, 9, 0), 72, None)
    for name, at in JETS.items():
        jet(out / f"jet-{name}.csv", at)
        (out / f"after-jets-{name}.toml").write_text(sheet_pass("jets", [JET_SPECIMEN[name]]))
    (out / "after-ip1.toml").write_text(
        sheet_pass("72 h immersion", ["QC-2027-014-S01", "QC-2027-014-S02"])
    )
    (out / "after-aged2.toml").write_text(sheet_pass("72 h immersion", ["QC-2027-014-S05"]))
    (out / "after-jets.toml").write_text(sheet_pass("jets", ["QC-2027-014-S01"]))
    (out / "after-aged1.toml").write_text(SHEET_FAIL)
    photo(out / "s04-gland.png")


if __name__ == "__main__":
    if len(sys.argv) != 2:
        sys.exit("usage: python sample_campaign/bench_data.py OUT_DIR")
    main(Path(sys.argv[1]))
