"""Report: 120 runs (24 specimens x 5 procedures), each with a logged plot, against
weasyprint alone printing the same finished HTML; the PDF must stay under 20 MB.

The store is filled in one warm process through the command-line app (about 6.5 million
samples: the 72 h immersions are logged at 1 Hz). `testplan report` is then timed as a
whole process, and so is the baseline (importing weasyprint and printing the HTML that
testplan wrote with --html).
"""

from __future__ import annotations

import re
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

from common import ROOT, TESTPLAN, median_of, py, report, run_timed

PDF_LIMIT_MB = 20

FILL = r"""
import datetime as dt, json, sys
import numpy as np
import typer
from testplan.cli import app

db, work = sys.argv[1], sys.argv[2]

def call(*args):
    try:
        app([*args, "--db", db, "-q"], standalone_mode=False)
    except (SystemExit, typer.Exit) as done:
        code = getattr(done, "exit_code", getattr(done, "code", 0))
        if code not in (0, 3, None):
            raise SystemExit(f"{args[:3]} failed with {code}")

import os
os.environ["TESTPLAN_KEY"] = f"{work}/qm.pem"
os.environ["TESTPLAN_KEY_PASSPHRASE"] = "bench manager passphrase"
call("people", "add", "QM", "--name", "Quinn Marsh", "--role", "manager")
try:
    app(["keys", "new", "QM", "--out", f"{work}/qm.pem"], standalone_mode=False)
except (SystemExit, typer.Exit):
    pass
call("keys", "register", "QM", "--public", f"{work}/qm.pem.pub", "--by", "QM")
call("people", "add", "AK", "--name", "Anna Kowal", "--role", "operator", "--by", "QM")
call("init", f"{work}/campaign.toml")
call("equipment", "add", "LT-03", "--description", "bench instruments", "--by", "AK")
CHANNELS = {"probe_force": ("N", 0.05), "depression": ("kPa", 0.05),
            "extraction_rate": ("L/h", 1), "flow": ("L/min", 0.5),
            "lowest_point_depth": ("mm", 4)}
for channel, (unit, u) in CHANNELS.items():
    call("equipment", "calibrate", "LT-03", "--channel", channel, "--certificate", "C-1",
         "--provider", "P", "--calibrated", "2026-06-01", "--due", "2027-12-01",
         "--uncertainty", f"{u} {unit}", "--by", "AK")

# procedure: (quantity, unit, seconds logged at 1 Hz, level)
LOGS = {"probe-access-d": ("probe_force", "N", 600, 1.0),
        "dust-6": ("depression", "kPa", 8 * 3600, 2.0),
        "water-6": ("flow", "L/min", 1800, 100.0),
        "water-7": ("lowest_point_depth", "mm", 1800, 1100.0),
        "water-8": ("lowest_point_depth", "mm", 72 * 3600 + 600, 2100.0)}
t0 = dt.datetime(2027, 1, 12, 8, 0, tzinfo=dt.UTC)
rng = np.random.default_rng(11)
for proc, (quantity, unit, seconds, level) in LOGS.items():
    stamps = (np.datetime64("2027-01-12T08:00:00") + np.arange(seconds).astype("timedelta64[s]"))
    values = level * (1 + rng.normal(0, 0.002, seconds))
    with open(f"{work}/{proc}.csv", "w") as f:
        f.write("time,reading\n")
        f.write("\n".join(f"{s}Z,{v:.4f}" for s, v in zip(stamps.astype(str), values)))
        f.write("\n")

plan = json.load(open(f"{work}/plan.json"))
for run in plan["schedule"]["runs"]:
    quantity, unit, seconds, _ = LOGS[run["procedure"]]
    end = (t0 + dt.timedelta(seconds=seconds)).strftime("%Y-%m-%dT%H:%M:%SZ")
    call("record", "start", run["id"], "--operator", "AK", "--equipment", "LT-03",
         "--ambient-temperature", "21 degC", "--ambient-humidity", "45 %",
         "--ambient-pressure", "1012 hPa", "--state-ok", "--at", "2027-01-12T08:00Z")
    call("record", "import", run["id"], f"{work}/{run['procedure']}.csv",
         "--map", f"reading[{unit}]={quantity}@LT-03", "--by", "AK")
    call("record", "finish", run["id"], "--by", "AK", "--at", end)
call("judge")
"""

WEASYPRINT = """
import sys
from weasyprint import HTML
HTML(filename=sys.argv[1], base_url=".").render().write_pdf(sys.argv[2])
"""


def campaign_text() -> str:
    """The sample campaign with one leg of 24 specimens through five procedures, each
    facility taking one specimen at a time: 120 runs of one specimen each."""
    text = (ROOT / "sample_campaign" / "flood-gauge-node.toml").read_text(encoding="utf-8")
    text = text.replace('code = "IP66/IP68"', 'code = "IP66/IP67/IP68"')
    text = text.replace('serves = ["water-8"]', 'serves = ["water-7", "water-8"]')
    text = re.sub(r"capacity = \d+", "capacity = 1", text)
    legs = text.index("[[leg]]")
    facilities = text.index("[[facility]]")
    leg = '[[leg]]\nname = "batch"\nspecimens = 24\ntests = ["probe", "dust", "water"]\n\n'
    return text[:legs] + leg + text[facilities:]


def main() -> int:
    work = Path(tempfile.mkdtemp(prefix="tp-bench-"))
    try:
        campaign = work / "campaign.toml"
        campaign.write_text(campaign_text(), encoding="utf-8")
        plan = subprocess.run(
            [TESTPLAN, "plan", str(campaign), "--json"], check=True, capture_output=True
        )
        (work / "plan.json").write_bytes(plan.stdout)
        db = str(work / "store.db")
        script = work / "fill.py"
        script.write_text(FILL)
        filled = subprocess.run(
            [sys.executable, str(script), db, str(work)], capture_output=True, text=True
        )
        if filled.returncode != 0:
            raise SystemExit(f"filling the store failed:\n{filled.stderr}")
        pdf, html = work / "report.pdf", work / "report.html"
        cmd = [TESTPLAN, "report", "QC-2027-014", "-o", str(pdf), "--html", str(html), "--db", db]
        ours = median_of(lambda: run_timed([*cmd, "-q"]))
        base_pdf = work / "baseline.pdf"
        base = median_of(lambda: run_timed([*py(WEASYPRINT), str(html), str(base_pdf)]))
        size_mb = pdf.stat().st_size / 1e6
        runs = html.read_text(encoding="utf-8").count('<section class="run"')
        ok = report(f"report of {runs} runs", ours, base, 1.5)
        ok &= size_mb < PDF_LIMIT_MB
        print(
            f"report PDF size: {size_mb:.1f} MB (limit {PDF_LIMIT_MB} MB) -> "
            f"{'ok' if size_mb < PDF_LIMIT_MB else 'MISSED'}",
            flush=True,
        )
    finally:
        shutil.rmtree(work, ignore_errors=True)
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
