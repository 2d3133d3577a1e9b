"""FE superposition over HTTP: unit stresses per node and load case, measured
loads, damage of every node and the worst nodes in full."""

from __future__ import annotations

import io
import time

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from service.engine.damage import assess_history
from service.engine.multiaxial import reduce, superpose
from service.engine.sn_catalogue import catalogue_curve
from tests.api.conftest import assert_problem

PARQUET = "application/vnd.apache.parquet"
EN71 = catalogue_curve("EN1993-1-9:71")


def unit_table(nodes=40, cases=("lift", "slew"), comps=("sxx", "syy", "szz", "sxy", "syz",
                                                        "szx"), seed=3, node_ids=None):
    rng = np.random.default_rng(seed)
    unit = rng.normal(0, 25, size=(nodes, len(cases), len(comps)))
    ids = node_ids if node_ids is not None else [1000 + i for i in range(nodes)]
    rows = {"node": [], "load_case": [], **{c: [] for c in comps}}
    for j in range(nodes):
        for k, case in enumerate(cases):
            rows["node"].append(ids[j])
            rows["load_case"].append(case)
            for m, c in enumerate(comps):
                rows[c].append(unit[j, k, m])
    buf = io.BytesIO()
    pq.write_table(pa.table(rows), buf)
    return buf.getvalue(), unit, ids


def loads(n=2000, seed=4):
    rng = np.random.default_rng(seed)
    return np.stack([np.cumsum(rng.normal(0, 0.3, n)), np.sin(np.arange(n) / 9.0)])


def wait(client, job, seconds=60):
    for _ in range(int(seconds / 0.05)):
        job = client.get(job["links"]["self"]).get_json()
        if job["state"] in ("done", "failed"):
            return job
        time.sleep(0.05)
    raise AssertionError(job)


def run_superposition(client, body):
    r = client.post("/v1/superpositions", json=body)
    assert r.status_code == 202, r.get_json()
    job = wait(client, r.get_json())
    assert job["state"] == "done", job
    assert job["kind"] == "superposition"
    return client.get(job["links"]["result"]).get_json()


def test_node_damage_over_http_equals_the_engine(client):
    raw, unit, ids = unit_table()
    r = client.post("/v1/unit-stresses?name=boom-v3", data=raw, content_type=PARQUET)
    assert r.status_code == 201, r.get_json()
    u = r.get_json()
    assert u["nodes"] == 40 and u["load_cases"] == ["lift", "slew"] and u["components"] == 6
    L = loads()
    res = run_superposition(client, {
        "unit_stresses_id": u["id"], "loads": {"lift": L[0].tolist(), "slew": L[1].tolist()},
        "sample_rate_hz": 100.0, "settings": {"curve": "EN1993-1-9:71"}, "top": 5})
    comps = superpose(unit, L)
    ref = np.array([assess_history(reduce(comps[j], "signed_von_mises"), EN71).damage
                    for j in range(40)])
    assert res["nodes"] == 40 and res["samples"] == 2000 and res["duration_s"] == 20.0
    assert res["damage_max"] == pytest.approx(ref.max(), rel=1e-12)
    worst = [ids[j] for j in np.argsort(-ref, kind="stable")[:5]]
    assert [t["node"] for t in res["top"]] == worst
    assert res["top"][0]["reserve_factor"] is not None and res["top"][0]["top_cycles"]
    assert any(c["code"] == "superposition_linear" for c in res["cautions"])
    nodes = client.get(res["links"]["nodes"] + "?limit=1000").get_json()
    assert nodes["total"] == 40
    assert [n["node"] for n in nodes["items"]] == ids
    assert np.allclose([n["damage"] for n in nodes["items"]], ref, rtol=1e-12, atol=0)
    table = pq.read_table(io.BytesIO(client.get(res["links"]["nodes"] + "?format=parquet").data))
    assert table.column("damage").to_pylist() == [n["damage"] for n in nodes["items"]]
    csv = client.get(res["links"]["nodes"] + "?format=csv").get_data(as_text=True)
    assert csv.splitlines()[0] == "node,damage,max_abs_equivalent" and len(csv.splitlines()) == 41
    assert client.get("/v1/unit-stresses").get_json()["items"][0]["name"] == "boom-v3"
    assert client.delete(f"/v1/unit-stresses/{u['id']}").status_code == 204
    assert client.get(res["links"]["self"]).status_code == 200  # results outlive the set


def test_plane_stress_sets_and_text_node_ids(client):
    raw, unit, ids = unit_table(nodes=6, comps=("sxx", "syy", "sxy"),
                                node_ids=[f"weld-{i}" for i in range(6)])
    u = client.post("/v1/unit-stresses", data=raw, content_type=PARQUET).get_json()
    assert u["components"] == 3
    L = loads(500)
    res = run_superposition(client, {
        "unit_stresses_id": u["id"], "loads": {"lift": L[0].tolist(), "slew": L[1].tolist()},
        "settings": {"curve": "EN1993-1-9:71"}, "reduction": "signed_tresca", "top": 2})
    comps = superpose(unit, L)
    ref = [assess_history(reduce(comps[j], "signed_tresca"), EN71).damage for j in range(6)]
    assert res["damage_max"] == pytest.approx(max(ref), rel=1e-12)
    assert res["top"][0]["node"] == ids[int(np.argmax(ref))]
    assert res["duration_s"] is None


