"""RFC 9457 problem details: the one map from exceptions to HTTP answers.

Every error body is ``application/problem+json`` with ``type``, ``title``,
``status`` and ``detail``, plus the extension members a client reads instead
of parsing ``detail``: ``field``, ``channel``, ``sample_index``, ``valid``,
``value``, ``limit``. ``title`` is fixed per ``type``; ``detail`` describes
the occurrence. The slugs are documented in ``service/api/openapi.yaml``.
"""

from __future__ import annotations

import logging
import math

from flask import Flask, jsonify, request
from werkzeug.exceptions import HTTPException

from service.engine.errors import (EngineError, IncompatibleState, InvalidLoadHistory,
                                   InvalidParameter, UnknownMethod)
from service.recordings import RecordingError, UnreadableRecording

PROBLEM_BASE = "https://cycleledger.example/problems/"
log = logging.getLogger("cycleledger.api")


class ApiProblem(Exception):
    """An error the API raises itself (bad upload, unknown id, ...)."""

    status = 400
    slug = "bad-request"
    title = "Bad request"

    def __init__(self, detail: str, **extra):
        super().__init__(detail)
        self.detail = detail
        self.extra = extra


class NotFound(ApiProblem):
    status, slug, title = 404, "not-found", "Resource not found"


class UnsupportedMediaType(ApiProblem):
    status, slug, title = 415, "unsupported-media-type", "Unsupported media type"


class MalformedBody(ApiProblem):
    status, slug, title = 400, "malformed-body", "Body could not be read"


class InvalidUpload(ApiProblem):
    status, slug, title = 422, "invalid-upload", "Upload is not a valid load history"


class TooLarge(ApiProblem):
    status, slug, title = 413, "too-large", "Request exceeds a limit"


class TooManyJobs(ApiProblem):
    status, slug, title = 429, "too-many-jobs", "Too many jobs waiting"

    def __init__(self, detail: str, retry_after_s: int, **extra):
        super().__init__(detail, retry_after_s=retry_after_s, **extra)
        self.retry_after_s = retry_after_s


class TooManyRequests(TooManyJobs):
    status, slug, title = 429, "too-many-requests", "Request rate exceeded"


class Unauthorized(ApiProblem):
    """No key, or not a valid one (answered with ``WWW-Authenticate``)."""

    status, slug, title = 401, "unauthorized", "API key missing or not valid"


class Forbidden(ApiProblem):
    status, slug, title = 403, "forbidden", "Key lacks the scope"


class NotAcceptable(ApiProblem):
    status, slug, title = 406, "not-acceptable", "No acceptable representation"


#: Engine exception class -> (status, slug, title). Looked up along the MRO.
ENGINE_PROBLEMS = {
    InvalidLoadHistory: (422, "invalid-load-history", "Invalid load history"),
    InvalidParameter: (422, "invalid-parameter", "Invalid parameter"),
    UnknownMethod: (422, "unknown-name", "Unknown name"),
    IncompatibleState: (409, "incompatible-state", "Incompatible continuation state"),
    UnreadableRecording: (400, "malformed-body", "Body could not be read"),
    RecordingError: (422, "invalid-upload", "Upload is not a valid load history"),
    EngineError: (422, "invalid-input", "Invalid input"),
}


def _clean(value):
    # JSON has no inf or NaN: send null (the engine never produces NaN).
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, (list, tuple)):
        return [_clean(v) for v in value]
    return value


def problem(status: int, slug: str | None, title: str, detail: str, **extra):
    body = {"type": PROBLEM_BASE + slug if slug else "about:blank", "title": title,
            "status": status, "detail": detail, "instance": request.path}
    body.update({k: _clean(v) for k, v in extra.items() if v is not None})
    resp = jsonify(body)
    resp.status_code = status
    resp.mimetype = "application/problem+json"
    return resp


def register(app: Flask) -> None:
    """Install the three handlers: engine errors, API problems, everything else."""

    @app.errorhandler(EngineError)
    def _engine(exc: EngineError):
        for cls in type(exc).__mro__:
            if cls in ENGINE_PROBLEMS:
                status, slug, title = ENGINE_PROBLEMS[cls]
                break
        extra = exc.as_dict()
        if isinstance(exc, UnknownMethod):
            extra["valid"] = exc.valid
        extra = {k: v for k, v in extra.items()
                 if isinstance(v, (str, int, float, list, tuple, dict))}
        return problem(status, slug, title, exc.message, **extra)

    @app.errorhandler(ApiProblem)
    def _api(exc: ApiProblem):
        resp = problem(exc.status, exc.slug, exc.title, exc.detail, **exc.extra)
        if getattr(exc, "retry_after_s", None):
            resp.headers["Retry-After"] = str(exc.retry_after_s)
        if isinstance(exc, Unauthorized):
            resp.headers["WWW-Authenticate"] = 'Bearer realm="cycleledger"'
        return resp

    @app.errorhandler(HTTPException)
    def _http(exc: HTTPException):
        resp = problem(exc.code or 500, None, exc.name, exc.description or exc.name)
        if exc.code == 405 and exc.valid_methods:
            resp.headers["Allow"] = ", ".join(exc.valid_methods)
        return resp

    @app.errorhandler(Exception)
    def _bug(exc: Exception):
        log.exception("unhandled error on %s %s", request.method, request.path)
        return problem(500, "internal-error", "Internal error",
                       "The service failed on this request; it has been logged.")
