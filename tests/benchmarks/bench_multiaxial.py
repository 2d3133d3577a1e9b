"""Multiaxial points: the critical-plane scan against one uniaxial assessment,
and finite-element superposition of many nodes.

Run:  python tests/benchmarks/bench_multiaxial.py [--quick]

1. ``critical_plane_over_uniaxial``: a rectangular rosette of 1e6 samples a
   gauge (seeded narrow-band plane stress, not proportional): reduce it to
   plane stress and scan planes at 10 deg (18 planes, each counted and
   assessed, the worst again in full), against one uniaxial assessment of a
   1e6-sample history (count + assess with reserve factor). Medians of
   alternating runs. Target <= 25.
2. ``nodes_per_s``: superpose three load channels of 1e4 samples on 1e5
   nodes (``--quick``: 1e4) with 3-D unit stresses, reduce each node by signed
   von Mises, count and assess every node, the worst ten in full.
   ``peak_mb``: the peak of traced allocations (tracemalloc; numpy's arrays
   are traced) during that run, which the node chunks (64 MB of component
   histories) bound whatever the node count.

Prints a table, then one JSON line.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import sys
import tempfile
import time
import tracemalloc

os.environ.setdefault("NUMBA_CACHE_DIR", os.path.join(tempfile.gettempdir(), "cycleledger-numba"))
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

import numpy as np  # noqa: E402

from bench_api import narrow_band  # noqa: E402
from service.engine.damage import AssessmentOptions, assess_history  # noqa: E402
from service.engine.damage import warm_up as warm_damage  # noqa: E402
from service.engine.multiaxial import (ROSETTE_LAYOUTS, assess_multiaxial,  # noqa: E402
                                       assess_superposition, plane_stress_from_strains,
                                       rosette_strains)
from service.engine.rainflow import warm_up  # noqa: E402
from service.engine.sn_catalogue import catalogue_curve  # noqa: E402

CURVE = catalogue_curve("EN1993-1-9:71")
OPTS = AssessmentOptions(mean_stress_method="goodman", ultimate_strength=700.0)
E, NU = 206_000.0, 0.3


def rosette(n: int, seed: int = 1):
    """Gauge readings (E x strain, MPa) of a rectangular rosette on a seeded
    plane stress history with independent sxx, syy, sxy."""
    c = narrow_band(n, seed, 3)
    sx, sy, txy = c["g0"], 0.4 * c["g1"], 0.5 * (c["g2"] - 20.0)
    ex, ey, g = (sx - NU * sy), (sy - NU * sx), 2 * (1 + NU) * txy  # E x strains
    out = []
    for a in ROSETTE_LAYOUTS["rectangular"]:
        t = np.radians(a)
        out.append(ex * np.cos(t) ** 2 + ey * np.sin(t) ** 2 + g * np.sin(t) * np.cos(t))
    return out


def time_it(fn) -> float:
    t0 = time.perf_counter()
    fn()
    return time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true")
    args = ap.parse_args()
    warm_up()
    warm_damage()

    n = 1_000_000
    a, b, c = rosette(n)
    uni = narrow_band(n, 9, 1)["g0"]

    def scan():
        comps = np.stack(plane_stress_from_strains(*rosette_strains(a, b, c), 1.0, NU), 1)
        return assess_multiaxial(comps, CURVE, OPTS, reductions=("critical_plane",),
                                 plane_step_deg=10.0)

    def one():
        return assess_history(uni, CURVE, OPTS)

    scan(), one()  # first calls load everything
    t_scan, t_one = [], []
    for _ in range(3 if args.quick else 5):
        t_one.append(time_it(one))
        t_scan.append(time_it(scan))
    ratio = statistics.median(t_scan) / statistics.median(t_one)
    m = scan()
    print(f"critical-plane scan, 18 planes of 1e6 samples: {statistics.median(t_scan):.3f} s; "
          f"one uniaxial assessment: {statistics.median(t_one) * 1e3:.1f} ms; ratio "
          f"{ratio:.1f} (governing plane {m.plane_angle} deg, rotation "
          f"{m.rotation_deg:.0f} deg)")

    nodes = 10_000 if args.quick else 100_000
    samples, cases = 10_000, 3
    rng = np.random.default_rng(3)
    unit = rng.normal(0.0, 15.0, size=(nodes, cases, 6))
    loads = np.stack([narrow_band(samples, 20 + k, 1)["g0"] / 40.0 for k in range(cases)])
    assess_superposition(unit[:200], loads, CURVE, OPTS, top=1)  # warm
    tracemalloc.start()
    t0 = time.perf_counter()
    r = assess_superposition(unit, loads, CURVE, OPTS, top=10)
    elapsed = time.perf_counter() - t0
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    per_s = nodes / elapsed
    print(f"superposition: {nodes} nodes x {samples} samples x {cases} load channels in "
          f"{elapsed:.1f} s = {per_s:.0f} nodes/s; traced peak {peak / 2**20:.0f} MB "
          f"(unit stresses alone {unit.nbytes / 2**20:.0f} MB); worst node {r.top[0][0]} "
          f"damage {r.top[0][1].damage:.3g}")
    print(json.dumps({"critical_plane_over_uniaxial": round(ratio, 2),
                      "nodes_per_s": round(per_s, 1), "peak_mb": round(peak / 2**20, 1),
                      "nodes": nodes, "samples": samples}))


if __name__ == "__main__":
    main()
