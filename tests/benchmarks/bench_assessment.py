"""Full assessment against counting alone, and many points against a plain loop.

Run:  python tests/benchmarks/bench_assessment.py [--quick]

1. ``assessment_over_counting``: count + mean-stress correction + S-N curve +
   Miner + reserve factor + equivalent range for one 1e7-sample history
   (``--quick``: 1e6) through ``assess_history`` (the call the service makes
   for one history), divided by counting alone (``astm_e1049``), on a
   narrow-band random signal (the shape of most measured stress); white noise
   and a smooth signal are printed too. Medians of fresh seeded inputs.
2. ``speedup_many_points``: 1,000 points of 1e4 samples in one ``assess_many``
   call, against looping the `rainflow` package plus a plain Python Miner sum
   over the same curve (the loop is timed on a subset and scaled per point);
   medians of three alternating runs.

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

os.environ.setdefault("NUMBA_CACHE_DIR", os.path.join(tempfile.gettempdir(), "cycleledger-numba"))
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

import numpy as np  # noqa: E402
import rainflow  # noqa: E402

from bench_counting import make  # noqa: E402
from service.engine import astm_e1049  # noqa: E402
from service.engine.damage import AssessmentOptions, assess_history, assess_many  # noqa: E402
from service.engine.rainflow import warm_up  # noqa: E402
from service.engine.sn_catalogue import catalogue_curve  # noqa: E402

CURVE = catalogue_curve("EN1993-1-9:71")


def scaled(kind, n, seed, rms=40.0):
    x = make(kind, n, seed)
    return rms * x / x.std() + 20.0


def count_vs_assess(kind: str, n: int, reps: int) -> dict:
    opts = AssessmentOptions(mean_stress_method="goodman", ultimate_strength=700.0)
    x = scaled(kind, n, 500)
    assess_history(x, CURVE, opts)
    tc, ta = [], []
    for r in range(reps):
        x = scaled(kind, n, r)
        t0 = time.perf_counter()
        astm_e1049(x)
        tc.append(time.perf_counter() - t0)
        x = scaled(kind, n, r + 100)
        t0 = time.perf_counter()
        assess_history(x, CURVE, opts)
        ta.append(time.perf_counter() - t0)
    c, a = statistics.median(tc), statistics.median(ta)
    return {"signal": kind, "samples": n, "count_s": c, "assess_s": a, "ratio": a / c}


def plain_point(x) -> float:
    """The loop a script would write: reference counter + Python Miner sum."""
    d = 0.0
    s_d = (2 / 5) ** (1 / 3) * 71.0
    s_l = (5 / 100) ** (1 / 5) * s_d
    for rng, mean, count, _, _ in rainflow.extract_cycles(x):
        if rng >= s_d:
            d += count / (2e6 * (71.0 / rng) ** 3)
        elif rng >= s_l:
            d += count / (5e6 * (s_d / rng) ** 5)
    return d


def many_points(points: int, samples: int, subset: int, reps: int = 3) -> dict:
    """Medians over ``reps`` alternating runs of both (this machine is shared)."""
    rng = np.random.default_rng(7)
    data = 40.0 * rng.standard_normal((samples, points))
    assess_many(data[:, :4], CURVE)
    t_ours, t_ref = [], []
    for r in range(reps):
        t0 = time.perf_counter()
        ours = assess_many(data, CURVE)
        t_ours.append(time.perf_counter() - t0)
        cols = range(r * subset, (r + 1) * subset)
        t0 = time.perf_counter()
        ref = [plain_point(data[:, i]) for i in cols]
        t_ref.append((time.perf_counter() - t0) * points / subset)
        for i, d in zip(cols, ref):
            assert abs(ours[str(i)].damage - d) <= 1e-9 * d
    a, b = statistics.median(t_ours), statistics.median(t_ref)
    return {"points": points, "samples": samples, "ours_s": a,
            "plain_loop_s_scaled": b, "speedup": b / a}


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="1e6 samples, 200 points")
    args = ap.parse_args(argv)
    warm_up()
    n = 10**6 if args.quick else 10**7
    reps = 7
    print(f"{'signal':<12}{'samples':>10}{'count ms':>10}{'assess ms':>11}{'ratio':>8}")
    rows = {}
    for kind in ("narrow_band", "white", "smooth"):
        r = count_vs_assess(kind, n, reps)
        rows[kind] = r
        print(f"{kind:<12}{n:>10.0e}{r['count_s'] * 1e3:>10.1f}{r['assess_s'] * 1e3:>11.1f}"
              f"{r['ratio']:>8.2f}", flush=True)
    m = many_points(200 if args.quick else 1000, 10**4, 20 if args.quick else 50)
    print(f"many points: {m['points']} x {m['samples']:.0e}: one call {m['ours_s']:.3f} s, "
          f"plain loop {m['plain_loop_s_scaled']:.2f} s (scaled), speedup {m['speedup']:.0f}x")
    summary = {"assessment_over_counting": round(rows["narrow_band"]["ratio"], 3),
               "assessment_over_counting_white": round(rows["white"]["ratio"], 3),
               "speedup_many_points": round(m["speedup"], 1)}
    print(json.dumps(summary))
    return summary


if __name__ == "__main__":
    main(sys.argv[1:])
