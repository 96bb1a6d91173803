"""Write output files so a reader never sees a half-written one."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

from testplan.errors import TestplanError


def write_atomically(path: str | Path, data: bytes, *, private: bool = False) -> None:
    """Write ``data`` to a temporary file beside ``path``, then rename it into place.

    With ``private`` the file stays 0600 from its first byte (private keys).
    Raises TestplanError naming the file when the folder is missing or not writable.
    """
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=folder)
    except OSError as err:
        raise TestplanError(f"cannot write here: {err.strerror}", file=path) from err
    try:
        umask = os.umask(0)
        os.umask(umask)
        if not private:
            os.chmod(tmp, 0o666 & ~umask)  # mkstemp makes 0600; give the usual file mode
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(tmp, path)
    except OSError as err:
        Path(tmp).unlink(missing_ok=True)
        raise TestplanError(f"cannot write: {err.strerror}", file=path) from err
