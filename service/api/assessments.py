"""Assessments: run on a stored history or inline samples; read results."""

from __future__ import annotations

import csv
import io
import re

import numpy as np
from flask import Blueprint, Response, current_app, jsonify, request, url_for

from service import digests, runs
from service.extrapolation import extrapolated
from service.store import parquet, sqlite

from . import caching, created, data_dir, db, idempotency, json_object, uploads
from .access import project
from .histories import load as load_history, page_args
from .problems import ApiProblem, NotAcceptable, NotFound, TooManyJobs

bp = Blueprint("assessments", __name__)

#: Folder of the inputs a queued job keeps until it ends.
JOB_INPUTS = "jobs"

#: Columns of the per-point summary table (JSON fields and CSV header alike).
SUMMARY_COLUMNS = ("point", "damage", "damage_per_repeat", "life_repeats", "life_hours",
                   "life_cycles", "reserve_factor", "reserve_limited_by", "equivalent_range",
                   "cycles_counted", "max_range", "overload_cycles", "runout", "flags",
                   "findings", "curve")
CYCLE_COLUMNS = ("stress_from", "stress_to", "count", "start_index", "end_index", "damage")


def resource(row: dict) -> dict:
    aid = row["id"]
    out = {"id": aid, "history_id": row["history_id"], "created_at": row["created_at"],
           "state": row["state"], "request": row["request"]}
    out.update(row["result"] or {})
    out["links"] = {
        "self": url_for("assessments.get_one", assessment_id=aid),
        "summary": url_for("assessments.summary", assessment_id=aid),
        "points": {p: {"cycles": url_for("assessments.cycles", assessment_id=aid, point=p),
                       "samples": url_for("assessments.samples", assessment_id=aid, point=p),
                       "range_mean": url_for("assessments.range_mean", assessment_id=aid,
                                             point=p)}
                   for p in (row["result"] or {}).get("points", {})},
    }
    if row["history_id"]:
        out["links"]["history"] = url_for("histories.get_one", history_id=row["history_id"])
    return out


def load(assessment_id: str) -> dict:
    row = sqlite.get_assessment(db(), project(), assessment_id)
    if row is None:
        raise NotFound(f"no assessment {assessment_id!r}", field="assessment_id")
    return row


@bp.post("/v1/assessments")
def create():
    """Assess a stored history (``history_id``) or inline ``samples``; 201 with results
    (or 202 with a job). An ``Idempotency-Key`` makes a retry answer as the first time."""
    idem_key = idempotency.key()
    body = request.get_data(cache=True)
    request_hash = idempotency.request_hash(digests.Fingerprint(body).hexdigest())
    again = idempotency.replay(idem_key, request_hash, body)
    if again is not None:
        return again
    return idempotency.remember(idem_key, request_hash, _create())


def _create():
    body = json_object()
    if ("history_id" in body) == ("samples" in body):
        raise ApiProblem("give exactly one of history_id or samples", field="history_id")
    if "history_id" in body:
        hid = body["history_id"]
        if not isinstance(hid, str):
            raise ApiProblem("history_id must be a string", field="history_id")
        hist = load_history(hid)
        names = [c["name"] for c in hist["channels"]]
        units = {c["name"]: c["unit"] for c in hist["channels"]}
        samples, duration = hist["sample_count"], hist["duration_s"]
        folder = data_dir()

        def channels():
            return parquet.read_channels(folder, hist["file"], names)
    else:
        if not isinstance(body["samples"], dict):
            raise ApiProblem("samples must be an object {channel: [numbers]}", field="samples")
        params = {k: body[k] for k in ("unit", "units", "youngs_modulus", "sample_rate_hz")
                  if k in body}
        up = uploads.validated(dict(body["samples"]), params)
        names, samples, duration, hid = list(up.channels), up.sample_count, up.duration_s, None
        units = dict(up.source_units)

        def channels():
            return up.channels
    # Every check that needs no counting runs now: bad input is a 4xx here,
    # never a failed job later.
    runs.counting_options(body)
    planned = runs.plan(body, dict.fromkeys(names), runs.store_lookup(db(), project()), units)
    if samples * len(planned) > current_app.config["ASYNC_SAMPLES"] or _prefers_async():
        return _queue(body, channels, duration, hid, len(planned),
                      hist["file"] if hid else None, names)
    row = runs.run(db(), data_dir(), body, channels(), duration, hid,
                   samples_file=hist["file"] if hid else None,
                   lookup=runs.store_lookup(db(), project()), project=project())
    return created(resource(row), 201)


