"""What a worker runs: one group of points through every file of a dataset.

Each point is counted file by file (ASTM E1049-85 with the residue carried
across files, so the joins are exact), its residue closed at the end, and
the cycles assessed with the point's settings. Memory: one file's samples of
the group at a time, plus the group's cycle tables. A point that cannot be
assessed (a NaN, a setting that does not apply) is reported with its reason;
the group's other points go on.
"""

from __future__ import annotations

import math
import os
import resource
import threading
import time

import numpy as np
from service import declarations
from service.engine import hot_spot
from service.engine import units as engine_units
from service.engine.damage import assess
from service.engine.errors import EngineError
from service.engine.errors import InvalidParameter
from service.engine.rainflow import CycleTable, close_residue, count_block, resolve_gate
from service.engine.strain_life import pseudo_of_stored
from service.engine.strain_life_blocks import close_local, count_block_local
from service.engine.settings import (STRAIN_LIFE_SHARED, is_strain_life, point_from_dict,
                                     strain_life_from_dict)

from .dataset import read_group

#: Columns of the per-point result table, in order.
RESULT_COLUMNS = ("point", "status", "damage", "damage_per_repeat", "life_repeats",
                  "life_hours", "life_cycles", "reserve_factor", "reserve_limited_by",
                  "equivalent_range", "cycles_counted", "max_range", "overload_cycles",
                  "samples", "gate_mpa", "flags", "cautions", "error")


def assess_group(files, layout: str, points: list[str], settings: dict, *,
                 unit: str = "MPa", youngs_modulus: float | None = None,
                 sample_rate_hz: float | None = None, gate: float = 0.0,
                 gate_fraction: float | None = None,
                 overrides: dict | None = None, measure_memory: bool = False) -> dict:
    """Assess ``points`` of a dataset; returns ``{"rows": [...], "pid",
    "peak_rss_kb", "seconds", "rss_rise_bytes"}``, one row per point
    (``status`` ok or failed, with ``error``). ``measure_memory`` samples
    the process's resident memory every 2 ms to report how far the task
    raised it (``rss_rise_bytes``; None when not measured).

    ``gate`` is one absolute hysteresis gate [MPa] for every point;
    ``gate_fraction`` [-] instead gates each point at that share of its own
    range (max - min over the whole dataset), which costs a first pass over
    the files to find the ranges (the samples are read twice, memory stays
    one file of the group)."""
    t0 = time.perf_counter()
    probe = _RssProbe() if measure_memory else None
    overrides = overrides or {}
    models, rows, states, tables, counts, failed, toes = {}, {}, {}, {}, {}, {}, {}
    strain, local = {}, {}
    for p in points:
        own = dict(overrides.get(p, {}))
        try:
            if "hot_spot" in own:
                toes[p] = declarations.hot_spot_spec(p, own.pop("hot_spot"), None)
            base = settings
            if own.get("method") == "strain_life":
                base = {k: v for k, v in settings.items() if k in STRAIN_LIFE_SHARED}
            merged = {**base, **own}
            if is_strain_life(merged):
                if p in toes:
                    raise InvalidParameter("a hot-spot point is assessed on hot-spot S-N "
                                           "curves, not by strain-life", field="method")
                strain[p] = strain_life_from_dict(merged)
            else:
                models[p] = point_from_dict(merged)
        except EngineError as exc:
            failed[p] = exc.message
    live = [p for p in points if p not in failed]
    gates = _gates(files, layout, live, toes, unit, youngs_modulus, gate, gate_fraction,
                   failed)
    for f in files:
        for p, mpa in _file_histories(f, layout, live, toes, unit, youngs_modulus,
                                      failed).items():
            try:
                if p in strain:
                    _strain_block(p, mpa, strain[p], gates[p], local)
                    counts[p] = counts.get(p, 0) + mpa.shape[0]
                    continue
                table, states[p] = count_block(mpa, states.get(p), gate=gates[p])
            except EngineError as exc:
                # count_block numbers samples across the whole history.
                at = exc.details.get("sample_index")
                where = f"{f} row {at - counts.get(p, 0)}" if at is not None else f
                failed[p] = f"{where}: {exc.message}"
                continue
            tables.setdefault(p, []).append(table)
            counts[p] = counts.get(p, 0) + mpa.shape[0]
    for p in points:
        if p in failed:
            rows[p] = _failed(p, failed[p])
            continue
        if counts.get(p, 0) < 2:
            rows[p] = _failed(p, "fewer than two samples in the dataset")
            continue
        duration = counts[p] / sample_rate_hz if sample_rate_hz else None
        if p in strain:
            rows[p] = _strain_row(p, strain[p], local.pop(p), counts[p], duration, gates[p])
            continue
        curve, opts, _ = models[p]
        table = CycleTable.concat(tables.pop(p) + [close_residue(states.pop(p))])
        try:
            r = assess(table, curve, opts, duration_s=duration)
        except EngineError as exc:
            rows[p] = _failed(p, exc.message)
            continue
        s = r.summary()
        rows[p] = {"point": p, "status": "ok", **{k: _num(s[k]) for k in (
            "damage", "damage_per_repeat", "life_repeats", "life_hours", "life_cycles",
            "reserve_factor", "equivalent_range", "cycles_counted", "max_range")},
            "reserve_limited_by": s["reserve_limited_by"],
            "overload_cycles": int(s["overload_cycles"]), "samples": counts[p],
            "gate_mpa": gates[p], "flags": ";".join(s["flags"]),
            "cautions": ";".join(c["code"] for c in r.caution_dicts()), "error": None}
    return {"rows": [rows[p] for p in points], "pid": os.getpid(),
            "peak_rss_kb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss,
            "seconds": time.perf_counter() - t0,
            "rss_rise_bytes": probe.stop() if probe else None}


