"""Health, readiness, version, the lists of valid names, and the contract."""

from __future__ import annotations

import functools
from importlib import resources

from flask import Blueprint, Response, jsonify

import service
from service.engine import units
from service.engine.mean_stress import COMPRESSIVE_MEAN_POLICIES, MEAN_STRESS_METHODS
from service.engine.rainflow import RESIDUE_TREATMENTS
from service.engine.cautions import CAUTION_TEXTS, SEVERITIES
from service.engine.damage import FLAGS
from service.engine.equivalents import REDUCTION_NAMES
from service.engine.rosette import ROSETTE_LAYOUTS
from service.engine.hot_spot import HOT_SPOT_METHODS
from service.engine.settings import METHODS
from service.engine.sn_catalogue import IIW_THICKNESS_EXPONENTS
from service.engine.weld_interaction import LOADINGS, NORMAL_COMPONENTS, SHEAR_INTERACTION_RULES
from service.engine.screening import FINDING_KINDS, SCREENING_POLICIES
from service.engine.sn_curve import BELOW_LIMIT_TREATMENTS
from service.engine.sn_estimate import LOAD_TYPE, MATERIAL_CLASSES, SURFACE_FINISH
from service.duty_cycles import TARGET_KINDS
from service.events import EVENT_SOURCES, EXPOSURES
from service.editing import EDIT_METHODS
from service.engine.spectral import RANGE_DENSITIES
from service.spectra import CASE_SOURCES
from service.reports.build import ASSESSMENT_PLOTS, DUTY_CYCLE_PLOTS, SPECTRUM_PLOTS

from . import data_dir, db
from .problems import NotFound

bp = Blueprint("meta", __name__)
#: The contract, package data beside this module.
OPENAPI = resources.files(__package__).joinpath("openapi.yaml")
#: The start page, package data beside this module (no network needed: one file).
START_PAGE = resources.files(__package__).joinpath("start.html")


@functools.cache
def _start_page() -> str:
    """The start page with the style it shares with the report pages."""
    from service.reports.pages import BASE_CSS

    return START_PAGE.read_text(encoding="utf-8").replace(
        "<!-- the pages' shared style goes here (service.reports.pages.BASE_CSS) -->",
        f"<style>{BASE_CSS}</style>", 1)


@bp.get("/")
def start():
    """The start page: assets and their used life, the latest assessments, a form to
    assess a recording. Public itself; its data come from the API with the key the
    user types (kept in the browser tab's session storage only)."""
    return Response(_start_page(), mimetype="text/html",
                    headers={"Cache-Control": "no-cache",
                             "Content-Security-Policy": "default-src 'self'; "
                             "style-src 'unsafe-inline'; script-src 'unsafe-inline'; img-src 'self' data:; "
                             "frame-ancestors 'none'"})


@bp.get("/v1/health")
def health():
    """The process answers."""
    return jsonify(status="ok")


@bp.get("/v1/ready")
def ready():
    """The database answers and the data directory is writable."""
    db().execute("SELECT 1").fetchone()
    probe = data_dir() / ".ready"
    probe.write_bytes(b"")
    probe.unlink()
    return jsonify(status="ready")


@bp.get("/v1/version")
def version():
    return jsonify(name="cycleledger", version=service.__version__, api="v1")


@bp.get("/v1/methods")
def methods():
    """Every name a request may use where a choice is offered."""
    return jsonify(mean_stress_methods=sorted(MEAN_STRESS_METHODS),
                   compressive_mean=list(COMPRESSIVE_MEAN_POLICIES),
                   residue=list(RESIDUE_TREATMENTS),
                   below_limit=list(BELOW_LIMIT_TREATMENTS),
                   units=list(units.UNITS),
                   reductions=list(REDUCTION_NAMES),
                   rosette_layouts=list(ROSETTE_LAYOUTS),
                   hot_spot_extrapolations=list(HOT_SPOT_METHODS),
                   shear_interaction_rules=list(SHEAR_INTERACTION_RULES),
                   interaction_loadings=list(LOADINGS),
                   interaction_normals=list(NORMAL_COMPONENTS),
                   joints=list(IIW_THICKNESS_EXPONENTS),
                   life_methods=list(METHODS),
                   material_classes=list(MATERIAL_CLASSES),
                   surface_finishes=list(SURFACE_FINISH),
                   load_types=list(LOAD_TYPE),
                   screening_policies=list(SCREENING_POLICIES),
                   finding_kinds=list(FINDING_KINDS),
                   plots=list(ASSESSMENT_PLOTS),
                   plot_formats=["svg", "png"],
                   duty_cycle_sources=list(EVENT_SOURCES),
                   duty_cycle_exposures=list(EXPOSURES),
                   duty_cycle_targets=list(TARGET_KINDS),
                   duty_cycle_plots=list(DUTY_CYCLE_PLOTS),
                   edit_methods=list(EDIT_METHODS),
                   spectral_methods=list(RANGE_DENSITIES),
                   spectrum_sources=list(CASE_SOURCES),
                   spectrum_plots=list(SPECTRUM_PLOTS),
                   flags=list(FLAGS),
                   cautions=sorted(CAUTION_TEXTS),
                   caution_severities=list(SEVERITIES))


@bp.get("/openapi.yaml")
def openapi():
    if not OPENAPI.is_file():
        raise NotFound("the OpenAPI document is not installed with this copy")
    return Response(OPENAPI.read_bytes(), mimetype="application/yaml")
