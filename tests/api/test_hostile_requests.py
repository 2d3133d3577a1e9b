"""Hostile requests: deep JSON, odd encodings, spreadsheet formulas, multipart
bodies, path traversal. Each is refused as problem details (never a 500),
stores nothing, or is stored and later exported harmlessly."""

from __future__ import annotations

import csv
import io
from pathlib import Path

import pytest

from tests.api.conftest import assert_problem, make_app

DEEP = '{"a": ' + "[" * 100_000 + "]" * 100_000 + "}"


def files(app) -> set[str]:
    root = Path(app.config["DATA_DIR"])
    return {str(p.relative_to(root)) for p in root.rglob("*") if p.is_file()
            and not p.name.startswith("cycleledger.sqlite3")}


@pytest.mark.parametrize("method, path", [
    ("POST", "/v1/assessments"), ("POST", "/v1/histories"), ("POST", "/v1/assets"),
    ("POST", "/v1/user-curves"), ("POST", "/v1/materials"),
    ("POST", "/v1/assets/arm/points"), ("PUT", "/v1/assets/arm/points/a/settings")])
def test_json_nested_a_hundred_thousand_deep_is_a_400(client, method, path):
    # Python's parser recurses per level; past its limit it raised
    # RecursionError, which was a 500 before (common practice: reject).
    client.post("/v1/assets", json={"name": "arm"})
    client.post("/v1/assets/arm/points", json={"name": "a", "unit": "MPa",
                                               "settings": {"curve": "EN1993-1-9:71"}})
    r = client.open(path, method=method, data=DEEP, content_type="application/json")
    assert_problem(r, 400, "malformed-body")
    assert "nested too deeply" in r.get_json()["detail"]


def test_csv_in_utf16_is_refused_with_the_reason_and_utf8_with_bom_is_read(client, app):
    text = "g1,g2\n1,2\n3,4\n5,1\n"
    before = files(app)
    for enc in ("utf-16", "utf-16-be"):
        r = client.post("/v1/histories?unit=MPa", data=text.encode(enc), content_type="text/csv")
        assert_problem(r, 400, "malformed-body")
        assert "UTF-8" in r.get_json()["detail"]
    assert files(app) == before
    # Spreadsheets write a UTF-8 byte-order mark: the first column keeps its name.
    r = client.post("/v1/histories?unit=MPa", data=("\ufeff" + text).encode("utf-8"),
                    content_type="text/csv")
    assert r.status_code == 201
    assert [c["name"] for c in r.get_json()["channels"]] == ["g1", "g2"]
    latin = "g1,d\u00e9form\n1,2\n3,4\n".encode("latin-1")  # not UTF-8: a clean 400
    assert_problem(client.post("/v1/histories?unit=MPa", data=latin, content_type="text/csv"),
                   400, "malformed-body")


def test_formula_cells_are_not_numbers(client):
    r = client.post("/v1/histories?unit=MPa", data=b"g1\n10\n=1+2\n30\n",
                    content_type="text/csv")
    assert_problem(r, 422, "invalid-load-history", channel="g1", sample_index=1)


def test_names_that_start_a_formula_are_exported_as_text(client):
    # A channel named like a spreadsheet formula is a legal name, but every
    # CSV export must not hand it to a spreadsheet as a formula (OWASP, CSV
    # injection: prefix such cells with an apostrophe).
    name = "=HYPERLINK(\"http://203.0.113.1\",\"x\")"
    body = {"samples": {name: [0.0, 100.0, -80.0, 90.0, -100.0, 0.0], "-g2": [0.0, 50.0, 0.0, 40.0, -10.0, 0.0]},
            "unit": "MPa", "settings": {"curve": "EN1993-1-9:71"}}
    a = client.post("/v1/assessments", json=body).get_json()
    assert set(a["points"]) == {name, "-g2"}  # JSON keeps the name as given
    text = client.get(f"/v1/assessments/{a['id']}/summary?format=csv").get_data(as_text=True)
    rows = list(csv.reader(io.StringIO(text)))
    firsts = [r[0] for r in rows[1:]]
    assert sorted(firsts) == sorted(["'" + name, "'-g2"])
    # Numbers stay numbers (negative values are not escaped).
    cyc = client.get(f"/v1/assessments/{a['id']}/points/-g2/cycles?format=csv").get_data(
        as_text=True)
    assert "'" not in cyc


def test_multipart_bodies_are_refused_and_store_nothing(tmp_path):
    app = make_app(tmp_path, MAX_UPLOAD_MB=0.01, WARM_KERNELS=False)
    try:
        c = app.test_client()
        before = files(app)
        small = (b"--x\r\nContent-Disposition: form-data; name=f; filename=a.csv\r\n\r\n"
                 b"g1\n1\n2\n\r\n--x--\r\n")
        r = c.post("/v1/histories?unit=MPa", data=small,
                   content_type="multipart/form-data; boundary=x")
        assert_problem(r, 415, "unsupported-media-type")
        big = small.replace(b"g1\n1\n2\n", b"g1\n" + b"1\n" * 20_000)  # 40 kB > 10 kB limit
        r = c.post("/v1/histories?unit=MPa", data=big,
                   content_type="multipart/form-data; boundary=x")
        assert r.status_code in (413, 415) and r.mimetype == "application/problem+json"
        r = c.post("/v1/assets/arm/blocks?seq=1", data=big,
                   content_type="multipart/form-data; boundary=x")
        assert r.status_code in (404, 413, 415) and r.mimetype == "application/problem+json"
        assert files(app) == before
    finally:
        app.extensions["cycleledger.jobs"].shutdown()


@pytest.mark.parametrize("path", [
    "/v1/histories/..%2F..%2Fetc%2Fpasswd", "/v1/histories/../../etc/passwd",
    "/v1/user-curves/..%2Fcycleledger.sqlite3", "/v1/materials/..%2F..%2Fcycleledger.sqlite3",
    "/v1/assets/..%2F..%2Fhistories", "/v1/assessments/%2Fetc%2Fpasswd/summary",
    "/v1/assets/arm/blocks/..%2Fblocks/void"])
def test_path_traversal_finds_nothing(client, app, path):
    client.post("/v1/assets", json={"name": "arm"})
    before = files(app)
    method = "POST" if path.endswith("/void") else "GET"
    r = client.open(path, method=method)
    assert r.status_code == 404 and r.mimetype == "application/problem+json"
    assert client.delete(path).status_code in (404, 405)
    assert files(app) == before


@pytest.mark.parametrize("route, body", [
    ("/v1/assets", {"name": "../arm"}), ("/v1/user-curves", {
        "name": "../../c", "basquin": {"slope": 3, "intercept": 1e12}}),
    ("/v1/materials", {"name": "..", "ultimate_strength": 400}),
    ("/v1/assets", {"name": "a/b"}), ("/v1/assets", {"name": "a\x00b"})])
def test_names_with_path_characters_are_refused(client, route, body):
    assert_problem(client.post(route, json=body), 400, "bad-request")


def test_a_history_name_is_metadata_only(client, app):
    r = client.post("/v1/histories?unit=MPa&name=..%2F..%2Fescape", data=b"g1\n1\n2\n3\n",
                    content_type="text/csv")
    assert r.status_code == 201 and r.get_json()["name"] == "../../escape"
    root = Path(app.config["DATA_DIR"])
    assert not (root.parent / "escape").exists() and not list(root.parent.glob("escape*"))
    assert all(f.startswith("histories/") for f in files(app))
