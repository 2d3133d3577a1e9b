"""The ``cycleledger`` command.

Subcommands
-----------
assess   count and assess the channels of a CSV or Parquet file, print a table
demo     start the service, post the bundled demo, print the table, keep serving
post     upload a recording to a running service, assess it, print the table
report   write an assessment's or an asset's HTML page (plots, tables, cautions)
curves   list the published S-N curves the catalogue holds
serve    run the HTTP service on embedded storage
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
from pathlib import Path


def _fmt(v, digits=3) -> str:
    if v is None:
        return "-"
    if isinstance(v, float):
        if math.isinf(v):
            return "inf"
        if v == 0:
            return "0"
        if abs(v) >= 1e5 or abs(v) < 1e-3:
            return f"{v:.{digits}e}"
        return f"{v:.{digits}g}" if abs(v) < 1 else f"{v:,.{max(digits - 2, 1)}f}"
    return str(v)


def _read_table(path: Path):
    import pandas as pd

    if path.suffix.lower() in (".parquet", ".pq"):
        return pd.read_parquet(path)
    return pd.read_csv(path)


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
                     top_cycles=result.top_cycles, cautions=list(result.cautions))
        if estimate is not None:
            entry["estimate"] = estimate.as_dict()
        report["points"][name] = entry
    return report


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
        row = [name, p["curve"], _fmt(p["cycles_counted"]), _fmt(p["max_range"]),
               _fmt(p["damage"]), _fmt(p["life_repeats"]), _fmt(p["life_hours"]),
               _fmt(p["reserve_factor"]), _fmt(p["equivalent_range"]),
               ",".join(p["flags"]) or "-"]
        print("".join(f"{str(v):<{w}}" for v, (_, w) in zip(row, cols)), file=out)
    print("\nCautions:", file=out)
    seen = []
    for p in report["points"].values():
        for c in p["cautions"]:
            if c not in seen:
                seen.append(c)
    for c in seen:
        print(f"  - {c}", file=out)


def _recording_config(args) -> dict:
    """The points file (if any) with the command-line options over it."""
    config = json.loads(Path(args.points).read_text()) if args.points else {}
    for key in ("unit", "youngs_modulus", "curve", "mean_stress_method", "gate_fraction",
                "sample_rate_hz"):
        value = getattr(args, key, None)
        if value is not None:
            config[key] = value
    return config


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


def _json_default(v):
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return str(v)


def _demo_files():
    here = Path(__file__).resolve().parent.parent / "examples"
    sys.path.insert(0, str(here))
    import make_demo  # noqa: E402  (the seeded generator lives with the examples)

    return make_demo, json.loads((here / "loader_arm_points.json").read_text())


def _cmd_demo(args) -> int:
    make_demo, config = _demo_files()
    csv = make_demo.write(Path(args.out) if args.out else make_demo.DEFAULT_CSV)
    if args.offline:
        print_report(assess_file(csv, config))
        return 0
    import threading

    from waitress import create_server

    from service.api import create_app
    from service.client import Client

    app = create_app({"DATA_DIR": args.data_dir} if args.data_dir else None)
    server = create_server(app, host="127.0.0.1", port=args.port, threads=8,
                           **waitress_options(app))
    url = f"http://127.0.0.1:{server.effective_port}"
    thread = threading.Thread(target=server.run, name="cycleledger-demo", daemon=True)
    thread.start()
    try:
        client = Client(url)
        report = post_file(client, csv, config)
        print_report(report)
        a = report["assessment_id"]
        from service.store import keys, sqlite

        con = sqlite.connect(app.config["DATA_DIR"])
        try:
            mode = ("API keys required" if keys.any_active(con)
                    else "open mode: no API keys, this machine only")
        finally:
            con.close()
        print(f"\nService on {url} (data in {app.config['DATA_DIR']}; {mode}). Look at:")
        for path in (f"/v1/assessments/{a}/report", "/v1/assessments/" + a,
                     f"/v1/assessments/{a}/summary?format=csv",
                     f"/v1/assessments/{a}/points/pin_lug/cycles?format=csv",
                     f"/v1/assessments/{a}/points/pin_lug/range-mean", "/v1/curves",
                     "/openapi.yaml"):
            print(f"  {url}{path}")
        if args.no_wait:
            return 0
        print("Serving until Ctrl-C.", flush=True)
        import signal

        def _stop(_sig, _frame):
            raise KeyboardInterrupt

        signal.signal(signal.SIGTERM, _stop)  # a service manager's stop, like Ctrl-C
        while thread.is_alive():
            thread.join(0.5)
    except KeyboardInterrupt:
        print("\nstopped")
    finally:
        stop_waitress(server, thread)
        app.extensions["cycleledger.jobs"].shutdown()
    return 0


def stop_waitress(server, thread, timeout_s: float = 10.0) -> None:
    """Stop a waitress server running on ``thread`` from inside its own loop.

    Closing its sockets from another thread races the loop's ``select`` (an
    EBADF in the server thread); a thunk pulled through waitress's trigger
    closes every channel inside the loop, which then ends on an empty map.
    """
    server.trigger.pull_trigger(lambda: [ch.close() for ch in list(server._map.values())])
    thread.join(timeout=timeout_s)


def post_file(client, path: Path, config: dict, progress=None) -> dict:
    """Upload a recording and assess it through the service; returns the report dict
    that :func:`print_report` prints (plus ``assessment_id``)."""
    time_col = config.get("time_column", "time_s")
    h = client.upload(path, unit=config.get("unit"), units=config.get("units"),
                      youngs_modulus=config.get("youngs_modulus"),
                      sample_rate_hz=config.get("sample_rate_hz"), time_column=time_col,
                      name=Path(path).name)
    settings = {k: v for k, v in config.items() if k in ("curve", "mean_stress_method")}
    request = {"history_id": h["id"], "settings": settings}
    if config.get("points"):
        request["points"] = config["points"]
    for key in ("gate", "gate_fraction", "residue"):
        if config.get(key) is not None:
            request[key] = config[key]
    a = client.assess(progress=progress, **request)
    points = {}
    for name, p in a["points"].items():
        points[name] = {**p, "curve": p["curve"]["name"], "curve_source": p["curve"]["source"],
                        "cautions": list(a["cautions"]) + p["cautions"]}
        points[name] = {k: (math.inf if v is None and k in ("life_repeats", "life_cycles")
                            and p["runout"] else v) for k, v in points[name].items()}
        if points[name]["damage"] is None:
            points[name]["damage"] = math.inf
    return {"file": str(path), "duration_s": a["duration_s"], "points": points,
            "assessment_id": a["id"], "history_id": h["id"]}


def _progress_bar(job) -> None:
    p = job["progress"]
    width = 30
    done = int(round(p["fraction"] * width))
    print(f"\r[{'#' * done}{'.' * (width - done)}] {p['points_done']}/{p['points_total']} "
          f"points ({job['state']})", end="" if job["state"] not in ("done", "failed") else "\n",
          file=sys.stderr, flush=True)


def _cmd_post(args) -> int:
    from service.client import Client, ServiceError

    config = _recording_config(args)
    client = Client(args.url)
    try:
        report = post_file(client, Path(args.file), config,
                           progress=None if args.json else _progress_bar)
    except ServiceError as exc:
        print(f"error: {exc}", file=sys.stderr)
        for k in ("field", "channel", "sample_index", "valid"):
            if k in exc.problem:
                print(f"  {k}: {exc.problem[k]}", file=sys.stderr)
        return 2 if 400 <= exc.status < 500 else 3
    if args.json:
        json.dump(report, sys.stdout, indent=2, default=_json_default)
        print()
    else:
        print_report(report)
        print(f"\n{args.url.rstrip('/')}/v1/assessments/{report['assessment_id']}")
    failed = any("static_overload" in p["flags"] for p in report["points"].values())
    return 1 if failed else 0


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
                           gate=args.gate or 0.0, overrides=overrides,
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


def is_loopback(host: str) -> bool:
    """Whether ``host`` only accepts connections from this machine."""
    import ipaddress

    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


def _cmd_serve(args) -> int:
    import logging

    from gunicorn.app.base import BaseApplication

    from service.api import create_app

    from service.store import keys, sqlite

    data_dir = args.data_dir or os.environ.get("CYCLELEDGER_DATA_DIR", "cycleledger-data")
    sqlite.init(data_dir)
    con = sqlite.connect(data_dir)
    try:
        keyed = keys.any_active(con)
    finally:
        con.close()
    if not keyed and not is_loopback(args.host):
        # Open mode (no keys): every client could read and change everything.
        print(f"error: refusing to serve on {args.host} without API keys: anyone who can "
              f"reach it could read and change every result. Make a key first "
              f"(cycleledger keys create --project NAME --scope admin), or bind to "
              f"127.0.0.1.", file=sys.stderr)
        return 2

    logging.basicConfig(level=logging.INFO, format="%(asctime)s %(name)s %(message)s")
    config = {"DATA_DIR": args.data_dir} if args.data_dir else {}
    if args.max_upload_mb is not None:
        config["MAX_UPLOAD_MB"] = args.max_upload_mb
    if args.job_workers is not None:
        config["JOB_WORKERS"] = args.job_workers
    if args.async_samples is not None:
        config["ASYNC_SAMPLES"] = args.async_samples
    for flag, setting in (("max_channels", "MAX_CHANNELS"),
                          ("max_samples_per_channel", "MAX_SAMPLES_PER_CHANNEL"),
                          ("max_queued_jobs", "MAX_QUEUED_JOBS")):
        if getattr(args, flag) is not None:
            config[setting] = getattr(args, flag)
    if args.scheduler:
        config["DASK_SCHEDULER"] = args.scheduler
    if args.rate_per_s is not None:
        config["RATE_PER_S"] = args.rate_per_s
    if args.rate_burst is not None:
        config["RATE_BURST"] = args.rate_burst
    access = ("API keys required" if keyed else
              "OPEN: no API keys, so it answers clients on this machine without one")

    class Server(BaseApplication):
        # One worker process with request threads: jobs and their state live
        # in this process, and gunicorn hands a request body to the app as it
        # arrives, so an upload is written to disk while it is received.
        def load_config(self):
            for key, value in {
                    "bind": f"{args.host}:{args.port}", "workers": 1,
                    "worker_class": "gthread", "threads": args.threads,
                    "timeout": 600, "graceful_timeout": 30, "keepalive": 5,
                    "control_socket_disable": True, "accesslog": "-",
                    "errorlog": "-"}.items():
                self.cfg.set(key, value)

        def load(self):
            app = create_app(config)
            print(f"cycleledger {_version()} serving on http://{args.host}:{args.port}/v1/ "
                  f"(data in {app.config['DATA_DIR']}; {access}; Ctrl-C stops)", flush=True)
            return app

    Server().run()
    return 0


def _keys_parser(sub) -> None:
    p = sub.add_parser("keys", help="make, list and revoke API keys (on the data directory)")
    p.add_argument("--data-dir", dest="data_dir",
                   help="data directory (default: $CYCLELEDGER_DATA_DIR or ./cycleledger-data)")
    ks = p.add_subparsers(dest="keys_command", required=True)
    c = ks.add_parser("create", help="make a key; its secret is printed once")
    c.add_argument("--project", required=True, help="the namespace the key reads and writes")
    c.add_argument("--scope", required=True, choices=["read", "write", "admin"],
                   help="read: GET; write: + histories, assessments, blocks; admin: + assets, "
                        "points, settings, voids, deletes, curves and materials")
    c.add_argument("--name", help="what the key is for (a rig, a dashboard)")
    c.add_argument("--rate-per-s", dest="rate_per_s", type=float,
                   help="this key's request rate (default: the service's)")
    c.add_argument("--json", action="store_true", help="machine-readable output")
    c.set_defaults(func=_cmd_keys_create)
    c = ks.add_parser("list", help="the keys (never their secrets)")
    c.add_argument("--project")
    c.add_argument("--json", action="store_true", help="machine-readable output")
    c.set_defaults(func=_cmd_keys_list)
    c = ks.add_parser("revoke", help="revoke a key for good (its requests get 401 at once)")
    c.add_argument("key_id", help="the key's id (k_...)")
    c.set_defaults(func=_cmd_keys_revoke)


def _keys_store(args):
    from service.store import sqlite

    data_dir = args.data_dir or os.environ.get("CYCLELEDGER_DATA_DIR", "cycleledger-data")
    sqlite.init(data_dir)
    return sqlite.connect(data_dir)


def _cmd_keys_create(args) -> int:
    from service.store import keys

    con = _keys_store(args)
    try:
        row, secret = keys.create(con, args.project, args.scope, args.name, args.rate_per_s)
    except ValueError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    finally:
        con.close()
    if args.json:
        print(json.dumps({**row, "secret": secret}))
    else:
        print(f"key {row['id']} for project {row['project']!r}, scopes "
              f"{' '.join(row['scopes'])}\n\n  {secret}\n\nThis secret is shown once and "
              f"not stored: keep it in your secret store. Send it as "
              f"`Authorization: Bearer <secret>` (or set CYCLELEDGER_API_KEY).")
    return 0


def _cmd_keys_list(args) -> int:
    from service.store import keys

    con = _keys_store(args)
    try:
        rows = keys.list_keys(con, args.project)
    finally:
        con.close()
    if args.json:
        print(json.dumps(rows))
        return 0
    print(f"{'id':<20} {'project':<16} {'scopes':<18} {'state':<8} {'created':<21} name")
    for r in rows:
        state = "revoked" if r["revoked_at"] else "active"
        print(f"{r['id']:<20} {r['project']:<16} {' '.join(r['scopes']):<18} {state:<8} "
              f"{r['created_at']:<21} {r['name'] or ''}")
    return 0


def _cmd_keys_revoke(args) -> int:
    from service.store import keys

    con = _keys_store(args)
    try:
        ok = keys.revoke(con, args.key_id)
    finally:
        con.close()
    if not ok:
        print(f"error: no active key {args.key_id!r}", file=sys.stderr)
        return 2
    print(f"revoked {args.key_id}")
    return 0


def waitress_options(app) -> dict:
    """waitress settings for large uploads.

    By default waitress reads 8 kB at a time and spools bodies above 512 kB
    to a temporary file; a 64 MB Parquet upload then costs more in the server
    than in the engine. Bodies up to the upload limit stay in memory and are
    read in 4 MB pieces.
    """
    limit = app.config["MAX_CONTENT_LENGTH"]
    return {"max_request_body_size": limit + 2**20, "inbuf_overflow": limit + 2**20,
            "recv_bytes": 2**22}


def _version() -> str:
    import service

    return service.__version__


def _cmd_report(args) -> int:
    """Fetch an assessment's (or an asset's) HTML page from the service into a file."""
    from service.client import Client, ServiceError

    client = Client(args.url)
    path = (f"/v1/assets/{args.asset}/report" if args.asset
            else f"/v1/assessments/{args.assessment}/report")
    try:
        _, _, body = client.request("GET", path, accept="text/html")
    except ServiceError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2 if 400 <= exc.status < 500 else 3
    out = Path(args.out or (f"{args.asset or args.assessment}.html"))
    out.write_bytes(body)
    print(f"wrote {out} ({len(body) / 1024:.0f} kB; open it in a browser, it needs no network)")
    return 0


def _recording_args(p, unit_help: str) -> None:
    """The options shared by ``assess`` and ``post``: a recording and its settings."""
    p.add_argument("file", help="CSV (header row; optional time_s column) or Parquet")
    p.add_argument("--points", help="JSON file with settings per channel")
    p.add_argument("--curve", help="catalogue designation for every channel")
    p.add_argument("--mean-stress-method", dest="mean_stress_method")
    p.add_argument("--unit", help=unit_help)
    p.add_argument("--youngs-modulus", dest="youngs_modulus", type=float,
                   help="E in MPa, for strain units")
    p.add_argument("--gate-fraction", dest="gate_fraction", type=float)
    p.add_argument("--sample-rate-hz", dest="sample_rate_hz", type=float)
    p.add_argument("--json", action="store_true", help="machine-readable output")


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(prog="cycleledger", description=__doc__.splitlines()[0])
    sub = parser.add_subparsers(dest="command", required=True)
    p = sub.add_parser("assess", help="assess the channels of a recording")
    _recording_args(p, "unit of the samples (default MPa)")
    p.set_defaults(func=_cmd_assess)
    p = sub.add_parser("demo", help="start the service, post the bundled demo, keep serving")
    p.add_argument("--out", help="where to write the demo CSV")
    p.add_argument("--port", type=int, default=8350, help="port on 127.0.0.1 (0: any free)")
    p.add_argument("--data-dir", dest="data_dir",
                   help="data directory (default: $CYCLELEDGER_DATA_DIR or ./cycleledger-data)")
    p.add_argument("--no-wait", dest="no_wait", action="store_true",
                   help="stop the service after printing the table")
    p.add_argument("--offline", action="store_true",
                   help="assess in this process without the service")
    p.set_defaults(func=_cmd_demo)
    p = sub.add_parser("post", help="upload a recording to a running service and assess it")
    _recording_args(p, "unit of the samples (required by the service)")
    p.add_argument("--url", default="http://127.0.0.1:8350", help="the service")
    p.set_defaults(func=_cmd_post)
    p = sub.add_parser("report", help="write an assessment's or an asset's HTML page")
    who = p.add_mutually_exclusive_group(required=True)
    who.add_argument("assessment", nargs="?", help="assessment id (a_...)")
    who.add_argument("--asset", help="a ledger asset instead")
    p.add_argument("--url", default="http://127.0.0.1:8350", help="the service")
    p.add_argument("--out", help="file to write (default: <id>.html)")
    p.set_defaults(func=_cmd_report)
    p = sub.add_parser("batch", help="assess every point of a Parquet dataset on Dask")
    p.add_argument("dataset", help="a Parquet file or a folder of them (successive stretches)")
    p.add_argument("--out", required=True, help="folder for points.parquet and summary.json")
    p.add_argument("--settings", help="JSON file: settings for every point")
    p.add_argument("--points", help="JSON file: settings per point over --settings")
    p.add_argument("--curve", help="catalogue designation for every point")
    p.add_argument("--mean-stress-method", dest="mean_stress_method")
    p.add_argument("--unit", default="MPa", help="unit of the samples (default MPa)")
    p.add_argument("--youngs-modulus", dest="youngs_modulus", type=float,
                   help="E in MPa, for strain units")
    p.add_argument("--sample-rate-hz", dest="sample_rate_hz", type=float,
                   help="when there is no time_s column")
    p.add_argument("--gate", type=float, help="hysteresis gate in MPa")
    p.add_argument("--partition-points", dest="partition_points", type=int, default=64,
                   help="points a task holds (memory per task: one file of them)")
    p.add_argument("--scheduler", help="Dask scheduler address (default: "
                   "$CYCLELEDGER_DASK_SCHEDULER, else a local cluster in this process)")
    p.add_argument("--threads", type=int, help="threads of the local cluster (default: cores)")
    p.add_argument("--json", action="store_true", help="print the summary as JSON")
    p.set_defaults(func=_cmd_batch)
    p = sub.add_parser("curves", help="list the catalogue of published S-N curves")
    p.set_defaults(func=_cmd_curves)
    p = sub.add_parser("serve", help="run the HTTP service (gunicorn, one process, threads)")
    p.add_argument("--host", default="127.0.0.1", help="address to listen on")
    p.add_argument("--port", type=int, default=8350)
    p.add_argument("--data-dir", dest="data_dir",
                   help="data directory (default: $CYCLELEDGER_DATA_DIR or ./cycleledger-data)")
    p.add_argument("--threads", type=int, default=8, help="request threads")
    p.add_argument("--job-workers", dest="job_workers", type=int,
                   help="threads running large assessments (default 1)")
    p.add_argument("--max-upload-mb", dest="max_upload_mb", type=float,
                   help="largest request body; larger ones get 413 (default 512)")
    p.add_argument("--async-samples", dest="async_samples", type=int,
                   help="samples x points above which an assessment becomes a job "
                        "(default 2000000)")
    p.add_argument("--scheduler", help="Dask scheduler address: jobs' points run on that "
                   "cluster (default: $CYCLELEDGER_DASK_SCHEDULER, else in this process)")
    p.add_argument("--max-channels", dest="max_channels", type=int,
                   help="channels in one request; more get 413 (default 256)")
    p.add_argument("--max-samples-per-channel", dest="max_samples_per_channel", type=int,
                   help="samples in one channel of a request; more get 413 (default 2e8)")
    p.add_argument("--max-queued-jobs", dest="max_queued_jobs", type=int,
                   help="jobs queued or running before new ones get 429 (default 16)")
    p.add_argument("--rate-per-s", dest="rate_per_s", type=float,
                   help="requests a second per API key before 429 (default 50; 0: no limit)")
    p.add_argument("--rate-burst", dest="rate_burst", type=float,
                   help="requests a key may send at once above its rate (default 100)")
    p.set_defaults(func=_cmd_serve)
    _keys_parser(sub)
    args = parser.parse_args(argv)
    from service.engine.errors import EngineError

    try:
        return args.func(args)
    except (EngineError, FileNotFoundError) as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2


if __name__ == "__main__":
    sys.exit(main())
