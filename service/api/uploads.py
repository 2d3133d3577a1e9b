"""Request bodies -> channels of samples in MPa.

Three ways in, one result: CSV (header row, optional time column), Parquet or
Arrow IPC (the fast path: columns arrive as float arrays, no text parsing),
and JSON arrays. Every channel is checked (numbers, finite, same length, at
least two samples) and converted to MPa with its unit before anything is
stored.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from service.engine import units
from service.engine.errors import InvalidLoadHistory, InvalidParameter, unknown
from service.engine.rainflow import as_history

from .problems import InvalidUpload, MalformedBody, TooLarge, UnsupportedMediaType

CSV_TYPES = ("text/csv",)
PARQUET_TYPES = ("application/vnd.apache.parquet", "application/x-parquet")
ARROW_TYPES = ("application/vnd.apache.arrow.stream", "application/vnd.apache.arrow.file")
JSON_TYPES = ("application/json",)
UPLOAD_TYPES = CSV_TYPES + PARQUET_TYPES + ARROW_TYPES + JSON_TYPES
DEFAULT_TIME_COLUMN = "time_s"


@dataclass
class Upload:
    """Validated channels in MPa, with what was said about them."""

    channels: dict[str, np.ndarray]
    source_units: dict[str, str]
    sample_rate_hz: float | None
    name: str | None
    ranges: dict[str, tuple[float, float]]  # (min, max) of each channel [MPa]
    stored_as_sent: bool = False             # the uploaded Parquet file can be kept as is

    @property
    def sample_count(self) -> int:
        return next(iter(self.channels.values())).shape[0]

    @property
    def duration_s(self) -> float | None:
        if not self.sample_rate_hz:
            return None
        return self.sample_count / self.sample_rate_hz


def check_media_type(content_type: str | None) -> str:
    """The body's media type, or 415 listing the accepted ones."""
    mime = (content_type or "").split(";")[0].strip().lower()
    if mime not in UPLOAD_TYPES:
        raise UnsupportedMediaType(
            f"content type {mime or '(none)'!r} is not accepted; send one of "
            f"{', '.join(UPLOAD_TYPES)}", valid=list(UPLOAD_TYPES))
    return mime


def parse(path, content_type: str, params: dict, registered: dict | None = None) -> Upload:
    """Parse and validate an upload spooled to ``path``; ``params`` are the
    query parameters. Parquet and Arrow are memory-mapped, not read."""
    import os

    mime = check_media_type(content_type)
    if os.path.getsize(path) == 0:
        raise InvalidUpload("the upload is empty", field="body")
    params = dict(params)
    if mime in JSON_TYPES:
        with open(path, "rb") as f:
            columns, params = _json(f.read(), params)
    elif mime in CSV_TYPES:
        columns = _csv(path)
    else:
        columns = _arrow(path, mime)
    up = validated(columns, params, registered)
    # Already float64 MPa with nothing to convert: keep the file as sent
    # (no second write, no re-encoding); readers select the channel columns.
    up.stored_as_sent = mime in PARQUET_TYPES and _stored_as_sent(up, columns)
    return up


def _stored_as_sent(up: "Upload", columns: dict) -> bool:
    return all(isinstance(columns.get(n), np.ndarray) and columns[n].dtype == np.float64
               and units.STRESS_UNITS.get(u) == 1.0 for n, u in up.source_units.items())


def _json(body: bytes, params: dict):
    import json

    try:
        doc = json.loads(body)
    except (ValueError, UnicodeDecodeError) as exc:
        raise MalformedBody(f"the body is not valid JSON: {exc}") from None
    except RecursionError:
        raise MalformedBody("the JSON body is nested too deeply") from None
    if not isinstance(doc, dict) or not isinstance(doc.get("channels"), dict):
        raise InvalidUpload('a JSON upload is an object with "channels": {name: [samples]}',
                            field="channels")
    for key in ("unit", "units", "youngs_modulus", "sample_rate_hz", "name", "time_column"):
        if key in doc:
            params[key] = doc[key]
    columns = {}
    for name, values in doc["channels"].items():
        if not isinstance(values, list):
            raise InvalidUpload(f"channel {name!r} must be an array of numbers",
                                field="channels", channel=name)
        columns[name] = values
    return columns, params


