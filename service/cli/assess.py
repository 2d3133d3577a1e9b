"""``cycleledger assess``: count and assess the channels of a file in this process."""

from __future__ import annotations

import json
import sys
from pathlib import Path

from ._shared import _json_default, _read_table, _recording_config, print_report


def assess_file(path: Path, config: dict) -> dict:
    """Assess every configured channel of a recording; returns the report dict."""
    import numpy as np

    from service.engine import units
    from service.engine.damage import assess_history
    import pandas as pd

    from service.engine.errors import InvalidLoadHistory, InvalidParameter
    from service.engine.settings import point_from_dict

    df = _read_table(path)
    time_col = config.get("time_column", "time_s")
    duration = None
    if time_col in df.columns:
        t = df[time_col].to_numpy(dtype=float)
        if t.size > 1:
            duration = float((t[-1] - t[0]) * t.size / (t.size - 1))
    elif config.get("sample_rate_hz"):
        duration = len(df) / float(config["sample_rate_hz"])
    points = config.get("points") or {c: {} for c in df.columns if c != time_col}
    defaults = {k: v for k, v in config.items() if k in ("curve", "mean_stress_method")}
    report = {"file": str(path), "duration_s": duration, "points": {}}
    for name, settings in points.items():
        if name not in df.columns:
            raise InvalidParameter(f"channel {name!r} is not in {path.name}; it has "
                                   f"{', '.join(map(str, df.columns))}", field="points")
        merged = {**defaults, **settings}
        curve, opts, estimate = point_from_dict(merged)
        raw = pd.to_numeric(df[name], errors="coerce").to_numpy(dtype=float)
        bad = np.flatnonzero(np.isnan(raw) & df[name].notna().to_numpy())
        if bad.size:
            raise InvalidLoadHistory(
                f"channel {name!r} row {int(bad[0])} is {df[name].iloc[bad[0]]!r}, not a number",
                sample_index=int(bad[0]), channel=name)
        stress = units.to_mpa(raw, config.get("unit", "MPa"), config.get("youngs_modulus"))
        gate = float(config.get("gate_fraction", 0.0)) * float(np.ptp(stress))
        result = assess_history(stress, curve, opts, gate=gate, duration_s=duration)
        entry = result.summary()
        entry.update(curve=curve.name, curve_source=curve.source,
                     top_cycles=result.top_cycles, cautions=result.caution_dicts())
        if estimate is not None:
            entry["estimate"] = estimate.as_dict()
        report["points"][name] = entry
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
