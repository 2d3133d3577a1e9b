"""The published S-N curves the service knows, by designation."""

from __future__ import annotations

from flask import Blueprint, jsonify, url_for

from service.engine.sn_catalogue import catalogue_curve, designations
from service.runs import json_safe

bp = Blueprint("catalogue", __name__)


def _curve(designation: str) -> dict:
    out = json_safe(dict(catalogue_curve(designation).description))
    out["links"] = {"self": url_for("catalogue.get_one", designation=designation)}
    return out


@bp.get("/v1/curves")
def list_all():
    return jsonify(items=[_curve(d) for d in designations()])


@bp.get("/v1/curves/<designation>")
def get_one(designation: str):
    # catalogue_curve raises UnknownMethod (422 listing the valid names) for
    # a malformed name; a well-formed name that is not there is a 404.
    from service.engine.errors import UnknownMethod

    from .problems import NotFound

    try:
        return jsonify(_curve(designation))
    except UnknownMethod as exc:
        raise NotFound(f"no catalogue curve {designation!r}", field="designation",
                       valid=exc.valid) from None
