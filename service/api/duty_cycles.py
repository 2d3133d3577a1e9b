"""/v1/duty-cycles: stored events combined into a design life, and what-if runs.

``POST /v1/duty-cycles`` evaluates and stores a duty cycle (see
``service.duty_cycles``); ``POST /v1/duty-cycles/{id}/what-if`` runs the
same events again under other settings or load scales, side by side, and
stores nothing.
"""

from __future__ import annotations

from flask import Blueprint, jsonify, url_for

from service import duty_cycles, events, rig_field, runs
from service.store import sqlite

from . import created, data_dir, db, json_object
from .access import project
from .histories import page_args
from .problems import ApiProblem, NotFound

bp = Blueprint("duty_cycles", __name__)


def resource(row: dict, full: bool = True) -> dict:
    out = {"id": row["id"], "name": row["name"], "created_at": row["created_at"],
           "passed": row["result"]["passed"], "worst_point": row["result"]["worst_point"],
           "links": {"self": url_for("duty_cycles.get", duty_id=row["id"]),
                     "what_if": url_for("duty_cycles.what_if", duty_id=row["id"]),
                     "report": url_for("reports.duty_cycle_report", duty_id=row["id"])}}
    if full:
        out["request"] = row["request"]
        out["result"] = row["result"]
    return out


def _evaluate(call, *args):
    try:
        return call(db(), data_dir(), project(), *args,
                    lookup=runs.store_lookup(db(), project()))
    except events.MissingSource as exc:
        raise NotFound(exc.detail, field=exc.field) from None


def load(duty_id: str) -> dict:
    row = sqlite.get_doc(db(), "duty_cycles", project(), duty_id)
    if row is None:
        raise NotFound(f"no duty cycle {duty_id!r}", field="duty_cycle_id")
    return row


@bp.post("/v1/duty-cycles")
def create():
    """Combine stored events into a design life, check it against the target, store it."""
    body = json_object()
    name = body.get("name")
    if name is not None and (not isinstance(name, str) or not 0 < len(name) <= 200):
        raise ApiProblem("name must be a text of 1 to 200 characters", field="name")
    return created(resource(_evaluate(duty_cycles.run, body)), 201)


@bp.get("/v1/duty-cycles")
def list_all():
    limit, offset = page_args()
    rows = sqlite.list_docs(db(), "duty_cycles", project(), limit, offset)
    return jsonify({"duty_cycles": [resource(r, full=False) for r in rows],
                    "limit": limit, "offset": offset})


@bp.get("/v1/duty-cycles/<duty_id>")
def get(duty_id: str):
    return jsonify(resource(load(duty_id)))


@bp.post("/v1/duty-cycles/<duty_id>/what-if")
def what_if(duty_id: str):
    """The stored duty cycle under other settings or load scales (nothing stored)."""
    row = load(duty_id)
    body = json_object()
    if set(body) - {"variants"} or not isinstance(body.get("variants"), list) \
            or not body["variants"]:
        raise ApiProblem("send {variants: [{name, settings?, load_scale?}, ...]}",
                         field="variants")
    return jsonify(_evaluate(duty_cycles.what_if, row, body["variants"]))


@bp.post("/v1/rig-comparisons")
def rig_comparison():
    """A rig run against a field span, per point: damage of each and their ratio
    (per pass and per hour: the test's acceleration factor). Nothing stored."""
    return jsonify(_evaluate(rig_field.compare, json_object()))


@bp.delete("/v1/duty-cycles/<duty_id>")
def delete(duty_id: str):
    con = db()
    with sqlite.write(con):
        gone = sqlite.delete_doc(con, "duty_cycles", project(), duty_id)
    if not gone:
        raise NotFound(f"no duty cycle {duty_id!r}", field="duty_cycle_id")
    return "", 204
