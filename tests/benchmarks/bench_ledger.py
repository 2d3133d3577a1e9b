"""Appending blocks to the ledger against the floor of the same work in Python.

Run:  python tests/benchmarks/bench_ledger.py [--quick]

Starts ``cycleledger serve`` on 127.0.0.1 (its own process and data directory
under a temporary folder), registers an asset with 8 points and posts blocks
of one hour at 1 kHz (3.6e6 samples a point; ``--quick``: 3.6e5) as Parquet.

1. ``ledger_over_floor``: the time of one block through the service (from the
   first byte sent to the answer), divided by the floor measured in this
   process on the same bytes: read them with pyarrow, write them once to a
   new file in a data directory (fsynced, as the service answers only once
   the block is on disk), and count and assess every point with the engine,
   carrying each point's counting state (two threads, as the service).
   Medians over the first blocks, alternating the two.
2. ``block_cost_growth``: median time of the last five blocks of 100
   (``--quick``: 30) over the median of the first five; the ledger's cost
   must not grow with the blocks already posted.

Prints a table, then one JSON line. Full mode writes about 23 GB of blocks
(and removes them).
"""

from __future__ import annotations

import argparse
import io
import json
import os
import statistics
import sys
import tempfile
import time
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

os.environ.setdefault("NUMBA_CACHE_DIR", os.path.join(tempfile.gettempdir(), "cycleledger-numba"))
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

import pyarrow as pa  # noqa: E402
import pyarrow.parquet as pq  # noqa: E402

from bench_api import free_port, narrow_band, start_service  # noqa: E402
from service.client import Client  # noqa: E402
from service.engine.damage import AssessmentOptions, assess  # noqa: E402
from service.engine.damage import warm_up as warm_damage  # noqa: E402
from service.engine.rainflow import count_block, warm_up  # noqa: E402
from service.engine.sn_catalogue import catalogue_curve  # noqa: E402

PARQUET = "application/vnd.apache.parquet"
RATE_HZ = 1000.0
POINTS = [f"g{i}" for i in range(8)]
SETTINGS = {"curve": "EN1993-1-9:71", "mean_stress_method": "goodman",
            "ultimate_strength": 700.0, "gate": 1.0}


def block_bytes(n: int, seed: int) -> bytes:
    cols = narrow_band(n, seed, len(POINTS))
    buf = io.BytesIO()
    pq.write_table(pa.table({p: cols[f"g{i}"] for i, p in enumerate(POINTS)}), buf,
                   compression="none")
    return buf.getvalue()


class Floor:
    """The same work without the service: parse, store once, count, assess."""

    def __init__(self, folder: Path):
        self.folder = folder
        self.states = {p: None for p in POINTS}
        self.curve = catalogue_curve("EN1993-1-9:71")
        self.opts = AssessmentOptions(mean_stress_method="goodman", ultimate_strength=700.0,
                                      reserve_factor=False, top_cycles=0)

    def block(self, body: bytes) -> float:
        t0 = time.perf_counter()
        table = pq.read_table(pa.BufferReader(body))
        with open(self.folder / f"b{time.perf_counter_ns()}.parquet", "wb") as f:
            f.write(body)
            f.flush()
            os.fsync(f.fileno())

        def one(p):
            cycles, self.states[p] = count_block(table.column(p).to_numpy(), self.states[p],
                                                 gate=1.0)
            return assess(cycles, self.curve, self.opts).damage

        with ThreadPoolExecutor(2) as pool:
            list(pool.map(one, POINTS))
        return time.perf_counter() - t0


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="3.6e5 samples a block, 30 blocks")
    args = ap.parse_args(argv)
    warm_up()
    warm_damage()
    n = 360_000 if args.quick else 3_600_000
    blocks = 30 if args.quick else 100
    bodies = [block_bytes(n, s) for s in (1, 2)]
    with tempfile.TemporaryDirectory(prefix="cycleledger-bench-") as tmp:
        tmp = Path(tmp)
        port = free_port()
        proc = start_service(tmp / "service", port)
        try:
            c = Client(f"http://127.0.0.1:{port}", timeout_s=600)
            c.post_json("/v1/assets", {"name": "rig"})
            for p in POINTS:
                c.post_json("/v1/assets/rig/points", {"name": p, "unit": "MPa",
                                                      "settings": SETTINGS})
            (tmp / "floor").mkdir()
            floor = Floor(tmp / "floor")
            t_api, t_floor = [], []
            for i in range(blocks):
                body = bodies[i % 2]
                t0 = time.perf_counter()
                _, headers, _ = c.request("POST", "/v1/assets/rig/blocks", body=body,
                                          content_type=PARQUET,
                                          params={"seq": i + 1, "sample_rate_hz": RATE_HZ})
                t_api.append(time.perf_counter() - t0)
                if i < 5:
                    t_floor.append(floor.block(body))
                print(f"block {i + 1:>3}: {t_api[-1]:.3f} s  ({headers.get('Server-Timing')})"
                      + (f"  floor {t_floor[-1]:.3f} s" if i < 5 else ""), flush=True)
            status = c.get_json("/v1/assets/rig/points/g0")
        finally:
            proc.terminate()
            proc.wait(timeout=60)
    first, last = statistics.median(t_api[:5]), statistics.median(t_api[-5:])
    ratio = first / statistics.median(t_floor)
    print(f"8 points x {n:.1e} samples a block: service {first:.3f} s, floor "
          f"{statistics.median(t_floor):.3f} s, ratio {ratio:.2f}; last five blocks "
          f"{last:.3f} s; growth {last / first:.2f}; point g0 after {blocks} blocks: "
          f"damage {status['damage']:.4g}, {status['recorded_hours']:.1f} h")
    summary = {"ledger_over_floor": round(ratio, 3), "block_cost_growth": round(last / first, 3)}
    print(json.dumps(summary))
    return summary


if __name__ == "__main__":
    main(sys.argv[1:])
