"""A logger file's bytes as received, read piece by piece: from its path, or from memory.

Reading from the path means a large file is never held whole by the reader: detection
reads the head, the parser and the hash read it in pieces, and the store streams it into
the raw file row. ``read()`` loads it whole where a caller needs the bytes themselves.
"""

from __future__ import annotations

import hashlib
import io
from collections.abc import Iterator
from pathlib import Path
from typing import IO

PIECE = 1 << 20


class RawSource:
    """The bytes of one logger file, from ``path`` or ``data`` (exactly one)."""

    def __init__(self, *, path: Path | None = None, data: bytes | None = None) -> None:
        if (path is None) == (data is None):
            raise ValueError("give a path or the bytes")
        self.path, self.data = path, data
        self._stat = None if path is None else _stamp(path)
        self.size = len(data) if data is not None else self._stat[0]  # type: ignore[index]
        self._sha256: str | None = None

    def open(self) -> IO[bytes]:
        """A binary file object at the first byte."""
        if self.data is not None:
            return io.BytesIO(self.data)
        assert self.path is not None
        return self.path.open("rb")

    def pieces(self, size: int = PIECE) -> Iterator[bytes]:
        """The bytes in order, ``size`` at a time."""
        if self.data is not None:
            view = memoryview(self.data)
            for start in range(0, len(self.data), size):
                yield bytes(view[start : start + size])
            return
        with self.open() as f:
            while piece := f.read(size):
                yield piece

    def head(self, size: int) -> bytes:
        """The first ``size`` bytes (fewer when the file is shorter)."""
        if self.data is not None:
            return self.data[:size]
        with self.open() as f:
            return f.read(size)

    def read(self) -> bytes:
        """The whole file (held in memory)."""
        if self.data is not None:
            return self.data
        assert self.path is not None
        return self.path.read_bytes()

    @property
    def sha256(self) -> str:
        if self._sha256 is None:
            h = hashlib.sha256()
            for piece in self.pieces():
                h.update(piece)
            self._sha256 = h.hexdigest()
        return self._sha256

    def verified_pieces(self, size: int = PIECE) -> Iterator[bytes]:
        """``pieces``, then a check that they are the bytes first hashed: a file changed on
        disk while it was being read and stored raises LoggerFileError (nothing is kept)."""
        expected = self.sha256
        self._check(True)
        h = hashlib.sha256()
        total = 0
        for piece in self.pieces(size):
            total += len(piece)
            self._check(total <= self.size)
            h.update(piece)
            yield piece
        self._check(total == self.size and h.hexdigest() == expected)

    def verified(self) -> bytes:
        """``read``, checked as ``verified_pieces`` checks."""
        expected = self.sha256
        content = self.read()
        self._check(hashlib.sha256(content).hexdigest() == expected)
        return content

    def _check(self, same: bool) -> None:
        if not same or (self.path is not None and _stamp(self.path) != self._stat):
            from testplan.errors import LoggerFileError

            raise LoggerFileError(
                "the file changed while it was being imported; nothing was kept",
                file=self.path,
                fix="import it again once the logger has finished writing it",
            )

    def find(self, needle: bytes) -> bool:
        """Whether ``needle`` occurs anywhere (across piece boundaries too)."""
        tail = b""
        for piece in self.pieces():
            if needle in tail + piece[: len(needle)] or needle in piece:
                return True
            tail = piece[-(len(needle) - 1) :] if len(needle) > 1 else b""
        return False


def _stamp(path: Path) -> tuple[int, int]:
    st = path.stat()
    return st.st_size, st.st_mtime_ns
