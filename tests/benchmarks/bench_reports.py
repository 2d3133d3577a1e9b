"""A report page's first render and its repeats, against drawing its plots.

Run:  python tests/benchmarks/bench_reports.py [--quick]

The demo recording (``service.demo``, 4 gauges x 60,000 samples; ``--quick``:
the first 20 s) is assessed in an app on a temporary data directory, then:

1. ``report_first_over_plots``: the first render of the assessment's page
   (read the samples, recount each point once, draw every plot, build the
   page) over drawing the same plots from data already in memory (the
   tables counted beforehand); medians of alternating repetitions on fresh
   assessments, target <= 1.3.
2. ``report_repeat_over_first``: a repeat with ``If-None-Match`` over the
   first render (target <= 0.05).

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
from pathlib import Path

os.environ.setdefault("NUMBA_CACHE_DIR", os.path.join(tempfile.gettempdir(), "cycleledger-numba"))
sys.path.insert(0, str(Path(__file__).resolve().parents[2]))


from service import demo, runs  # noqa: E402
from service.api import create_app  # noqa: E402
from service.engine.settings import point_from_dict  # noqa: E402
from service.reports import plots  # noqa: E402


def plots_in_memory(resource: dict, samples: dict, cycles: dict, rate: float) -> None:
    """Every plot of the page from data already read and counted."""
    points = resource["points"]
    plots.render(plots.damage_by_point({p: v["damage"] for p, v in points.items()},
                                       {p: v["options"]["allowable_damage"]
                                        for p, v in points.items()}))
    plots.render(plots.history(samples, rate))
    plots.render(plots.exceedance({p: c[0] for p, c in cycles.items()}))
    for p, (table, dmg) in cycles.items():
        curve, _, _ = point_from_dict(points[p]["settings_used"])
        plots.render(plots.sn_with_spectrum(curve, table, dmg))
        plots.render(plots.range_mean(table))


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true")
    args = ap.parse_args()
    repeats = 3 if args.quick else 5
    t, channels = demo.generate()
    if args.quick:
        keep = int(20 * demo.RATE_HZ)
        channels = {k: v[:keep] for k, v in channels.items()}
    config = demo.points()
    with tempfile.TemporaryDirectory(prefix="cycleledger-bench-reports-") as tmp:
        app = create_app({"DATA_DIR": tmp, "WARM_KERNELS": True, "TESTING": True})
        client = app.test_client()
        body = {"samples": {k: v.tolist() for k, v in channels.items()},
                "unit": config["unit"], "youngs_modulus": config["youngs_modulus"],
                "sample_rate_hz": demo.RATE_HZ, "points": config["points"],
                "gate_fraction": config["gate_fraction"]}
        first, memory, repeat = [], [], []
        for i in range(repeats + 1):
            r = client.post("/v1/assessments", json=body)
            assert r.status_code == 201, r.get_json()
            a = r.get_json()
            # What the page draws, read and counted beforehand.
            from service.store import sqlite

            con = sqlite.connect(tmp)
            row = sqlite.get_assessment(con, "default", a["id"])
            samples = {p: runs.point_samples(tmp, row, p, con) for p in a["points"]}
            cycles = {p: runs.point_cycles(tmp, row, p, con) for p in a["points"]}
            con.close()
            t0 = time.perf_counter()
            page = client.get(f"/v1/assessments/{a['id']}/report")
            t1 = time.perf_counter()
            plots_in_memory(a, samples, cycles, demo.RATE_HZ)
            t2 = time.perf_counter()
            again = client.get(f"/v1/assessments/{a['id']}/report",
                               headers={"If-None-Match": page.headers["ETag"]})
            t3 = time.perf_counter()
            assert page.status_code == 200 and again.status_code == 304
            if i:  # the first round warms the plotting code
                first.append(t1 - t0)
                memory.append(t2 - t1)
                repeat.append(t3 - t2)
    f, m, r = statistics.median(first), statistics.median(memory), statistics.median(repeat)
    n = len(next(iter(channels.values())))
    print(f"demo page, 4 points x {n} samples: first render {f * 1e3:.0f} ms, plots from "
          f"memory {m * 1e3:.0f} ms, repeat (304) {r * 1e3:.1f} ms")
    print(json.dumps({"report_first_over_plots": round(f / m, 3),
                      "report_repeat_over_first": round(r / f, 4)}))


if __name__ == "__main__":
    main()
