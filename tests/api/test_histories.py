"""Uploading histories: formats, units, and every kind of bad upload."""

from __future__ import annotations

import io
import json
import os

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from tests.api.conftest import assert_problem

PARQUET = "application/vnd.apache.parquet"


def parquet_bytes(columns: dict) -> bytes:
    buf = io.BytesIO()
    pq.write_table(pa.table(columns), buf)
    return buf.getvalue()


def stored_files(app) -> list[str]:
    root = app.config["DATA_DIR"]
    return sorted(os.path.relpath(os.path.join(d, f), root)
                  for d, _, fs in os.walk(root) for f in fs if f.endswith(".parquet"))


def test_csv_with_time_column_infers_rate_and_converts_strain(client):
    # sigma = E * epsilon for a uniaxial gauge (common practice):
    # 500 microstrain on steel with E = 206000 MPa is 103 MPa.
    csv = "time_s,g1,g2\n0.000,0,100\n0.002,500,-100\n0.004,-500,50\n0.006,250,0\n"
    r = client.post("/v1/histories?unit=microstrain&youngs_modulus=206000&name=run1",
                    data=csv, content_type="text/csv")
    assert r.status_code == 201
    h = r.get_json()
    assert h["sample_count"] == 4 and h["name"] == "run1"
    assert h["sample_rate_hz"] == pytest.approx(500.0)
    assert h["duration_s"] == pytest.approx(4 / 500.0)
    g1 = h["channels"][0]
    assert g1["name"] == "g1" and g1["unit"] == "microstrain" and g1["stored_unit"] == "MPa"
    assert g1["max_mpa"] == pytest.approx(103.0) and g1["min_mpa"] == pytest.approx(-103.0)
    assert r.headers["Location"] == f"/v1/histories/{h['id']}"
    assert client.get(r.headers["Location"]).get_json() == h


def test_parquet_json_and_arrow_uploads_agree(client):
    x = np.random.default_rng(3).standard_normal(1000) * 50
    bodies = [
        (parquet_bytes({"a": x}), PARQUET),
        (json.dumps({"channels": {"a": x.tolist()}, "unit": "MPa"}), "application/json"),
    ]
    sink = pa.BufferOutputStream()
    with pa.ipc.new_stream(sink, pa.schema([("a", pa.float64())])) as w:
        w.write_table(pa.table({"a": x}))
    bodies.append((sink.getvalue().to_pybytes(), "application/vnd.apache.arrow.stream"))
    ids = []
    for body, ctype in bodies:
        r = client.post("/v1/histories?unit=MPa&sample_rate_hz=100", data=body,
                        content_type=ctype)
        assert r.status_code == 201, r.get_json()
        ch = r.get_json()["channels"][0]
        assert ch["min_mpa"] == x.min() and ch["max_mpa"] == x.max()
        ids.append(r.get_json()["id"])
    listed = client.get("/v1/histories").get_json()["items"]
    assert {h["id"] for h in listed} == set(ids)


def test_per_channel_units(client):
    csv = "a,b\n1,100\n2,200\n3,300\n"
    r = client.post("/v1/histories?units=a:MPa,b:kPa", data=csv, content_type="text/csv")
    assert r.status_code == 201
    chans = {c["name"]: c for c in r.get_json()["channels"]}
    assert chans["b"]["max_mpa"] == pytest.approx(0.3)  # 300 kPa = 0.3 MPa (SI)


def test_delete_removes_row_and_file(client, app):
    r = client.post("/v1/histories?unit=MPa", data="a\n1\n2\n", content_type="text/csv")
    hid = r.get_json()["id"]
    assert len(stored_files(app)) == 1
    assert client.delete(f"/v1/histories/{hid}").status_code == 204
    assert stored_files(app) == []
    assert_problem(client.get(f"/v1/histories/{hid}"), 404, "not-found")
    assert_problem(client.delete(f"/v1/histories/{hid}"), 404, "not-found")


