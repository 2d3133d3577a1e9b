"""Scale-out: many points over a Parquet dataset on one and on two Dask workers.

Run:  python tests/benchmarks/bench_scale.py [--quick]

Writes a seeded dataset of 2,000 points x 1e5 samples (``--quick``: 400
points) as ten wide Parquet files (successive stretches of one recording,
1.6 GB of float64 in all) in a temporary folder, then assesses every point
(EN 1993-1-9 cat. 71, Goodman) with ``service.batch`` on a LocalCluster of
worker processes on loopback, one worker of one thread, then two:

1. ``two_worker_speedup``: points a second with two worker processes over
   one (best of two runs each, after every worker has loaded the kernels).
   Target >= 1.6.
2. ``worker_peak_over_partition``: the most any task raised its worker's
   resident memory (sampled every 2 ms from /proc/self/statm, in a separate
   run), over the bytes of one partition's samples (50 points x 1e5 x 8).
   Target < 4.

Prints a table, then one JSON line.
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import sys
import tempfile
import time
from pathlib import Path

os.environ.setdefault("NUMBA_CACHE_DIR", os.path.join(tempfile.gettempdir(), "cycleledger-numba"))
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

import numpy as np  # noqa: E402
import pyarrow as pa  # noqa: E402
import pyarrow.parquet as pq  # noqa: E402

SETTINGS = {"curve": "EN1993-1-9:71", "mean_stress_method": "goodman",
            "ultimate_strength": 700.0}
SAMPLES = 100_000
FILES = 10
PARTITION_POINTS = 50


def write_dataset(folder: Path, points: int) -> None:
    from scipy import signal

    sos = signal.butter(2, [0.17, 0.23], btype="bandpass", output="sos")
    rows = SAMPLES // FILES
    rng = np.random.default_rng(42)
    # Generate point by point (filter state carried across files), write file by file.
    data = np.empty((FILES, points, rows))
    for j in range(points):
        x = signal.sosfilt(sos, rng.standard_normal(SAMPLES))
        data[:, j, :] = (40.0 * x / x.std() + 20.0).reshape(FILES, rows)
    for k in range(FILES):
        cols = {f"n{j:05d}": data[k, j] for j in range(points)}
        cols["time_s"] = (np.arange(rows) + k * rows) / 1000.0
        pq.write_table(pa.table(cols), folder / f"run_{k:02d}.parquet", compression="none")


def run_on(workers: int, ds, repeats: int = 2):
    from distributed import Client, LocalCluster

    from service.batch.run import run_batch
    from service.batch.tasks import warm

    cluster = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True,
                           host="127.0.0.1", dashboard_address="127.0.0.1:0")
    client = Client(cluster)
    try:
        client.run(warm)
        best = None
        for _ in range(repeats):
            r = run_batch(ds, SETTINGS, client, partition_points=PARTITION_POINTS)
            assert all(row["status"] == "ok" for row in r.rows), r.failures
            best = r if best is None or r.seconds < best.seconds else best
        # Memory in a run of its own: the probe thread costs a little time.
        m = run_batch(ds, SETTINGS, client, partition_points=PARTITION_POINTS,
                      measure_memory=True)
        return best, m.peak_memory
    finally:
        client.close()
        cluster.close()


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true")
    args = ap.parse_args()
    points = 400 if args.quick else 2000
    root = Path(tempfile.mkdtemp(prefix="cycleledger-scale-"))
    os.environ.setdefault("DASK_TEMPORARY_DIRECTORY", str(root / "dask"))
    try:
        from service.batch.dataset import open_dataset

        t0 = time.perf_counter()
        write_dataset(root, points)
        ds = open_dataset(root)
        print(f"dataset: {len(ds.points)} points x {ds.rows} samples in {len(ds.files)} files "
              f"({ds.sample_bytes() / 2**30:.2f} GB of float64), written in "
              f"{time.perf_counter() - t0:.0f} s")
        one, rise1 = run_on(1, ds)
        two, rise2 = run_on(2, ds)
        assert [r["damage"] for r in one.rows] == [r["damage"] for r in two.rows]
    finally:
        shutil.rmtree(root, ignore_errors=True)
    partition_bytes = PARTITION_POINTS * SAMPLES * 8
    speedup = one.seconds / two.seconds
    worst_rise = max(list(rise1.values()) + list(rise2.values()))
    print(f"{'workers':<8} {'seconds':>8} {'points/s':>9} {'peak rise MB per worker':>26}")
    for n, r, rise in ((1, one, rise1), (2, two, rise2)):
        print(f"{n:<8} {r.seconds:>8.2f} {points / r.seconds:>9.0f} "
              f"{', '.join(f'{v / 2**20:.0f}' for v in rise.values()):>26}")
    print(f"partition: {PARTITION_POINTS} points = {partition_bytes / 2**20:.0f} MB of samples")
    print(json.dumps({"two_worker_speedup": round(speedup, 2),
                      "worker_peak_over_partition": round(worst_rise / partition_bytes, 2),
                      "points": points, "samples": SAMPLES,
                      "points_per_s_two_workers": round(points / two.seconds, 1)}))


if __name__ == "__main__":
    main()
