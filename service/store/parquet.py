"""Long arrays as Parquet files in the data directory.

Files are written under a temporary name in the same folder and renamed
into place, so a reader never sees half a file and a failed request leaves
at most a temporary file that :func:`sweep` removes.
"""

from __future__ import annotations

import os
import uuid
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

HISTORIES = "histories"
BLOCKS = "blocks"
UNIT_STRESSES = "unit_stresses"
SUPERPOSITIONS = "superpositions"
EDITS = "edits"
TMP_PREFIX = ".tmp-"
_TMP = TMP_PREFIX


def _atomic(data_dir: str | Path, folder: str, name: str, write) -> str:
    """Run ``write(tmp_path)``, fsync, rename into ``<folder>/<name>.parquet``, fsync the
    folder; on any failure remove the temporary file. Returns the relative path."""
    rel = f"{folder}/{name}.parquet"
    target = Path(data_dir) / rel
    target.parent.mkdir(parents=True, exist_ok=True)
    tmp = target.with_name(f"{_TMP}{uuid.uuid4().hex}.parquet")
    try:
        write(tmp)
        _fsync(tmp)
        os.replace(tmp, target)
        _fsync(target.parent)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return rel


def write_columns(data_dir: str | Path, folder: str, name: str,
                  columns: dict[str, np.ndarray]) -> str:
    """Write ``columns`` to ``<data_dir>/<folder>/<name>.parquet``; returns the relative path."""
    table = pa.table({k: v if isinstance(v, pa.Array) else pa.array(v)
                      for k, v in columns.items()})
    # Uncompressed, no dictionary: measured float signals barely compress, and
    # trying dictionaries first made the write 2.5x slower.
    return _atomic(data_dir, folder, name, lambda tmp: pq.write_table(
        table, tmp, compression="none", use_dictionary=False))


def write_table(data_dir: str | Path, folder: str, name: str, table: pa.Table) -> str:
    """Write an Arrow table as ``<folder>/<name>.parquet`` (atomic, fsynced)."""
    return _atomic(data_dir, folder, name, lambda tmp: pq.write_table(table, tmp))


def read_table(data_dir: str | Path, rel: str, columns=None) -> pa.Table:
    """A stored file as an Arrow table."""
    return pq.read_table(Path(data_dir) / rel, columns=columns, memory_map=True)


def adopt(data_dir: str | Path, folder: str, name: str,
          path: str | Path | bytes | memoryview) -> str:
    """Keep an already validated file (an upload spooled to disk) as
    ``<folder>/<name>.parquet``: fsync it, rename it into place, fsync the
    folder. Given the file's bytes (an upload held in memory), write them
    the same way."""
    if isinstance(path, (bytes, bytearray, memoryview)):
        data = path
        return _atomic(data_dir, folder, name, lambda tmp: Path(tmp).write_bytes(data))
    rel = f"{folder}/{name}.parquet"
    target = Path(data_dir) / rel
    _fsync(Path(path))
    os.replace(path, target)
    _fsync(target.parent)
    return rel


def _fsync(path: Path) -> None:
    # A result is acknowledged only once its file and its name are on disk.
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def read_columns(data_dir: str | Path, rel: str, columns=None) -> dict[str, np.ndarray]:
    """Columns of a stored file as numpy arrays (all, or those named)."""
    table = pq.read_table(Path(data_dir) / rel, columns=columns, memory_map=True)
    return {name: table.column(name).to_numpy() for name in table.column_names}


def read_channels(data_dir: str | Path, rel: str, names) -> dict[str, np.ndarray]:
    """The named channels of a stored history as float64 arrays. [MPa]"""
    cols = read_columns(data_dir, rel, columns=list(names))
    return {n: np.ascontiguousarray(v, dtype=np.float64) for n, v in cols.items()}


def read_bytes(data_dir: str | Path, rel: str) -> bytes:
    return (Path(data_dir) / rel).read_bytes()


def remove(data_dir: str | Path, rel: str | None) -> None:
    if rel:
        (Path(data_dir) / rel).unlink(missing_ok=True)


def sweep(data_dir: str | Path, referenced: set[str] | None = None) -> int:
    """Remove what a crash left: temporary files, and (given ``referenced``,
    the relative paths the database names) files renamed into place whose
    database row was never committed. Only for a start-up, while no request
    is writing. Returns how many files went."""
    n = 0
    for folder in (HISTORIES, BLOCKS, UNIT_STRESSES, SUPERPOSITIONS):
        for p in (Path(data_dir) / folder).glob("*"):
            rel = f"{folder}/{p.name}"
            if p.name.startswith(_TMP) or (referenced is not None and p.is_file()
                                           and rel not in referenced):
                p.unlink(missing_ok=True)
                n += 1
    return n
