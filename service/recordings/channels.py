"""Channels of a recording checked and converted to MPa.

What a valid recording is, whichever way it came in (a file read by
:func:`service.recordings.read`, JSON arrays, inline samples): named
channels of at least two finite numbers, all of one length, each with a unit
(the request's per-channel ``units``, else the file's own, else ``unit``,
else a ledger point's registered unit), strain corrected for the gauge
factor when asked and converted to MPa with Young's modulus; a time column
that increases gives the rate. The service and the command line both call
:func:`validated`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from service.engine import units
from service.engine.errors import InvalidLoadHistory, InvalidParameter, unknown
from service.engine.rainflow import as_history

from . import RecordingError

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


def validated(columns: dict, params: dict, registered: dict | None = None, *,
              file_units: dict | None = None, time_column: str | None = None,
              file_rate: float | None = None, check=None) -> Upload:
    """Check named columns (arrays or lists) and convert them to MPa.

    ``registered`` ({channel: (unit, youngs_modulus)}), when given, names the
    only channels allowed (the ledger's points) and gives a channel whose
    unit the request does not state its registered unit and modulus.
    ``file_units`` are the units the file itself gives (spelt as the
    acquisition system spells them), ``time_column`` the time column the
    reader found, ``file_rate`` a rate from the file's metadata [Hz];
    ``check(columns)``, if given, is called before any conversion (the
    service's limits on channels and samples).
    """
    time_col = params.get("time_column") or time_column or DEFAULT_TIME_COLUMN
    rate = params.get("sample_rate_hz")
    if rate is not None:
        rate = _positive(rate, "sample_rate_hz")
    elif file_rate is not None:
        rate = _positive(file_rate, "sample_rate_hz")
    time = columns.pop(time_col, None)
    if not columns:
        raise RecordingError("the upload has no channels besides the time column",
                             field="channels")
    if time is not None:
        t = as_history(time, field_name=time_col)
        step = np.diff(t)
        if np.any(step <= 0):
            raise RecordingError(f"column {time_col!r} must increase", field=time_col,
                                 sample_index=int(np.flatnonzero(step <= 0)[0]) + 1)
        inferred = rate_from_times(t)
        if rate is None:
            rate = inferred
        elif not math.isclose(rate, inferred, rel_tol=1e-3):
            raise InvalidParameter(
                f"sample_rate_hz {rate} contradicts the time column ({inferred:.6g} Hz)",
                field="sample_rate_hz", value=rate, limit=inferred)
    if check is not None:
        check(columns)
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
        raise RecordingError(f"channels differ in length: {sorted(lengths)} samples",
                             field="channels")
    return Upload(out, unit_of, rate, params.get("name"), ranges,
                  gauge_factors=None if gauge is None else list(gauge))


def rate_from_times(t: np.ndarray) -> float:
    """The sample rate a time column says, to the digits it can say. [Hz]

    The median step gives the rate (a dropped or doubled sample does not
    move it); the times' own resolution (the decimal quantum they are
    written in, found on a few hundred of them) limits how many significant
    digits that rate has: a column in steps of 0.002 s written to 0.1 ms
    over 240 s gives 500 Hz, not 500.0000000002771.
    """
    step = float(np.median(np.diff(t)))
    rate = 1.0 / step
    span = float(t[-1] - t[0])
    sample = t[:: max(1, t.shape[0] // 500)]
    quantum = None
    for k in range(0, 10):
        q = 10.0 ** -k
        scaled = sample / q
        if np.all(np.abs(scaled - np.round(scaled)) <= 1e-6 * np.maximum(1.0, np.abs(scaled))):
            quantum = q
            break
    if quantum is None or span <= 0:
        return rate
    digits = max(1, int(math.floor(math.log10(span / quantum))))
    return float(f"{rate:.{digits}g}")


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
