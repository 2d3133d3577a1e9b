"""Access: API keys bound to projects, scopes per route, a request rate per key,
open mode only without keys and only for loopback clients.

The cross-project test walks every route of the app (a parity check fails if
a route is added without a case here): project A's key gets a 2xx, so each
case is a real request, and project B's key gets a 404 (or, for lists and
feeds, an answer with none of A's names or ids in it), and A's data is
unchanged afterwards.
"""

from __future__ import annotations

import re
import time
from pathlib import Path

import numpy as np
import pytest

from service.api.access import PUBLIC, ROUTE_SCOPES, required_scope
from service.store import keys, sqlite
from tests.api.conftest import assert_problem, make_app
from tests.api.test_ledger import pq_bytes
from tests.api.test_superpositions import unit_table

PARQUET = "application/vnd.apache.parquet"
CA = np.tile([-60.0, 60.0], 400)  # constant amplitude, 120 MPa range


def key(app, project, scope, rate=0.0, name=None):
    con = sqlite.connect(app.config["DATA_DIR"])
    try:
        return keys.create(con, project, scope, name, rate_per_s=rate)[1]
    finally:
        con.close()


def auth(secret):
    return {"Authorization": f"Bearer {secret}"}


def routes(app) -> set[tuple[str, str]]:
    out = set()
    for rule in app.url_map.iter_rules():
        if rule.endpoint == "static" or rule.endpoint in PUBLIC:
            continue
        out |= {(m, rule.rule) for m in rule.methods - {"HEAD", "OPTIONS"}}
    return out


@pytest.fixture
def keyed(tmp_path):
    app = make_app(tmp_path, RATE_PER_S=0)
    yield app
    app.extensions["cycleledger.jobs"].shutdown(wait=True)
    assert not app.config["contract_errors"], app.config["contract_errors"]


def populate(c, h) -> dict:
    """One of everything in a project; returns the ids and names made."""
    r = c.post("/v1/histories?unit=MPa&sample_rate_hz=50&name=a-hist",
               data=pq_bytes({"g1": CA}), content_type=PARQUET, headers=h)
    assert r.status_code == 201, r.get_json()
    hid = r.get_json()["id"]
    assert c.post("/v1/user-curves", headers=h, json={
        "name": "a-curve", "basquin": {"slope": 4, "intercept": 1e14}}).status_code == 201
    assert c.post("/v1/materials", headers=h, json={
        "name": "a-steel", "ultimate_strength": 510, "yield_strength": 355}).status_code == 201
    r = c.post("/v1/assessments", headers=h, json={
        "history_id": hid, "settings": {"curve": "user:a-curve", "material": "a-steel",
                                        "mean_stress_method": "goodman"}})
    assert r.status_code == 201, r.get_json()
    aid = r.get_json()["id"]
    r = c.post("/v1/assessments", headers={**h, "Prefer": "respond-async"},
               json={"history_id": hid, "settings": {"curve": "EN1993-1-9:71"}})
    assert r.status_code == 202
    jid = r.get_json()["id"]
    assert c.post("/v1/assets", headers=h, json={"name": "a-asset"}).status_code == 201
    r = c.post("/v1/assets/a-asset/points", headers=h, json={
        "name": "a-point", "unit": "MPa", "settings": {"curve": "user:a-curve"}})
    assert r.status_code == 201, r.get_json()
    r = c.post("/v1/assets/a-asset/blocks?seq=1&sample_rate_hz=50", headers=h,
               data=pq_bytes({"a-point": CA}), content_type=PARQUET)
    assert r.status_code == 201, r.get_json()
    block_id = r.get_json()["block"]["id"]
    from tests.api.test_superpositions import run_superposition

    r = c.post("/v1/unit-stresses?name=a-model", data=unit_table(nodes=3)[0], headers=h,
               content_type=PARQUET)
    assert r.status_code == 201, r.get_json()
    uid = r.get_json()["id"]
    c.environ_base["HTTP_AUTHORIZATION"] = h["Authorization"]  # for the polling helper
    try:
        sup = run_superposition(c, {"unit_stresses_id": uid,
                                    "loads": {"lift": [0.0, 1.0, -1.0], "slew": [0, 2, 0]},
                                    "settings": {"curve": "EN1993-1-9:71"}})
    finally:
        c.environ_base.pop("HTTP_AUTHORIZATION")
    r = c.post("/v1/duty-cycles", headers=h, json={
        "name": "a-duty", "settings": {"curve": "EN1993-1-9:71"},
        "events": [{"name": "a-event", "history_id": hid, "repeats": 2}]})
    assert r.status_code == 201, r.get_json()
    duty = r.get_json()["id"]
    r = c.post("/v1/spectra", headers=h, json={
        "name": "a-spectrum", "settings": {"curve": "EN1993-1-9:71"},
        "load_cases": [{"name": "a-case", "exposure_s": 60,
                        "psd": {"frequency_hz": [1, 10, 20], "psd": [5, 5, 5]}}]})
    assert r.status_code == 201, r.get_json()
    spectrum = r.get_json()["id"]
    r = c.post("/v1/edits", headers=h, json={"history_id": hid, "length": 0.5,
                                             "settings": {"curve": "EN1993-1-9:71"}})
    assert r.status_code == 201, r.get_json()
    return {"history": hid, "assessment": aid, "job": jid, "block": block_id,
            "unit": uid, "superposition": sup["id"], "duty": duty, "edit": r.get_json()["id"],
            "spectrum": spectrum,
            "names": ["a-hist", "a-curve", "a-steel", "a-asset", "a-point", "a-model",
                      "a-duty", "a-spectrum"]}


