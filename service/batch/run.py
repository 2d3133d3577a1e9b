"""Run a batch: partitions of points as Dask tasks, progress, failures, results.

A partition that fails as a whole (an unreadable file, a lost worker) is
reported with the points it held and why; every other partition's results
are kept. Results are one row per point (Parquet) and a summary (JSON).
"""

from __future__ import annotations

import json
import math
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

from service import declarations
from service.engine import cautions as _cautions
from service.engine.errors import InvalidParameter
from service.engine.rainflow import resolve_gate
from service.runs import json_safe
from service.engine.settings import is_strain_life, point_from_dict, strain_life_from_dict

from .dataset import Dataset, partitions
from .tasks import RESULT_COLUMNS, _failed, assess_group

#: Points a partition holds unless told otherwise.
DEFAULT_PARTITION_POINTS = 64


@dataclass
class BatchResult:
    rows: list[dict]
    failures: list[dict]
    seconds: float
    partitions: int
    partition_points: int
    # worker process id -> the most a task raised its resident memory (bytes;
    # with measure_memory), else the process's peak resident memory (bytes)
    peak_memory: dict = field(default_factory=dict)

    def summary(self, dataset: Dataset, settings: dict, top: int = 10) -> dict:
        ok = [r for r in self.rows if r["status"] == "ok"]
        worst = sorted(ok, key=lambda r: -(r["damage"] if r["damage"] is not None
                                            else math.inf))[:top]
        return json_safe({
            "dataset": {"files": len(dataset.files), "layout": dataset.layout,
                        "points": len(dataset.points), "rows": dataset.rows,
                        "sample_rate_hz": dataset.sample_rate_hz},
            "settings": settings,
            "points_ok": len(ok), "points_failed": len(self.rows) - len(ok),
            "partitions": self.partitions, "partition_points": self.partition_points,
            "failed_partitions": self.failures,
            "seconds": round(self.seconds, 3),
            "worst": [{k: r[k] for k in ("point", "damage", "life_hours", "reserve_factor",
                                         "flags")} for r in worst],
            "units": {"stress": "MPa", "damage": "-", "life_hours": "h"},
            "cautions": _cautions.general(),
        })


def run_batch(dataset: Dataset, settings: dict, client, *,
              partition_points: int = DEFAULT_PARTITION_POINTS, unit: str = "MPa",
              youngs_modulus: float | None = None, gate: float = 0.0,
              gate_fraction: float | None = None, overrides: dict | None = None, progress=None,
              measure_memory: bool = False) -> BatchResult:
    """Assess every point of ``dataset`` on ``client``'s cluster.

    Settings are checked here first (a bad setting fails at once, not in
    every task). ``progress(points_done, points_total)`` follows the tasks.
    """
    from distributed import as_completed

    if is_strain_life(settings):
        strain_life_from_dict(settings)
    else:
        point_from_dict(settings)
    resolve_gate(np.zeros(1), gate, gate_fraction)  # a bad gate fails here, not per task
    if partition_points < 1:
        raise ValueError("partition_points must be at least 1")
    points = batch_points(dataset, overrides)
    groups = partitions(points, partition_points)
    t0 = time.perf_counter()
    futures = {}
    for g in groups:
        fut = client.submit(assess_group, list(dataset.files), dataset.layout, g, settings,
                            unit=unit, youngs_modulus=youngs_modulus,
                            sample_rate_hz=dataset.sample_rate_hz, gate=gate,
                            gate_fraction=gate_fraction,
                            overrides={p: overrides[p] for p in g if p in (overrides or {})},
                            measure_memory=measure_memory, pure=False)
        futures[fut] = g
    rows: dict[str, dict] = {}
    failures, peaks = [], {}
    done = 0
    for fut in as_completed(list(futures)):
        g = futures[fut]
        try:
            out = fut.result()
        except Exception as exc:  # the whole partition: name its points and why
            failures.append({"points": g, "reason": f"{type(exc).__name__}: {exc}"})
            rows.update({p: _failed(p, f"partition failed: {type(exc).__name__}: {exc}")
                         for p in g})
        else:
            rows.update({r["point"]: r for r in out["rows"]})
            seen = out["rss_rise_bytes"] if measure_memory else out["peak_rss_kb"] * 1024
            peaks[out["pid"]] = max(peaks.get(out["pid"], 0), seen)
        finally:
            fut.release()
        done += len(g)
        if progress is not None:
            progress(done, len(points))
    return BatchResult([rows[p] for p in points], failures,
                       time.perf_counter() - t0, len(groups), partition_points, peaks)


