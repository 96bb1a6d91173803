"""The error family every inner package raises, and the exit codes the CLI maps them to.

Exit codes (documented in README and DEVELOPERS.md, tested in tests/test_errors.py):

* 0 ``EXIT_OK``: success.
* 1 ``EXIT_USER``: a user-fixable problem (bad file, bad value, unknown run);
  one line, no traceback.
* 2 ``EXIT_USAGE``: bad command-line usage; typer's own code, also used for our option checks.
* 3 ``EXIT_FAILED``: the command ran, but results failed their criteria or verification failed.

Bugs keep their traceback: only ``TestplanError`` is turned into a one-line message.
"""

from __future__ import annotations

from pathlib import Path

EXIT_OK = 0
EXIT_USER = 1
EXIT_USAGE = 2
EXIT_FAILED = 3


class TestplanError(Exception):
    """Base of every error testplan reports to the user.

    Attributes carry where the problem is, so the CLI can print one line:
    ``file:line: key: message (fix)``.
    """

    # Not a pytest test class, whatever its name says.
    __test__ = False
    exit_code: int = EXIT_USER

    def __init__(
        self,
        message: str,
        *,
        file: str | Path | None = None,
        line: int | None = None,
        column: int | None = None,
        key: str | None = None,
        fix: str | None = None,
    ) -> None:
        super().__init__(message)
        self.message = message
        self.file = str(file) if file is not None else None
        self.line = line
        self.column = column
        self.key = key
        self.fix = fix

    def located(
        self,
        *,
        file: str | Path | None = None,
        line: int | None = None,
        key: str | None = None,
    ) -> TestplanError:
        """Fill in location fields that are still empty and return self."""
        if self.file is None and file is not None:
            self.file = str(file)
        if self.line is None and line is not None:
            self.line = line
        if self.key is None and key is not None:
            self.key = key
        return self

    def one_line(self) -> str:
        """The message as the CLI prints it: where, what, and how to fix it."""
        where = ""
        if self.file:
            where = self.file
            if self.line is not None:
                where += f":{self.line}"
                if self.column is not None:
                    where += f":{self.column}"
            where += ": "
        key = f"{self.key}: " if self.key else ""
        fix = f" ({self.fix})" if self.fix else ""
        text = f"{where}{key}{self.message}{fix}"
        return " ".join(text.split())


class CampaignFileError(TestplanError):
    """The campaign file cannot be read: syntax, missing or unknown keys, wrong types."""


class QuantityError(TestplanError):
    """A quantity string is malformed, has an unknown unit or the wrong dimension."""


class IPCodeError(TestplanError):
    """An IP code is malformed or not allowed by IEC 60529 / ISO 20653."""


class PlanningError(TestplanError):
    """The campaign is readable but cannot be planned as declared (missing or impossible values)."""


class CriteriaFailedError(TestplanError):
    """The command ran, but results failed their criteria or verification failed."""

    exit_code = EXIT_FAILED


class StoreError(TestplanError):
    """The store cannot be opened or used: no store, wrong schema revision, busy, bad URL."""


class RecordError(TestplanError):
    """A bench record is refused: unknown run, wrong state, unauthorised person, out of service."""


class LoggerFileError(TestplanError):
    """A data-logger file cannot be imported: columns, values, time stamps, channel map."""


class IntegrityError(TestplanError):
    """The store's evidence does not check out: broken audit chain, changed raw file or samples."""

    exit_code = EXIT_FAILED