@pytest.mark.parametrize("query,body,ctype,status,slug,members", [
    ("unit=MPa", "a\n1\n2\n", "image/png", 415, "unsupported-media-type", {}),
    ("unit=MPa", "", "text/csv", 422, "invalid-upload", {}),
    ("unit=MPa", b"\xff\xfe\x00a,b\n1", "text/csv", 400, "malformed-body", {}),
    ("unit=MPa", "a,b\n1,2\n3\n", "text/csv", 400, "malformed-body", {}),
    ("", "a\n1\n2\n", "text/csv", 422, "invalid-parameter", {"field": "unit"}),
    ("unit=furlong", "a\n1\n2\n", "text/csv", 422, "unknown-name", {"field": "unit"}),
    ("unit=microstrain", "a\n1\n2\n", "text/csv", 422, "invalid-parameter",
     {"field": "youngs_modulus"}),
    ("unit=MPa", "a\n1\nnan\n3\n", "text/csv", 422, "invalid-load-history",
     {"channel": "a", "sample_index": 1}),
    ("unit=MPa", "a\n1\ninf\n3\n", "text/csv", 422, "invalid-load-history",
     {"channel": "a", "sample_index": 1}),
    ("unit=MPa", "a\n1\n", "text/csv", 422, "invalid-load-history", {"channel": "a"}),
    ("unit=MPa", "a,b\n1,x\n2,3\n", "text/csv", 422, "invalid-load-history",
     {"channel": "b", "sample_index": 0}),
    ("unit=MPa", '{"channels": {"a": [1, 2, 3], "b": [1, 2]}}', "application/json", 422,
     "invalid-upload", {}),
    ("unit=MPa", '{"channels": [1, 2]}', "application/json", 422, "invalid-upload", {}),
    ("unit=MPa", "{not json", "application/json", 400, "malformed-body", {}),
    ("unit=MPa", b"PAR1 not really", PARQUET, 400, "malformed-body", {}),
    ("unit=MPa&sample_rate_hz=-3", "a\n1\n2\n", "text/csv", 422, "invalid-parameter",
     {"field": "sample_rate_hz"}),
    ("unit=MPa&sample_rate_hz=50", "time_s,a\n0,1\n0.01,2\n0.02,1\n", "text/csv", 422,
     "invalid-parameter", {"field": "sample_rate_hz"}),
    ("unit=MPa", "time_s,a\n0,1\n0,2\n", "text/csv", 422, "invalid-upload", {}),
    ("units=zz:MPa", "a\n1\n2\n", "text/csv", 422, "invalid-parameter", {"field": "units"}),
])
def test_bad_uploads_are_problems_and_store_nothing(client, app, query, body, ctype, status,
                                                    slug, members):
    r = client.post(f"/v1/histories?{query}", data=body, content_type=ctype)
    assert_problem(r, status, slug, **members)
    assert stored_files(app) == []
    assert client.get("/v1/histories").get_json()["items"] == []


def test_oversized_body_is_413(tmp_path):
    from tests.api.conftest import make_app

    app = make_app(tmp_path, MAX_UPLOAD_MB=0.001)  # ~1 kB
    r = app.test_client().post("/v1/histories?unit=MPa", data="a\n" + "1\n" * 2000,
                               content_type="text/csv")
    assert_problem(r, 413)
    app.extensions["cycleledger.jobs"].shutdown()


def test_unknown_ids_and_paging(client):
    assert_problem(client.get("/v1/histories/h_nope"), 404, "not-found", field="history_id")
    assert_problem(client.get("/v1/histories?limit=0"), 400, "bad-request")
    assert_problem(client.get("/v1/histories?limit=x"), 400, "bad-request")
    r = client.put("/v1/histories")
    assert_problem(r, 405)
    assert "POST" in r.headers["Allow"]


def test_a_data_directory_of_another_schema_is_refused(tmp_path):
    import sqlite3

    from service.api import create_app
    from service.store.sqlite import DB_NAME, IncompatibleStore

    d = tmp_path / "old"
    d.mkdir()
    con = sqlite3.connect(d / DB_NAME)
    con.executescript("CREATE TABLE histories (id TEXT); PRAGMA user_version = 1;")
    con.close()
    with pytest.raises(IncompatibleStore, match="schema version 1"):
        create_app({"DATA_DIR": str(d), "WARM_KERNELS": False})


