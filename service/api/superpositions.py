"""FE superposition: unit-load stresses per node, and runs against measured loads.

``POST /v1/unit-stresses`` stores a table of stresses per node and load case
(Parquet or CSV); ``POST /v1/superpositions`` queues a job that superposes
the load histories, counts and assesses every node, and keeps the damage of
every node with the worst nodes in full.
"""

from __future__ import annotations

import io

import pyarrow as pa
import pyarrow.parquet as pq
from flask import Blueprint, Response, current_app, jsonify, request, url_for

from service import superpositions as sup
from service.recordings.channels import check_name
from service.store import parquet, sqlite

from . import created, data_dir, db, json_object
from .access import project
from .assessments import JOB_INPUTS, _csv, _format, admit_job, job_resource
from .bodies import spool_body
from .histories import page_args
from .problems import ApiProblem, InvalidUpload, MalformedBody, NotFound

bp = Blueprint("superpositions", __name__)
_TYPES = {"application/vnd.apache.parquet": "parquet", "application/x-parquet": "parquet",
          "text/csv": "csv"}


def _unit_resource(row: dict) -> dict:
    return {"id": row["id"], "name": row["name"], "created_at": row["created_at"],
            "nodes": row["nodes"], "load_cases": row["load_cases"],
            "components": row["components"],
            "links": {"self": url_for("superpositions.get_unit_stresses", set_id=row["id"])}}


def _load_unit_set(set_id: str) -> dict:
    row = sqlite.get_unit_stress_set(db(), project(), set_id)
    if row is None:
        raise NotFound(f"no unit stresses {set_id!r}", field="unit_stresses_id")
    return row


@bp.post("/v1/unit-stresses")
def upload_unit_stresses():
    """Store stresses per node and load case from a linear FE model (MPa per load unit)."""
    mime = (request.content_type or "").split(";")[0].strip().lower()
    if mime not in _TYPES:
        from .problems import UnsupportedMediaType

        raise UnsupportedMediaType("send the unit stresses as Parquet or CSV",
                                   valid=sorted(_TYPES))
    name = request.args.get("name")
    if name is not None:
        check_name(name, "name")
    spooled = spool_body(data_dir() / parquet.UNIT_STRESSES)
    try:
        try:
            if _TYPES[mime] == "parquet":
                table = pq.read_table(spooled)
            else:
                from pyarrow import csv as pacsv

                table = pacsv.read_csv(str(spooled))
        except (pa.ArrowException, OSError, UnicodeDecodeError) as exc:
            raise MalformedBody(f"the unit stresses could not be read: {exc}") from None
        try:
            table, shape = sup.unit_stress_table(table)
        except pa.ArrowException as exc:
            raise InvalidUpload(f"the unit stresses are not a table of numbers: {exc}",
                                field="body") from None
        sid = sqlite.new_id("u")
        rel = parquet.write_table(data_dir(), parquet.UNIT_STRESSES, sid, table)
    finally:
        spooled.unlink(missing_ok=True)
    row = {"id": sid, "project": project(), "name": name, "created_at": sqlite.now(),
           **shape, "file": rel}
    sqlite.insert_owning_file(db(), sqlite.insert_unit_stress_set, row, data_dir(), rel)
    return created(_unit_resource(row), 201)


@bp.get("/v1/unit-stresses")
def list_unit_stresses():
    return jsonify(items=[_unit_resource(r) for r in
                          sqlite.list_unit_stress_sets(db(), project())])


@bp.get("/v1/unit-stresses/<set_id>")
def get_unit_stresses(set_id: str):
    return jsonify(_unit_resource(_load_unit_set(set_id)))


@bp.delete("/v1/unit-stresses/<set_id>")
def delete_unit_stresses(set_id: str):
    """Remove a set; superpositions made with it keep their results."""
    row = _load_unit_set(set_id)
    con = db()
    with sqlite.write(con):
        sqlite.delete_unit_stress_set(con, project(), set_id)
    parquet.remove(data_dir(), row["file"])
    return "", 204


@bp.post("/v1/superpositions")
def create():
    """Queue a superposition of measured loads on a set of unit stresses (202 + job)."""
    body = json_object()
    sid = body.get("unit_stresses_id")
    if not isinstance(sid, str):
        raise ApiProblem("unit_stresses_id (a string) is required", field="unit_stresses_id")
    unit_set = _load_unit_set(sid)
    checked = sup.check_request(body, unit_set)
    con = db()
    job_id = sqlite.new_id("j")
    # What re-runs the job after a restart: the checked request, and the
    # loads in a file of their own (removed when the job ends).
    stored = {"unit_stresses_id": unit_set["id"],
              "checked": {k: v for k, v in checked.items() if k != "loads"}}
    input_file = parquet.write_columns(data_dir(), JOB_INPUTS, job_id, dict(
        zip(unit_set["load_cases"], checked["loads"])))
    admit_job(con, job_id, "superposition", unit_set["nodes"], stored, input_file)
    current_app.extensions["cycleledger.jobs"].submit_superposition(job_id, project(),
                                                                    unit_set, checked)
    return created(job_resource(sqlite.get_job(con, project(), job_id)), 202)


def _load(sup_id: str) -> dict:
    row = sqlite.get_superposition(db(), project(), sup_id)
    if row is None:
        raise NotFound(f"no superposition {sup_id!r}", field="superposition_id")
    return row


@bp.get("/v1/superpositions/<sup_id>")
def get_one(sup_id: str):
    row = _load(sup_id)
    return jsonify({"id": row["id"], "created_at": row["created_at"],
                    "unit_stresses_id": row["unit_stress_id"], "request": row["request"],
                    **row["result"],
                    "links": {"self": url_for("superpositions.get_one", sup_id=row["id"]),
                              "nodes": url_for("superpositions.nodes", sup_id=row["id"])}})


@bp.get("/v1/superpositions/<sup_id>/nodes")
def nodes(sup_id: str):
    """Damage of every node (JSON, CSV or Parquet), in the unit set's node order."""
    fmt = _format(("json", "csv", "parquet"))
    row = _load(sup_id)
    table = parquet.read_table(data_dir(), row["nodes_file"])
    if fmt == "parquet":
        buf = io.BytesIO()
        pq.write_table(table, buf)
        return Response(buf.getvalue(), mimetype="application/vnd.apache.parquet")
    cols = {c: table.column(c).to_pylist() for c in table.column_names}
    if fmt == "csv":
        return _csv(list(cols), list(zip(*cols.values())))
    from service.runs import json_safe

    limit, offset = page_args()
    return jsonify(items=json_safe([{c: cols[c][i] for c in cols}
                                    for i in range(offset, min(offset + limit,
                                                               table.num_rows))]),
                   total=table.num_rows, limit=limit, offset=offset)
