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

import math
from dataclasses import dataclass, field

import numpy as np

from service.engine import units
from service.engine.errors import InvalidLoadHistory, InvalidParameter, unknown
from service.engine.rainflow import as_history

from .problems import InvalidUpload, MalformedBody, TooLarge, UnsupportedMediaType

CSV_TYPES = ("text/csv", "text/plain")
PARQUET_TYPES = ("application/vnd.apache.parquet", "application/x-parquet")
ARROW_TYPES = ("application/vnd.apache.arrow.stream", "application/vnd.apache.arrow.file")
JSON_TYPES = ("application/json",)
#: Files recognised by their first bytes (MDF 4, HDF5, gzip of any format).
BINARY_TYPES = ("application/x-hdf5", "application/x-mdf", "application/gzip",
                "application/octet-stream")
UPLOAD_TYPES = CSV_TYPES + PARQUET_TYPES + ARROW_TYPES + JSON_TYPES + BINARY_TYPES
#: Query parameters that tell the reader how to read a file.
READER_OPTIONS = ("delimiter", "decimal", "header_row", "channels", "group", "time_column")
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
    format: str = "json"                     # how the body was read (recordings.FORMATS)
    read_details: dict = field(default_factory=dict)  # the CSV dialect, MDF group ...
    gauge_factors: list | None = None        # [set, gauge] when strain was corrected

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
    query parameters. The format comes from the file's first bytes (a gzip
    file is unpacked beside it first); Parquet and Arrow are memory-mapped."""
    import os

    from service import recordings

    mime = check_media_type(content_type)
    if os.path.getsize(path) == 0:
        raise InvalidUpload("the upload is empty", field="body")
    params = dict(params)
    with open(path, "rb") as f:
        head = f.read(16)
    fmt = recordings.detect(head, mime)
    source, unpacked = path, None
    try:
        if fmt == "gzip":
            source = unpacked = recordings.unpacked(path)
            with open(source, "rb") as f:
                fmt = recordings.detect(f.read(16), mime)
        if fmt == "json":
            with open(source, "rb") as f:
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
        if unpacked is not None:
            unpacked.unlink(missing_ok=True)
    # Already float64 MPa with nothing to convert: keep the file as sent
    # (no second write, no re-encoding); readers select the channel columns.
    up.stored_as_sent = (fmt == "parquet" and unpacked is None
                         and _stored_as_sent(up, columns))
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


def validated(columns: dict, params: dict, registered: dict | None = None, *,
              file_units: dict | None = None, time_column: str | None = None,
              file_rate: float | None = None) -> Upload:
    """Check named columns (arrays or lists) and convert them to MPa.

    ``registered`` ({channel: (unit, youngs_modulus)}), when given, names the
    only channels allowed (the ledger's points) and gives a channel whose
    unit the request does not state its registered unit and modulus.
    ``file_units`` are the units the file itself gives (spelt as the
    acquisition system spells them), ``time_column`` the time column the
    reader found, ``file_rate`` a rate from the file's metadata [Hz].
    """
    time_col = params.get("time_column") or time_column or DEFAULT_TIME_COLUMN
    rate = params.get("sample_rate_hz")
    if rate is not None:
        rate = _positive(rate, "sample_rate_hz")
    elif file_rate is not None:
        rate = _positive(file_rate, "sample_rate_hz")
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
    unit_of = _units(params, list(columns), registered or {}, file_units or {})
    gauge = _gauge_factors(params, unit_of)
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
        if gauge is not None and units.is_strain(unit_of[name]):
            x = units.corrected_strain(x, *gauge)
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
    return Upload(out, unit_of, rate, params.get("name"), ranges,
                  gauge_factors=None if gauge is None else list(gauge))


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


def _units(params: dict, names: list, registered: dict, file_units: dict) -> dict:
    """Unit of each channel: ``units`` ({name: unit} or "a:MPa,b:microstrain"),
    else the unit the file gives it (as the acquisition system spells it),
    else ``unit`` for all, else the channel's registered unit. A file's unit
    that contradicts ``unit`` is refused (say ``units`` to override it); a
    channel without a unit is refused."""
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
    if default:
        default = units.unit_from_spelling(default)
    out = {}
    for name in names:
        spelt = file_units.get(name)
        from_file = units.unit_from_spelling(spelt) if spelt and name not in per else None
        if from_file and default and from_file != default:
            exc = InvalidParameter(
                f"channel {name!r} is in {spelt!r} by the file, but unit says {default!r}; "
                f"give units={name}:<unit> to override the file", field="unit")
            exc.details["channel"] = str(name)
            raise exc
        unit = per.get(name) or from_file or default
        if not unit and name in registered:
            unit = registered[name][0]
        if not unit:
            raise InvalidParameter(
                f"channel {name!r} has no unit; give unit (for all channels) or units "
                f"(one of {', '.join(units.UNITS)})", field="unit")
        out[name] = units.unit_from_spelling(unit)
    return out


def _gauge_factors(params: dict, unit_of: dict):
    """``(gauge_factor_set, gauge_factor)`` when the request asks for the
    correction (both given), else None."""
    k_set, k = params.get("gauge_factor_set"), params.get("gauge_factor")
    if k_set is None and k is None:
        return None
    if k_set is None or k is None:
        raise InvalidParameter("give both gauge_factor_set (the amplifier's setting) and "
                               "gauge_factor (the gauge's own) to correct strain",
                               field="gauge_factor" if k is None else "gauge_factor_set")
    if not any(units.is_strain(u) for u in unit_of.values()):
        raise InvalidParameter("gauge factors correct strain channels; none is in a strain "
                               "unit", field="gauge_factor")
    return _positive(k_set, "gauge_factor_set"), _positive(k, "gauge_factor")


def _positive(value, field: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InvalidParameter(f"{field} {value!r} is not a number", field=field) from None
    if not math.isfinite(v) or v <= 0:
        raise InvalidParameter(f"{field} {value!r} must be a positive number", field=field,
                               value=v, limit=0.0)
    return v
