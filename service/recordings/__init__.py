"""Recordings as rigs write them: one reader for every way a file comes in.

The service (histories, ledger blocks), ``cycleledger assess`` and ``post``
all read a recording here, so one place decides what a valid recording is.
The format is recognised from the file's first bytes (magic numbers), the
declared media type deciding only between text forms: CSV in the dialects
of acquisition systems (``csv_dialect.py``), Parquet and Arrow IPC (pyarrow),
ASAM MDF 4 (``mdf.py``, asammdf) and HDF5 (``hdf5.py``, h5py); a gzip file
is unpacked (streamed, to a temporary file beside it) and recognised again.

A recording is read from a file on disk (a :class:`~pathlib.Path`) or from
bytes held in memory (a request body small enough to keep there: the
service keeps bodies up to a limit in memory because writing them to disk
and reading them back costs more than parsing them, see
``tests/benchmarks/bench_inputs.py``): ``sources.py``.

A :class:`Recording` is columns of float64 samples with the unit each is
spelt in (if the file says), the time column if there is one (in seconds)
and a rate from the file's metadata; units and conversion to MPa are the
caller's (``service.api.uploads.validated``).
"""

from __future__ import annotations

import gzip
import io
import shutil
import tempfile
import zlib
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from service.engine.errors import EngineError, InvalidLoadHistory

from . import sources
from .sources import arrow_input, head, in_memory

# Where a recording is read from (sources.py), also reached from here.
BytesReader, binary = sources.BytesReader, sources.binary

#: Names a time column goes by when the request does not name one (the
#: bracketed unit removed, compared without case).
TIME_NAMES = ("time_s", "time", "t", "zeit", "timestamp")
#: Seconds per unit of a time column.
TIME_UNITS = {"s": 1.0, "sec": 1.0, "ms": 1e-3, "us": 1e-6, "\u00b5s": 1e-6, "min": 60.0,
              "h": 3600.0}

FORMATS = ("csv", "parquet", "arrow_file", "arrow_stream", "mdf4", "hdf5", "json")

_MAGIC = (
    (b"PAR1", "parquet"),
    (b"ARROW1", "arrow_file"),
    (b"\xff\xff\xff\xff", "arrow_stream"),
    (b"MDF     ", "mdf4"),
    (b"\x89HDF\r\n\x1a\n", "hdf5"),
)
_GZIP = b"\x1f\x8b"

class RecordingError(EngineError):
    """A recording that cannot be read: the file, and where possible the
    channel and the row or record, are named."""

    slug = "invalid-upload"

    def __init__(self, message: str, *, field: str = "body", **details):
        super().__init__(message, field=field, **details)


class UnreadableRecording(RecordingError):
    """The bytes are not a file of the format they claim (or any): the API's
    ``malformed-body`` (400)."""

    slug = "malformed-body"


@dataclass
class Recording:
    """Channels read from a file.

    ``columns`` maps channel names to float64 samples (the time column among
    them when there is one, already in seconds); ``units`` the unit each
    channel is spelt in by the file (``None`` where it says nothing);
    ``time_column`` the name of the time column found (or None);
    ``sample_rate_hz`` a rate the file's metadata gives [Hz]; ``format``
    one of :data:`FORMATS`; ``details`` what was found (the CSV dialect,
    the MDF group, the HDF5 paths).
    """

    columns: dict
    units: dict = field(default_factory=dict)
    time_column: str | None = None
    sample_rate_hz: float | None = None
    format: str = "csv"
    details: dict = field(default_factory=dict)


def detect(head: bytes, media_type: str | None = None) -> str:
    """The format of a file from its first bytes (``gzip`` for a gzip
    file), else from its media type (JSON), else CSV text."""
    if head.startswith(_GZIP):
        return "gzip"
    for magic, name in _MAGIC:
        if head.startswith(magic):
            return name
    if (media_type or "").endswith("json") or head.lstrip()[:1] == b"{":
        return "json"
    return "csv"