def _prefers_async() -> bool:
    # RFC 7240: "Prefer: respond-async" asks for a job whatever the size.
    return any(p.strip().lower() == "respond-async"
               for h in request.headers.getlist("Prefer") for p in h.split(","))


def _queue(body, channels, duration, hid, n_points, samples_file, names):
    job_id = sqlite.new_id("j")
    con = db()
    # What re-runs the job after a restart: the request, and inline samples
    # (already in MPa) in a file of their own, removed when the job ends.
    stored = {"body": {k: v for k, v in body.items() if k != "samples"}, "history_id": hid,
              "samples_file": samples_file, "duration_s": duration, "channels": names}
    input_file = None if hid else parquet.write_columns(data_dir(), JOB_INPUTS, job_id,
                                                        channels())
    admit_job(con, job_id, "assessment", n_points, stored, input_file)
    current_app.extensions["cycleledger.jobs"].submit_assessment(
        job_id, body, channels, duration, hid, samples_file, project=project())
    return created(job_resource(sqlite.get_job(con, project(), job_id)), 202)


def admit_job(con, job_id: str, kind: str, size: int, stored: dict,
              input_file: str | None) -> None:
    """Store a job for the queue, or 429 when ``MAX_QUEUED_JOBS`` are queued
    or running (its input file, already written, is then removed)."""
    limit = current_app.config["MAX_QUEUED_JOBS"]
    try:
        with sqlite.write(con):
            waiting = sqlite.count_jobs(con, ("queued", "running"))
            if waiting >= limit:
                raise TooManyJobs(f"{waiting} jobs are queued or running (limit {limit}); "
                                  f"retry later", retry_after_s=5, limit=limit)
            sqlite.insert_job(con, project(), job_id, kind, size, stored, input_file)
    except BaseException:
        parquet.remove(data_dir(), input_file)
        raise


def job_resource(job: dict) -> dict:
    total = job["points_total"]
    out = {"id": job["id"], "kind": job["kind"], "state": job["state"],
           "created_at": job["created_at"], "updated_at": job["updated_at"],
           "progress": {"fraction": (job["points_done"] / total) if total else 0.0,
                        "points_done": job["points_done"], "points_total": total},
           "links": {"self": url_for("assessments.get_job", job_id=job["id"])}}
    if job["assessment_id"]:
        out["links"]["result"] = url_for("assessments.get_one",
                                         assessment_id=job["assessment_id"])
    if job.get("superposition_id"):
        out["links"]["result"] = url_for("superpositions.get_one",
                                         sup_id=job["superposition_id"])
    if job["error"]:
        out["error"] = job["error"]
    return out


@bp.get("/v1/jobs/<job_id>")
def get_job(job_id: str):
    job = sqlite.get_job(db(), project(), job_id)
    if job is None:
        raise NotFound(f"no job {job_id!r}", field="job_id")
    return jsonify(job_resource(job))


@bp.get("/v1/assessments")
def list_all():
    limit, offset = page_args()
    rows = sqlite.list_assessments(db(), project(), limit, offset)
    items = [{**r, "links": {"self": url_for("assessments.get_one", assessment_id=r["id"])}}
             for r in rows]
    return jsonify(items=items, limit=limit, offset=offset)


@bp.get("/v1/assessments/<assessment_id>")
@caching.by_content
def get_one(assessment_id: str):
    return jsonify(resource(load(assessment_id)))


