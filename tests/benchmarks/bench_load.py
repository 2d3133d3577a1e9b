"""Load: concurrent clients posting ledger blocks and reading figures, with keys.

Run:  python tests/benchmarks/bench_load.py [--quick] [--clients 8] [--seconds 60]

Starts ``cycleledger serve`` on 127.0.0.1 (its own process and a temporary
data directory) after making API keys in that directory: one admin key to
set up, and one write key a client (each its own project, so the clients
also exercise the project filter). Each client owns an asset with two
points and, until the time is up, posts the next block (10 s at 1 kHz a
point, Parquet, with an Idempotency-Key; a broken connection is retried
with the same key) and reads its point's figures, and every fifth round the
dashboard feed and the metrics. A 429 (the key's request rate) is honoured
(Retry-After) and counted as ``throttled``, not as an error.

Afterwards every client's acknowledged blocks are checked against the
service: each present exactly once (``lost_blocks``: acknowledged but
missing; ``doubled_blocks``: a sequence number held twice), and each
point's damage equal to a recount in this process from the same seeded
blocks (``totals_mismatch``: points off by more than 1e-9 relative).

Prints latency percentiles by request kind, then one JSON line with
``errors``, ``lost_blocks``, ``doubled_blocks``, ``totals_mismatch``,
``throttled``, ``p50_ms``, ``p95_ms``, ``p99_ms``, ``requests_per_s``.
"""

from __future__ import annotations

import argparse
import io
import json
import os
import shutil
import sys
import tempfile
import threading
import time
from pathlib import Path

os.environ.setdefault("NUMBA_CACHE_DIR", os.path.join(tempfile.gettempdir(), "cycleledger-numba"))
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

import numpy as np  # noqa: E402
import pyarrow as pa  # noqa: E402
import pyarrow.parquet as pq  # noqa: E402

from bench_api import free_port, narrow_band, start_service  # noqa: E402
from service.client import Client, ServiceError  # noqa: E402
from service.engine.damage import AssessmentOptions, assess  # noqa: E402
from service.engine.rainflow import count_block  # noqa: E402
from service.engine.sn_catalogue import catalogue_curve  # noqa: E402
from service.store import keys, sqlite  # noqa: E402

PARQUET = "application/vnd.apache.parquet"
RATE_HZ = 1000.0
BLOCK_SAMPLES = 10_000
POINTS = ("p0", "p1")
SETTINGS = {"curve": "EN1993-1-9:71", "mean_stress_method": "goodman",
            "ultimate_strength": 700.0}


def block_columns(client: int, seq: int) -> dict[str, np.ndarray]:
    """The seeded samples of a client's block ``seq``. [MPa]"""
    cols = narrow_band(BLOCK_SAMPLES, 1000 * client + seq, len(POINTS))
    return {p: cols[f"g{i}"] for i, p in enumerate(POINTS)}


def block_bytes(cols: dict) -> bytes:
    buf = io.BytesIO()
    pq.write_table(pa.table(cols), buf, compression="none")
    return buf.getvalue()


class Tally:
    def __init__(self):
        self.lock = threading.Lock()
        self.latency: dict[str, list[float]] = {}
        self.errors: list[str] = []
        self.throttled = 0

    def add(self, kind: str, seconds: float) -> None:
        with self.lock:
            self.latency.setdefault(kind, []).append(seconds)

    def error(self, what: str) -> None:
        with self.lock:
            self.errors.append(what)


def timed(tally: Tally, kind: str, call):
    """``call()`` with 429 honoured and broken connections retried (same request)."""
    for _attempt in range(20):
        t0 = time.perf_counter()
        try:
            out = call()
        except ServiceError as exc:
            if exc.status == 429:
                with tally.lock:
                    tally.throttled += 1
                time.sleep(float(exc.problem.get("retry_after_s") or 1))
                continue
            if exc.status == 0:  # connection broke: retry, the ledger counts it once
                time.sleep(0.2)
                continue
            tally.error(f"{kind}: {exc}")
            return None
        tally.add(kind, time.perf_counter() - t0)
        return out
    tally.error(f"{kind}: gave up after 20 attempts")
    return None


def run_client(i: int, url: str, secret: str, stop_at: float, tally: Tally,
               acked: dict[int, list[int]]) -> None:
    c = Client(url, timeout_s=120, api_key=secret)
    asset = f"asset-{i}"
    seq = 0
    while time.monotonic() < stop_at:
        seq += 1
        body = block_bytes(block_columns(i, seq))
        answer = timed(tally, "post_block", lambda: c.request(
            "POST", f"/v1/assets/{asset}/blocks", body=body, content_type=PARQUET,
            params={"seq": seq, "sample_rate_hz": RATE_HZ},
            headers={"Idempotency-Key": f"{asset}-{seq}"}))
        if answer is None:
            break
        acked[i].append(seq)
        timed(tally, "read_point", lambda: c.get_json(f"/v1/assets/{asset}/points/p0"))
        if seq % 5 == 0:
            timed(tally, "read_feed", lambda: c.get_json("/v1/feeds/points"))
            timed(tally, "read_metrics", lambda: c.request("GET", "/metrics",
                                                           accept="text/plain"))


