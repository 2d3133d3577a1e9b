"""The HTTP service against the floor of the same work done in Python.

Run:  python tests/benchmarks/bench_api.py [--quick]

Starts ``cycleledger serve`` on 127.0.0.1 (a separate process, its own data
directory under a temporary folder) and stops it at the end.

1. ``api_over_floor``: upload 8 channels x 1e6 samples (``--quick``: 2e5) as
   Parquet, then assess them (EN 1993-1-9 category 71, Goodman), timed from
   the first byte sent to the last result received; divided by the floor
   measured in this process on the same bytes: read them with pyarrow, write
   the bytes once into a new file in a data directory (fsynced: the service
   answers only once its data is on disk), count and assess every channel with the engine
   (``assess_many``, which uses both cores for long points). Medians of
   repetitions, alternating the two.
2. ``small_assessments_per_s``: 4 client threads posting one-channel,
   1e4-sample JSON assessments for a fixed time; each answer (201) comes
   after the result is committed (SQLite synchronous=FULL, Parquet file and
   folder fsynced).

Prints a table, then one JSON line.
"""

from __future__ import annotations

import argparse
import io
import json
import os
import socket
import statistics
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

os.environ.setdefault("NUMBA_CACHE_DIR", os.path.join(tempfile.gettempdir(), "cycleledger-numba"))

import numpy as np  # noqa: E402
import pyarrow as pa  # noqa: E402
import pyarrow.parquet as pq  # noqa: E402

from service.client import Client  # noqa: E402
from service.engine.damage import AssessmentOptions, assess_many, warm_up  # noqa: E402
from service.engine.rainflow import warm_up as warm_counting  # noqa: E402
from service.engine.sn_catalogue import catalogue_curve  # noqa: E402

SETTINGS = {"curve": "EN1993-1-9:71", "mean_stress_method": "goodman",
            "ultimate_strength": 700.0}
PARQUET = "application/vnd.apache.parquet"


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def start_service(data_dir: Path, port: int) -> subprocess.Popen:
    """``cycleledger serve`` on 127.0.0.1:``port``, its log (one JSON line a
    request) written to ``service.log`` beside ``data_dir``. Not a pipe: a
    pipe nobody reads fills after ~250 requests and the service then waits
    in its logger (that stalled small_assessments_per_s to 2 a second)."""
    cmd = [sys.executable, "-m", "service.cli", "serve", "--host", "127.0.0.1",
           "--port", str(port), "--data-dir", str(data_dir), "--threads", "8",
           "--async-samples", str(10**9)]
    log_path = Path(data_dir).parent / f"service-{port}.log"
    with open(log_path, "wb") as log:
        proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=log)
    client = Client(f"http://127.0.0.1:{port}", timeout_s=10)
    deadline = time.monotonic() + 120
    while not client.ready():
        if proc.poll() is not None or time.monotonic() > deadline:
            proc.kill()
            raise RuntimeError("service did not start: " + log_path.read_text()[-2000:])
        time.sleep(0.1)
    return proc


def narrow_band(n: int, seed: int, channels: int) -> dict[str, np.ndarray]:
    """Seeded narrow-band random stresses (the shape of most measured signals). [MPa]"""
    from scipy import signal

    sos = signal.butter(2, [0.17, 0.23], btype="bandpass", output="sos")
    rng = np.random.default_rng(seed)
    out = {}
    for i in range(channels):
        x = signal.sosfilt(sos, rng.standard_normal(n))
        out[f"g{i}"] = 40.0 * x / x.std() + 20.0
    return out


def parquet_bytes(cols: dict) -> bytes:
    buf = io.BytesIO()
    pq.write_table(pa.table(cols), buf, compression="none")
    return buf.getvalue()


def via_api(client: Client, body: bytes) -> float:
    t0 = time.perf_counter()
    _, _, raw = client.request("POST", "/v1/histories", body=body, content_type=PARQUET,
                               params={"unit": "MPa", "sample_rate_hz": 1000})
    hid = json.loads(raw)["id"]
    a = client.assess(history_id=hid, settings=SETTINGS)
    assert len(a["points"]) > 0
    return time.perf_counter() - t0


