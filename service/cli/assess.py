"""``cycleledger assess``: count and assess the channels of a file in this process."""

from __future__ import annotations

import json
import sys
from pathlib import Path

from ._shared import _json_default, _recording_config, from_json, print_report


def assess_file(path: Path, config: dict) -> dict:
    """Assess every configured channel of a recording; returns the report dict.

    The file is read as the service reads an upload (``service.recordings``:
    CSV dialects, Parquet, MDF 4, HDF5, gzip), and its channels checked and
    converted the same way; ``config`` carries the request's options.
    """
    from service import recordings, runs
    from service.engine.errors import InvalidParameter
    from service.engine.settings import point_from_dict
    from service.recordings.channels import validated

    options = {k: config[k] for k in ("delimiter", "decimal", "header_row", "channels",
                                      "group", "time_column") if config.get(k) is not None}
    source, unpacked = path, None
    with open(path, "rb") as f:
        if recordings.detect(f.read(16)) == "gzip":
            source = unpacked = recordings.unpacked(path)
    try:
        rec = recordings.read(source, None, options)
    finally:
        if unpacked is not None:
            unpacked.unlink(missing_ok=True)
    params = {k: config[k] for k in ("unit", "units", "youngs_modulus", "sample_rate_hz",
                                     "time_column", "gauge_factor_set", "gauge_factor")
              if config.get(k) is not None}
    if "unit" not in params and not any(rec.units.get(c) for c in rec.columns
                                        if c != rec.time_column):
        params["unit"] = "MPa"  # the command's documented default
    up = validated(dict(rec.columns), params, file_units=rec.units,
                   time_column=rec.time_column, file_rate=rec.sample_rate_hz)
    duration = up.duration_s
    points = config.get("points") or {c: {} for c in up.channels}
    defaults = {k: v for k, v in config.items() if k in ("curve", "mean_stress_method")}
    report = {"file": str(path), "duration_s": duration, "points": {}}
    gate = float(config["gate"]) if config.get("gate") is not None else None
    gate_fraction = float(config.get("gate_fraction", 0.0)) or None
    for name, settings in points.items():
        if name not in up.channels:
            raise InvalidParameter(f"channel {name!r} is not in {path.name}; it has "
                                   f"{', '.join(map(str, up.channels))}", field="points")
        merged = {**defaults, **settings}
        point_from_dict(merged)
        # The service's own path for one point: screening, assessment, cautions.
        out, _ = runs.assess_point(runs.PlannedPoint(name, up.channels[name], merged), gate,
                                   gate_fraction, "half_cycles", duration)
        entry = {**out, "curve": out["curve"]["name"], "curve_source": out["curve"]["source"]}
        report["points"][name] = from_json(entry, duration is not None)
    return report


def _cmd_assess(args) -> int:
    config = _recording_config(args)
    if not config.get("points") and not config.get("curve"):
        print("error: give --curve or a --points file naming each channel's curve",
              file=sys.stderr)
        return 2
    report = assess_file(Path(args.file), config)
    if args.json:
        json.dump(report, sys.stdout, indent=2, default=_json_default)
        print()
    else:
        print_report(report)
    failed = any("static_overload" in p["flags"] for p in report["points"].values())
    return 1 if failed else 0