def unpacked(source, *, folder=None, memory_limit: int = 0):
    """A gzip file or body unpacked (streamed: bounded memory).

    A file on disk is unpacked to a file beside it. Bytes in memory are
    unpacked into memory while the result stays within ``memory_limit``
    bytes, else (a large or highly compressed body) into a temporary file in
    ``folder`` (default: the system's temporary folder). Returns the
    unpacked file's path or bytes; a path is the caller's to remove.
    """
    if not in_memory(source):
        out = Path(str(source) + ".unpacked")
        try:
            with gzip.open(source, "rb") as src, open(out, "wb") as dst:
                shutil.copyfileobj(src, dst, 1 << 20)
        except (OSError, EOFError, zlib.error) as exc:
            out.unlink(missing_ok=True)
            raise UnreadableRecording(f"the gzip body could not be unpacked: {exc}") from None
        return out
    chunks, size, spill = [], 0, None
    try:
        with gzip.GzipFile(fileobj=io.BytesIO(source), mode="rb") as src:
            while True:
                chunk = src.read(1 << 22)
                if not chunk:
                    break
                if spill is None and size + len(chunk) > memory_limit:
                    spill = tempfile.NamedTemporaryFile(
                        dir=folder, prefix=".tmp-", suffix=".unpacked", delete=False)
                    spill.writelines(chunks)
                    chunks = []
                if spill is not None:
                    spill.write(chunk)
                else:
                    chunks.append(chunk)
                size += len(chunk)
    except (OSError, EOFError, zlib.error) as exc:
        if spill is not None:
            spill.close()
            Path(spill.name).unlink(missing_ok=True)
        raise UnreadableRecording(f"the gzip body could not be unpacked: {exc}") from None
    if spill is None:
        return b"".join(chunks)
    spill.close()
    return Path(spill.name)


def read(source, media_type: str | None = None, options: dict | None = None) -> Recording:
    """Read the recording in ``source``, a file's path or its bytes (see the
    module notes).

    ``options``: ``delimiter``, ``decimal``, ``header_row`` (CSV);
    ``channels`` (MDF 4 and HDF5: names or dataset paths, comma separated),
    ``group`` (MDF 4: a channel group's index; HDF5: a group's path);
    ``time_column``. A gzip file must be unpacked first (:func:`unpacked`).
    """
    options = options or {}
    source = source if in_memory(source) else Path(source)
    fmt = detect(head(source), media_type)
    if fmt == "gzip":
        raise RecordingError("unpack gzip files first (recordings.unpacked)")
    if fmt == "csv":
        rec = _read_csv(source, options)
    elif fmt in ("parquet", "arrow_file", "arrow_stream"):
        rec = _read_arrow(source, fmt)
    elif fmt == "mdf4":
        from .mdf import read_mdf

        rec = read_mdf(source, options)
    elif fmt == "hdf5":
        from .hdf5 import read_hdf5

        rec = read_hdf5(source, options)
    else:
        raise RecordingError("a JSON body is read by the API, not as a recording file")
    _time_in_seconds(rec, options.get("time_column"))
    return rec


def _read_csv(source, options: dict) -> Recording:
    import pyarrow as pa

    from . import csv_dialect

    start = head(source, csv_dialect.SNIFF_BYTES + 1)
    if start.startswith((b"\xff\xfe", b"\xfe\xff")) or b"\x00" in start:
        raise UnreadableRecording("the CSV must be UTF-8 (or ASCII) text; this looks like UTF-16 "
                             "or binary: save it as UTF-8 CSV")
    text, complete = csv_dialect.head_text(io.BytesIO(start))
    delimiter, decimal, header_row = _csv_options(options)
    try:
        dialect = csv_dialect.sniff(text, delimiter=delimiter, decimal=decimal,
                                    header_row=header_row, complete=complete)
    except csv_dialect.DialectError as exc:
        raise UnreadableRecording(f"the CSV could not be read: {exc}") from None
    if len(set(dialect.names)) != len(dialect.names):
        raise RecordingError(f"the CSV's column names repeat: {dialect.names}",
                             field="channels")
    try:
        table = csv_dialect.read(arrow_input(source), dialect)
    except UnicodeDecodeError:
        raise UnreadableRecording("the CSV must be UTF-8 (or ASCII) text: save it as UTF-8 CSV"
                             ) from None
    except pa.ArrowInvalid as exc:
        bad = _bad_cell(source, dialect) if "conversion error" in str(exc) else None
        if bad is not None:
            name, row, cell = bad
            raise InvalidLoadHistory(f"channel {name!r} row {row} is {cell[:40]!r}, not a number",
                                     sample_index=row, channel=name) from None
        raise UnreadableRecording(f"the CSV could not be read with {dialect.describe()}: {exc}"
                                  ) from None
    columns = {}
    for name in table.column_names:
        col = table.column(name)
        if col.null_count:
            first = int(np.flatnonzero(col.is_null().to_numpy(zero_copy_only=False))[0])
            raise InvalidLoadHistory(
                f"channel {name!r} row {first} is empty or not a number",
                sample_index=first, channel=name)
        columns[name] = col.to_numpy()
    units = dict(zip(dialect.names, dialect.units))
    return Recording(columns, units, _time_name(columns, options), None, "csv",
                     {"dialect": dialect.describe()})


