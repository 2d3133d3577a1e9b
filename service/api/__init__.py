"""The HTTP API: a thin Flask layer over the engine and the store.

``create_app`` builds the app; views parse the request, call one function of
``service.runs`` / ``service.store`` / the engine, and serialise the answer.
Errors become RFC 9457 problem details in ``problems.py``.
"""

from __future__ import annotations

import os
import threading
from pathlib import Path

from flask import Flask, g

from service.store import parquet, sqlite

from . import problems, uploads

#: Environment variable naming the data directory.
DATA_DIR_ENV = "CYCLELEDGER_DATA_DIR"
DEFAULT_DATA_DIR = "cycleledger-data"


def create_app(test_config: dict | None = None) -> Flask:
    """The WSGI app. Settings (``test_config`` wins over the environment):

    ``DATA_DIR``: data directory (env ``CYCLELEDGER_DATA_DIR``);
    ``MAX_UPLOAD_MB``: largest request body before 413 (default 512);
    ``MEMORY_BODY_MB``: an upload (or its unpacked gzip) up to this size is
    read from memory, a larger one through a temporary file (default 256);
    ``ASYNC_SAMPLES``: samples x points above which an assessment runs as a
    job (202) instead of at once (201) (default 2e6);
    ``JOB_WORKERS``: threads running jobs (default 1);
    ``MAX_CHANNELS``, ``MAX_SAMPLES_PER_CHANNEL``: per request (413 above);
    ``MAX_QUEUED_JOBS``: jobs queued or running before new ones get 429;
    ``WARM_KERNELS``: compile or load the numba kernels at start (default on);
    ``OPEN_ACCESS``: answer loopback clients without a key while no key
    exists (default on; see ``access.py``);
    ``RATE_PER_S``, ``RATE_BURST``: requests a second per key and the burst
    allowed above it (429 with Retry-After beyond; 0 = no limit);
    ``DASK_SCHEDULER``: a Dask scheduler address (env
    ``CYCLELEDGER_DASK_SCHEDULER``); jobs' points then run on that cluster.
    """
    app = Flask(__name__)
    app.config.update(
        DATA_DIR=os.environ.get(DATA_DIR_ENV, DEFAULT_DATA_DIR),
        MAX_UPLOAD_MB=512,
        MEMORY_BODY_MB=uploads.MEMORY_BODY_MB,
        ASYNC_SAMPLES=2_000_000,
        JOB_WORKERS=1,
        MAX_CHANNELS=256,
        MAX_SAMPLES_PER_CHANNEL=200_000_000,
        MAX_QUEUED_JOBS=16,
        WARM_KERNELS=True,
        OPEN_ACCESS=True,
        DASK_SCHEDULER=os.environ.get("CYCLELEDGER_DASK_SCHEDULER") or None,
        RATE_PER_S=50,
        RATE_BURST=100,
        JSON_SORT_KEYS=False,
    )
    if test_config:
        app.config.update(test_config)
    app.config["MAX_CONTENT_LENGTH"] = int(float(app.config["MAX_UPLOAD_MB"]) * 2**20)
    app.json.sort_keys = False
    data_dir = Path(app.config["DATA_DIR"])
    sqlite.init(data_dir)
    con = sqlite.connect(data_dir)
    try:
        parquet.sweep(data_dir, sqlite.referenced_files(con))
        interrupted = sqlite.interrupted_jobs(con)
    finally:
        con.close()
    from service.jobs import JobRunner

    app.extensions["cycleledger.jobs"] = JobRunner(data_dir, int(app.config["JOB_WORKERS"]),
                                                   app.config["DASK_SCHEDULER"])
    app.extensions["cycleledger.jobs"].resume(interrupted)
    if app.config["WARM_KERNELS"]:
        from service.engine.rainflow import warm_up
        from service.engine.damage import warm_up as warm_damage

        from service.engine.multiaxial import warm_up as warm_multiaxial
        from service.engine.screening import warm_up as warm_screening
        from service.engine.strain_life import warm_up as warm_strain_life

        warm_up()
        warm_damage()
        warm_multiaxial()
        warm_screening()      # every assessment screens its channels first
        warm_strain_life()

    # One connection per request thread, kept for the thread's life: opening
    # one per request cost three PRAGMAs, and closing the last connection of
    # a WAL database checkpoints it (about 2 ms a request).
    app.extensions["cycleledger.connections"] = threading.local()

    @app.teardown_appcontext
    def _release(_exc):
        con = g.pop("con", None)
        if con is not None and con.in_transaction:
            con.execute("ROLLBACK")  # never leave a transaction open for the next request

    problems.register(app)
    from . import (access, assessments, audit, catalogue, duty_cycles, edits, histories,
                   ledger, library, meta, metrics, reports, spectra, superpositions)

    metrics.install(app)
    access.install(app)
    audit.install(app)
    for bp in (meta.bp, histories.bp, assessments.bp, catalogue.bp, library.bp, ledger.bp,
               metrics.bp, reports.bp, superpositions.bp, audit.bp, duty_cycles.bp,
               edits.bp, spectra.bp):
        app.register_blueprint(bp)
    return app


def db():
    """This thread's database connection (opened on first use)."""
    if "con" not in g:
        from flask import current_app

        local = current_app.extensions["cycleledger.connections"]
        con = getattr(local, "con", None)
        if con is None:
            con = local.con = sqlite.connect(current_app.config["DATA_DIR"])
        g.con = con
    return g.con


def json_object() -> dict:
    """The request's JSON object body, or 415 / 400 problems."""
    from flask import request

    from .problems import MalformedBody, UnsupportedMediaType

    if request.mimetype != "application/json":
        raise UnsupportedMediaType("send JSON (application/json)", valid=["application/json"])
    try:
        body = request.get_json(silent=True)
    except RecursionError:
        raise MalformedBody("the JSON body is nested too deeply") from None
    if not isinstance(body, dict):
        raise MalformedBody("the body must be a JSON object")
    return body


def created(doc: dict, status: int = 201):
    """A JSON answer for a new resource, with its Location."""
    from flask import jsonify

    resp = jsonify(doc)
    resp.status_code = status
    resp.headers["Location"] = doc["links"]["self"]
    return resp


def data_dir() -> Path:
    from flask import current_app

    return Path(current_app.config["DATA_DIR"])
