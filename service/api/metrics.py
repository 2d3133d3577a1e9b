"""Prometheus text exposition: per-point damage of the key's project, its jobs,
and the service's own request counters (route templates only, no names)."""

from __future__ import annotations

import math
import threading
import time

from flask import Blueprint, Flask, Response, g, request

from service.store import ledger as sql

from . import db
from .access import project

bp = Blueprint("metrics", __name__)
_CONTENT_TYPE = "text/plain; version=0.0.4; charset=utf-8"


class RequestCounters:
    """Requests and their seconds by method, route and status (process-wide)."""

    def __init__(self):
        self.lock = threading.Lock()
        self.counts: dict = {}
        self.seconds: dict = {}

    def add(self, method: str, route: str, status: int, seconds: float) -> None:
        key = (method, route, str(status))
        with self.lock:
            self.counts[key] = self.counts.get(key, 0) + 1
            self.seconds[key] = self.seconds.get(key, 0.0) + seconds


def install(app: Flask) -> None:
    counters = app.extensions["cycleledger.requests"] = RequestCounters()

    @app.before_request
    def _start():
        g.t0 = time.perf_counter()

    @app.after_request
    def _count(resp):
        route = request.url_rule.rule if request.url_rule is not None else "(unrouted)"
        counters.add(request.method, route, resp.status_code,
                     time.perf_counter() - g.get("t0", time.perf_counter()))
        return resp


def _label(v) -> str:
    # Prometheus text format: backslash, double quote and newline are escaped.
    return str(v).replace("\\", "\\\\").replace('"', '\\"').replace("\n", "\\n")


def _num(v) -> str:
    if v is None:
        return "NaN"
    if math.isinf(v):
        return "+Inf" if v > 0 else "-Inf"
    return repr(float(v))


@bp.get("/metrics")
def metrics():
    from flask import current_app

    lines = []

    def family(name, kind, help_text, samples):
        lines.append(f"# HELP {name} {help_text}")
        lines.append(f"# TYPE {name} {kind}")
        for labels, value in samples:
            lab = ",".join(f'{k}="{_label(v)}"' for k, v in labels.items())
            lines.append(f"{name}{{{lab}}} {_num(value)}" if lab else f"{name} {_num(value)}")

    points = sql.list_points(db(), project())
    family("cycleledger_point_damage", "gauge",
           "Miner damage of the closed cycles of a ledger point (inf: static overload).",
           [({"asset": p["asset"], "point": p["point"]}, p["damage"]) for p in points])
    family("cycleledger_point_damage_if_ended", "gauge",
           "Damage with the open residue closed as half cycles.",
           [({"asset": p["asset"], "point": p["point"]}, p["damage"] + p["residue_damage"])
            for p in points])
    family("cycleledger_point_recorded_hours", "gauge", "Recorded hours counted for a point.",
           [({"asset": p["asset"], "point": p["point"]}, p["hours"]) for p in points])
    counters = current_app.extensions["cycleledger.requests"]
    with counters.lock:
        counts = dict(counters.counts)
        seconds = dict(counters.seconds)
    keys = sorted(counts)
    family("cycleledger_http_requests_total", "counter", "HTTP requests answered.",
           [({"method": m, "route": r, "status": s}, counts[(m, r, s)]) for m, r, s in keys])
    family("cycleledger_http_request_seconds_total", "counter",
           "Seconds spent answering HTTP requests.",
           [({"method": m, "route": r, "status": s}, seconds[(m, r, s)]) for m, r, s in keys])
    jobs = dict(db().execute("SELECT state, count(*) FROM jobs WHERE project = ? GROUP BY state",
                             (project(),)).fetchall())
    family("cycleledger_jobs", "gauge", "Jobs by state.",
           [({"state": st}, jobs.get(st, 0)) for st in ("queued", "running", "done", "failed")])
    return Response("\n".join(lines) + "\n", content_type=_CONTENT_TYPE)