def _bad_cell(source, dialect) -> tuple | None:
    """``(channel, row, cell)`` of the first cell that is not a number (the
    error path only: the file is read again as text)."""
    import pyarrow as pa
    from pyarrow import csv as pacsv

    from . import csv_dialect

    table = pacsv.read_csv(
        arrow_input(source), read_options=pacsv.ReadOptions(
            skip_rows=dialect.header_row + 1 + int(dialect.units_row),
            column_names=dialect.names),
        parse_options=pacsv.ParseOptions(delimiter=dialect.delimiter),
        convert_options=pacsv.ConvertOptions(
            column_types={n: pa.string() for n in dialect.names}))
    pattern = csv_dialect._NUMBER[dialect.decimal]
    for name in table.column_names:
        for row, cell in enumerate(table.column(name).to_pylist()):
            text = (cell or "").strip()
            if not (pattern.match(text) or text.lower() in csv_dialect._NOT_A_NUMBER):
                return name, row, cell or ""
    return None


def _csv_options(options: dict):
    """``(delimiter, decimal, header_row)`` given by the request, checked."""
    from service.engine.errors import InvalidParameter

    delimiter = options.get("delimiter")
    if delimiter is not None:
        delimiter = {"tab": "\t", "\\t": "\t", "semicolon": ";", "comma": ",",
                     "pipe": "|"}.get(delimiter, delimiter)
        if len(delimiter) != 1 or delimiter in "\r\n\"":
            raise InvalidParameter(f"delimiter {options['delimiter']!r} must be one character "
                                   "(or tab, semicolon, comma, pipe)", field="delimiter")
    decimal = options.get("decimal")
    if decimal is not None and decimal not in (".", ","):
        raise InvalidParameter(f"decimal {decimal!r} must be '.' or ','", field="decimal")
    if decimal == "," and delimiter == ",":
        raise InvalidParameter("a comma cannot be both delimiter and decimal mark",
                               field="decimal")
    header_row = options.get("header_row")
    if header_row is not None:
        try:
            header_row = int(header_row)
        except (TypeError, ValueError):
            header_row = -1
        if header_row < 0:
            raise InvalidParameter(f"header_row {options['header_row']!r} must be a line "
                                   "number from 0", field="header_row")
    return delimiter, decimal, header_row


def _read_arrow(source, fmt: str) -> Recording:
    import pyarrow as pa
    import pyarrow.parquet as pq

    try:
        source = arrow_input(source, memory_map=True)
        if fmt == "parquet":
            table = pq.read_table(source)
        elif fmt == "arrow_stream":
            table = pa.ipc.open_stream(source).read_all()
        else:
            table = pa.ipc.open_file(source).read_all()
    except (pa.ArrowException, OSError) as exc:
        raise UnreadableRecording(f"the {fmt} body could not be read: {exc}") from None
    columns = {}
    for name in table.column_names:
        col = table.column(name)
        if pa.types.is_floating(col.type) or pa.types.is_integer(col.type):
            if col.null_count:
                first = int(np.flatnonzero(col.is_null().to_numpy(zero_copy_only=False))[0])
                raise InvalidLoadHistory(f"channel {name!r} sample {first} is empty",
                                         sample_index=first, channel=name)
            columns[name] = col.to_numpy().astype(np.float64, copy=False)
        else:
            columns[name] = _text_column(name, col.to_pylist())
    return Recording(columns, {}, _time_name(columns, {}), None, fmt)


def _text_column(name: str, cells: list) -> np.ndarray:
    """A column stored as text: numbers if every cell is one, else the first
    cell that is not (a formula such as ``=1+2``, a word, a blank)."""
    out = np.empty(len(cells), dtype=np.float64)
    for i, cell in enumerate(cells):
        try:
            out[i] = float(cell)
        except (TypeError, ValueError):
            raise InvalidLoadHistory(f"channel {name!r} must be numbers; sample {i} is "
                                     f"{str(cell)[:40]!r}", sample_index=i, channel=name,
                                     field=name) from None
    return out


def _time_name(columns: dict, options: dict) -> str | None:
    """The time column: the one named by ``time_column``, else the first
    whose name is one of :data:`TIME_NAMES`."""
    given = options.get("time_column")
    if given:
        return given if given in columns else None
    for name in columns:
        if str(name).strip().lower() in TIME_NAMES:
            return name
    return None


def _time_in_seconds(rec: Recording, given: str | None) -> None:
    """Scale the time column to seconds by its unit (``ms``, ``min`` ...)."""
    if given and given in rec.columns:
        rec.time_column = given
    name = rec.time_column
    if name is None:
        return
    unit = rec.units.get(name)
    if unit is None:
        return
    scale = TIME_UNITS.get(str(unit).strip().lower().replace("\u03bc", "\u00b5"))
    if scale is None:
        raise RecordingError(f"the time column {name!r} is in {unit!r}; give it in one of "
                             f"{', '.join(TIME_UNITS)}", field="time_column")
    if scale != 1.0:
        rec.columns[name] = np.asarray(rec.columns[name], np.float64) * scale
    rec.units[name] = "s"
