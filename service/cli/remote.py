"""``cycleledger post`` and ``report``: a recording to a running service, and its pages back."""

from __future__ import annotations

import json
import sys
from pathlib import Path

from ._shared import (READER_KEYS, _json_default, _recording_config, from_json, print_report,
                      service_error)


def post_file(client, path: Path, config: dict, progress=None) -> dict:
    """Upload a recording and assess it through the service; returns the report dict
    that :func:`print_report` prints (plus ``assessment_id``)."""
    options = {k: config[k] for k in READER_KEYS if config.get(k) is not None}
    h = client.upload_history(path, unit=config.get("unit"), units=config.get("units"),
                      youngs_modulus=config.get("youngs_modulus"),
                      sample_rate_hz=config.get("sample_rate_hz"),
                      time_column=config.get("time_column"), name=Path(path).name, **options)
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
        points[name] = from_json({**p, "curve": p["curve"]["name"],
                                  "curve_source": p["curve"]["source"]},
                                 a["duration_s"] is not None)
    return {"file": str(path), "duration_s": a["duration_s"], "points": points,
            "assessment_id": a["id"], "history_id": h["id"], "cautions": a["cautions"]}


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
        return service_error(exc)
    if args.json:
        json.dump(report, sys.stdout, indent=2, default=_json_default)
        print()
    else:
        print_report(report)
        print(f"\n{args.url.rstrip('/')}/v1/assessments/{report['assessment_id']}")
    failed = any("static_overload" in p["flags"] for p in report["points"].values())
    return 1 if failed else 0


def _cmd_report(args) -> int:
    """Fetch an assessment's (or an asset's) HTML page from the service into a file."""
    from service.client import Client, ServiceError

    client = Client(args.url)
    path = (f"/v1/assets/{args.asset}/report" if args.asset
            else f"/v1/duty-cycles/{args.duty_cycle}/report" if args.duty_cycle
            else f"/v1/assessments/{args.assessment}/report")
    try:
        _, _, body = client.request("GET", path, accept="text/html")
    except ServiceError as exc:
        return service_error(exc)
    out = Path(args.out or (f"{args.asset or args.duty_cycle or args.assessment}.html"))
    out.write_bytes(body)
    print(f"wrote {out} ({len(body) / 1024:.0f} kB; open it in a browser, it needs no network)")
    return 0
