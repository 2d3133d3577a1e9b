"""``cycleledger batch`` and ``curves``: many points on Dask, and the curve catalogue."""

from __future__ import annotations

import json
import sys
from pathlib import Path


def _cmd_batch(args) -> int:
    """Assess every point of a Parquet dataset as Dask tasks; write the results."""
    from service.batch.cluster import connect, scheduler_address
    from service.batch.dataset import DatasetError, open_dataset
    from service.batch.run import run_batch, write_results

    settings = json.loads(Path(args.settings).read_text()) if args.settings else {}
    if args.curve:
        settings["curve"] = args.curve
    if args.mean_stress_method:
        settings["mean_stress_method"] = args.mean_stress_method
    overrides = json.loads(Path(args.points).read_text()) if args.points else None
    try:
        ds = open_dataset(args.dataset, args.sample_rate_hz)
    except DatasetError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    where = scheduler_address(args.scheduler) or "a local cluster in this process"
    print(f"{len(ds.points)} points, {len(ds.files)} file(s), {ds.layout} layout, "
          f"{ds.sample_bytes() / 2**20:.0f} MB of samples; running on {where}",
          file=sys.stderr)

    def bar(done, total):
        width = 30
        k = int(round(width * done / total))
        print(f"\r[{'#' * k}{'.' * (width - k)}] {done}/{total} points", end="",
              file=sys.stderr, flush=True)

    with connect(args.scheduler, args.threads) as client:
        result = run_batch(ds, settings, client, partition_points=args.partition_points,
                           unit=args.unit, youngs_modulus=args.youngs_modulus,
                           gate=args.gate or 0.0, gate_fraction=args.gate_fraction,
                           overrides=overrides,
                           progress=None if args.json else bar)
    if not args.json:
        print(file=sys.stderr)
    summary = write_results(result, ds, settings, args.out)
    if args.json:
        print(json.dumps(summary))
    else:
        print(f"{summary['points_ok']} points assessed, {summary['points_failed']} failed, "
              f"in {summary['seconds']:.1f} s; results in {args.out}/points.parquet and "
              f"summary.json")
        for f in summary["failed_partitions"]:
            print(f"  partition of {len(f['points'])} points failed ({f['reason']}): "
                  f"{', '.join(f['points'][:8])}{' ...' if len(f['points']) > 8 else ''}")
        print(f"{'point':<24} {'damage':>12} {'life h':>12} {'reserve':>8} flags")
        for w in summary["worst"]:
            def fmt(v, spec):
                return "-" if v is None else format(v, spec)
            print(f"{w['point']:<24} {fmt(w['damage'], '12.4g')} {fmt(w['life_hours'], '12.4g')} "
                  f"{fmt(w['reserve_factor'], '8.3f')} {w['flags']}")
    return 1 if summary["points_failed"] else 0


def _cmd_curves(args) -> int:
    from service.engine.sn_catalogue import catalogue_curve, designations

    for d in designations():
        c = catalogue_curve(d)
        knees = ", ".join(f"{r:.1f} MPa @ {n:.0e}" for r, n in zip(c.knee_ranges, c.knee_cycles))
        cut = f"; cut-off {c.cutoff_range:.1f} MPa @ {c.cutoff_cycles:.0e}" if c.cutoff_cycles else ""
        print(f"{d:<24} m={'/'.join(f'{m:g}' for m in c.slopes):<6} "
              f"{c.reference_range:.1f} MPa @ {c.reference_cycles:.0e}; knees {knees or '-'}{cut}")
    return 0
