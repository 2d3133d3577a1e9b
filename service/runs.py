"""Run an assessment request: channels + settings in, stored results out.

Between the HTTP layer and the engine: resolves each point's settings (the
same dictionaries the CLI reads, see ``engine/settings.py``), counts and
assesses every point, turns the results into JSON-safe dictionaries and
stores them (metadata in SQLite, cycles in Parquet). Nothing here reads a
request; the API and, later, background jobs call :func:`run`.
"""

from __future__ import annotations

import math
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, replace

import numpy as np

from service.engine import histograms
from service.engine.damage import CAUTIONS, assess
from service.engine.errors import InvalidParameter, unknown
from service.engine.rainflow import RESIDUE_TREATMENTS, CycleTable, astm_e1049, resolve_gate
from service.engine.settings import USER_CURVE_PREFIX, point_from_dict, resolve
from service.store import parquet, sqlite

#: Mean samples a point above which points are assessed on worker threads.
THREADED_SAMPLES = 50_000
POINT_WORKERS = 2

#: Keys of an assessment request besides the samples themselves.
REQUEST_KEYS = {"history_id", "samples", "unit", "units", "youngs_modulus", "sample_rate_hz",
                "settings", "points", "gate", "gate_fraction", "residue"}


@dataclass
class PlannedPoint:
    name: str
    samples: np.ndarray
    settings: dict


def plan(request: dict, channels: dict[str, np.ndarray], lookup=None) -> list[PlannedPoint]:
    """Which channels to assess with which settings; every error before any work.

    ``lookup(kind, name)`` resolves stored materials and user curves (see
    ``engine.settings.resolve``); each point keeps its resolved settings.
    """
    unknown_keys = set(request) - REQUEST_KEYS
    if unknown_keys:
        raise InvalidParameter(f"unknown field(s): {', '.join(sorted(unknown_keys))}",
                               field=sorted(unknown_keys)[0])
    defaults = request.get("settings") or {}
    points = request.get("points")
    if not isinstance(defaults, dict):
        raise InvalidParameter("settings must be an object", field="settings")
    if points is None:
        points = {name: {} for name in channels}
    if not isinstance(points, dict) or not points:
        raise InvalidParameter("points must be an object {channel: settings}", field="points")
    out = []
    for name, own in points.items():
        if name not in channels:
            raise unknown("points", name, channels)
        if not isinstance(own, dict):
            raise InvalidParameter(f"settings of point {name!r} must be an object",
                                   field="points")
        merged = {**defaults, **own}
        if lookup is not None:
            merged = resolve(merged, lookup)
        point_from_dict(merged)  # validate now: nothing is counted if any point is wrong
        out.append(PlannedPoint(name, channels[name], merged))
    return out


def counting_options(request: dict) -> tuple[float | None, float | None, str]:
    gate = request.get("gate")
    frac = request.get("gate_fraction")
    for key, v in (("gate", gate), ("gate_fraction", frac)):
        if v is not None and (isinstance(v, bool) or not isinstance(v, (int, float))):
            raise InvalidParameter(f"{key} {v!r} must be a number", field=key)
    if gate is not None and frac is not None:
        raise InvalidParameter("give gate or gate_fraction, not both", field="gate")
    residue = request.get("residue", "half_cycles")
    if residue not in RESIDUE_TREATMENTS:
        raise unknown("residue", residue, RESIDUE_TREATMENTS)
    return gate, frac, residue


def store_lookup(con, project: str):
    """``lookup(kind, name)`` over the materials and user curves of ``project``."""
    def lookup(kind: str, name: str) -> dict:
        table = "materials" if kind == "material" else "user_curves"
        doc = sqlite.get_named(con, project, table, name)
        if doc is None:
            names = [d["name"] for d in sqlite.list_named(con, project, table)]
            shown = names if kind == "material" else [USER_CURVE_PREFIX + n for n in names]
            raise unknown(kind, name if kind == "material" else USER_CURVE_PREFIX + name, shown)
        return doc
    return lookup


