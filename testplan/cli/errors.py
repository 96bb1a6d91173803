"""Turn TestplanError into one line on stderr and its exit code, once for every command."""

from __future__ import annotations

import functools
from collections.abc import Callable
from typing import ParamSpec, TypeVar

import typer

from testplan.errors import TestplanError

P = ParamSpec("P")
R = TypeVar("R")


def reports_errors(fn: Callable[P, R]) -> Callable[P, R]:
    """Decorate a command: a TestplanError becomes ``error: <one line>`` and its exit code."""

    @functools.wraps(fn)
    def wrapper(*args: P.args, **kwargs: P.kwargs) -> R:
        try:
            return fn(*args, **kwargs)
        except TestplanError as err:
            typer.echo(f"error: {err.one_line()}", err=True)
            raise typer.Exit(err.exit_code) from None
        finally:
            from testplan.cli.common import close_stores

            close_stores()

    return wrapper
