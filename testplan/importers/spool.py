"""Samples read from a logger file, kept on disk while the file is read chunk by chunk.

A 200 MB file holds about 12 million samples (240 MB as arrays); keeping them in memory
would make the import's peak grow with the file. The reader appends each chunk's arrays
here; the store then hashes them and cuts them into blocks by reading slices back. Small
imports stay in memory (``SpooledTemporaryFile``). The spool is gone when closed or
collected.
"""

from __future__ import annotations

import tempfile
from collections.abc import Callable, Iterator
from typing import IO, TYPE_CHECKING, Any

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np
    import numpy.typing as npt

_IN_MEMORY = 4 * 1024 * 1024  # bytes per column before the spool goes to a temp file
_COLUMNS = (("t_us", "<i8"), ("channel", "<i4"), ("value", "<f8"))
_PIECE = 1 << 20  # samples read back at a time when hashing


class SampleSpool:
    """Time stamps (int64 us UTC), channel numbers (int32) and values (float64, plan
    units), appended in sequence order."""

    def __init__(self) -> None:
        self._files: dict[str, IO[bytes]] = {
            name: tempfile.SpooledTemporaryFile(max_size=_IN_MEMORY) for name, _ in _COLUMNS
        }
        self.count = 0
        self.t_min: int | None = None
        self.t_max: int | None = None

    def append(
        self,
        t_us: npt.NDArray[np.int64],
        channel: npt.NDArray[np.int32],
        value: npt.NDArray[np.float64],
    ) -> None:
        """Add one chunk's samples after those already held."""
        if not len(t_us):
            return
        arrays: tuple[Any, ...] = (t_us, channel, value)
        for (name, dtype), arr in zip(_COLUMNS, arrays, strict=True):
            f = self._files[name]
            f.seek(0, 2)
            f.write(arr.astype(dtype, copy=False).tobytes())
        lo, hi = int(t_us.min()), int(t_us.max())
        self.t_min = lo if self.t_min is None else min(self.t_min, lo)
        self.t_max = hi if self.t_max is None else max(self.t_max, hi)
        self.count += len(t_us)

    def column(self, name: str, start: int, stop: int) -> Any:
        """Samples ``start`` to ``stop`` of one column as a little-endian array."""
        import numpy as np

        dtype = np.dtype(dict(_COLUMNS)[name])
        f = self._files[name]
        f.seek(start * dtype.itemsize)
        return np.frombuffer(f.read((stop - start) * dtype.itemsize), dtype=dtype)

    def pieces(self, name: str, size: int = _PIECE) -> Iterator[bytes]:
        """One column's bytes in sequence order, ``size`` samples at a time."""
        for start in range(0, self.count, size):
            yield self.column(name, start, min(start + size, self.count)).tobytes()

    def slices(self, size: int) -> Iterator[tuple[Any, Any, Any]]:
        """Consecutive ``(t_us, channel, value)`` slices of ``size`` samples (the last shorter)."""
        for start in range(0, self.count, size):
            stop = min(start + size, self.count)
            yield tuple(self.column(name, start, stop) for name, _ in _COLUMNS)

    def whole(self) -> tuple[Any, Any, Any]:
        """All samples as three native arrays (for small files and tests)."""
        import numpy as np

        t, c, v = (self.column(name, 0, self.count) for name, _ in _COLUMNS)
        return t.astype(np.int64), c.astype(np.int32), v.astype(np.float64)

    def filtered(self, keep: Callable[[Any], Any], size: int = _PIECE) -> SampleSpool:
        """A new spool with the samples whose time stamps ``keep`` (an array -> bool array)
        accepts, in the same order."""
        out = SampleSpool()
        for t, c, v in self.slices(size):
            mask = keep(t)
            out.append(t[mask], c[mask], v[mask])
        return out

    def close(self) -> None:
        for f in self._files.values():
            f.close()

    def __del__(self) -> None:
        self.close()