def json_safe(value):
    """Floats that JSON can carry: inf and NaN become None; numpy scalars become Python."""
    if isinstance(value, dict):
        return {str(k): json_safe(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [json_safe(v) for v in value]
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def assess_point(point: PlannedPoint, gate, gate_fraction, residue, duration_s):
    """``(result dict, CycleTable, per-cycle damage)`` of one point."""
    curve, opts, estimate = point_from_dict(point.settings)
    g = resolve_gate(point.samples, gate or 0.0, gate_fraction)
    table = astm_e1049(point.samples, gate=g, residue=residue)
    r = assess(table, curve, opts, duration_s=duration_s)
    out = r.summary()
    out.update(
        point=point.name,
        runout=math.isinf(r.life_repeats),
        gate_mpa=g,
        top_cycles=r.top_cycles,
        curve=r.curve,
        estimate=estimate.as_dict() if estimate is not None else None,
        settings={**r.options, "residue": residue},
        settings_used=point.settings,
        cautions=[c for c in r.cautions if c not in CAUTIONS],
    )
    return json_safe(out), table, r.damage_per_cycle


def run(con, data_dir, request: dict, channels: dict[str, np.ndarray],
        duration_s: float | None, history_id: str | None, progress=None,
        samples_file: str | None = None, lookup=None, *, project: str) -> dict:
    """Assess, store (in ``project``) and return the assessment row.

    ``samples_file`` is the stored history the channels came from; inline
    channels are stored with the assessment, in the database. Cycle tables are not
    stored: counting is exact and repeatable, so :func:`point_cycles`
    recounts a point from these samples when asked (a fraction of the cost
    of writing and keeping every cycle). ``progress(done, total)`` is called
    after each point, if given.
    """
    gate, frac, residue = counting_options(request)
    points = plan(request, channels, lookup)
    results = {}

    def one(p):
        return assess_point(p, gate, frac, residue, duration_s)

    # Long points side by side on worker threads (the kernels release the
    # GIL); short ones in turn, as assess_many does (GIL hand-offs cost more).
    long_points = sum(p.samples.shape[0] for p in points) >= THREADED_SAMPLES * len(points)
    pool = ThreadPoolExecutor(POINT_WORKERS) if long_points and len(points) > 1 else None
    try:
        outcomes = pool.map(one, points) if pool else map(one, points)
        for i, (p, (res, _table, _dmg)) in enumerate(zip(points, outcomes)):
            results[p.name] = res
            if progress is not None:
                progress(i + 1, len(points))
    finally:
        if pool:
            pool.shutdown(cancel_futures=True)
    aid = sqlite.new_id("a")
    row = {"id": aid, "project": project, "history_id": history_id, "created_at": sqlite.now(), "state": "done",
           "request": json_safe({k: v for k, v in request.items() if k != "samples"}),
           "result": {"points": results, "duration_s": json_safe(duration_s),
                      "units": {"stress": "MPa", "damage": "-", "life_hours": "h",
                                "life_cycles": "cycles"},
                      "cautions": list(CAUTIONS)},
           "samples_file": samples_file}
    with sqlite.write(con):
        sqlite.insert_assessment(con, row)
        if samples_file is None:
            # Inline samples go into the same transaction: one commit (one
            # fsync) makes the result and what it was made from durable.
            sqlite.insert_samples(con, aid, {p.name: np.ascontiguousarray(p.samples)
                                             for p in points})
    return row


def point_cycles(data_dir, assessment: dict, point: str,
                 con=None) -> tuple[CycleTable, np.ndarray]:
    """A point's cycle table and per-cycle damage, recounted from its samples.

    Uses the gate and residue treatment the assessment used and its settings,
    so the rows are the ones the stored result was computed from.
    """
    res = assessment["result"]["points"][point]
    if assessment["samples_file"]:
        samples = parquet.read_channels(data_dir, assessment["samples_file"], [point])[point]
    else:
        samples = sqlite.get_samples(con, assessment["id"], point)
    table = astm_e1049(samples, gate=res["gate_mpa"], residue=res["settings"]["residue"])
    curve, opts, _ = point_from_dict(res["settings_used"])
    r = assess(table, curve, replace(opts, reserve_factor=False, top_cycles=0))
    return table, r.damage_per_cycle


def range_mean(table: CycleTable, range_bins, mean_bins) -> dict:
    m = histograms.range_mean_matrix(table, range_bins=range_bins, mean_bins=mean_bins)
    return {"range_edges_mpa": m.row_edges.tolist(), "mean_edges_mpa": m.col_edges.tolist(),
            "counts": m.counts.tolist(), "outside": m.outside}