def test_a_retry_of_an_answer_kept_before_fingerprints_had_a_scheme_replays(client, app):
    # Answers kept by an earlier version hash the body's SHA-256, not its
    # XXH3-128 fingerprint: a retry across the upgrade still replays, and
    # another body under the key is still a conflict.
    import hashlib
    import sqlite3

    body = b"g1\n0\n100\n-50\n"
    first = client.post("/v1/histories?unit=MPa", data=body, content_type="text/csv",
                        headers={"Idempotency-Key": "rig3-run43"})
    assert first.status_code == 201
    with app.test_request_context("/v1/histories?unit=MPa", method="POST"):
        from service.api.idempotency import request_hash

        old = request_hash(hashlib.sha256(body).hexdigest())
    from pathlib import Path

    from service.store.sqlite import DB_NAME

    con = sqlite3.connect(Path(app.config["DATA_DIR"]) / DB_NAME)
    with con:
        assert con.execute("UPDATE idempotency SET request_hash = ? WHERE key = ?",
                           (old, "rig3-run43")).rowcount == 1
    con.close()
    again = client.post("/v1/histories?unit=MPa", data=body, content_type="text/csv",
                        headers={"Idempotency-Key": "rig3-run43"})
    assert again.status_code == 201 and again.headers["Idempotent-Replayed"] == "true"
    assert again.get_json() == first.get_json()
    other = client.post("/v1/histories?unit=MPa", data=b"g1\n0\n5\n", content_type="text/csv",
                        headers={"Idempotency-Key": "rig3-run43"})
    assert_problem(other, 409, "idempotency-conflict", field="Idempotency-Key")


def test_idempotency_key_makes_a_retry_answer_as_the_first_time(client, app):
    # Issue 18: a pipeline that lost the answer posts again with the same
    # key: the same resource, nothing more stored; another request under the
    # same key is a conflict.
    from pathlib import Path

    body = b"g1\n0\n100\n-50\n"
    first = client.post("/v1/histories?unit=MPa", data=body, content_type="text/csv",
                        headers={"Idempotency-Key": "rig3-run42"})
    again = client.post("/v1/histories?unit=MPa", data=body, content_type="text/csv",
                        headers={"Idempotency-Key": "rig3-run42"})
    assert first.status_code == again.status_code == 201
    assert again.get_json() == first.get_json() and again.headers["Location"]
    assert again.headers["Idempotent-Replayed"] == "true"
    assert len(list((Path(app.config["DATA_DIR"]) / "histories").glob("h_*"))) == 1
    other = client.post("/v1/histories?unit=MPa", data=b"g1\n0\n5\n", content_type="text/csv",
                        headers={"Idempotency-Key": "rig3-run42"})
    assert_problem(other, 409, "idempotency-conflict", field="Idempotency-Key")
    a1 = client.post("/v1/assessments", json={"history_id": first.get_json()["id"],
                                              "settings": {"curve": "EN1993-1-9:71"}},
                     headers={"Idempotency-Key": "a-1"})
    a2 = client.post("/v1/assessments", json={"history_id": first.get_json()["id"],
                                              "settings": {"curve": "EN1993-1-9:71"}},
                     headers={"Idempotency-Key": "a-1"})
    assert a1.get_json()["id"] == a2.get_json()["id"]
    assert len(client.get("/v1/assessments").get_json()["items"]) == 1


def test_client_retries_with_the_same_key_and_honours_retry_after(monkeypatch):
    from service.client import Client, ServiceError

    c = Client("http://127.0.0.1:1", backoff_s=0.001)
    calls = []

    def once(method, path, **kw):
        calls.append(kw["headers"].get("Idempotency-Key"))
        if len(calls) < 3:
            err = ServiceError(429 if len(calls) == 1 else 0, {"title": "busy"})
            err.retry_after_s = 0.01 if len(calls) == 1 else None
            raise err
        return 201, {}, b"{}"

    monkeypatch.setattr(c, "_once", once)
    assert c.request("POST", "/v1/histories", body=b"x")[0] == 201
    assert len(calls) == 3 and len(set(calls)) == 1 and calls[0].startswith("client-")

    def refused(method, path, **kw):
        raise ServiceError(422, {"title": "bad"})

    monkeypatch.setattr(c, "_once", refused)
    with pytest.raises(ServiceError):
        c.request("POST", "/v1/histories", body=b"x")        # a 4xx is not retried
