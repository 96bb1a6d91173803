"""The sign-off manifest over 1,000,000 samples (hashed per chunk), against the import time."""

from __future__ import annotations

import shutil
import sys
import tempfile
from pathlib import Path

from common import median_of, py, report, run_timed
from judge import imported_store

MANIFEST = """
import sys
from testplan.store.engine import open_store
from testplan.store.records import find_campaign
from testplan.store.signoff import compute_items, root_of
store = open_store(sys.argv[1])
with store.reading() as session:
    root_of(compute_items(session, find_campaign(session, None)))
"""


def main() -> int:
    work = Path(tempfile.mkdtemp(prefix="tp-bench-"))
    try:
        db, imported = imported_store(work)
        ours = median_of(lambda: run_timed([*py(MANIFEST), db]))
        ok = report("manifest over 1M samples (baseline: their import)", ours, imported, 0.5)
    finally:
        shutil.rmtree(work, ignore_errors=True)
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