def cases(a: dict) -> list[tuple]:
    """(method, rule, path, request kwargs, what B gets): 404, "hidden" (2xx
    with none of A's names or ids), or a status for creates that refer to A's
    resources by name. Destructive cases last."""
    hid, aid, jid, bid = a["history"], a["assessment"], a["job"], a["block"]
    uid, sid, did, eid = a["unit"], a["superposition"], a["duty"], a["edit"]
    pid = a["spectrum"]
    block = dict(data=pq_bytes({"a-point": CA}), content_type=PARQUET)
    return [
        ("GET", "/v1/histories", "/v1/histories", {}, "hidden"),
        ("GET", "/v1/histories/<history_id>", f"/v1/histories/{hid}", {}, 404),
        ("POST", "/v1/histories", "/v1/histories?unit=MPa",
         dict(data=pq_bytes({"g2": CA}), content_type=PARQUET), "hidden"),
        ("GET", "/v1/assessments", "/v1/assessments", {}, "hidden"),
        ("POST", "/v1/assessments", "/v1/assessments",
         dict(json={"history_id": hid, "settings": {"curve": "EN1993-1-9:71"}}), 404),
        ("GET", "/v1/assessments/<assessment_id>", f"/v1/assessments/{aid}", {}, 404),
        ("GET", "/v1/assessments/<assessment_id>/summary",
         f"/v1/assessments/{aid}/summary", {}, 404),
        ("GET", "/v1/assessments/<assessment_id>/points/<point>/cycles",
         f"/v1/assessments/{aid}/points/g1/cycles", {}, 404),
        ("GET", "/v1/assessments/<assessment_id>/points/<point>/range-mean",
         f"/v1/assessments/{aid}/points/g1/range-mean", {}, 404),
        ("GET", "/v1/assessments/<assessment_id>/points/<point>/samples",
         f"/v1/assessments/{aid}/points/g1/samples", {}, 404),
        ("GET", "/v1/assessments/<assessment_id>/points/<point>/extrapolation",
         f"/v1/assessments/{aid}/points/g1/extrapolation", {}, 404),
        ("GET", "/v1/assessments/<assessment_id>/report",
         f"/v1/assessments/{aid}/report", {}, 404),
        ("GET", "/v1/assessments/<assessment_id>/plots/<plot>",
         f"/v1/assessments/{aid}/plots/damage", {}, 404),
        ("GET", "/v1/jobs/<job_id>", f"/v1/jobs/{jid}", {}, 404),
        ("GET", "/v1/curves", "/v1/curves", {}, "hidden"),
        ("GET", "/v1/curves/<designation>", "/v1/curves/EN1993-1-9:71", {}, "hidden"),
        ("GET", "/v1/user-curves", "/v1/user-curves", {}, "hidden"),
        ("GET", "/v1/user-curves/<name>", "/v1/user-curves/a-curve", {}, 404),
        # A curve of A's, by name, from B: unknown in B (422 unknown-name).
        ("POST", "/v1/user-curves", "/v1/user-curves",
         dict(json={"name": "b-curve", "basquin": {"slope": 3, "intercept": 1e12}}), "hidden"),
        ("GET", "/v1/materials", "/v1/materials", {}, "hidden"),
        ("GET", "/v1/materials/<name>", "/v1/materials/a-steel", {}, 404),
        ("POST", "/v1/materials", "/v1/materials",
         dict(json={"name": "b-steel", "ultimate_strength": 400}), "hidden"),
        ("GET", "/v1/assets", "/v1/assets", {}, "hidden"),
        ("POST", "/v1/assets", "/v1/assets", dict(json={"name": "b-asset"}), "hidden"),
        ("GET", "/v1/assets/<asset>", "/v1/assets/a-asset", {}, 404),
        ("GET", "/v1/assets/<asset>/report", "/v1/assets/a-asset/report", {}, 404),
        ("POST", "/v1/assets/<asset>/points", "/v1/assets/a-asset/points",
         dict(json={"name": "a-point-2", "unit": "MPa",
                    "settings": {"curve": "user:a-curve"}}), 404),
        ("GET", "/v1/assets/<asset>/points/<point>", "/v1/assets/a-asset/points/a-point",
         {}, 404),
        ("GET", "/v1/assets/<asset>/points/<point>/history",
         "/v1/assets/a-asset/points/a-point/history", {}, 404),
        ("GET", "/v1/assets/<asset>/points/<point>/plot",
         "/v1/assets/a-asset/points/a-point/plot", {}, 404),
        ("PUT", "/v1/assets/<asset>/points/<point>/settings",
         "/v1/assets/a-asset/points/a-point/settings",
         dict(json={"settings": {"curve": "EN1993-1-9:80"}}), 404),
        ("POST", "/v1/assets/<asset>/blocks", "/v1/assets/a-asset/blocks?seq=2&"
         "sample_rate_hz=50", block, 404),
        ("GET", "/v1/assets/<asset>/blocks", "/v1/assets/a-asset/blocks", {}, 404),
        ("GET", "/v1/assets/<asset>/blocks/<block_id>", f"/v1/assets/a-asset/blocks/{bid}",
         {}, 404),
        ("GET", "/v1/feeds/points", "/v1/feeds/points", {}, "hidden"),
        ("GET", "/v1/unit-stresses", "/v1/unit-stresses", {}, "hidden"),
        ("GET", "/v1/unit-stresses/<set_id>", f"/v1/unit-stresses/{uid}", {}, 404),
        ("POST", "/v1/unit-stresses", "/v1/unit-stresses",
         dict(data=unit_table(nodes=2)[0], content_type=PARQUET), "hidden"),
        ("POST", "/v1/superpositions", "/v1/superpositions",
         dict(json={"unit_stresses_id": uid, "loads": {"lift": [0, 1], "slew": [1, 0]},
                    "settings": {"curve": "EN1993-1-9:71"}}), 404),
        ("GET", "/v1/superpositions/<sup_id>", f"/v1/superpositions/{sid}", {}, 404),
        ("GET", "/v1/superpositions/<sup_id>/nodes", f"/v1/superpositions/{sid}/nodes", {},
         404),
        ("GET", "/v1/duty-cycles", "/v1/duty-cycles", {}, "hidden"),
        ("POST", "/v1/duty-cycles", "/v1/duty-cycles",
         dict(json={"events": [{"history_id": hid, "repeats": 1}],
                    "settings": {"curve": "EN1993-1-9:71"}}), 404),
        ("GET", "/v1/duty-cycles/<duty_id>", f"/v1/duty-cycles/{did}", {}, 404),
        ("POST", "/v1/duty-cycles/<duty_id>/what-if", f"/v1/duty-cycles/{did}/what-if",
         dict(json={"variants": [{"name": "v", "load_scale": 2}]}), 404),
        ("GET", "/v1/duty-cycles/<duty_id>/report", f"/v1/duty-cycles/{did}/report", {}, 404),
        ("GET", "/v1/duty-cycles/<duty_id>/plots/<plot>",
         f"/v1/duty-cycles/{did}/plots/events", {}, 404),
        ("POST", "/v1/rig-comparisons", "/v1/rig-comparisons",
         dict(json={"rig": {"history_id": hid}, "field": {"history_id": hid},
                    "settings": {"curve": "EN1993-1-9:71"}}), 404),
        ("GET", "/v1/spectra", "/v1/spectra", {}, "hidden"),
        ("POST", "/v1/spectra", "/v1/spectra",
         dict(json={"settings": {"curve": "EN1993-1-9:71"},
                    "load_cases": [{"history_id": hid, "exposure_s": 60}]}), 404),
        ("GET", "/v1/spectra/<spectrum_id>", f"/v1/spectra/{pid}", {}, 404),
        ("GET", "/v1/spectra/<spectrum_id>/report", f"/v1/spectra/{pid}/report", {}, 404),
        ("GET", "/v1/spectra/<spectrum_id>/plots/<plot>", f"/v1/spectra/{pid}/plots/psd",
         {}, 404),
        ("POST", "/v1/edits", "/v1/edits",
         dict(json={"history_id": hid, "settings": {"curve": "EN1993-1-9:71"}}), 404),
        ("GET", "/v1/edits/<edit_id>", f"/v1/edits/{eid}", {}, 404),
        ("GET", "/v1/edits/<edit_id>/signal", f"/v1/edits/{eid}/signal", {}, 404),
        ("GET", "/v1/edits/<edit_id>/report", f"/v1/edits/{eid}/report", {}, 404),
        ("GET", "/metrics", "/metrics", {}, "hidden"),
        ("GET", "/v1/audit", "/v1/audit", {}, "hidden"),
        ("POST", "/v1/assets/<asset>/blocks/<block_id>/void",
         f"/v1/assets/a-asset/blocks/{bid}/void", {}, 404),
        ("DELETE", "/v1/user-curves/<name>", "/v1/user-curves/a-curve", {}, 404),
        ("DELETE", "/v1/materials/<name>", "/v1/materials/a-steel", {}, 404),
        ("DELETE", "/v1/histories/<history_id>", f"/v1/histories/{hid}", {}, 404),
        ("DELETE", "/v1/unit-stresses/<set_id>", f"/v1/unit-stresses/{uid}", {}, 404),
        ("DELETE", "/v1/duty-cycles/<duty_id>", f"/v1/duty-cycles/{did}", {}, 404),
        ("DELETE", "/v1/edits/<edit_id>", f"/v1/edits/{eid}", {}, 404),
        ("DELETE", "/v1/spectra/<spectrum_id>", f"/v1/spectra/{pid}", {}, 404),
    ]