def _format(allowed: tuple[str, ...]) -> str:
    """``format`` query parameter, else the best of the Accept header."""
    fmt = request.args.get("format")
    if fmt is not None:
        if fmt not in allowed:
            raise ApiProblem(f"format {fmt!r} is not offered here; use one of "
                             f"{', '.join(allowed)}", field="format", valid=list(allowed))
        return fmt
    mimes = {"json": "application/json", "csv": "text/csv",
             "parquet": "application/vnd.apache.parquet"}
    offered = [mimes[f] for f in allowed]
    best = request.accept_mimetypes.best_match(offered, default=None) \
        if request.accept_mimetypes else offered[0]
    if best is None:
        raise NotAcceptable(f"this resource is offered as {', '.join(offered)}",
                            valid=offered)
    return {v: k for k, v in mimes.items()}[best]


#: A text cell starting with one of these is a formula to a spreadsheet.
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def csv_cell(value):
    """A cell safe to open in a spreadsheet: text that would start a formula
    (a channel named ``=HYPERLINK(...)``) gets a leading apostrophe; numbers
    are left alone (OWASP, CSV injection); booleans are ``true``/``false``
    as in the JSON."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str) and value.startswith(_FORMULA_START):
        return "'" + value
    return value


def _csv(header, rows) -> Response:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow([csv_cell(h) for h in header])
    w.writerows([csv_cell(v) for v in row] for row in rows)
    return Response(buf.getvalue(), mimetype="text/csv")


@bp.get("/v1/assessments/<assessment_id>/summary")
@caching.by_content
def summary(assessment_id: str):
    """One row per point: the figures a dashboard or report needs."""
    fmt = _format(("json", "csv"))
    points = (load(assessment_id)["result"] or {}).get("points", {})
    rows = [{c: _summary_value(p, c) for c in SUMMARY_COLUMNS} for p in points.values()]
    if fmt == "json":
        return jsonify(items=rows, units={"stress": "MPa", "life_hours": "h"})
    return _csv(SUMMARY_COLUMNS, [[";".join(r[c]) if c in ("flags", "findings") else
                                   ("" if r[c] is None else r[c]) for c in SUMMARY_COLUMNS]
                                  for r in rows])


def _summary_value(p: dict, column: str):
    """A point's value in the summary: the curve's name; the kinds of its
    screening findings; else the result's own field."""
    if column == "curve":
        return p["curve"]["name"]
    if column == "findings":
        return sorted({f["kind"] for f in ((p.get("screening") or {}).get("findings") or [])})
    return p.get(column)


def _point(assessment_id: str, point: str):
    row = load(assessment_id)
    if point not in (row["result"] or {}).get("points", {}):
        raise NotFound(f"assessment {assessment_id!r} has no point {point!r}", field="point")
    return runs.point_cycles(data_dir(), row, point, db())


@bp.get("/v1/assessments/<assessment_id>/points/<point>/cycles")
@caching.by_content
def cycles(assessment_id: str, point: str):
    """Every counted cycle of a point with its damage (JSON, CSV or Parquet)."""
    fmt = _format(("json", "csv", "parquet"))
    table, dmg = _point(assessment_id, point)
    cols = {c: getattr(table, c) for c in CYCLE_COLUMNS[:-1]}
    cols["damage"] = dmg
    if fmt == "parquet":
        return _parquet(cols)
    if fmt == "csv":
        return _csv(CYCLE_COLUMNS, zip(*(cols[c].tolist() for c in CYCLE_COLUMNS)))
    out = {c: runs.json_safe(cols[c].tolist()) for c in CYCLE_COLUMNS}
    return jsonify(point=point, units={"stress": "MPa", "damage": "-"}, **out)


