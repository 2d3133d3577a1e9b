"""Parquet datasets of many points: one file or a folder of files.

Layouts
-------
``wide``: one column per point (float), an optional ``time_s`` column.
``long``: columns ``point`` (text) and ``value`` (float), optional
``time_s``; a point's samples are its rows in file order.

A folder's files (``*.parquet``, sorted by name) are successive stretches of
one recording: a point found in several files is the concatenation of its
pieces in that order (counted across the joins exactly, by continuation).
A point absent from a file simply has no samples there.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq

TIME_COLUMN = "time_s"
LONG_COLUMNS = ("point", "value")


class DatasetError(ValueError):
    """The path is not a dataset this module can read (named in the message)."""


@dataclass(frozen=True)
class Dataset:
    """What a dataset holds: its files in order, layout, points, rows and rate."""

    files: tuple[str, ...]
    layout: str
    points: tuple[str, ...]
    rows: int
    sample_rate_hz: float | None

    def sample_bytes(self) -> int:
        """Bytes of all samples as float64 (what the dataset weighs in memory)."""
        return self.rows * 8 * (len(self.points) if self.layout == "wide" else 1)


def open_dataset(path: str | Path, sample_rate_hz: float | None = None) -> Dataset:
    """Read the metadata (never the samples) of a file or folder of Parquet."""
    p = Path(path)
    if p.is_dir():
        files = sorted(str(f) for f in p.glob("*.parquet"))
    elif p.is_file():
        files = [str(p)]
    else:
        raise DatasetError(f"{path}: no such file or folder")
    if not files:
        raise DatasetError(f"{path}: no *.parquet files")
    schemas = []
    rows = 0
    for f in files:
        try:
            meta = pq.read_metadata(f)
        except (pa.ArrowInvalid, OSError) as exc:
            raise DatasetError(f"{f}: not a readable Parquet file ({exc})") from None
        schemas.append(meta.schema.to_arrow_schema())
        rows += meta.num_rows
    long = all(set(LONG_COLUMNS) <= set(s.names) for s in schemas)
    if long:
        points: dict[str, None] = {}
        for f in files:
            col = pq.read_table(f, columns=["point"]).column("point")
            points.update(dict.fromkeys(str(v) for v in pc.unique(col).to_pylist()))
        names = tuple(points)
    else:
        seen: dict[str, None] = {}
        for f, s in zip(files, schemas):
            for field in s:
                if field.name == TIME_COLUMN:
                    continue
                if not (pa.types.is_floating(field.type) or pa.types.is_integer(field.type)):
                    raise DatasetError(f"{f}: column {field.name!r} is {field.type}, not numbers "
                                       f"(wide layout: one numeric column per point)")
                seen[field.name] = None
        names = tuple(seen)
    if not names:
        raise DatasetError(f"{path}: no point columns")
    rate = sample_rate_hz
    if rate is None and TIME_COLUMN in schemas[0].names:
        t = pq.read_table(files[0], columns=[TIME_COLUMN]).column(TIME_COLUMN)
        t = t.to_numpy()[:2] if len(t) >= 2 else None
        if t is not None and t[1] > t[0]:
            rate = 1.0 / float(t[1] - t[0])
    return Dataset(tuple(files), "long" if long else "wide", names, rows, rate)


def read_group(file: str, layout: str, points: list[str]) -> dict[str, np.ndarray]:
    """The samples of ``points`` in one file (absent points are left out). [as stored]"""
    if layout == "wide":
        pf = pq.ParquetFile(file, memory_map=True)
        names = set(pf.schema_arrow.names)
        present = [p for p in points if p in names]
        table = pf.read(columns=present)
        return {p: table.column(p).to_numpy().astype(np.float64, copy=False) for p in present}
    table = pq.read_table(file, columns=list(LONG_COLUMNS),
                          filters=[("point", "in", list(points))])
    out = {}
    keys = table.column("point").to_numpy(zero_copy_only=False).astype(str)
    values = table.column("value").to_numpy().astype(np.float64, copy=False)
    for p in points:
        mask = keys == p
        if mask.any():
            out[p] = values[mask]
    return out


def partitions(points, size: int) -> list[list[str]]:
    """Points in groups of ``size`` (the unit of work and of memory)."""
    points = list(points)
    return [points[i:i + size] for i in range(0, len(points), size)]
