"""Request bodies -> channels of samples in MPa.

Files are read by ``service.recordings`` (the one reader of the service, the
ledger and the command line): CSV in acquisition systems' dialects, Parquet
and Arrow IPC (the fast path: columns arrive as float arrays), ASAM MDF 4,
HDF5, any of them gzip-compressed; JSON arrays are read here. Every channel
is checked (numbers, finite, same length, at least two samples), given its
unit (the request's, or the file's own), its strain corrected for the gauge
factor when asked, and converted to MPa before anything is stored.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from service.engine import units
from service.recordings.channels import Upload
from service.recordings.channels import validated as _validated

from .problems import InvalidUpload, MalformedBody, TooLarge, UnsupportedMediaType

CSV_TYPES = ("text/csv", "text/plain")
PARQUET_TYPES = ("application/vnd.apache.parquet", "application/x-parquet")
ARROW_TYPES = ("application/vnd.apache.arrow.stream", "application/vnd.apache.arrow.file")
JSON_TYPES = ("application/json",)
#: Files recognised by their first bytes (MDF 4, HDF5, gzip of any format).
BINARY_TYPES = ("application/x-hdf5", "application/x-mdf", "application/gzip",
                "application/octet-stream")
UPLOAD_TYPES = CSV_TYPES + PARQUET_TYPES + ARROW_TYPES + JSON_TYPES + BINARY_TYPES
#: Default of ``MEMORY_BODY_MB``: uploads up to this size are read in memory.
MEMORY_BODY_MB = 256
#: Query parameters that tell the reader how to read a file.
READER_OPTIONS = ("delimiter", "decimal", "header_row", "channels", "group", "time_column")


def check_media_type(content_type: str | None) -> str:
    """The body's media type, or 415 listing the accepted ones."""
    mime = (content_type or "").split(";")[0].strip().lower()
    if mime not in UPLOAD_TYPES:
        raise UnsupportedMediaType(
            f"content type {mime or '(none)'!r} is not accepted; send one of "
            f"{', '.join(UPLOAD_TYPES)}", valid=list(UPLOAD_TYPES))
    return mime


def parse(body, content_type: str, params: dict, registered: dict | None = None) -> Upload:
    """Parse and validate an upload: ``body`` is its bytes (held in memory)
    or the file it was spooled to; ``params`` are the query parameters. The
    format comes from the first bytes (a gzip body is unpacked first, into
    memory while it stays within the memory limit); Parquet and Arrow files
    are memory-mapped."""
    from service import recordings

    mime = check_media_type(content_type)
    if _size(body) == 0:
        raise InvalidUpload("the upload is empty", field="body")
    params = dict(params)
    fmt = recordings.detect(recordings.head(body), mime)
    source, unpacked = body, None
    try:
        if fmt == "gzip":
            source = unpacked = recordings.unpacked(
                body, folder=None if recordings.in_memory(body) else Path(body).parent,
                memory_limit=memory_body_limit())
            fmt = recordings.detect(recordings.head(source), mime)
        if fmt == "json":
            with recordings.binary(source) as f:
                columns, params = _json(f.read(), params)
            up = validated(columns, params, registered)
        else:
            rec = recordings.read(source, mime, {k: params[k] for k in READER_OPTIONS
                                                 if params.get(k) is not None})
            columns = rec.columns
            up = validated(columns, params, registered, file_units=rec.units,
                           time_column=rec.time_column, file_rate=rec.sample_rate_hz)
            up.format = rec.format
            up.read_details = rec.details
    finally:
        if isinstance(unpacked, Path):
            unpacked.unlink(missing_ok=True)
    # Already float64 MPa with nothing to convert: keep the file as sent
    # (no second write, no re-encoding); readers select the channel columns.
    up.stored_as_sent = (fmt == "parquet" and unpacked is None
                         and _stored_as_sent(up, columns))
    return up


def _size(body) -> int:
    import os

    from service import recordings

    return len(body) if recordings.in_memory(body) else os.path.getsize(body)


def memory_body_limit() -> int:
    """Bytes of a request body (or its unpacked gzip) kept in memory rather
    than written to a temporary file (``MEMORY_BODY_MB``)."""
    from flask import current_app, has_app_context

    mb = (current_app.config.get("MEMORY_BODY_MB", MEMORY_BODY_MB) if has_app_context()
          else MEMORY_BODY_MB)
    return int(float(mb) * 2**20)


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


def validated(columns: dict, params: dict, registered: dict | None = None, **file) -> Upload:
    """:func:`service.recordings.channels.validated` within the service's
    limits on channels and samples (413)."""
    return _validated(columns, params, registered, check=_check_limits, **file)


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


