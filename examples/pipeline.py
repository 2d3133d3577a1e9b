"""A rig pipeline step: post a recording to cycleledger, wait, fetch the results.

Usage (with the service running, e.g. `make demo` or `cycleledger serve`):

    python examples/pipeline.py RECORDING.csv [--url http://127.0.0.1:8350]

The recording is the demo's format (a `time_s` column and one microstrain
column per gauge); the settings per gauge are the demo's (service.demo.points()).
Prints the per-point summary and writes each point's cycle table next to the
recording as Parquet.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from service.client import Client, ServiceError  # noqa: E402


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("recording")
    ap.add_argument("--url", default="http://127.0.0.1:8350")
    args = ap.parse_args()
    from service.demo import points

    config = points()
    client = Client(args.url)
    try:
        history = client.upload_history(args.recording, unit=config["unit"],
                                youngs_modulus=config["youngs_modulus"])
        print(f"uploaded {history['id']}: {history['sample_count']} samples x "
              f"{len(history['channels'])} channels, {history['duration_s']} s")
        assessment = client.assess(history_id=history["id"], points=config["points"],
                                   gate_fraction=config["gate_fraction"],
                                   progress=lambda job: print(
                                       f"  job {job['state']} {job['progress']['fraction']:.0%}"))
    except ServiceError as exc:
        print(f"failed: {exc} {exc.problem}", file=sys.stderr)
        return 2
    summary = client.summary(assessment["id"])
    print(summary[["damage", "life_hours", "reserve_factor", "equivalent_range", "flags"]])
    for point in summary.index:
        out = Path(args.recording).with_name(f"{Path(args.recording).stem}.{point}.cycles.parquet")
        client.cycles(assessment["id"], point).to_parquet(out)
        print(f"cycles of {point} -> {out}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
