"""Report pages and plots of assessments and ledger assets (HTML, SVG, PNG)."""

from __future__ import annotations

from flask import Blueprint, Response, request

from service.reports import build

from . import caching, data_dir, db
from .assessments import load as load_assessment, resource as assessment_resource
from .duty_cycles import load as load_duty, resource as duty_resource
from .ledger import _asset, _point
from .problems import ApiProblem, NotAcceptable, NotFound

bp = Blueprint("reports", __name__)

_IMAGE = {"svg": "image/svg+xml", "png": "image/png"}


def _image_format() -> str:
    fmt = request.args.get("format")
    if fmt is not None:
        if fmt not in _IMAGE:
            raise ApiProblem(f"format {fmt!r} is not offered; use svg or png", field="format",
                             valid=list(_IMAGE))
        return fmt
    best = (request.accept_mimetypes.best_match(list(_IMAGE.values()), default=None)
            if request.accept_mimetypes else "image/svg+xml")
    if best is None:
        raise NotAcceptable("plots are offered as image/svg+xml and image/png",
                            valid=list(_IMAGE.values()))
    return {v: k for k, v in _IMAGE.items()}[best]


def _html(text: str) -> Response:
    return Response(text, mimetype="text/html")


@bp.get("/v1/assessments/<assessment_id>/report")
def assessment_report(assessment_id: str):
    """A self-contained HTML page: summary, plots, settings and sources, cautions.
    Fixed once made: a strong ETag, and 304 to ``If-None-Match``."""
    row = load_assessment(assessment_id)  # 404 (or another project's: 404) first
    etag = caching.etag_of("text/html")
    return caching.not_modified(etag) or caching.immutable(
        _html(build.assessment_page(db(), data_dir(), row, assessment_resource(row))), etag)


@bp.get("/v1/assessments/<assessment_id>/plots/<plot>")
def assessment_plot(assessment_id: str, plot: str):
    """One plot alone (``point`` for the per-point ones), SVG or PNG."""
    fmt = _image_format()
    row = load_assessment(assessment_id)
    if plot not in build.ASSESSMENT_PLOTS:
        raise NotFound(f"no plot {plot!r}", field="plot", valid=sorted(build.ASSESSMENT_PLOTS))
    point = request.args.get("point")
    points = (row["result"] or {}).get("points", {})
    if build.ASSESSMENT_PLOTS[plot]:
        if point not in points:
            raise ApiProblem(f"plot {plot!r} is per point: give point (one of "
                             f"{', '.join(points)})", field="point", valid=list(points))
    etag = caching.etag_of(_IMAGE[fmt])
    unchanged = caching.not_modified(etag)
    if unchanged is not None:
        return unchanged
    body = build.assessment_plot(db(), data_dir(), row, assessment_resource(row), plot,
                                 point, fmt)
    return caching.immutable(Response(body, mimetype=_IMAGE[fmt]), etag)


@bp.get("/v1/duty-cycles/<duty_id>/report")
def duty_cycle_report(duty_id: str):
    """A self-contained HTML page of a duty cycle (fixed once made: ETag, 304)."""
    row = load_duty(duty_id)
    etag = caching.etag_of("text/html")
    return caching.not_modified(etag) or caching.immutable(
        _html(build.duty_cycle_page(duty_resource(row))), etag)


@bp.get("/v1/duty-cycles/<duty_id>/plots/<plot>")
def duty_cycle_plot(duty_id: str, plot: str):
    """One plot of a duty cycle (``damage`` or ``events``), SVG or PNG."""
    fmt = _image_format()
    row = load_duty(duty_id)
    if plot not in build.DUTY_CYCLE_PLOTS:
        raise NotFound(f"no plot {plot!r}", field="plot", valid=list(build.DUTY_CYCLE_PLOTS))
    return Response(build.duty_cycle_plots(duty_resource(row), fmt)[plot],
                    mimetype=_IMAGE[fmt])


@bp.get("/v1/assets/<asset>/report")
def asset_report(asset: str):
    """A self-contained HTML page of a ledger asset's points."""
    return _html(build.asset_page(db(), _asset(asset)))


@bp.get("/v1/assets/<asset>/points/<point>/plot")
def ledger_point_plot(asset: str, point: str):
    """Cumulative damage over recorded hours with the projection, SVG or PNG."""
    fmt = _image_format()
    asset_id = _point(asset, point)["asset_id"]
    return Response(build.ledger_plot(db(), asset_id, point, fmt), mimetype=_IMAGE[fmt])
