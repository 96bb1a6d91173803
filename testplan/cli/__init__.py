"""The testplan command line: one typer app, one module per command group.

Nothing heavy is imported here at module level (see tests/test_startup.py): command
bodies import pandas, SQLAlchemy and weasyprint when they need them.
"""

from __future__ import annotations

import typer

from testplan import __version__
from testplan.cli import equipment, keys_cmd, people, record, signoff_cmd, store_cmd
from testplan.cli.common import command_group
from testplan.cli.init_cmd import init_command
from testplan.cli.judge_cmd import judge_command
from testplan.cli.plan import PLAN_EPILOG, plan_command
from testplan.cli.report_cmd import report_command
from testplan.cli.serve_cmd import serve_command

app = command_group(
    "Plan, record, judge and report qualification tests of sealed products "
    "(IP code ingress, salt mist, cycle endurance).",
    name="testplan",
)


def _version(value: bool) -> None:
    if value:
        typer.echo(f"testplan {__version__}")
        raise typer.Exit()


@app.callback()
def _root(
    version: bool = typer.Option(
        False, "--version", callback=_version, is_eager=True, help="Print the version and exit."
    ),
) -> None:
    """Plan, record, judge and report qualification tests of sealed products."""


app.command("plan", epilog=PLAN_EPILOG)(plan_command)
app.command("init")(init_command)
app.command("judge")(judge_command)
app.command("report")(report_command)
app.command("sign")(signoff_cmd.sign_command)
app.command("amend")(signoff_cmd.amend_command)
app.command("verify")(signoff_cmd.verify_command)
app.command("serve")(serve_command)
app.add_typer(keys_cmd.app, name="keys")
app.add_typer(record.app, name="record")
app.add_typer(equipment.app, name="equipment")
app.add_typer(people.app, name="people")
app.add_typer(store_cmd.app, name="store")


def main() -> None:
    """Entry point of the ``testplan`` console script."""
    app()