def test_no_key_reads_or_touches_another_projects_data(keyed):
    c = keyed.test_client()
    ka, kb = key(keyed, "rig-a", "admin"), key(keyed, "rig-b", "admin")
    a = populate(c, auth(ka))
    table = cases(a)
    assert {(m, rule) for m, rule, *_ in table} == routes(keyed), "a route has no case"
    secrets_of_a = a["names"] + [a["history"], a["assessment"], a["job"], a["block"]]
    for method, _rule, path, kw, b_gets in table:
        rb = c.open(path, method=method, headers=auth(kb), **kw)
        body = rb.get_data(as_text=True)
        if b_gets == "hidden":
            assert 200 <= rb.status_code < 300, (method, path, rb.status_code, body[:300])
            leaked = [s for s in secrets_of_a if s in body]
            assert not leaked, (method, path, leaked)
        else:
            assert_problem(rb, b_gets, "not-found")
            sent = path + repr(kw.get("json", ""))  # an echo of what B sent is no leak
            assert not [s for s in secrets_of_a if s in rb.get_json()["detail"]
                        and s not in sent], (method, path)
        ra = c.open(path, method=method, headers=auth(ka), **kw)
        assert 200 <= ra.status_code < 300, (method, path, ra.status_code,
                                             ra.get_data(as_text=True)[:300])
    # B's creates landed in B, and A then made "b-asset" too without a 409:
    # names are per project.
    names_b = [x["name"] for x in c.get("/v1/assets", headers=auth(kb)).get_json()["items"]]
    names_a = [x["name"] for x in c.get("/v1/assets", headers=auth(ka)).get_json()["items"]]
    assert names_b == ["b-asset"] and names_a == ["a-asset", "b-asset"]
    # A's history and its block's totals survived B's attempts (deleted by A last).
    pt = c.get("/v1/assets/a-asset/points/a-point", headers=auth(ka)).get_json()
    assert pt["settings_version"] == 2 and pt["last_seq"] == 2


