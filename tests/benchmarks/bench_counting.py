"""Counting throughput and memory against the `rainflow` reference package.

Run:  python tests/benchmarks/bench_counting.py [--quick]

Three seeded signals (white noise, narrow-band random, densely sampled smooth
random) at 1e5, 1e6 and 1e7 samples (``--quick``: 1e6 only). Every repetition
counts a freshly generated input, so no branch predictor learns one array.
The engine and the reference are timed side by side in this one process;
only ratios are reported as targets. Prints a table, then one JSON line.
"""

from __future__ import annotations

import argparse
import gc
import json
import os
import statistics
import sys
import tempfile
import time
import tracemalloc

os.environ.setdefault("NUMBA_CACHE_DIR", os.path.join(tempfile.gettempdir(), "cycleledger-numba"))

import numpy as np  # noqa: E402
import rainflow  # noqa: E402
from scipy import signal  # noqa: E402

from service.engine import astm_e1049, turning_points  # noqa: E402
from service.engine.rainflow import warm_up  # noqa: E402

SIGNALS = ("white", "narrow_band", "smooth")
# Band-pass around 0.1 cycles/sample gives ~1 turning point in 5 samples;
# a low-pass random signal at ~0.02 cycles/sample gives ~1 in 20.
_NB = signal.butter(2, [0.17, 0.23], btype="bandpass", output="sos")
_SM = signal.butter(4, 0.05, output="sos")


def make(kind: str, n: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng([seed, SIGNALS.index(kind), n])
    e = rng.standard_normal(n)
    if kind == "white":
        return e
    if kind == "narrow_band":
        return signal.sosfilt(_NB, e)
    return signal.sosfilt(_SM, e)


def _timed(fn, x) -> float:
    # Every timed call starts from the same state: a collection first (it
    # also evicts caches), so no contender runs warm after another.
    gc.collect()
    t0 = time.perf_counter()
    fn(x)
    return time.perf_counter() - t0


def engine(x):
    return astm_e1049(x)


def reference(x):
    return list(rainflow.extract_cycles(x))


def bench(kind: str, n: int, reps_engine: int, reps_ref: int) -> dict:
    """Median times of engine, reference and np.diff on fresh inputs.

    The first input is counted once untimed by both (and checked to agree),
    so neither pays for first-touch costs; then each repetition draws a new
    seed. Medians, because this shared machine has occasional long stalls.
    """
    x = make(kind, n, seed=1000)
    frac = turning_points(x)[0].size / n
    if n <= 10**6:
        assert len(engine(x)) == len(reference(x))
    else:
        engine(x)
    te, tr, td = [], [], []
    for r in range(max(reps_engine, reps_ref)):
        x = make(kind, n, seed=r)
        if r < reps_engine:
            te.append(_timed(engine, x))
            td.append(_timed(np.diff, x))
        if r < reps_ref:
            tr.append(_timed(reference, x))
    e, d = statistics.median(te), statistics.median(td)
    ref = statistics.median(tr) if tr else float("nan")
    return {"signal": kind, "samples": n, "turning_fraction": frac,
            "engine_s": e, "reference_s": ref, "diff_s": d,
            "speedup": ref / e, "engine_msamples_per_s": n / e / 1e6,
            "fraction_of_diff": d / e}


def peak_memory_ratio(n: int) -> float:
    """Peak bytes allocated while counting, over the input's bytes."""
    x = make("white", n, seed=99)
    gc.collect()
    tracemalloc.start()
    tracemalloc.reset_peak()
    base = tracemalloc.get_traced_memory()[0]
    table = astm_e1049(x)
    peak = tracemalloc.get_traced_memory()[1] - base
    tracemalloc.stop()
    del table
    return peak / x.nbytes


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="1e6 samples only (< 1 min)")
    args = ap.parse_args(argv)
    warm_up()
    sizes = [10**6] if args.quick else [10**5, 10**6, 10**7]
    reps = {10**5: (21, 5), 10**6: (11, 3), 10**7: (3, 1)}
    results = []
    print(f"{'signal':<12}{'samples':>10}{'tp/sample':>10}{'engine ms':>11}"
          f"{'ref ms':>10}{'speedup':>9}{'Msamp/s':>9}{'/np.diff':>9}")
    for n in sizes:
        for kind in SIGNALS:
            r = bench(kind, n, *reps[n])
            results.append(r)
            print(f"{kind:<12}{n:>10.0e}{r['turning_fraction']:>10.3f}"
                  f"{r['engine_s'] * 1e3:>11.2f}{r['reference_s'] * 1e3:>10.0f}"
                  f"{r['speedup']:>9.1f}{r['engine_msamples_per_s']:>9.0f}"
                  f"{r['fraction_of_diff']:>9.2f}", flush=True)
    at_1e6 = [r for r in results if r["samples"] == 10**6]
    speedups = [r["speedup"] for r in at_1e6]
    smooth = next(r for r in at_1e6 if r["signal"] == "smooth")
    summary = {
        "min_speedup_vs_rainflow": round(min(speedups), 1),
        "median_speedup_vs_rainflow": round(statistics.median(speedups), 1),
        "smooth_fraction_of_diff_pass": round(smooth["fraction_of_diff"], 3),
    }
    if not args.quick:
        summary["peak_memory_over_input_1e7"] = round(peak_memory_ratio(10**7), 3)
    print(json.dumps(summary))
    return summary


if __name__ == "__main__":
    main(sys.argv[1:])