def _csv(path) -> dict:
    import pyarrow as pa
    from pyarrow import csv as pacsv

    with open(path, "rb") as f:
        head = f.read(4096)
    if head.startswith((b"\xff\xfe", b"\xfe\xff")) or b"\x00" in head:
        raise MalformedBody("the CSV must be UTF-8 (or ASCII) text; this looks like UTF-16 or "
                            "binary: save it as UTF-8 CSV")
    try:
        table = pacsv.read_csv(str(path))
        return _table_columns(table)  # names are decoded here, lazily
    except UnicodeDecodeError:
        raise MalformedBody("the CSV must be UTF-8 (or ASCII) text: save it as UTF-8 CSV"
                            ) from None
    except pa.ArrowInvalid as exc:
        raise MalformedBody(f"the CSV could not be read: {exc}") from None


def _arrow(path, mime: str) -> dict:
    import pyarrow as pa
    import pyarrow.parquet as pq

    try:
        source = pa.memory_map(str(path))
        if mime in PARQUET_TYPES:
            table = pq.read_table(source)
        elif mime.endswith("stream"):
            table = pa.ipc.open_stream(source).read_all()
        else:
            table = pa.ipc.open_file(source).read_all()
    except (pa.ArrowException, OSError) as exc:
        raise MalformedBody(f"the {mime} body could not be read: {exc}") from None
    return _table_columns(table)


def _table_columns(table) -> dict:
    import pyarrow as pa

    out = {}
    for name in table.column_names:
        col = table.column(name)
        if pa.types.is_floating(col.type) or pa.types.is_integer(col.type):
            if col.null_count:
                first = int(np.flatnonzero(col.is_null().to_numpy(zero_copy_only=False))[0])
                raise InvalidLoadHistory(f"channel {name!r} sample {first} is empty",
                                         sample_index=first, channel=name)
            out[name] = col.to_numpy().astype(np.float64, copy=False)
        else:
            out[name] = _text_column(name, col.to_pylist())
    return out


def _text_column(name: str, cells: list) -> np.ndarray:
    """A column the reader left as text: numbers if every cell is one, else
    the first cell that is not (a formula such as ``=1+2``, a word, a blank)."""
    out = np.empty(len(cells), dtype=np.float64)
    for i, cell in enumerate(cells):
        try:
            out[i] = float(cell)
        except (TypeError, ValueError):
            raise InvalidLoadHistory(f"channel {name!r} must be numbers; sample {i} is "
                                     f"{str(cell)[:40]!r}", sample_index=i, channel=name,
                                     field=name) from None
    return out


def validated(columns: dict, params: dict, registered: dict | None = None) -> Upload:
    """Check named columns (arrays or lists) and convert them to MPa.

    ``registered`` ({channel: (unit, youngs_modulus)}), when given, names the
    only channels allowed (the ledger's points) and gives a channel whose
    unit the request does not state its registered unit and modulus.
    """
    time_col = params.get("time_column") or DEFAULT_TIME_COLUMN
    rate = params.get("sample_rate_hz")
    if rate is not None:
        rate = _positive(rate, "sample_rate_hz")
    time = columns.pop(time_col, None)
    if not columns:
        raise InvalidUpload("the upload has no channels besides the time column",
                            field="channels")
    if time is not None:
        t = as_history(time, field_name=time_col)
        step = np.diff(t)
        if np.any(step <= 0):
            raise InvalidUpload(f"column {time_col!r} must increase", field=time_col,
                                sample_index=int(np.flatnonzero(step <= 0)[0]) + 1)
        inferred = 1.0 / float(np.median(step))
        if rate is None:
            rate = inferred
        elif not math.isclose(rate, inferred, rel_tol=1e-3):
            raise InvalidParameter(
                f"sample_rate_hz {rate} contradicts the time column ({inferred:.6g} Hz)",
                field="sample_rate_hz", value=rate, limit=inferred)
    _check_limits(columns)
    if registered is not None:
        for name in columns:
            if name not in registered:
                raise unknown("point", name, sorted(registered))
    unit_of = _units(params, list(columns), registered or {})
    e = params.get("youngs_modulus")
    if e is not None:
        e = _positive(e, "youngs_modulus")
    for name in columns:
        check_name(name, "channels")
    if params.get("name") is not None:
        check_name(params["name"], "name")
    out, lengths, ranges = {}, set(), {}
    for name, values in columns.items():
        try:
            x = as_history(values, field_name=name)
        except InvalidLoadHistory as exc:
            exc.channel = name
            exc.details["channel"] = name
            raise
        lengths.add(x.shape[0])
        e_here = e
        if e_here is None and registered and name in registered:
            e_here = registered[name][1]
        with np.errstate(over="ignore", invalid="ignore"):
            mpa = units.to_mpa(x, unit_of[name], e_here)
            # min and max carry NaN and inf through: two passes check
            # finiteness and give the range the history resource reports.
            lo, hi = float(np.min(mpa)), float(np.max(mpa))
        if not (math.isfinite(lo) and math.isfinite(hi)):
            j = int(np.flatnonzero(~np.isfinite(mpa))[0])
            what = (f"is {x[j]}" if not math.isfinite(x[j])
                    else f"({x[j]} {unit_of[name]}) overflows in MPa")
            raise InvalidLoadHistory(
                f"channel {name!r} sample {j} {what}; samples must be finite numbers",
                sample_index=j, channel=str(name))
        out[str(name)] = mpa
        ranges[str(name)] = (lo, hi)
    if time is not None:
        lengths.add(len(time))
    if len(lengths) > 1:
        raise InvalidUpload(f"channels differ in length: {sorted(lengths)} samples",
                            field="channels")
    return Upload(out, unit_of, rate, params.get("name"), ranges)


