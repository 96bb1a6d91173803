"""Logged samples are stored in columnar blocks, not a row per value.

An import's samples (in file order) are cut into blocks of BLOCK samples. Each block row
holds three little-endian arrays (int64 microseconds since 1970 UTC, int32 channel number,
float64 value in plan units), its first sequence number, its count and the SHA-256 of its
arrays. A million samples are 16 rows: writing them is one bulk insert on either engine,
and reading them back for judging, plotting or hashing is a copy of bytes rather than a
million driver rows.

Blocks are written inside the caller's transaction, so an import is stored whole or not at
all. ``digest_arrays`` is the one hash layout (used per block, per import and per manifest
chunk), the same on SQLite and PostgreSQL.
"""

from __future__ import annotations

import hashlib
import uuid
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Protocol, cast

import sqlalchemy as sa
from sqlmodel import Session

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np
    import numpy.typing as npt

BLOCK = 65_536


def digest_arrays(
    t_us: npt.NDArray[np.int64], channel: npt.NDArray[np.int32], value: npt.NDArray[np.float64]
) -> str:
    """SHA-256 over samples in sequence order, in a fixed binary layout."""
    h = hashlib.sha256()
    h.update(t_us.astype("<i8").tobytes())
    h.update(channel.astype("<i4").tobytes())
    h.update(value.astype("<f8").tobytes())
    return h.hexdigest()


@dataclass(frozen=True)
class Samples:
    """An import's samples in sequence order (sequence numbers are 0..n-1)."""

    t_us: npt.NDArray[np.int64]
    channel: npt.NDArray[np.int32]
    value: npt.NDArray[np.float64]

    def __len__(self) -> int:
        return len(self.t_us)


@dataclass(frozen=True)
class BlockProblem:
    """A stored block that does not check out."""

    block: int
    first_seq: int
    problem: str


def _table() -> sa.Table:
    from sqlmodel import SQLModel

    import testplan.store.tables  # noqa: F401  (registers the tables)

    return SQLModel.metadata.tables["sample_block"]


class SampleSource(Protocol):
    """Samples held outside memory (``importers.spool.SampleSpool``): a count, one column's
    bytes piece by piece, and consecutive slices."""

    count: int

    def pieces(self, name: str) -> Iterator[bytes]: ...

    def slices(self, size: int) -> Iterator[tuple[Any, Any, Any]]: ...


def digest_source(samples: SampleSource) -> str:
    """``digest_arrays`` of all the samples, read piece by piece (the same bytes in the
    same order: every time stamp, then every channel number, then every value)."""
    h = hashlib.sha256()
    for name in ("t_us", "channel", "value"):
        for piece in samples.pieces(name):
            h.update(piece)
    return h.hexdigest()


def block_row(
    raw_file_id: uuid.UUID,
    block: int,
    first_seq: int,
    t: npt.NDArray[np.int64],
    c: npt.NDArray[np.int32],
    v: npt.NDArray[np.float64],
) -> dict[str, object]:
    """One block row: its arrays in the fixed layout and their SHA-256."""
    return {
        "raw_file_id": raw_file_id,
        "block": block,
        "first_seq": first_seq,
        "n": len(t),
        "t_us": t.astype("<i8").tobytes(),
        "channel": c.astype("<i4").tobytes(),
        "value": v.astype("<f8").tobytes(),
        "sha256": digest_arrays(t, c, v),
    }


