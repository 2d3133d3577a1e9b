"""Reading recordings as rigs write them, and screening them, against floors.

Run:  python tests/benchmarks/bench_inputs.py [--quick]

1. ``screening_over_counting``: screening 1e6 samples of a narrow-band
   signal (``engine.screening.screen``) over counting them (``astm_e1049``),
   medians of alternating repetitions in this process (target <= 0.5).
2. ``csv_ingest_over_floor``: posting an 8-channel CSV of 1e6 rows
   (``--quick``: 2e5) to ``cycleledger serve`` on 127.0.0.1 until it is
   stored and acknowledged, over the unavoidable work measured in this run:
   pyarrow reading the same file, plus writing and fsyncing the stored form
   (Parquet of the 8 float64 columns) once (target <= 1.5).
3. ``mdf4_ingest_over_floor``: the same for the same data as an MDF 4 file
   written by asammdf; the floor is asammdf reading the file plus the same
   store write (target <= 1.5).
4. ``csv_peak_over_file`` and ``mdf4_peak_over_file`` (reported, no
   target): the rise of a fresh process's peak resident memory while it
   reads a recording from a file, as an upload over the memory limit is
   read, and stores it, over the file's size: 4e6 rows of 8 channels
   (600 MB as CSV; ``--quick``: 1e6), so a 1 GB recording needs about
   this many GB.

The service is started with its own data directory under a temporary
folder and stopped at the end. Prints a table, then one JSON line.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import sys
import tempfile
import time
from pathlib import Path

os.environ.setdefault("NUMBA_CACHE_DIR", os.path.join(tempfile.gettempdir(), "cycleledger-numba"))
sys.path.insert(0, str(Path(__file__).resolve().parent))

import numpy as np  # noqa: E402
import pyarrow as pa  # noqa: E402
import pyarrow.parquet as pq  # noqa: E402
from pyarrow import csv as pacsv  # noqa: E402

from bench_api import free_port, narrow_band, start_service  # noqa: E402
from service.client import Client  # noqa: E402
from service.engine.rainflow import astm_e1049  # noqa: E402
from service.engine.screening import screen  # noqa: E402
from service.engine.screening import warm_up as warm_screening  # noqa: E402

RATE = 1000.0


def screening_ratio(repeats: int) -> tuple[float, float, float]:
    x = narrow_band(1_000_000, 1, 1)["g0"]
    warm_screening()
    astm_e1049(x)
    s, c = [], []
    for _ in range(repeats):
        t0 = time.perf_counter()
        screen(x, RATE)
        t1 = time.perf_counter()
        astm_e1049(x)
        t2 = time.perf_counter()
        s.append(t1 - t0)
        c.append(t2 - t1)
    return statistics.median(s), statistics.median(c), statistics.median(s) / statistics.median(c)


def write_csv(cols: dict, path: Path) -> None:
    n = len(next(iter(cols.values())))
    table = pa.table({"time_s": np.arange(n) / RATE, **cols})
    pacsv.write_csv(table, path)


def write_mdf(cols: dict, path: Path) -> None:
    from asammdf import MDF, Signal

    n = len(next(iter(cols.values())))
    t = np.arange(n) / RATE
    mdf = MDF(version="4.10")
    mdf.append([Signal(v, t, name=k, unit="MPa") for k, v in cols.items()])
    mdf.save(path, overwrite=True)
    mdf.close()


def store_once(cols: dict, folder: Path) -> None:
    """The stored form written once, durably, to a new file."""
    path = folder / f"h{time.perf_counter_ns()}.parquet"
    pq.write_table(pa.table(cols), path, compression="none", use_dictionary=False)
    with open(path, "rb+") as f:
        os.fsync(f.fileno())


def csv_floor(path: Path, folder: Path) -> float:
    t0 = time.perf_counter()
    table = pacsv.read_csv(path)
    store_once({n: table.column(n).to_numpy() for n in table.column_names
                if n != "time_s"}, folder)
    return time.perf_counter() - t0


def mdf_floor(path: Path, folder: Path) -> float:
    from asammdf import MDF

    t0 = time.perf_counter()
    mdf = MDF(str(path))
    cols = {n: mdf.get(n).samples for n in mdf.channels_db if n != "time"}
    mdf.close()
    store_once(cols, folder)
    return time.perf_counter() - t0


# The peak from /proc (VmHWM: this process's own), not ru_maxrss, which
# Linux carries over from the parent through exec.
_PEAK = """
import json, sys, tempfile
from pathlib import Path
from service.api import uploads
from service.store import parquet
def hwm():
    for line in open("/proc/self/status"):
        if line.startswith("VmHWM:"):
            return int(line.split()[1]) * 1024
