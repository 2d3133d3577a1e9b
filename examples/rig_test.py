"""A shorter rig test from a field recording: edit it, check what it keeps.

Usage (with the service running, e.g. `make demo` or `cycleledger serve`):

    python examples/rig_test.py RECORDING.csv [--url http://127.0.0.1:8350] [--keep 0.95]

The recording is the demo's format (a `time_s` column and one microstrain
column per gauge; settings per gauge from service.demo.points()). The script
uploads it as the field recording, edits it into a drive signal that keeps
`--keep` of every gauge's damage, uploads the drive signal as the rig run,
and compares the two: per gauge the damage a rig run does against the field
recording and how many field hours one rig hour stands for. Writes the drive
signal next to the recording as CSV.
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
    ap.add_argument("--keep", type=float, default=0.95)
    args = ap.parse_args()
    from service.demo import points

    config = points()
    # Stress-life settings per gauge; the edit and the comparison use the same.
    per_gauge = config["points"]
    client = Client(args.url)
    try:
        field = client.upload_history(args.recording, unit=config["unit"],
                                      youngs_modulus=config["youngs_modulus"], name="field")
        edit = client.edit(field["id"], points=per_gauge, keep=args.keep, window_s=0.5,
                           settings={})
        drive = client.edited_signal(edit["id"])
        rate = field["sample_rate_hz"]
        rig = client.upload_history({g: drive[g].to_numpy() for g in per_gauge}, unit="MPa",
                                    sample_rate_hz=rate, name="rig drive")
        compared = client.compare_rig_field({"history_id": rig["id"]},
                                            {"history_id": field["id"]}, points=per_gauge)
    except ServiceError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    out = Path(args.recording).with_name(Path(args.recording).stem + "-drive.csv")
    drive.to_csv(out, index=False)
    res = edit["result"]
    print(f"drive signal: {res['samples_after']} of {res['samples_before']} samples "
          f"({res['length_kept']:.0%}) in {res['pieces']} pieces -> {out}")
    print(f"{'gauge':<16}{'damage kept':>12}{'rig/field':>11}{'field h per rig h':>19}")
    for g, ch in res["channels"].items():
        c = compared["points"][g]
        print(f"{g:<16}{ch['damage_kept']:>12.3f}{c['field_spans_per_rig_run']:>11.3f}"
              f"{c['acceleration_factor']:>19.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