def _strain_params(model):
    material, params, _ = model
    scale, rule = pseudo_of_stored(material, params)
    return material, scale, rule, params["mean_stress_method"]


def _strain_block(p, mpa, model, gate, local) -> None:
    """One file of a strain-life point followed through the notch, the
    memory carried to the next file (``engine.strain_life_blocks``)."""
    material, scale, rule, msm = _strain_params(model)
    held = local.get(p) or {"state": None, "damage": 0.0, "cycles": 0.0, "over": 0,
                            "max_amp": 0.0}
    loops, held["state"] = count_block_local(mpa * scale, held["state"], material, rule=rule,
                                             mean_stress_method=msm, gate=gate * scale)
    held["damage"] += float(np.sum(loops["damage"]))
    held["cycles"] += float(np.sum(loops["count"]))
    held["over"] += int(np.sum(loops["reversals_to_failure"] == 0.0))
    if len(loops["count"]):
        held["max_amp"] = max(held["max_amp"], float(np.max(loops["strain_amplitude"])))
    local[p] = held


def _strain_row(p, model, held, samples, duration, gate) -> dict:
    """A strain-life point's result row: the files' loops and the residue
    closed as half cycles (the reserve factor is not searched in batches)."""
    material, scale, rule, msm = _strain_params(model)
    opts = model[2]
    tail = close_local(held["state"], material, rule=rule, mean_stress_method=msm)
    over = held["over"] + int(np.sum(tail["reversals_to_failure"] == 0.0))
    damage = math.inf if over else held["damage"] + float(np.sum(tail["damage"]))
    cycles = held["cycles"] + float(np.sum(tail["count"]))
    life = 0.0 if over else (math.inf if damage == 0 else opts.allowable_damage / damage)
    flags = ["static_overload"] if over else (
        ["allowable_reached"] if damage >= opts.allowable_damage else [])
    return {"point": p, "status": "ok", "damage": damage, "damage_per_repeat": None,
            "life_repeats": life, "life_hours": (life * duration / 3600.0 if duration
                                                 else None),
            "life_cycles": life * cycles if math.isfinite(life) else math.inf,
            "reserve_factor": None, "equivalent_range": None, "cycles_counted": cycles,
            "max_range": None, "reserve_limited_by": None, "overload_cycles": over,
            "samples": samples, "gate_mpa": gate, "flags": ";".join(flags),
            "cautions": "strain_life_method", "error": None}