def test_references_by_name_resolve_in_the_keys_own_project(keyed):
    # Two projects may use the same names; "user:<name>" and a material name
    # resolve to the asking project's entry, never the other's.
    c = keyed.test_client()
    ka, kb = key(keyed, "rig-a", "admin"), key(keyed, "rig-b", "admin")
    for k, intercept in ((ka, 1e14), (kb, 2e14)):
        assert c.post("/v1/user-curves", headers=auth(k), json={
            "name": "lug", "basquin": {"slope": 4, "intercept": intercept}}).status_code == 201
        assert c.post("/v1/assets", headers=auth(k), json={"name": "arm"}).status_code == 201
    body = {"samples": {"g": CA.tolist()}, "unit": "MPa", "settings": {"curve": "user:lug"}}
    da = c.post("/v1/assessments", headers=auth(ka), json=body).get_json()["points"]["g"]
    db_ = c.post("/v1/assessments", headers=auth(kb), json=body).get_json()["points"]["g"]
    # Basquin N = C / S^m (closed form): twice C, half the damage.
    assert da["damage"] == pytest.approx(2 * db_["damage"], rel=1e-12)
    kc = key(keyed, "rig-c", "admin")
    assert_problem(c.post("/v1/assessments", headers=auth(kc), json=body), 422, "unknown-name")
    # The same asset name in a third project is free.
    assert c.post("/v1/assets", headers=auth(kc), json={"name": "arm"}).status_code == 201


