"""Start-up: `testplan --help`, a subcommand's --help, and planning the sample campaign."""

from __future__ import annotations

import sys

from common import ROOT, TESTPLAN, median_of, py, report, run_timed

SAMPLE = str(ROOT / "sample_campaign" / "flood-gauge-node.toml")


def main() -> int:
    typer_base = median_of(lambda: run_timed(py("import typer")))
    ok = report(
        "startup --help", median_of(lambda: run_timed([TESTPLAN, "--help"])), typer_base, 2.5
    )
    ok &= report(
        "startup record import --help",
        median_of(lambda: run_timed([TESTPLAN, "record", "import", "--help"])),
        typer_base,
        3.0,
    )
    pint_base = median_of(lambda: run_timed(py("import pint; pint.UnitRegistry()")))
    ok &= report(
        "plan sample campaign",
        median_of(lambda: run_timed([TESTPLAN, "plan", SAMPLE])),
        pint_base,
        1.5,
    )
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