def recount(i: int, seqs: list[int]) -> dict[str, float]:
    """Each point's closed damage over the client's blocks, counted here."""
    curve = catalogue_curve(SETTINGS["curve"])
    opts = AssessmentOptions(mean_stress_method="goodman",
                             ultimate_strength=SETTINGS["ultimate_strength"],
                             reserve_factor=False, top_cycles=0)
    out = {}
    for p in POINTS:
        state, total = None, 0.0
        for s in sorted(seqs):
            table, state = count_block(block_columns(i, s)[p], state)
            total += assess(table, curve, opts).damage
        out[p] = total
    return out


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true", help="10 s instead of 60")
    ap.add_argument("--clients", type=int, default=8)
    ap.add_argument("--seconds", type=float)
    args = ap.parse_args()
    seconds = args.seconds or (10.0 if args.quick else 60.0)
    root = Path(tempfile.mkdtemp(prefix="cycleledger-load-"))
    proc = None
    try:
        data = root / "data"
        sqlite.init(data)
        con = sqlite.connect(data)
        admin = {}
        writers = {}
        for i in range(args.clients):
            project = f"rig-{i}"
            admin[i] = keys.create(con, project, "admin", "bench setup")[1]
            writers[i] = keys.create(con, project, "write", f"client {i}")[1]
        con.close()
        port = free_port()
        proc = start_service(data, port)
        url = f"http://127.0.0.1:{port}"
        for i in range(args.clients):
            c = Client(url, timeout_s=30, api_key=admin[i])
            c.post_json("/v1/assets", {"name": f"asset-{i}"})
            for p in POINTS:
                c.post_json(f"/v1/assets/asset-{i}/points",
                            {"name": p, "unit": "MPa", "settings": SETTINGS})
        block_columns(0, 0)  # scipy's filter design loaded before the clock starts
        tally = Tally()
        acked: dict[int, list[int]] = {i: [] for i in range(args.clients)}
        t0 = time.monotonic()
        threads = [threading.Thread(target=run_client, args=(
            i, url, writers[i], t0 + seconds, tally, acked)) for i in range(args.clients)]
        for t in threads:
            t.start()
        for t in threads:
            t.join()
        elapsed = time.monotonic() - t0

        lost = doubled = mismatch = 0
        for i in range(args.clients):
            c = Client(url, timeout_s=60, api_key=writers[i])
            held: list[int] = []
            offset = 0
            while True:
                page = c.get_json(f"/v1/assets/asset-{i}/blocks", limit=1000, offset=offset)
                held += [b["seq"] for b in page["items"]]
                if len(page["items"]) < 1000:
                    break
                offset += 1000
            lost += len(set(acked[i]) - set(held))
            doubled += len(held) - len(set(held))
            expected = recount(i, acked[i])
            for p in POINTS:
                got = c.get_json(f"/v1/assets/asset-{i}/points/{p}")
                if got["last_seq"] != (max(acked[i]) if acked[i] else None) or not np.isclose(
                        got["damage"], expected[p], rtol=1e-9, atol=0.0):
                    mismatch += 1
    finally:
        if proc is not None:
            proc.terminate()
            try:
                proc.wait(30)
            except Exception:
                proc.kill()
        shutil.rmtree(root, ignore_errors=True)

    every = [x for v in tally.latency.values() for x in v]
    n_requests = len(every)
    print(f"{args.clients} clients for {elapsed:.1f} s: {n_requests} requests, "
          f"{sum(len(v) for v in acked.values())} blocks of {BLOCK_SAMPLES} samples x "
          f"{len(POINTS)} points; throttled {tally.throttled}")
    print(f"{'kind':<14} {'n':>6} {'p50 ms':>8} {'p95 ms':>8} {'p99 ms':>8}")
    for kind, v in sorted(tally.latency.items()):
        q = np.percentile(np.asarray(v) * 1e3, [50, 95, 99])
        print(f"{kind:<14} {len(v):>6} {q[0]:>8.1f} {q[1]:>8.1f} {q[2]:>8.1f}")
    for e in tally.errors[:10]:
        print("error:", e)
    q = np.percentile(np.asarray(every) * 1e3, [50, 95, 99]) if every else [None] * 3
    print(json.dumps({
        "errors": len(tally.errors), "lost_blocks": lost, "doubled_blocks": doubled,
        "totals_mismatch": mismatch, "throttled": tally.throttled,
        "p50_ms": round(float(q[0]), 2) if every else None,
        "p95_ms": round(float(q[1]), 2) if every else None,
        "p99_ms": round(float(q[2]), 2) if every else None,
        "requests_per_s": round(n_requests / elapsed, 1),
        "clients": args.clients, "seconds": round(elapsed, 1)}))


if __name__ == "__main__":
    main()
