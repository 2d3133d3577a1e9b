"""ASAM MDF 4 recordings, read with asammdf (the library that owns the format).

An MDF file holds channel groups, each with its own time base (the master
channel). A history has one rate, and resampling a group to another's time
base would lose or invent peaks, so one upload takes the channels of one
group: ``channels`` (names, comma separated) or ``group`` (its index) say
which; a file with a single group of data needs neither. Names and units
come from the file's metadata; the master channel becomes the time column.

References
----------
.. [1] ASAM MCD-2 MDF, *Measurement Data Format*, version 4.1. Hoehenkirchen,
   Germany: ASAM e.V., 2019 (channel groups, master channels).
"""

from __future__ import annotations

import numpy as np

from . import Recording, RecordingError, UnreadableRecording, binary, in_memory


def _groups(mdf) -> list[list[tuple[str, str]]]:
    """Per group, its data channels ``(name, unit)`` (the master left out)."""
    out = []
    for g, group in enumerate(mdf.groups):
        master = mdf.masters_db.get(g)
        out.append([(ch.name, ch.unit or "") for i, ch in enumerate(group.channels)
                    if i != master])
    return out


def read_mdf(source, options: dict) -> Recording:
    """The channels of one channel group of an MDF 4 file (module notes):
    ``source`` is its path or its bytes (read through a reader closed here:
    asammdf leaves a file object it was given open)."""
    if in_memory(source):
        with binary(source) as f:
            return _read_mdf(f, options)
    return _read_mdf(str(source), options)


def _read_mdf(source, options: dict) -> Recording:
    from asammdf import MDF

    try:
        mdf = MDF(source)
    except Exception as exc:  # asammdf raises many kinds on a damaged file
        raise UnreadableRecording(f"the MDF file could not be read: {exc}") from None
    try:
        groups = _groups(mdf)
        listing = {g: [n for n, _ in chans] for g, chans in enumerate(groups) if chans}
        wanted = [c.strip() for c in str(options.get("channels") or "").split(",") if c.strip()]
        if options.get("group") is not None:
            g = _group_index(options["group"], listing)
        elif wanted:
            where = {n: g for g, names in listing.items() for n in names}
            missing = [n for n in wanted if n not in where]
            if missing:
                raise RecordingError(f"the MDF file has no channel(s) {missing}; its groups: "
                                     f"{listing}", field="channels")
            found = sorted({where[n] for n in wanted})
            if len(found) > 1:
                raise RecordingError(
                    f"channels {wanted} lie in groups {found}, each with its own time base; "
                    "post each group on its own (nothing is resampled)", field="channels",
                    groups={str(k): v for k, v in listing.items()})
            g = found[0]
        elif len(listing) == 1:
            g = next(iter(listing))
        else:
            raise RecordingError(
                f"the MDF file has {len(listing)} channel groups, each with its own time base; "
                "choose one with group (its index) or channels (names)", field="group",
                groups={str(k): v for k, v in listing.items()})
        names = wanted or listing[g]
        units = dict(groups[g])
        columns, time = {}, None
        for name in names:
            sig = mdf.get(name, group=g, index=_index(mdf, name, g))
            samples = np.asarray(sig.samples)
            if samples.ndim != 1 or samples.dtype.kind not in "iuf":
                raise RecordingError(f"MDF channel {name!r} is not a series of numbers "
                                     f"({samples.dtype}, shape {samples.shape})",
                                     field="channels", channel=name)
            columns[name] = samples.astype(np.float64, copy=False)
            time = np.asarray(sig.timestamps, np.float64)
    finally:
        mdf.close()
    time_name = "time_s" if "time_s" not in columns else "time_s_mdf"
    columns[time_name] = time
    out_units = {n: (units.get(n) or None) for n in names}
    out_units[time_name] = "s"
    return Recording(columns, out_units, time_name, None, "mdf4",
                     {"group": g, "channels": names})


def _group_index(value, listing: dict) -> int:
    try:
        g = int(value)
    except (TypeError, ValueError):
        raise RecordingError(f"group {value!r} must be a channel group's index",
                             field="group") from None
    if g not in listing:
        raise RecordingError(f"the MDF file has no channel group {g} with data; its groups: "
                             f"{listing}", field="group")
    return g


def _index(mdf, name: str, group: int) -> int:
    for g, i in mdf.channels_db[name]:
        if g == group:
            return i
    raise RecordingError(f"MDF channel {name!r} is not in group {group}", field="channels")
