"""API test fixtures: the app on a temporary data directory, with every
response checked against ``service/api/openapi.yaml`` (openapi-core)."""

from __future__ import annotations

import json
import time
from pathlib import Path

import pytest
from flask import request
from openapi_core import Config, OpenAPI
from openapi_core.contrib.flask import FlaskOpenAPIRequest, FlaskOpenAPIResponse

from service.api import create_app

SPEC_PATH = Path(__file__).resolve().parents[2] / "service" / "api" / "openapi.yaml"
def _text(body) -> str:
    return body.decode("utf-8") if isinstance(body, bytes) else body


def _binary(body) -> str:
    # Binary bodies are `type: string` with a contentMediaType in the spec.
    return body.decode("latin-1") if isinstance(body, bytes) else body


# Problem bodies are JSON under their own media type (RFC 9457); CSV, YAML
# and binary bodies are strings to the schema.
SPEC = OpenAPI.from_file_path(str(SPEC_PATH), config=Config(
    extra_media_type_deserializers={
        "application/problem+json": json.loads, "text/csv": _text,
        "application/yaml": _text, "application/vnd.apache.parquet": _binary,
        "text/html": _text, "image/svg+xml": _text, "image/png": _binary,
        "application/vnd.apache.arrow.stream": _binary}))


def make_app(tmp_path, **config):
    app = create_app({"DATA_DIR": str(tmp_path / "data"), "TESTING": True, **config})
    app.config["contract_errors"] = []

    @app.after_request
    def _check_response(resp):
        # Only routed requests are in the contract (Flask answers the rest);
        # a 413 cannot be checked here because reading its request body
        # raises again (its problem body is checked by the test itself).
        too_big = (request.content_length or 0) > (app.config["MAX_CONTENT_LENGTH"] or 2**62)
        if request.url_rule is not None and resp.status_code != 413 and not too_big:
            resp.direct_passthrough = False
            errors = list(SPEC.iter_response_errors(FlaskOpenAPIRequest(request),
                                                    FlaskOpenAPIResponse(resp)))
            if errors:
                app.config["contract_errors"].append(
                    (request.method, request.path, resp.status_code,
                     [str(e) + " " + str(getattr(e, "__cause__", "")) for e in errors]))
        return resp

    return app


@pytest.fixture
def app(tmp_path):
    app = make_app(tmp_path)
    yield app
    app.extensions["cycleledger.jobs"].shutdown(wait=True)
    assert not app.config["contract_errors"], app.config["contract_errors"]


@pytest.fixture
def client(app):
    return app.test_client()


def assert_problem(resp, status: int, slug: str | None = None, **members):
    """Check an RFC 9457 body: status, type slug and extension members."""
    assert resp.status_code == status, (resp.status_code, resp.get_data(as_text=True)[:500])
    assert resp.mimetype == "application/problem+json"
    body = resp.get_json()
    assert body["status"] == status and body["title"] and body["detail"]
    if slug is None:
        assert body["type"] == "about:blank"
    else:
        assert body["type"].endswith("/problems/" + slug), body["type"]
    for k, v in members.items():
        assert body.get(k) == v, (k, body.get(k), body)
    return body


def wait_for_job(client, location: str, timeout_s: float = 30.0) -> dict:
    deadline = time.monotonic() + timeout_s
    while True:
        job = client.get(location).get_json()
        if job["state"] in ("done", "failed"):
            return job
        if time.monotonic() > deadline:
            raise AssertionError(f"job still {job['state']} after {timeout_s} s")
        time.sleep(0.02)



def stop_waitress(server, thread) -> None:
    from service.cli import stop_waitress as stop

    stop(server, thread)
    assert not thread.is_alive(), "waitress did not stop"