def test_every_route_needs_a_key_once_keys_exist(keyed):
    c = keyed.test_client()
    key(keyed, "rig-a", "read")
    for method, rule in sorted(routes(keyed)):
        path = re.sub(r"<(?:[a-z]+:)?([a-z_]+)>", "x", rule)
        r = c.open(path, method=method)
        assert_problem(r, 401, "unauthorized")
        assert r.headers["WWW-Authenticate"].startswith("Bearer")
        assert_problem(c.open(path, method=method, headers=auth("clk_k_0_not-a-key")), 401,
                       "unauthorized")
    for path in ("/v1/health", "/v1/version", "/v1/methods", "/openapi.yaml", "/v1/ready"):
        assert c.get(path).status_code == 200


@pytest.mark.parametrize("scope", ["read", "write"])
def test_a_key_below_the_routes_scope_gets_403(keyed, scope):
    c = keyed.test_client()
    k = key(keyed, "rig-a", scope)
    above = keys.SCOPES[keys.SCOPES.index(scope) + 1:]
    checked = 0
    for method, rule in sorted(routes(keyed)):
        endpoint = next(r.endpoint for r in keyed.url_map.iter_rules() if r.rule == rule
                        and method in r.methods)
        if required_scope(endpoint, method) not in above:
            continue
        path = re.sub(r"<(?:[a-z]+:)?([a-z_]+)>", "x", rule)
        r = c.open(path, method=method, headers=auth(k))
        assert_problem(r, 403, "forbidden", scope=required_scope(endpoint, method))
        checked += 1
    assert checked >= (12 if scope == "read" else 9)
    # ... and what the scope allows passes the gate (then 404s on the made-up id).
    assert c.get("/v1/histories/x", headers=auth(k)).status_code == 404


def test_every_route_is_classified(tmp_path):
    # A new route must be placed in a scope on purpose: POST/PUT/DELETE
    # routes are in ROUTE_SCOPES (an unlisted one falls back to admin).
    app = make_app(tmp_path, WARM_KERNELS=False)
    try:
        for rule in app.url_map.iter_rules():
            for m in rule.methods - {"HEAD", "OPTIONS"}:
                if rule.endpoint in PUBLIC or rule.endpoint == "static":
                    continue
                if m != "GET":
                    assert rule.endpoint in ROUTE_SCOPES, (m, rule.rule)
    finally:
        app.extensions["cycleledger.jobs"].shutdown()


