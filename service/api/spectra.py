"""/v1/spectra: vibration test profiles of PSD load cases, assessed by spectral methods.

``POST /v1/spectra`` assesses and stores (see ``service.spectra``); a report
page and two plots (the PSDs; each load case's predicted range densities
beside the rainflow histogram of its history, where it has one).
"""

from __future__ import annotations

from flask import Blueprint, Response, jsonify, request, url_for

from service import events, runs, spectra
from service.reports import build
from service.store import sqlite

from . import caching, created, data_dir, db, json_object
from .access import project
from .histories import page_args
from .problems import ApiProblem, NotFound
from .reports import _IMAGE, _html, _image_format

bp = Blueprint("spectra", __name__)


def resource(row: dict, full: bool = True) -> dict:
    res = row["result"]
    out = {"id": row["id"], "name": row["name"], "created_at": row["created_at"],
           "governing_method": res["governing_method"], "damage": res["damage"],
           "reserve_factor": res["reserve_factor"],
           "links": {"self": url_for("spectra.get", spectrum_id=row["id"]),
                     "report": url_for("spectra.report", spectrum_id=row["id"])}}
    if full:
        out["request"] = row["request"]
        out["result"] = res
    return out


def load(spectrum_id: str) -> dict:
    row = sqlite.get_doc(db(), "spectra", project(), spectrum_id)
    if row is None:
        raise NotFound(f"no spectral assessment {spectrum_id!r}", field="spectrum_id")
    return row


@bp.post("/v1/spectra")
def create():
    """Assess a profile of PSD load cases by spectral methods; store it."""
    body = json_object()
    name = body.get("name")
    if name is not None and (not isinstance(name, str) or not 0 < len(name) <= 200):
        raise ApiProblem("name must be a text of 1 to 200 characters", field="name")
    try:
        row = spectra.run(db(), data_dir(), project(), body,
                          lookup=runs.store_lookup(db(), project()))
    except events.MissingSource as exc:
        raise NotFound(exc.detail, field=exc.field) from None
    return created(resource(row), 201)


@bp.get("/v1/spectra")
def list_all():
    limit, offset = page_args()
    rows = sqlite.list_docs(db(), "spectra", project(), limit, offset)
    return jsonify({"spectra": [resource(r, full=False) for r in rows],
                    "limit": limit, "offset": offset})


@bp.get("/v1/spectra/<spectrum_id>")
def get(spectrum_id: str):
    return jsonify(resource(load(spectrum_id)))


def _densities(row):
    try:
        return spectra.densities(row["request"], row["result"], db(), data_dir(), project())
    except events.MissingSource as exc:
        raise NotFound(exc.detail + " (it was deleted after the assessment)",
                       field=exc.field) from None


@bp.get("/v1/spectra/<spectrum_id>/report")
def report(spectrum_id: str):
    """A self-contained HTML page (fixed once made: ETag, 304)."""
    row = load(spectrum_id)
    etag = caching.etag_of("text/html")
    return caching.not_modified(etag) or caching.immutable(
        _html(build.spectrum_page(resource(row), _densities(row))), etag)


@bp.get("/v1/spectra/<spectrum_id>/plots/<plot>")
def plot(spectrum_id: str, plot: str):
    """``psd`` (every load case) or ``ranges`` (``case``: one load case's
    predicted range densities and its rainflow histogram), SVG or PNG."""
    fmt = _image_format()
    row = load(spectrum_id)
    if plot not in build.SPECTRUM_PLOTS:
        raise NotFound(f"no plot {plot!r}", field="plot", valid=list(build.SPECTRUM_PLOTS))
    dens = _densities(row)
    case = request.args.get("case")
    if plot == "ranges" and case not in dens:
        raise ApiProblem(f"plot 'ranges' is per load case: give case (one of "
                         f"{', '.join(dens)})", field="case", valid=list(dens))
    return Response(build.spectrum_plot(plot, dens, case, fmt), mimetype=_IMAGE[fmt])


@bp.delete("/v1/spectra/<spectrum_id>")
def delete(spectrum_id: str):
    con = db()
    with sqlite.write(con):
        gone = sqlite.delete_doc(con, "spectra", project(), spectrum_id)
    if not gone:
        raise NotFound(f"no spectral assessment {spectrum_id!r}", field="spectrum_id")
    return "", 204
