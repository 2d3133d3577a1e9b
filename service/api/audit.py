"""The audit trail and the request log.

Every request that changed something (POST, PUT or DELETE answered 2xx) is
appended to its project's audit trail: when, which key, what endpoint, the
path and the id of what it made or changed; an admin key reads it at
``/v1/audit``. Every request, changing or not, is written to the log
``cycleledger.requests`` as one JSON object (request id, key id, project,
method, route template, status, milliseconds); the request id is also sent
back in ``X-Request-Id``.
"""

from __future__ import annotations

import json
import logging
import time
import uuid

from flask import Blueprint, Flask, g, jsonify, request

from service.store import sqlite

from . import db
from .access import project

bp = Blueprint("audit", __name__)
log = logging.getLogger("cycleledger.requests")
_CHANGES = {"POST", "PUT", "DELETE"}


class JsonFormatter(logging.Formatter):
    """Log records as one JSON object a line (what log collectors read)."""

    def format(self, record: logging.LogRecord) -> str:
        doc = {"time": self.formatTime(record, "%Y-%m-%dT%H:%M:%S%z"),
               "level": record.levelname, "logger": record.name}
        fields = getattr(record, "fields", None)
        doc.update(fields if isinstance(fields, dict) else {"message": record.getMessage()})
        if record.exc_info:
            doc["traceback"] = self.formatException(record.exc_info)
        return json.dumps(doc, default=str)


def install(app: Flask) -> None:
    @app.before_request
    def _tag():
        g.request_id = request.headers.get("X-Request-Id") or uuid.uuid4().hex
        g.audit_t0 = time.perf_counter()

    @app.after_request
    def _record(resp):
        resp.headers["X-Request-Id"] = g.get("request_id", "")
        route = request.url_rule.rule if request.url_rule is not None else "(unrouted)"
        proj = g.get("project")
        log.info("request", extra={"fields": {
            "request_id": g.get("request_id"), "key_id": g.get("key_id"), "project": proj,
            "method": request.method, "route": route, "status": resp.status_code,
            "ms": round(1000 * (time.perf_counter() - g.get("audit_t0", time.perf_counter())),
                        2)}})
        if (request.method in _CHANGES and 200 <= resp.status_code < 300 and proj
                and request.endpoint and resp.headers.get("Idempotent-Replayed") != "true"):
            target = None
            if resp.is_json:
                body = resp.get_json(silent=True)
                if isinstance(body, dict):
                    # What was made: its id (a block's, in a block's answer),
                    # else its name (assets and points are named).
                    target = (body.get("id") or (body.get("block") or {}).get("id")
                              or body.get("point") or body.get("name"))
            if target is None and request.view_args:
                target = "/".join(str(v) for v in request.view_args.values())
            sqlite.record_audit(db(), proj, request.endpoint, key_id=g.get("key_id"),
                                method=request.method, path=request.path,
                                status=resp.status_code, target=target)
        return resp


@bp.get("/v1/audit")
def audit_trail():
    """Who changed what in the key's project, newest first (admin keys)."""
    from .histories import page_args

    limit, offset = page_args()
    return jsonify(items=sqlite.list_audit(db(), project(), limit, offset), limit=limit,
                   offset=offset)