#: Longest channel or history name. [characters]
MAX_NAME_CHARS = 200


def check_name(name, field: str) -> None:
    """A name is stored and shown: printable text (UTF-8), 1..200 characters."""
    ok = isinstance(name, str) and 0 < len(name) <= MAX_NAME_CHARS and name.isprintable()
    if ok:
        try:
            name.encode("utf-8")
        except UnicodeEncodeError:
            ok = False
    if not ok:
        shown = repr(name)[:60]
        raise InvalidParameter(f"{field}: name {shown} must be printable text of 1 to "
                               f"{MAX_NAME_CHARS} characters", field=field)


def _check_limits(columns: dict) -> None:
    """Channels per request and samples per channel within the service's limits (413)."""
    from flask import current_app, has_app_context

    if not has_app_context():
        return
    cfg = current_app.config
    if len(columns) > cfg["MAX_CHANNELS"]:
        raise TooLarge(f"{len(columns)} channels in one request; the limit is "
                       f"{cfg['MAX_CHANNELS']}", field="channels", limit=cfg["MAX_CHANNELS"])
    for name, values in columns.items():
        if len(values) > cfg["MAX_SAMPLES_PER_CHANNEL"]:
            raise TooLarge(f"channel {name!r} has {len(values)} samples; the limit is "
                           f"{cfg['MAX_SAMPLES_PER_CHANNEL']}", field="channels",
                           channel=str(name), limit=cfg["MAX_SAMPLES_PER_CHANNEL"])


def _units(params: dict, names: list, registered: dict) -> dict:
    """Unit of each channel: ``units`` ({name: unit} or "a:MPa,b:microstrain"),
    else ``unit`` for all, else the channel's registered unit. A channel
    without a unit is refused."""
    per = params.get("units") or {}
    if isinstance(per, str):
        try:
            per = dict(item.split(":", 1) for item in per.split(",") if item)
        except ValueError:
            raise InvalidParameter('units must look like "channel:unit,channel:unit"',
                                   field="units") from None
    if not isinstance(per, dict):
        raise InvalidParameter("units must map channel names to units", field="units")
    extra = set(per) - set(names)
    if extra:
        raise InvalidParameter(f"units names channel(s) not in the upload: "
                               f"{', '.join(sorted(map(str, extra)))}", field="units")
    default = params.get("unit")
    out = {}
    for name in names:
        unit = per.get(name, default)
        if not unit and name in registered:
            unit = registered[name][0]
        if not unit:
            raise InvalidParameter(
                f"channel {name!r} has no unit; give unit (for all channels) or units "
                f"(one of {', '.join(units.UNITS)})", field="unit")
        if unit not in units.UNITS:
            raise unknown("unit", unit, units.UNITS)
        out[name] = unit
    return out


def _positive(value, field: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InvalidParameter(f"{field} {value!r} is not a number", field=field) from None
    if not math.isfinite(v) or v <= 0:
        raise InvalidParameter(f"{field} {value!r} must be a positive number", field=field,
                               value=v, limit=0.0)
    return v
