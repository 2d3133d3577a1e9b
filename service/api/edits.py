"""/v1/edits: a stored recording shortened for a rig, keeping its damage.

``POST /v1/edits`` edits a stored history (damage windows or peak-valley
reduction, see ``service.editing``) and stores the edited drive signal with
a report per channel; ``GET /v1/edits/{id}/signal`` downloads it (CSV or
Parquet).
"""

from __future__ import annotations

import io

import pyarrow.parquet as pq
from flask import Blueprint, Response, jsonify, url_for

from service import editing, events, runs
from service.reports import build
from service.store import parquet, sqlite

from . import created, data_dir, db, json_object
from .access import project
from .assessments import _csv, _format
from .problems import NotFound

bp = Blueprint("edits", __name__)


def resource(row: dict) -> dict:
    return {"id": row["id"], "history_id": row["history_id"], "created_at": row["created_at"],
            "request": row["request"], "result": row["result"],
            "links": {"self": url_for("edits.get", edit_id=row["id"]),
                      "signal": url_for("edits.signal", edit_id=row["id"]),
                      "report": url_for("edits.report", edit_id=row["id"])}}


def load(edit_id: str) -> dict:
    row = sqlite.get_edit(db(), project(), edit_id)
    if row is None:
        raise NotFound(f"no edit {edit_id!r}", field="edit_id")
    return row


@bp.post("/v1/edits")
def create():
    """Shorten a stored recording keeping each channel's damage; store the edited signal."""
    body = json_object()
    try:
        row = editing.run(db(), data_dir(), project(), body,
                          lookup=runs.store_lookup(db(), project()))
    except events.MissingSource as exc:
        raise NotFound(exc.detail, field=exc.field) from None
    return created(resource(row), 201)


@bp.get("/v1/edits/<edit_id>")
def get(edit_id: str):
    return jsonify(resource(load(edit_id)))


@bp.get("/v1/edits/<edit_id>/signal")
def signal(edit_id: str):
    """The edited drive signal: source_index, time_s and source_time_s (with a
    rate), then one column per channel [MPa]."""
    fmt = _format(("csv", "parquet"))
    row = load(edit_id)
    name = f"{edit_id}.{fmt}"
    if fmt == "parquet":
        resp = Response(parquet.read_bytes(data_dir(), row["file"]),
                        mimetype="application/vnd.apache.parquet")
    else:
        table = pq.read_table(io.BytesIO(parquet.read_bytes(data_dir(), row["file"])))
        cols = [table.column(i).to_pylist() for i in range(table.num_columns)]
        resp = _csv(tuple(table.column_names), zip(*cols))
    resp.headers["Content-Disposition"] = f'attachment; filename="{name}"'
    return resp


@bp.get("/v1/edits/<edit_id>/report")
def report(edit_id: str):
    """A self-contained HTML page: each channel's damage and ranges kept, and
    where the kept stretches lie in the recording."""
    row = load(edit_id)
    res = row["result"]
    hist = sqlite.get_history(db(), project(), row["history_id"]) if row["history_id"] else None
    original = None
    if hist is not None:
        original = parquet.read_channels(data_dir(), hist["file"], list(res["channels"]))
    table = pq.read_table(io.BytesIO(parquet.read_bytes(data_dir(), row["file"])),
                          columns=["source_index"])
    kept = table.column(0).to_numpy()
    return Response(build.edit_page(resource(row), original, kept,
                                    hist.get("sample_rate_hz") if hist else None),
                    mimetype="text/html")


@bp.delete("/v1/edits/<edit_id>")
def delete(edit_id: str):
    con = db()
    with sqlite.write(con):
        rel = sqlite.delete_edit(con, project(), edit_id)
    if rel is None:
        raise NotFound(f"no edit {edit_id!r}", field="edit_id")
    parquet.remove(data_dir(), rel)
    return "", 204