def batch_points(dataset: Dataset, overrides: dict | None) -> list[str]:
    """The points of a batch: the dataset's columns, and the hot-spot points
    of ``overrides`` (``{name: {"hot_spot": declaration, ...}}``, their
    gauges among the columns); a column used as a gauge is a point of its
    own only when ``overrides`` lists it."""
    overrides = overrides or {}
    columns = set(dataset.points)
    toes = {p: o["hot_spot"] for p, o in overrides.items()
            if isinstance(o, dict) and "hot_spot" in o}
    gauges = set()
    for p, decl in toes.items():
        if p in columns:
            raise InvalidParameter(f"hot-spot point {p!r} has the name of a column: name it "
                                   "apart from its gauges", field="hot_spot", value=p)
        gauges |= set(declarations.hot_spot_spec(p, decl, columns)["gauges"])
    return [p for p in dataset.points if p not in gauges or p in overrides] + list(toes)


def write_results(result: BatchResult, dataset: Dataset, settings: dict, out_dir) -> dict:
    """``points.parquet`` (one row per point) and ``summary.json`` in ``out_dir``."""
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    cols = {c: [r[c] for r in result.rows] for c in RESULT_COLUMNS}
    types = {"point": pa.string(), "status": pa.string(), "flags": pa.string(),
             "cautions": pa.string(), "reserve_limited_by": pa.string(),
             "error": pa.string(), "overload_cycles": pa.int64(), "samples": pa.int64()}  # gate_mpa: float64
    table = pa.table({c: pa.array(v, type=types.get(c, pa.float64())) for c, v in cols.items()})
    tmp = out / ".points.parquet.tmp"
    pq.write_table(table, tmp)
    tmp.replace(out / "points.parquet")
    summary = result.summary(dataset, settings)
    (out / "summary.json").write_text(json.dumps(summary, indent=2))
    return summary


def point_runner(client):
    """A ``runner`` for :func:`service.runs.run`: each point of an assessment
    as one task on ``client``'s cluster, progress as tasks finish."""
    def run_points(points, gate, gate_fraction, residue, duration_s, progress):
        from distributed import as_completed

        from service.runs import assess_point

        futures = {client.submit(assess_point, p, gate, gate_fraction, residue, duration_s,
                                 pure=False): p.name for p in points}
        out = {}
        try:
            for i, fut in enumerate(as_completed(list(futures)), 1):
                out[futures[fut]] = fut.result()[0]
                if progress is not None:
                    progress(i, len(points))
        finally:
            client.cancel(list(futures))
        return out
    return run_points


def superpose_on_cluster(client, unit, loads, curve, options, *, node_ids, reduction: str,
                         top: int, gate: float = 0.0, duration_s=None, progress=None,
                         chunk_nodes: int = 2000, **scan):
    """:func:`service.engine.multiaxial.assess_superposition` over node chunks
    as Dask tasks; the same numbers, node for node, as one process."""
    import numpy as np
    from distributed import as_completed

    from service.engine.multiaxial import NodeDamage

    ids = np.array(node_ids, dtype=object)
    loads_f = client.scatter(loads, broadcast=True)
    futures = {}
    for lo in range(0, unit.shape[0], chunk_nodes):
        hi = min(lo + chunk_nodes, unit.shape[0])
        fut = client.submit(_superpose_chunk, unit[lo:hi], loads_f, curve, options, reduction,
                            ids[lo:hi], top, gate, duration_s, scan, pure=False)
        futures[fut] = (lo, hi)
    damage = np.empty(unit.shape[0])
    peak = np.empty(unit.shape[0])
    index = np.empty(unit.shape[0], np.int64)
    planes, shares = None, {}
    tops = []
    done = 0
    try:
        for fut in as_completed(list(futures)):
            lo, hi = futures[fut]
            nd = fut.result()
            damage[lo:hi] = nd.damage
            peak[lo:hi] = nd.max_abs_equivalent
            if nd.planes is not None:
                planes = nd.planes
                index[lo:hi] = nd.plane_index
            shares.update(nd.sign_ambiguous_share or {})
            tops += nd.top
            done += hi - lo
            if progress is not None:
                progress(done, unit.shape[0])
    finally:
        client.cancel(list(futures))
    # The worst of every chunk's worst: the global worst, in the same order as
    # one process (damage descending, then node order).
    order = {n: i for i, n in enumerate(node_ids)}
    tops.sort(key=lambda t: (-t[1].damage, order[t[0]]))
    kept = [n for n, _ in tops[:top]]
    return NodeDamage(node_ids=ids, damage=damage, max_abs_equivalent=peak,
                      reduction=reduction, top=tops[:top], planes=planes,
                      plane_index=index if planes is not None else None,
                      sign_ambiguous_share={n: shares[n] for n in kept if n in shares})


def _superpose_chunk(unit, loads, curve, options, reduction, ids, top, gate, duration_s,
                     scan=None):
    from service.engine.multiaxial import assess_superposition

    return assess_superposition(unit, loads, curve, options, reduction=reduction,
                                node_ids=ids, top=top, gate=gate, duration_s=duration_s,
                                workers=1, **(scan or {}))