def block_rows(
    raw_file_id: uuid.UUID,
    t_us: npt.NDArray[np.int64],
    channel: npt.NDArray[np.int32],
    value: npt.NDArray[np.float64],
    first_block: int = 0,
) -> list[dict[str, object]]:
    """The block rows of one import's samples."""
    rows = []
    for start in range(0, len(t_us), BLOCK):
        stop = min(start + BLOCK, len(t_us))
        t, c, v = t_us[start:stop], channel[start:stop], value[start:stop]
        rows.append(block_row(raw_file_id, first_block + start // BLOCK, start, t, c, v))
    return rows


def insert_source(
    session: Session,
    raw_file_id: uuid.UUID,
    samples: SampleSource,
    *,
    progress: Callable[[int], None] | None = None,
) -> None:
    """Write samples held outside memory as blocks, one block in memory at a time; the
    same rows ``insert_samples`` writes for the same samples."""
    conn = session.connection()
    table = _table()
    for block, (t, c, v) in enumerate(samples.slices(BLOCK)):
        conn.execute(table.insert(), [block_row(raw_file_id, block, block * BLOCK, t, c, v)])
        if progress is not None:
            progress(len(t))


def insert_samples(
    session: Session,
    raw_file_id: uuid.UUID,
    t_us: npt.NDArray[np.int64],
    channel: npt.NDArray[np.int32],
    value: npt.NDArray[np.float64],
    *,
    progress: Callable[[int], None] | None = None,
) -> None:
    """Write the samples of one raw file as blocks on the session's own connection."""
    conn = session.connection()
    table = _table()
    for row in block_rows(raw_file_id, t_us, channel, value):
        conn.execute(table.insert(), [row])
        if progress is not None:
            progress(cast(int, row["n"]))


def _blocks(session: Session, raw_file_id: uuid.UUID) -> list[sa.Row[tuple[object, ...]]]:
    table = _table()
    return list(
        session.connection().execute(
            sa.select(
                table.c.block,
                table.c.first_seq,
                table.c.n,
                table.c.t_us,
                table.c.channel,
                table.c.value,
                table.c.sha256,
            )
            .where(table.c.raw_file_id == raw_file_id)
            .order_by(table.c.block)
        )
    )


def _decode(row: sa.Row[tuple[object, ...]]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    import numpy as np

    return (
        np.frombuffer(bytes(row.t_us), dtype="<i8"),
        np.frombuffer(bytes(row.channel), dtype="<i4"),
        np.frombuffer(bytes(row.value), dtype="<f8"),
    )


def _joined(parts: list[tuple[np.ndarray, np.ndarray, np.ndarray]]) -> Samples:
    """One import's block arrays end to end, as native arrays."""
    import numpy as np

    def column(k: int, dtype: type) -> Any:
        if not parts:
            return np.zeros(0, dtype=dtype)
        return np.concatenate([p[k] for p in parts]).astype(dtype)

    return Samples(column(0, np.int64), column(1, np.int32), column(2, np.float64))


def read_samples(session: Session, raw_file_id: uuid.UUID) -> Samples:
    """An import's samples, in sequence order, as three arrays."""
    return _joined([_decode(row) for row in _blocks(session, raw_file_id)])


def check_blocks(session: Session, raw_file_id: uuid.UUID) -> tuple[Samples, list[BlockProblem]]:
    """Read an import's samples and check each block: its arrays against its own SHA-256
    and count, and that blocks follow on from each other with no gap or overlap."""
    problems: list[BlockProblem] = []
    parts = []
    expected_seq = expected_block = 0
    for row in _blocks(session, raw_file_id):
        block, first, n = int(row.block), int(row.first_seq), int(row.n)
        if block != expected_block:
            gone = f"{expected_block + 1}" + (f" to {block}" if block > expected_block + 1 else "")
            problems.append(BlockProblem(expected_block, expected_seq, f"block {gone} missing"))
        elif first != expected_seq:
            problems.append(
                BlockProblem(block, first, f"starts at sample {first + 1}, not {expected_seq + 1}")
            )
        try:
            t, c, v = _decode(row)
        except ValueError:
            problems.append(BlockProblem(block, first, "its arrays are not whole"))
            continue
        if not len(t) == len(c) == len(v) == n:
            problems.append(BlockProblem(block, first, f"holds {len(t)} samples, not {n}"))
        elif digest_arrays(t, c, v) != row.sha256:
            problems.append(BlockProblem(block, first, "its values changed since import"))
        parts.append((t, c, v))
        expected_seq, expected_block = first + n, block + 1
    return _joined(parts), problems
