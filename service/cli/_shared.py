"""What the subcommands share: number formatting, the recording options, the printed table."""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path

from service import formatting


#: A number for the table (``service.formatting``'s one policy).
_fmt = formatting.number


def from_json(entry: dict, has_duration: bool) -> dict:
    """A point's result as the service serves it, with its infinities back
    (JSON's null stands for them: a runout's lives, a static overload's
    damage)."""
    out = dict(entry)
    if out.get("runout"):
        for k in ("life_repeats", "life_cycles") + (("life_hours",) if has_duration else ()):
            if out.get(k) is None:
                out[k] = math.inf
    if out.get("damage") is None:
        out["damage"] = math.inf
    return out


def _json_default(v):
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return str(v)


def _version() -> str:
    import service

    return service.__version__


def _recording_args(p, unit_help: str) -> None:
    """The options shared by ``assess`` and ``post``: a recording and its settings."""
    p.add_argument("file", help="a recording: CSV (any common dialect), Parquet, Arrow, MDF 4, "
                   "HDF5, or any of them gzipped")
    p.add_argument("--points", help="JSON file with settings per channel")
    p.add_argument("--curve", help="catalogue designation for every channel")
    p.add_argument("--mean-stress-method", dest="mean_stress_method",
                   help="mean-stress correction for every channel (default none: range only)")
    p.add_argument("--unit", help=unit_help)
    p.add_argument("--youngs-modulus", dest="youngs_modulus", type=float,
                   help="E in MPa, for strain units")
    gate = p.add_mutually_exclusive_group()
    gate.add_argument("--gate", type=float,
                      help="hysteresis gate for every channel [MPa] (default 0: none)")
    gate.add_argument("--gate-fraction", dest="gate_fraction", type=float,
                      help="hysteresis gate as a fraction of each channel's range (default 0)")
    p.add_argument("--sample-rate-hz", dest="sample_rate_hz", type=float,
                   help="samples a second, when the file has no time column [Hz]")
    p.add_argument("--time-column", dest="time_column",
                   help="the time column (default: time_s, time, t or zeit if present)")
    p.add_argument("--delimiter", help="CSV delimiter if not found (';', ',', tab, '|')")
    p.add_argument("--decimal", choices=(".", ","), help="CSV decimal mark if not found")
    p.add_argument("--header-row", dest="header_row", type=int,
                   help="CSV line (from 0) of the column names if not found")
    p.add_argument("--channels", help="MDF 4 channel names or HDF5 dataset paths, comma "
                   "separated")
    p.add_argument("--group", help="MDF 4 channel group index or HDF5 group path")
    p.add_argument("--gauge-factor-set", dest="gauge_factor_set", type=float,
                   help="gauge factor the amplifier was set to (with --gauge-factor)")
    p.add_argument("--gauge-factor", dest="gauge_factor", type=float,
                   help="the gauges' own gauge factor: strain is corrected by set / own")
    p.add_argument("--json", action="store_true", help="machine-readable output")


#: How the file is read: the service's reader options (``service.recordings``).
READER_KEYS = ("delimiter", "decimal", "header_row", "channels", "group", "gauge_factor_set",
               "gauge_factor")


def _recording_config(args) -> dict:
    """The points file (if any) with the command-line options over it."""
    config = json.loads(Path(args.points).read_text()) if args.points else {}
    for key in ("unit", "youngs_modulus", "curve", "mean_stress_method", "gate", "gate_fraction",
                "sample_rate_hz", "time_column") + READER_KEYS:
        value = getattr(args, key, None)
        if value is not None:
            config[key] = value
    return config


#: Members of a problem the commands print under its message.
PROBLEM_MEMBERS = ("field", "value", "channel", "sample_index", "valid")


def service_error(exc) -> int:
    """Print a refused request (a ``ServiceError``) for people; the exit code:
    2 for the request's fault (4xx), 3 for the service's or the network's."""
    print(f"error: {exc}", file=sys.stderr)
    for k in PROBLEM_MEMBERS:
        if k in exc.problem:
            print(f"  {k}: {exc.problem[k]}", file=sys.stderr)
    return 2 if 400 <= exc.status < 500 else 3


def print_report(report: dict, out=None) -> None:
    """The per-point table and the cautions, for people."""
    out = out or sys.stdout
    cols = [("point", 16), ("curve", 22), ("cycles", 9), ("max range", 10),
            ("damage", 10), ("life rep.", 10), ("life h", 10), ("reserve", 8),
            ("eq. range", 10), ("flags", 20)]
    print(f"{report['file']}  (duration {_fmt(report['duration_s'])} s; stresses in MPa)",
          file=out)
    print("".join(f"{c:<{w}}" for c, w in cols), file=out)
    for name, p in report["points"].items():
        row = [name, p["curve"], formatting.count(p["cycles_counted"]), _fmt(p["max_range"]),
               _fmt(p["damage"]), _fmt(p["life_repeats"]), _fmt(p["life_hours"]),
               _fmt(p["reserve_factor"]), _fmt(p["equivalent_range"]),
               ",".join(p["flags"]) or "-"]
        print("".join(f"{str(v):<{w}}" for v, (_, w) in zip(row, cols)), file=out)
    signal = [(name, f) for name, p in report["points"].items()
              for f in ((p.get("screening") or {}).get("findings") or [])]
    if signal:
        print("\nSignal screening (faults found before counting):", file=out)
        for name, f in signal:
            share = ("" if f.get("damage_share") is None
                     else f", {f['damage_share']:.0%} of the damage")
            print(f"  - {name}: {f['kind']} x{f['count']} from sample {f['first_sample']}"
                  f"{share}", file=out)
    print("\nCautions:", file=out)
    for c in gathered_cautions(report):
        where = f" ({', '.join(c['points'])})" if c["points"] else ""
        print(f"  - [{c['code']}] {c['text']}{where}", file=out)


def gathered_cautions(report: dict) -> list[dict]:
    """Every caution of a report once, with the points it concerns: the
    report's own list when it has one (from the service), else merged from
    its points (the general ones first, concerning every point)."""
    from service.engine.cautions import as_dict, merge

    if report.get("cautions"):
        return [as_dict(c) | {"points": c.get("points", [])} if isinstance(c, dict)
                else as_dict(c) | {"points": []} for c in report["cautions"]]
    return merge({name: [as_dict(c) for c in p["cautions"]]
                  for name, p in report["points"].items()})
