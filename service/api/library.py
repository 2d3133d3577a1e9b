"""What users store by name: their own S-N curves and materials.

A point's settings refer to them as ``"curve": "user:<name>"`` and
``"material": "<name>"``; an assessment keeps the resolved values
(``settings_used``), so deleting or replacing an entry later never changes
a stored result.
"""

from __future__ import annotations

import re

from flask import Blueprint, jsonify, url_for

from service.engine.settings import (USER_CURVE_PREFIX, curve_from_dict, material_properties,
                                     user_curve_definition)
from service.runs import json_safe
from service.store import sqlite

from . import created, db, json_object
from .access import project
from .problems import ApiProblem, NotFound

bp = Blueprint("library", __name__)

_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.\-]{0,63}$")
_KINDS = {"user_curves": ("user curve", "library.get_curve"),
          "materials": ("material", "library.get_material")}


class NameTaken(ApiProblem):
    status, slug, title = 409, "name-taken", "Name already in use"


def _body() -> dict:
    body = json_object()
    name = body.get("name")
    if not isinstance(name, str) or not _NAME.match(name):
        raise ApiProblem("name must be 1-64 letters, digits, '_', '.' or '-', starting with "
                         "a letter or digit", field="name")
    return body


def _resource(table: str, doc: dict) -> dict:
    _, endpoint = _KINDS[table]
    out = json_safe(doc)
    out["links"] = {"self": url_for(endpoint, name=doc["name"])}
    if table == "user_curves":
        out["reference"] = USER_CURVE_PREFIX + doc["name"]
        kind = "curve_points" if "curve_points" in doc else "basquin"
        spec = {kind: {**doc[kind], "name": out["reference"],
                       "source": doc.get("source") or "user"}}
        if "below_limit" in doc:
            spec["below_limit"] = doc["below_limit"]
        curve, _ = curve_from_dict(spec)
        out["curve"] = json_safe(dict(curve.description))
    return out


def _create(table: str, doc: dict, name: str):
    con = db()
    with sqlite.write(con):
        ok = sqlite.insert_named(con, project(), table, name, doc)
    if not ok:
        raise NameTaken(f"a {_KINDS[table][0]} named {name!r} exists; delete it first",
                        field="name")
    return created(_resource(table, sqlite.get_named(con, project(), table, name)), 201)


def _get(table: str, name: str) -> dict:
    doc = sqlite.get_named(db(), project(), table, name)
    if doc is None:
        raise NotFound(f"no {_KINDS[table][0]} {name!r}", field="name")
    return doc


def _delete(table: str, name: str):
    con = db()
    with sqlite.write(con):
        gone = sqlite.delete_named(con, project(), table, name)
    if not gone:
        raise NotFound(f"no {_KINDS[table][0]} {name!r}", field="name")
    return "", 204


@bp.post("/v1/user-curves")
def create_curve():
    """Store an S-N curve from (N, S) points or Basquin constants."""
    body = _body()
    return _create("user_curves", user_curve_definition(body), body["name"])


@bp.get("/v1/user-curves")
def list_curves():
    return jsonify(items=[_resource("user_curves", d)
                          for d in sqlite.list_named(db(), project(), "user_curves")])


@bp.get("/v1/user-curves/<name>")
def get_curve(name: str):
    return jsonify(_resource("user_curves", _get("user_curves", name)))


@bp.delete("/v1/user-curves/<name>")
def delete_curve(name: str):
    return _delete("user_curves", name)


@bp.post("/v1/materials")
def create_material():
    """Store a material's strengths (from a tensile test or a data sheet)."""
    body = _body()
    return _create("materials", material_properties(body), body["name"])


@bp.get("/v1/materials")
def list_materials():
    return jsonify(items=[_resource("materials", d)
                          for d in sqlite.list_named(db(), project(), "materials")])


@bp.get("/v1/materials/<name>")
def get_material(name: str):
    return jsonify(_resource("materials", _get("materials", name)))


@bp.delete("/v1/materials/<name>")
def delete_material(name: str):
    return _delete("materials", name)