def test_revoked_key_is_refused_at_once(keyed):
    c = keyed.test_client()
    con = sqlite.connect(keyed.config["DATA_DIR"])
    row, secret = keys.create(con, "rig-a", "read")
    keys.create(con, "rig-a", "read")  # another key stays active: no open mode
    assert c.get("/v1/assets", headers=auth(secret)).status_code == 200
    assert keys.revoke(con, row["id"]) and not keys.revoke(con, row["id"])
    con.close()
    assert_problem(c.get("/v1/assets", headers=auth(secret)), 401, "unauthorized")


def test_only_the_hash_of_a_secret_is_stored(keyed):
    secret = key(keyed, "rig-a", "admin")
    raw = b"".join(p.read_bytes() for p in Path(keyed.config["DATA_DIR"]).glob("cycleledger*"))
    assert len(raw) > 0 and secret.encode() not in raw
    con = sqlite.connect(keyed.config["DATA_DIR"])
    stored = [r[0] for r in con.execute("SELECT secret_hash FROM api_keys")]
    con.close()
    assert stored == [keys.digest(secret)]


def test_open_mode_is_for_loopback_clients_only(app):
    c = app.test_client()
    assert c.get("/v1/assets").status_code == 200  # no keys, loopback: open, project default
    r = c.get("/v1/assets", environ_base={"REMOTE_ADDR": "192.0.2.7"})
    assert_problem(r, 401, "unauthorized")
    r = c.get("/v1/assets", environ_base={"REMOTE_ADDR": "::1"})
    assert r.status_code == 200
    # A proxy on this machine must not make remote clients look local.
    for h in ("Forwarded", "X-Forwarded-For", "X-Real-IP"):
        assert_problem(c.get("/v1/assets", headers={h: "203.0.113.9"}), 401, "unauthorized")
    # The first key ends open mode at the next request; data made open is
    # project "default"'s.
    assert c.post("/v1/assets", json={"name": "early"}).status_code == 201
    k = key(app, "default", "read")
    assert_problem(c.get("/v1/assets"), 401, "unauthorized")
    assert [a["name"] for a in c.get("/v1/assets", headers=auth(k)).get_json()["items"]] == [
        "early"]


def test_open_access_off_needs_a_key_even_on_loopback(tmp_path):
    app = make_app(tmp_path, OPEN_ACCESS=False, WARM_KERNELS=False)
    try:
        assert_problem(app.test_client().get("/v1/assets"), 401, "unauthorized")
    finally:
        app.extensions["cycleledger.jobs"].shutdown()


def test_request_rate_per_key_answers_429_with_retry_after(tmp_path):
    app = make_app(tmp_path, RATE_PER_S=2, RATE_BURST=3, WARM_KERNELS=False)
    try:
        c = app.test_client()
        slow, other = key(app, "rig-a", "read", rate=None), key(app, "rig-a", "read", rate=None)
        fast = key(app, "rig-a", "read", rate=0)  # 0: this key has no limit
        codes = [c.get("/v1/assets", headers=auth(slow)).status_code for _ in range(3)]
        assert codes == [200, 200, 200]  # the burst
        r = c.get("/v1/assets", headers=auth(slow))
        assert_problem(r, 429, "too-many-requests")
        assert int(r.headers["Retry-After"]) >= 1
        # Buckets are per key: another key of the same project is not held back.
        assert c.get("/v1/assets", headers=auth(other)).status_code == 200
        assert all(c.get("/v1/assets", headers=auth(fast)).status_code == 200
                   for _ in range(20))
        time.sleep(0.6)  # 2 a second: a token is back after 0.5 s
        assert c.get("/v1/assets", headers=auth(slow)).status_code == 200
        # Public routes are not counted.
        assert all(c.get("/v1/health").status_code == 200 for _ in range(10))
    finally:
        app.extensions["cycleledger.jobs"].shutdown()


def test_rate_limiter_refills_at_its_rate():
    from service.api.access import RateLimiter

    lim = RateLimiter(rate=10.0, burst=5.0)
    assert [lim.take("k") for _ in range(5)] == [0.0] * 5
    wait = lim.take("k")
    assert 0.0 < wait <= 0.1 + 1e-9  # one token at 10 a second
    assert lim.take("k", rate=0) == 0.0  # 0 = no limit
    assert lim.take("j", rate=1.0) == 0.0  # burst scales with the key's rate: 0.5 -> 1
    assert lim.take("j", rate=1.0) > 0.0
