"""The app and service/api/openapi.yaml agree: routes, enums, and a fuzz of the contract."""

from __future__ import annotations

import os
import re
import shutil
import tempfile

import pytest
import schemathesis
import yaml
from hypothesis import HealthCheck, settings
from schemathesis.specs.openapi.checks import positive_data_acceptance

from service.api import create_app
from service.engine import units
from service.engine.mean_stress import COMPRESSIVE_MEAN_POLICIES, MEAN_STRESS_METHODS
from service.engine.rainflow import RESIDUE_TREATMENTS
from service.engine.multiaxial import REDUCTION_NAMES, ROSETTE_LAYOUTS
from service.engine.sn_curve import BELOW_LIMIT_TREATMENTS
from service.declarations import MULTIAXIAL_KEYS
from service.store import keys, sqlite
from tests.api.conftest import SPEC_PATH

DOC = yaml.safe_load(SPEC_PATH.read_text())


def flask_routes(app) -> set[tuple[str, str]]:
    out = set()
    for rule in app.url_map.iter_rules():
        if rule.endpoint == "static":
            continue
        path = re.sub(r"<(?:[a-z]+:)?([a-z_]+)>", r"{\1}", rule.rule)
        out |= {(path, m.lower()) for m in rule.methods - {"HEAD", "OPTIONS"}}
    return out


def spec_routes() -> set[tuple[str, str]]:
    return {(p, m) for p, item in DOC["paths"].items() for m in item
            if m in ("get", "post", "put", "patch", "delete")}


def test_routes_and_spec_paths_match_both_ways(tmp_path):
    app = create_app({"DATA_DIR": str(tmp_path), "WARM_KERNELS": False})
    assert flask_routes(app) == spec_routes()
    app.extensions["cycleledger.jobs"].shutdown()


def test_enums_match_the_registries():
    s = DOC["components"]["schemas"]
    assert s["MeanStressMethod"]["enum"] == sorted(MEAN_STRESS_METHODS)
    assert s["CompressiveMean"]["enum"] == list(COMPRESSIVE_MEAN_POLICIES)
    assert s["Residue"]["enum"] == list(RESIDUE_TREATMENTS)
    assert s["BelowLimit"]["enum"] == list(BELOW_LIMIT_TREATMENTS)
    assert s["Unit"]["enum"] == list(units.UNITS)
    assert s["Reduction"]["enum"] == list(REDUCTION_NAMES)
    assert s["MultiaxialPoint"]["properties"]["rosette"]["enum"] == list(ROSETTE_LAYOUTS)
    assert set(s["MultiaxialPoint"]["properties"]) == MULTIAXIAL_KEYS


def test_spec_is_valid_openapi_31():
    from openapi_spec_validator import validate

    validate(DOC)


def test_served_document_is_the_file(client):
    r = client.get("/openapi.yaml")
    assert r.status_code == 200 and r.data == SPEC_PATH.read_bytes()


# ---------------------------------------------------------------- fuzz

@schemathesis.serializer("application/vnd.apache.parquet", "application/vnd.apache.arrow.stream",
                         "application/gzip", "application/x-hdf5", "application/x-mdf")
def _binary_body(ctx, value):
    # The schema says "a string of that media type"; send its bytes as they
    # are, so the fuzz exercises the malformed-file path of the upload.
    return value if isinstance(value, bytes) else str(value).encode("utf-8", "surrogatepass")


_FUZZ_DIR = tempfile.mkdtemp(prefix="cycleledger-fuzz-")
_FUZZ_APP = create_app({"DATA_DIR": _FUZZ_DIR, "ASYNC_SAMPLES": 10**9})
# The fuzz runs as an admin key without a rate limit: the contract says
# every non-public route needs a key, and schemathesis checks that too.
_FUZZ_CON = sqlite.connect(_FUZZ_DIR)
_FUZZ_KEY = keys.create(_FUZZ_CON, "fuzz", "admin", "contract fuzz", rate_per_s=0)[1]
_FUZZ_CON.close()
schema = schemathesis.openapi.from_wsgi("/openapi.yaml", _FUZZ_APP)


@schema.auth(refresh_interval=None)
class _FuzzKey:
    # Given through schemathesis's auth hook (not as a plain header), so it
    # knows the request is authenticated when it judges negative cases.
    def get(self, case, ctx):
        return _FUZZ_KEY

    def set(self, case, data, ctx):
        case.headers = {**(case.headers or {}), "Authorization": f"Bearer {data}"}


@pytest.fixture(scope="module", autouse=True)
def _cleanup_fuzz_app():
    yield
    _FUZZ_APP.extensions["cycleledger.jobs"].shutdown()
    shutil.rmtree(_FUZZ_DIR, ignore_errors=True)


@schema.parametrize()
@settings(max_examples=int(os.environ.get("FUZZ_EXAMPLES", "200")), deadline=None,
          suppress_health_check=list(HealthCheck))
def test_contract_fuzz(case):
    # No 5xx, and every response conforms to the document (status, media
    # type, schema) whatever the generated request. Left out: the check that
    # every schema-valid request is accepted; a schema cannot say that a CSV
    # body must be a table of numbers or that a history needs two samples,
    # and those requests are 4xx problems by design.
    case.call_and_validate(excluded_checks=[positive_data_acceptance])


def test_every_enumeration_of_the_contract_is_listed_at_methods(client):
    # One name per concept (issue 17): every value an enumeration of the
    # contract allows, outside the response formats, is one /v1/methods
    # lists, so a client can discover each choice it may send.
    methods = client.get("/v1/methods").get_json()
    listed = {v for values in methods.values() for v in values}
    formats = {"json", "csv", "parquet", "svg", "png"}
    internal = {"queued", "running", "done", "failed", "block", "void", "late_block",
                "settings", "rosette", "plane_stress", "tensor", "fatigue",
                "static_strength", ".", ","}

    def enums(node):
        if isinstance(node, dict):
            if "enum" in node:
                yield from node["enum"]
            for v in node.values():
                yield from enums(v)
        elif isinstance(node, list):
            for v in node:
                yield from enums(v)

    missing = {v for v in enums(DOC) if isinstance(v, str)} - listed - formats - internal
    assert not missing, sorted(missing)


def test_every_flag_the_code_sets_is_listed_at_methods(client):
    # One vocabulary of flags for assessments and the ledger (issue 17): every
    # flag the service can set appears at /v1/methods.
    import re
    from pathlib import Path

    listed = set(client.get("/v1/methods").get_json()["flags"])
    root = Path(__file__).resolve().parents[2] / "service"
    set_in_code = {m for f in root.rglob("*.py")
                   for m in re.findall(r'flags\.append\("([a-z_]+)"\)', f.read_text())}
    assert set_in_code and set_in_code <= listed, set_in_code - listed