def _file_histories(f, layout, points, toes, unit, youngs_modulus, failed) -> dict:
    """``{point: stress history in this file}`` [MPa]: a point's own column,
    or a hot-spot point's gauges extrapolated to the toe (``engine.hot_spot``;
    a file holding only some of its gauges fails the point). A point whose
    samples cannot be read as stress lands in ``failed``; points absent from
    the file are left out."""
    columns = sorted({c for p in points for c in (toes[p]["gauges"] if p in toes else [p])})
    data = read_group(f, layout, columns)
    out = {}
    for p in points:
        if p in failed:
            continue
        names = toes[p]["gauges"] if p in toes else [p]
        present = [c for c in names if c in data]
        if not present:
            continue
        if len(present) < len(names):
            failed[p] = (f"{f}: hot-spot gauge(s) "
                         f"{', '.join(c for c in names if c not in data)} missing")
            continue
        try:
            mpa = [engine_units.to_mpa(data[c], unit, youngs_modulus) for c in names]
            out[p] = (hot_spot.extrapolate(mpa, toes[p]["weights"]) if p in toes
                      else mpa[0])
        except EngineError as exc:
            failed[p] = f"{f}: {exc.message}"
    return out


def _gates(files, layout, points, toes, unit, youngs_modulus, gate, gate_fraction,
           failed) -> dict:
    """The absolute gate [MPa] of each point: ``gate`` for all, or
    ``gate_fraction`` of each point's range over every file (a first pass).
    A point whose samples cannot be read as stress lands in ``failed``."""
    if gate_fraction is None:
        g = resolve_gate(None, gate)
        return dict.fromkeys(points, g)
    resolve_gate(np.zeros(1), gate, gate_fraction)  # the checks, before any reading
    lo = dict.fromkeys(points, np.inf)
    hi = dict.fromkeys(points, -np.inf)
    for f in files:
        for p, mpa in _file_histories(f, layout, points, toes, unit, youngs_modulus,
                                      failed).items():
            if mpa.size:
                lo[p] = min(lo[p], float(np.min(mpa)))
                hi[p] = max(hi[p], float(np.max(mpa)))
    span = {p: hi[p] - lo[p] for p in points}
    return {p: gate_fraction * span[p] if np.isfinite(span[p]) else 0.0 for p in points}


class _RssProbe:
    """Samples this process's resident set (``/proc/self/statm``) on a thread."""

    def __init__(self, every_s: float = 0.002):
        self.page = os.sysconf("SC_PAGE_SIZE")
        self.start = self.peak = self._rss()
        self.every_s = every_s
        self.done = threading.Event()
        self.thread = threading.Thread(target=self._loop, daemon=True)
        self.thread.start()

    def _rss(self) -> int:
        with open("/proc/self/statm") as f:
            return int(f.read().split()[1]) * self.page

    def _loop(self) -> None:
        while not self.done.wait(self.every_s):
            self.peak = max(self.peak, self._rss())

    def stop(self) -> int:
        self.done.set()
        self.thread.join()
        self.peak = max(self.peak, self._rss())
        return self.peak - self.start


def _num(v):
    """Floats as they are (inf stays inf in Parquet); None for missing."""
    return None if v is None else float(v)


def _failed(point: str, reason: str) -> dict:
    row = dict.fromkeys(RESULT_COLUMNS)
    row.update(point=point, status="failed", error=reason, flags="", cautions="")
    return row


def warm() -> dict:
    """Load the kernels in a worker before the clock starts (a bench helper)."""
    from service.engine.damage import warm_up as warm_damage
    from service.engine.rainflow import warm_up

    warm_up()
    warm_damage()
    return {"pid": os.getpid(),
            "peak_rss_kb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss}