@pytest.mark.parametrize("rows, status, field", [
    ({"node": [1, 1], "load_case": ["a", "b"], "sxx": [1.0, 2.0]}, 422, "components"),
    ({"node": [1, 2, 2], "load_case": ["a", "a", "b"], "sxx": [1.0] * 3, "syy": [0.0] * 3,
      "sxy": [0.0] * 3}, 422, "load_case"),
    ({"load_case": ["a"], "sxx": [1.0], "syy": [0.0], "sxy": [0.0]}, 422, "node"),
    ({"node": [1, 1], "load_case": ["a", "a"], "sxx": [1.0, 2.0], "syy": [0.0] * 2,
      "sxy": [0.0] * 2}, 422, "load_case"),
    ({"node": [1], "load_case": ["a"], "sxx": [float("nan")], "syy": [0.0], "sxy": [0.0]},
     422, "sxx"),
])
def test_bad_unit_stress_tables(client, app, rows, status, field):
    buf = io.BytesIO()
    pq.write_table(pa.table(rows), buf)
    r = client.post("/v1/unit-stresses", data=buf.getvalue(), content_type=PARQUET)
    assert_problem(r, status, "invalid-parameter", field=field)
    assert not list((app.config["DATA_DIR"] and __import__("pathlib").Path(
        app.config["DATA_DIR"]) / "unit_stresses").glob("*.parquet"))


def test_bad_superposition_requests(client):
    raw, _, _ = unit_table(nodes=3)
    u = client.post("/v1/unit-stresses", data=raw, content_type=PARQUET).get_json()
    good = {"unit_stresses_id": u["id"], "loads": {"lift": [0.0, 1.0, 0.0], "slew": [0, 1, 2]},
            "settings": {"curve": "EN1993-1-9:71"}}
    assert_problem(client.post("/v1/superpositions", json={**good, "unit_stresses_id": "u_x"}),
                   404, "not-found")
    assert_problem(client.post("/v1/superpositions", json={**good, "loads": {"lift": [0, 1]}}),
                   422, "invalid-parameter", field="loads")
    assert_problem(client.post("/v1/superpositions", json={
        **good, "loads": {"lift": [0.0, 1.0], "slew": [0, 1, 2]}}), 422, "invalid-load-history")
    assert_problem(client.post("/v1/superpositions", json={**good, "reduction": "octahedral_guess"}),
                   422, "unknown-name")
    assert_problem(client.post("/v1/superpositions", json={**good, "top": 5000}), 422,
                   "invalid-parameter", field="top")
    assert_problem(client.post("/v1/superpositions", json={**good, "settings": {"curve": "x"}}),
                   422, "unknown-name")
    assert_problem(client.post("/v1/unit-stresses", data=b"x", content_type="text/plain"), 415,
                   "unsupported-media-type")
    assert_problem(client.post("/v1/unit-stresses", data=b"not parquet",
                               content_type=PARQUET), 400, "malformed-body")


def test_superposition_plane_scan_over_http(client):
    # One load case of unit in-plane shear (torsion), reversed: the normal
    # stress on the 45 deg plane is the shear stress (Mohr's circle), so the
    # critical-plane damage is that of the shear history itself on the
    # normal-stress curve; the shear planes use the shear curve (EN 1993-1-9
    # Fig. 7.2, m = 5).
    t = np.arange(2000)
    tau = 80.0 * np.sin(t / 10.0)
    table = pa.table({"node": ["n1"], "load_case": ["twist"], "sxx": [0.0], "syy": [0.0],
                      "sxy": [1.0]})
    sink = pa.BufferOutputStream()
    pq.write_table(table, sink)
    r = client.post("/v1/unit-stresses?name=shaft", data=sink.getvalue().to_pybytes(),
                    content_type="application/vnd.apache.parquet")
    assert r.status_code == 201, r.get_json()
    uid = r.get_json()["id"]
    res = run_superposition(client, {
        "unit_stresses_id": uid, "loads": {"twist": tau.tolist()}, "reduction": "critical_plane",
        "plane_step_deg": 15, "settings": {"curve": "EN1993-1-9:71"},
        "shear_settings": {"curve": "EN1993-1-9:shear-80"}, "top": 1})
    normal = assess_history(tau, EN71).damage
    shear = assess_history(tau, catalogue_curve("EN1993-1-9:shear-80")).damage
    assert res["damage_max"] == pytest.approx(max(normal, shear), rel=1e-9)
    assert res["top"][0]["plane"]["kind"] == ("normal" if normal > shear else "shear")
