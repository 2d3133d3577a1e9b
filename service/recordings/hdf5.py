"""HDF5 recordings, read with h5py (the library that owns the format).

Datasets are chosen by path: ``channels`` (dataset paths, comma separated)
or ``group`` (every one-dimensional numeric dataset in that group); with
neither, every such dataset in the file. A dataset named like a time column
(``time``, ``time_s``, ``t``) is the time column. The rate and each
channel's unit come from attributes where the file has them:
``sample_rate_hz``, ``sample_rate``, ``rate`` or ``fs`` [Hz], or ``dt``,
``time_step`` or ``increment`` [s], on the dataset or its group; ``unit`` or
``units`` on the dataset. Only the chosen datasets are read.

References
----------
.. [1] The HDF Group, *HDF5 File Format Specification*, version 3.0, 2017.
"""

from __future__ import annotations

import numpy as np

from . import TIME_NAMES, Recording, RecordingError, UnreadableRecording, binary, in_memory

_RATE_ATTRS = ("sample_rate_hz", "sample_rate", "rate", "fs")
_STEP_ATTRS = ("dt", "time_step", "increment")


def _text(value) -> str:
    if isinstance(value, bytes):
        return value.decode("utf-8", errors="replace")
    if isinstance(value, np.ndarray) and value.size == 1:
        return _text(value.reshape(-1)[0])
    return str(value)


def _series(f) -> list[str]:
    """Paths of every 1-D numeric dataset below ``f`` (a file or group)."""
    import h5py

    out = []

    def visit(name, obj):
        if isinstance(obj, h5py.Dataset) and obj.ndim == 1 and obj.dtype.kind in "iuf":
            out.append(obj.name)

    f.visititems(visit)
    return out


def _rate(ds) -> float | None:
    for holder in (ds, ds.parent):
        for key in _RATE_ATTRS:
            if key in holder.attrs:
                return float(np.asarray(holder.attrs[key]).reshape(-1)[0])
        for key in _STEP_ATTRS:
            if key in holder.attrs:
                step = float(np.asarray(holder.attrs[key]).reshape(-1)[0])
                return 1.0 / step if step > 0 else None
    return None


def read_hdf5(source, options: dict) -> Recording:
    """The chosen datasets of an HDF5 file (module notes): ``source`` is its
    path or its bytes (read through a reader closed here: h5py leaves a
    file object it was given open)."""
    if in_memory(source):
        with binary(source) as f:
            return _read_hdf5(f, options)
    return _read_hdf5(str(source), options)


def _read_hdf5(source, options: dict) -> Recording:
    import h5py

    try:
        f = h5py.File(source, "r")
    except OSError as exc:
        raise UnreadableRecording(f"the HDF5 file could not be read: {exc}") from None
    with f:
        wanted = [c.strip() for c in str(options.get("channels") or "").split(",") if c.strip()]
        if wanted:
            paths = ["/" + p.lstrip("/") for p in wanted]
        else:
            root = options.get("group") or "/"
            if root not in f or not isinstance(f[root], h5py.Group):
                raise RecordingError(f"the HDF5 file has no group {root!r}", field="group")
            paths = _series(f[root])
        if not paths:
            raise RecordingError("the HDF5 file has no one-dimensional numeric dataset "
                                 "(give channels as dataset paths)", field="channels")
        columns, units, rates = {}, {}, set()
        for p in paths:
            if p not in f or not isinstance(f[p], h5py.Dataset):
                raise RecordingError(f"the HDF5 file has no dataset {p!r}; it has "
                                     f"{_series(f)[:20]}", field="channels", channel=p)
            ds = f[p]
            if ds.ndim != 1 or ds.dtype.kind not in "iuf":
                raise RecordingError(f"HDF5 dataset {p!r} is not a 1-D series of numbers "
                                     f"({ds.dtype}, shape {ds.shape})", field="channels",
                                     channel=p)
            name = p.rsplit("/", 1)[-1]
            if name in columns:
                name = p.lstrip("/")  # two datasets of one name in different groups
            columns[name] = ds[()].astype(np.float64, copy=False)
            unit = next((_text(ds.attrs[k]) for k in ("unit", "units") if k in ds.attrs), None)
            units[name] = unit or None
            if name.lower() not in TIME_NAMES:
                rate = _rate(ds)
                if rate is not None:
                    rates.add(rate)
    if len(rates) > 1:
        raise RecordingError(f"the chosen datasets have different rates {sorted(rates)} Hz; "
                             "post each rate on its own (nothing is resampled)",
                             field="channels")
    time_name = next((n for n in columns if n.lower() in TIME_NAMES), None)
    return Recording(columns, units, time_name, rates.pop() if rates else None, "hdf5",
                     {"datasets": paths})
