"""The bulk path for logged samples: executemany on SQLite, COPY on PostgreSQL.

Samples never go in as one ORM object per row. They are written in chunks inside the
caller's transaction, so an import is stored whole or not at all. ``samples_digest``
hashes an import's samples in sequence order (little-endian int64 time, int32 channel,
float64 value), the same way on both engines.
"""

from __future__ import annotations

import hashlib
import uuid
from collections.abc import Callable
from typing import TYPE_CHECKING

import sqlalchemy as sa
from sqlmodel import Session

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np
    import numpy.typing as npt

CHUNK_ROWS = 50_000

_INSERT = "INSERT INTO sample (raw_file_id, seq, channel, t_us, value) VALUES (?, ?, ?, ?, ?)"
_COPY = "COPY sample (raw_file_id, seq, channel, t_us, value) FROM STDIN"


def digest_arrays(
    t_us: npt.NDArray[np.int64], channel: npt.NDArray[np.int32], value: npt.NDArray[np.float64]
) -> str:
    """SHA-256 over the samples in sequence order, in a fixed binary layout."""
    h = hashlib.sha256()
    h.update(t_us.astype("<i8").tobytes())
    h.update(channel.astype("<i4").tobytes())
    h.update(value.astype("<f8").tobytes())
    return h.hexdigest()


def insert_samples(
    session: Session,
    raw_file_id: uuid.UUID,
    t_us: npt.NDArray[np.int64],
    channel: npt.NDArray[np.int32],
    value: npt.NDArray[np.float64],
    *,
    progress: Callable[[int], None] | None = None,
) -> None:
    """Write the samples of one raw file in chunks on the session's own connection."""
    conn = session.connection()
    n = len(t_us)
    if conn.dialect.name == "postgresql":
        _copy_postgres(conn, raw_file_id, t_us, channel, value, progress)
        return
    rid = raw_file_id.hex  # SQLAlchemy's Uuid is CHAR(32) hex on SQLite
    for start in range(0, n, CHUNK_ROWS):
        stop = min(start + CHUNK_ROWS, n)
        rows = list(
            zip(
                [rid] * (stop - start),
                range(start, stop),
                channel[start:stop].tolist(),
                t_us[start:stop].tolist(),
                value[start:stop].tolist(),
                strict=True,
            )
        )
        conn.exec_driver_sql(_INSERT, rows)
        if progress is not None:
            progress(stop - start)


def _copy_postgres(
    conn: sa.Connection,
    raw_file_id: uuid.UUID,
    t_us: npt.NDArray[np.int64],
    channel: npt.NDArray[np.int32],
    value: npt.NDArray[np.float64],
    progress: Callable[[int], None] | None,
) -> None:
    import numpy as np

    driver = conn.connection.driver_connection
    assert driver is not None
    rid = str(raw_file_id)
    n = len(t_us)
    with driver.cursor() as cur, cur.copy(_COPY) as copy:
        for start in range(0, n, CHUNK_ROWS):
            stop = min(start + CHUNK_ROWS, n)
            seq = np.arange(start, stop)
            lines = "".join(
                f"{rid}\t{s}\t{c}\t{t}\t{v!r}\n"
                for s, c, t, v in zip(
                    seq.tolist(),
                    channel[start:stop].tolist(),
                    t_us[start:stop].tolist(),
                    value[start:stop].tolist(),
                    strict=True,
                )
            )
            copy.write(lines)
            if progress is not None:
                progress(stop - start)


def sample_table(session: Session, raw_file_id: uuid.UUID) -> npt.NDArray[np.float64]:
    """An import's samples as an (n, 4) array of seq, t_us, channel, value in seq order.

    Read through the driver's own cursor into numpy: a million rows take a fraction of a
    second this way (times in microseconds stay exact in float64 below 2**53).
    """
    import numpy as np

    conn = session.connection()
    cursor = conn.connection.cursor()
    try:
        if conn.dialect.name == "sqlite":
            cursor.execute(
                "SELECT seq, t_us, channel, value FROM sample WHERE raw_file_id = ? ORDER BY seq",
                (raw_file_id.hex,),
            )
        else:
            cursor.execute(
                "SELECT seq, t_us, channel, value FROM sample WHERE raw_file_id = %s ORDER BY seq",
                (raw_file_id,),
            )
        rows = cursor.fetchall()
    finally:
        cursor.close()
    if not rows:
        return np.zeros((0, 4), dtype=np.float64)
    return np.array(rows, dtype=np.float64)


def samples_digest(session: Session, raw_file_id: uuid.UUID) -> tuple[str, int]:
    """Re-read an import's samples from the store and hash them; also return their count."""
    import numpy as np

    data = sample_table(session, raw_file_id)
    return (
        digest_arrays(data[:, 1].astype(np.int64), data[:, 2].astype(np.int32), data[:, 3]),
        len(data),
    )