path, media = Path(sys.argv[1]), sys.argv[2]
base = hwm()
up = uploads.parse(path, media, {"unit": "MPa"})
parquet.write_columns(Path(tempfile.mkdtemp()), parquet.HISTORIES, "h", up.channels)
print(json.dumps({"rise_bytes": hwm() - base, "file_bytes": path.stat().st_size}))
"""


def peak_over_file(path: Path, media: str) -> float:
    """Peak resident memory risen while a fresh process reads ``path`` and
    stores it (its high-water mark after the imports), over the file's size."""
    import subprocess

    out = subprocess.run([sys.executable, "-c", _PEAK, str(path), media], check=True,
                         capture_output=True, text=True,
                         cwd=Path(__file__).resolve().parents[2]).stdout
    got = json.loads(out.strip().splitlines()[-1])
    return got["rise_bytes"] / got["file_bytes"]


def via_api(client: Client, path: Path, content_type: str) -> float:
    body = path.read_bytes()
    t0 = time.perf_counter()
    client.request("POST", "/v1/histories", body=body, content_type=content_type,
                   params={"unit": "MPa"})
    return time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true")
    args = ap.parse_args()
    rows = 200_000 if args.quick else 1_000_000
    repeats = 3 if args.quick else 5
    s, c, screening_over_counting = screening_ratio(7 if args.quick else 15)
    print(f"screening 1e6: {s * 1e3:.2f} ms, counting {c * 1e3:.2f} ms, "
          f"ratio {screening_over_counting:.2f}")
    with tempfile.TemporaryDirectory(prefix="cycleledger-bench-inputs-") as tmp:
        tmp = Path(tmp)
        cols = narrow_band(rows, 2, 8)
        csv_path, mdf_path = tmp / "run.csv", tmp / "run.mf4"
        write_csv(cols, csv_path)
        write_mdf(cols, mdf_path)
        floor_dir = tmp / "floor"
        floor_dir.mkdir()
        port = free_port()
        proc = start_service(tmp / "data", port)
        try:
            client = Client(f"http://127.0.0.1:{port}", timeout_s=300)
            via_api(client, csv_path, "text/csv")  # warm
            via_api(client, mdf_path, "application/octet-stream")
            ratios = {}
            for name, path, ctype, fl in (("csv", csv_path, "text/csv", csv_floor),
                                          ("mdf4", mdf_path, "application/octet-stream",
                                           mdf_floor)):
                api, flo = [], []
                for _ in range(repeats):
                    api.append(via_api(client, path, ctype))
                    flo.append(fl(path, floor_dir))
                a, f = statistics.median(api), statistics.median(flo)
                ratios[name] = a / f
                print(f"{name}: {rows} rows x 8, {path.stat().st_size / 2**20:.0f} MB: service "
                      f"{a * 1e3:.0f} ms, floor {f * 1e3:.0f} ms, ratio {a / f:.2f}")
        finally:
            proc.terminate()
            proc.wait(timeout=30)
        big = narrow_band(1_000_000 if args.quick else 4_000_000, 3, 8)
        big_csv, big_mdf = tmp / "big.csv", tmp / "big.mf4"
        write_csv(big, big_csv)
        write_mdf(big, big_mdf)
        del big
        peaks = {"csv": peak_over_file(big_csv, "text/csv"),
                 "mdf4": peak_over_file(big_mdf, "application/octet-stream")}
        for name, path in (("csv", big_csv), ("mdf4", big_mdf)):
            print(f"{name} read from a {path.stat().st_size / 2**20:.0f} MB file and stored: "
                  f"peak memory rose {peaks[name]:.2f} x the file")
    print(json.dumps({"screening_over_counting": round(screening_over_counting, 3),
                      "csv_ingest_over_floor": round(ratios["csv"], 3),
                      "mdf4_ingest_over_floor": round(ratios["mdf4"], 3),
                      "csv_peak_over_file": round(peaks["csv"], 3),
                      "mdf4_peak_over_file": round(peaks["mdf4"], 3)}))


if __name__ == "__main__":
    main()