def floor(body: bytes, folder: Path) -> float:
    opts = AssessmentOptions(mean_stress_method="goodman", ultimate_strength=700.0)
    curve = catalogue_curve("EN1993-1-9:71")
    t0 = time.perf_counter()
    table = pq.read_table(pa.BufferReader(body))
    # The bytes written once, durably (the service answers only once its
    # data is on disk), to a new file as every upload is: overwriting one
    # file measured 4-5x cheaper here (no new blocks to allocate).
    with open(folder / f"h{time.perf_counter_ns()}.parquet", "wb") as f:
        f.write(body)
        f.flush()
        os.fsync(f.fileno())
    cols = {n: table.column(n).to_numpy() for n in table.column_names}
    assess_many(cols, curve, opts)
    return time.perf_counter() - t0


def large(client: Client, folder: Path, n: int, reps: int) -> dict:
    body = parquet_bytes(narrow_band(n, 1, 8))
    via_api(client, body)
    floor(body, folder)
    ta, tf = [], []
    for _ in range(reps):
        ta.append(via_api(client, body))
        tf.append(floor(body, folder))
    a, f = statistics.median(ta), statistics.median(tf)
    return {"samples": n, "api_s": a, "floor_s": f, "ratio": a / f}


def small_rate(url: str, seconds: float, clients: int = 4) -> dict:
    rng = np.random.default_rng(3)
    docs = [json.dumps({"samples": {"g": (40.0 * rng.standard_normal(10_000)).tolist()},
                        "unit": "MPa", "settings": SETTINGS}).encode() for _ in range(8)]
    done, errors = [0] * clients, []
    stop = time.monotonic() + seconds

    def worker(k: int) -> None:
        c = Client(url, timeout_s=30)
        i = 0
        while time.monotonic() < stop:
            try:
                status, _, _ = c.request("POST", "/v1/assessments", body=docs[i % len(docs)],
                                         content_type="application/json")
                if status == 201:
                    done[k] += 1
            except Exception as exc:  # noqa: BLE001 - count, report, go on
                errors.append(repr(exc))
            i += 1

    t0 = time.monotonic()
    threads = [threading.Thread(target=worker, args=(k,)) for k in range(clients)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    elapsed = time.monotonic() - t0
    return {"clients": clients, "assessments": sum(done), "seconds": elapsed,
            "per_s": sum(done) / elapsed, "errors": len(errors)}


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="2e5 samples a channel, 5 s of load")
    args = ap.parse_args(argv)
    warm_counting()
    warm_up()
    n = 2 * 10**5 if args.quick else 10**6
    with tempfile.TemporaryDirectory(prefix="cycleledger-bench-") as tmp:
        tmp = Path(tmp)
        port = free_port()
        proc = start_service(tmp / "service", port)
        try:
            url = f"http://127.0.0.1:{port}"
            client = Client(url, timeout_s=600)
            (tmp / "floor").mkdir()
            big = large(client, tmp / "floor", n, 3 if args.quick else 5)
            print(f"8 channels x {n:.0e}: api {big['api_s']:.3f} s, floor {big['floor_s']:.3f} s,"
                  f" ratio {big['ratio']:.2f}", flush=True)
            small = small_rate(url, 5.0 if args.quick else 15.0)
            print(f"small assessments (1e4 samples, JSON, {small['clients']} clients): "
                  f"{small['per_s']:.0f}/s over {small['seconds']:.1f} s, "
                  f"{small['errors']} errors", flush=True)
        finally:
            proc.terminate()
            try:
                proc.wait(timeout=30)
            except subprocess.TimeoutExpired:
                proc.kill()
    summary = {"api_over_floor": round(big["ratio"], 3),
               "small_assessments_per_s": round(small["per_s"], 1)}
    print(json.dumps(summary))
    return summary


if __name__ == "__main__":
    main(sys.argv[1:])