@bp.get("/v1/assessments/<assessment_id>/points/<point>/samples")
@caching.by_content
def samples(assessment_id: str, point: str):
    """The history a point was counted from, to download (CSV or Parquet):
    ``samples`` [MPa] as counted (cleaned, reduced to the governing
    equivalent for a multiaxial point), ``recorded`` [MPa] as recorded when
    the signal was cleaned, and ``time_s`` when the duration is known."""
    fmt = _format(("csv", "parquet"))
    row = load(assessment_id)
    result = row["result"] or {}
    if point not in result.get("points", {}):
        raise NotFound(f"assessment {assessment_id!r} has no point {point!r}", field="point")
    counted, recorded = runs.point_signal(data_dir(), row, point, db())
    cols = {}
    duration = result.get("duration_s")
    if duration and counted.size > 1:
        cols["time_s"] = np.arange(counted.size) * (duration / counted.size)
    cols["samples"] = counted
    if recorded is not None:
        cols["recorded"] = recorded
    safe = re.sub(r"[^A-Za-z0-9._-]", "_", point)
    name = f"{assessment_id}-{safe}.{'csv' if fmt == 'csv' else 'parquet'}"
    if fmt == "parquet":
        resp = _parquet(cols)
    else:
        resp = _csv(tuple(cols), zip(*(c.tolist() for c in cols.values())))
    resp.headers["Content-Disposition"] = f'attachment; filename="{name}"'
    return resp


@bp.get("/v1/assessments/<assessment_id>/points/<point>/range-mean")
@caching.by_content
def range_mean(assessment_id: str, point: str):
    """Range-mean matrix of a point's cycles (``range_bins``, ``mean_bins``)."""
    fmt = _format(("json", "csv", "parquet"))
    try:
        rb = int(request.args.get("range_bins", 32))
        mb = int(request.args.get("mean_bins", 32))
    except ValueError:
        raise ApiProblem("range_bins and mean_bins must be whole numbers",
                         field="range_bins") from None
    if not (1 <= rb <= 1000 and 1 <= mb <= 1000):
        raise ApiProblem("range_bins and mean_bins must be 1..1000", field="range_bins")
    table, _ = _point(assessment_id, point)
    m = runs.range_mean(table, rb, mb)
    if fmt == "json":
        return jsonify(point=point, units={"stress": "MPa", "cycles": "cycles"}, **m)
    # CSV and Parquet: one row a bin (long format), the same columns.
    r, me = np.asarray(m["range_edges_mpa"]), np.asarray(m["mean_edges_mpa"])
    i, j = np.meshgrid(np.arange(r.size - 1), np.arange(me.size - 1), indexing="ij")
    i, j = i.ravel(), j.ravel()
    cols = {"range_lo_mpa": r[i], "range_hi_mpa": r[i + 1], "mean_lo_mpa": me[j],
            "mean_hi_mpa": me[j + 1], "cycles": np.asarray(m["cycles"]).ravel()}
    if fmt == "parquet":
        return _parquet(cols)
    return _csv(tuple(cols), zip(*(c.tolist() for c in cols.values())))


@bp.get("/v1/assessments/<assessment_id>/points/<point>/extrapolation")
@caching.by_content
def extrapolation(assessment_id: str, point: str):
    """The point's range-mean matrix extrapolated to ``factor`` times the usage
    recorded, with the damage it gives and that of plain scaling (JSON)."""
    try:
        factor = float(request.args.get("factor", "10"))
        rb = int(request.args.get("range_bins", 48))
        mb = int(request.args.get("mean_bins", 48))
    except ValueError:
        raise ApiProblem("factor must be a number, range_bins and mean_bins whole numbers",
                         field="factor") from None
    if not (1 <= rb <= 500 and 1 <= mb <= 500):
        raise ApiProblem("range_bins and mean_bins must be 1..500", field="range_bins")
    row = load(assessment_id)
    if point not in (row["result"] or {}).get("points", {}):
        raise NotFound(f"assessment {assessment_id!r} has no point {point!r}", field="point")
    return jsonify(extrapolated(data_dir(), row, point, factor, rb, mb, db()))


def _parquet(cols: dict) -> Response:
    import pyarrow as pa
    import pyarrow.parquet as pq

    buf = io.BytesIO()
    pq.write_table(pa.table(cols), buf)
    return Response(buf.getvalue(), mimetype="application/vnd.apache.parquet")
