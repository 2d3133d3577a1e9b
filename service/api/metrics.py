"""Prometheus exposition through ``prometheus_client``.

Process-wide, in the app's own registry: request latency as a histogram per
method, route template and status (no names or ids in labels), the build's
version, and the process's CPU, memory and open files. Per scrape, for the
key's project only: each ledger point's damage, its allowable damage, the
seconds recorded and the time of its last block (so a rig that went silent
can be alerted on), and jobs by state. Units are in the metric names
(``_seconds``, ``_timestamp_seconds``); damage is a dimensionless Miner sum.
"""

from __future__ import annotations

import math
import time
from datetime import datetime

from flask import Blueprint, Flask, Response, current_app, g, request
from prometheus_client import (CollectorRegistry, Histogram, Info, ProcessCollector,
                               generate_latest)
from prometheus_client.core import GaugeMetricFamily

import service
from service.store import ledger as sql

from . import db
from .access import project

bp = Blueprint("metrics", __name__)
#: The classic text format every Prometheus server reads (the names here need
#: none of the newer format's escaping).
_CONTENT_TYPE = "text/plain; version=0.0.4; charset=utf-8"

#: Latency buckets: from a cached 304 to a long upload. [s]
LATENCY_BUCKETS = (0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0,
                   10.0, 30.0, 60.0, 300.0)


def install(app: Flask) -> None:
    registry = CollectorRegistry()
    latency = Histogram("cycleledger_http_request_duration_seconds",
                        "Time to answer HTTP requests, by method, route template and status.",
                        ("method", "route", "status"), buckets=LATENCY_BUCKETS,
                        registry=registry)
    Info("cycleledger_build", "The running service's version.",
         registry=registry).info({"version": service.__version__})
    ProcessCollector(registry=registry)
    app.extensions["cycleledger.metrics"] = registry

    @app.before_request
    def _start():
        g.t0 = time.perf_counter()

    @app.after_request
    def _count(resp):
        route = request.url_rule.rule if request.url_rule is not None else "(unrouted)"
        latency.labels(request.method, route, str(resp.status_code)).observe(
            time.perf_counter() - g.get("t0", time.perf_counter()))
        return resp


def _timestamp(text: str | None) -> float:
    if not text:
        return math.nan
    try:
        return datetime.fromisoformat(text.replace("Z", "+00:00")).timestamp()
    except ValueError:
        return math.nan


class _ProjectCollector:
    """The key's project's ledger points and jobs, read at scrape time."""

    def __init__(self, con, proj: str):
        self.con, self.project = con, proj

    def collect(self):
        labels = ("asset", "point")
        families = {
            "damage": GaugeMetricFamily(
                "cycleledger_point_damage", "Miner damage of the closed cycles of a ledger "
                "point (+Inf: static overload).", labels=labels),
            "damage_if_ended": GaugeMetricFamily(
                "cycleledger_point_damage_if_ended", "Damage with the open residue closed "
                "as half cycles.", labels=labels),
            "allowable": GaugeMetricFamily(
                "cycleledger_point_allowable_damage", "The point's allowable damage sum.",
                labels=labels),
            "recorded": GaugeMetricFamily(
                "cycleledger_point_recorded_seconds", "Recorded time counted for a point.",
                labels=labels),
            "last_block": GaugeMetricFamily(
                "cycleledger_point_last_block_timestamp_seconds", "When the point's last "
                "block was recorded (Unix time; NaN before the first).", labels=labels),
        }
        for p in sql.list_points(self.con, self.project):
            key = (p["asset"], p["point"])
            families["damage"].add_metric(key, p["damage"])
            families["damage_if_ended"].add_metric(key, p["damage"] + p["residue_damage"])
            families["allowable"].add_metric(
                key, float(p["resolved"].get("allowable_damage", 1.0)))
            families["recorded"].add_metric(key, p["hours"] * 3600.0)
            families["last_block"].add_metric(key, _timestamp(p["last_block_at"]))
        yield from families.values()
        jobs = GaugeMetricFamily("cycleledger_jobs", "Jobs by state.", labels=("state",))
        counts = dict(self.con.execute(
            "SELECT state, count(*) FROM jobs WHERE project = ? GROUP BY state",
            (self.project,)).fetchall())
        for state in ("queued", "running", "done", "failed"):
            jobs.add_metric((state,), counts.get(state, 0))
        yield jobs


@bp.get("/metrics")
def metrics():
    scoped = CollectorRegistry()
    scoped.register(_ProjectCollector(db(), project()))
    body = (generate_latest(current_app.extensions["cycleledger.metrics"])
            + generate_latest(scoped))
    return Response(body, content_type=_CONTENT_TYPE)
