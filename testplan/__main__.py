"""Allow ``python -m testplan``."""

from testplan.cli import main

main()
