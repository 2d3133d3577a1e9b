"""The ledger: running damage per asset and point over successive blocks."""

from __future__ import annotations

import io
import json
import threading
import uuid

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from service.api import create_app
from service.engine import astm_e1049
from service.engine.damage import AssessmentOptions, assess
from service.engine.sn_catalogue import catalogue_curve
from tests.api.conftest import assert_problem, stop_waitress

PARQUET = "application/vnd.apache.parquet"
EN71 = catalogue_curve("EN1993-1-9:71")


def pq_bytes(cols: dict) -> bytes:
    buf = io.BytesIO()
    pq.write_table(pa.table(cols), buf)
    return buf.getvalue()


def setup_asset(client, asset="arm", points=("a",), settings=None, unit="MPa", **extra):
    assert client.post("/v1/assets", json={"name": asset}).status_code == 201
    for p in points:
        r = client.post(f"/v1/assets/{asset}/points", json={
            "name": p, "unit": unit, "settings": settings or {"curve": "EN1993-1-9:71"},
            **extra})
        assert r.status_code == 201, r.get_json()


def post(client, asset, seq, cols, rate=100.0, headers=None, **query):
    q = "&".join([f"seq={seq}", f"sample_rate_hz={rate}"] + [f"{k}={v}" for k, v in query.items()])
    return client.post(f"/v1/assets/{asset}/blocks?{q}", data=pq_bytes(cols),
                       content_type=PARQUET, headers=headers or {})


def whole(x, gate=0.0, opts=None, curve=EN71):
    return assess(astm_e1049(np.asarray(x), gate=gate), curve, opts or AssessmentOptions())


# ---------------------------------------------------------------- exactness

_APP = {}


def _shared_client(tmp_path_factory):
    if "app" not in _APP:
        _APP["app"] = create_app({"DATA_DIR": str(tmp_path_factory.mktemp("ledger")),
                                  "TESTING": True})
    return _APP["app"].test_client()


@pytest.fixture(scope="module")
def shared(tmp_path_factory):
    yield _shared_client(tmp_path_factory)
    _APP.pop("app").extensions["cycleledger.jobs"].shutdown()


@settings(max_examples=40, deadline=None, suppress_health_check=list(HealthCheck))
@given(seed=st.integers(0, 10**6), n=st.integers(50, 3000),
       cuts=st.lists(st.floats(0.0, 1.0), min_size=0, max_size=6),
       gate=st.sampled_from([0.0, 5.0]), method=st.sampled_from(["none", "goodman"]))
def test_running_damage_equals_the_whole_history_counted_at_once(shared, seed, n, cuts, gate,
                                                                 method):
    # ASTM E1049-85 counting carried across blocks (the residue is the state)
    # must give the cycles of the concatenated history; so the closed damage
    # plus the residue closed now equals the damage of counting everything at
    # once, to rounding (Miner sums are added in another order).
    client = shared
    asset = "a" + uuid.uuid4().hex[:10]
    s = {"curve": "EN1993-1-9:71", "gate": gate, "mean_stress_method": method,
         "ultimate_strength": 900.0}
    setup_asset(client, asset, ("g",), s)
    x = np.random.default_rng(seed).standard_normal(n) * 60 + 15
    edges = sorted({int(c * n) for c in cuts} - {0, n})
    parts = [p for p in np.split(x, edges) if p.size >= 2]
    assume_whole = np.concatenate(parts)
    for i, part in enumerate(parts):
        r = post(client, asset, i + 1, {"g": part})
        assert r.status_code == 201, r.get_json()
    p = client.get(f"/v1/assets/{asset}/points/g").get_json()
    ref = whole(assume_whole, gate, AssessmentOptions(mean_stress_method=method,
                                                      ultimate_strength=900.0))
    assert p["damage_if_ended"] == pytest.approx(ref.damage, rel=1e-12, abs=1e-300)
    assert p["cycles_counted"] <= ref.cycles_counted
    assert p["recorded_hours"] == pytest.approx(assume_whole.size / 100.0 / 3600.0)


def test_constant_amplitude_blocks_match_en1993_and_project_life(client):
    # Source: EN 1993-1-9 eq. (7.1): category 71 at 100 MPa, N = 2e6 (71/100)^3.
    # 10 blocks of 2000 samples (alternating -50, 50) at 10 Hz = 200 s each.
    # The whole history has 19999 ranges = 9999.5 cycles (ASTM E1049-85);
    # while it runs, the last two ranges stay open (the last sample is a
    # pending extreme until the next block), so the closed damage is
    # 9998.5 / N and the residue adds the last 1.0 (worked by hand:
    # regression pin on top of the standard's counting).
    setup_asset(client)
    block = np.tile([-50.0, 50.0], 1000)
    for i in range(10):
        r = post(client, "arm", i + 1, {"a": block}, rate=10.0, recorded_at=f"2026-01-01T0{i}:00:00Z")
        assert r.status_code == 201
    p = client.get("/v1/assets/arm/points/a").get_json()
    n_f = 2e6 * (71 / 100) ** 3
    assert p["damage"] == pytest.approx(9998.5 / n_f, rel=1e-12)
    assert p["residue_damage"] == pytest.approx(1.0 / n_f, rel=1e-12)
    assert p["damage_if_ended"] == pytest.approx(whole(np.tile(block, 10)).damage, rel=1e-12)
    hours = 10 * 2000 / 10.0 / 3600.0
    assert p["recorded_hours"] == pytest.approx(hours)
    assert p["damage_rate_per_hour"] == pytest.approx(p["damage"] / hours)
    assert p["projected_hours_remaining"] == pytest.approx((1 - p["damage"]) / (p["damage"] / hours))
    assert p["consumed_percent"] == pytest.approx(100 * p["damage"])
    assert p["last_block_at"] == "2026-01-01T09:00:00Z" and p["last_seq"] == 10
    hist = client.get("/v1/assets/arm/points/a/history").get_json()["items"]
    assert [h["reason"] for h in hist] == ["block"] * 10
    assert hist[-1]["damage"] == p["damage"]


def test_strain_points_convert_with_their_registered_modulus(client):
    # sigma = E eps (uniaxial gauge, common practice): 485.4 microstrain on
    # E = 206000 MPa is 100 MPa.
    setup_asset(client, unit="microstrain", youngs_modulus=206000)
    eps = np.tile([-50.0, 50.0], 500) / 206000 * 1e6
    r = post(client, "arm", 1, {"a": eps})  # no unit given: the point's
    assert r.status_code == 201, r.get_json()
    ref = whole(np.tile([-50.0, 50.0], 500))
    assert r.get_json()["points"]["a"]["damage_if_ended"] == pytest.approx(ref.damage, rel=1e-9)
    assert_problem(post(client, "arm", 2, {"a": eps}, unit="MPa"), 422, "invalid-parameter",
                   field="unit")


# ---------------------------------------------------------------- retries and order


def test_retries_count_once_and_answer_the_same(client):
    setup_asset(client)
    x = np.random.default_rng(1).standard_normal(2000) * 80
    first = post(client, "arm", 1, {"a": x})
    again = post(client, "arm", 1, {"a": x})
    assert again.status_code == 201 and again.get_json() == first.get_json()
    keyed = post(client, "arm", 2, {"a": x}, headers={"Idempotency-Key": "run-2"})
    replay = post(client, "arm", 2, {"a": x}, headers={"Idempotency-Key": "run-2"})
    assert replay.get_json() == keyed.get_json()
    p = client.get("/v1/assets/arm/points/a").get_json()
    assert p["damage_if_ended"] == pytest.approx(whole(np.concatenate([x, x])).damage, rel=1e-12)
    assert len(client.get("/v1/assets/arm/blocks").get_json()["items"]) == 2
    assert_problem(post(client, "arm", 2, {"a": x + 1}), 409, "sequence-conflict")
    assert_problem(post(client, "arm", 3, {"a": x}, headers={"Idempotency-Key": "run-2"}),
                   409, "sequence-conflict")


def test_csv_block_retries_are_known_by_their_whole_content(client):
    # A CSV block's content hash (a retry is the same bytes, taken as the
    # body arrives) covers every byte: the same CSV again answers the same,
    # one that differs only in its last row conflicts.
    setup_asset(client)
    x = np.round(np.random.default_rng(2).standard_normal(40_000) * 80, 3)

    def csv_post(seq, values):
        body = ("a\n" + "\n".join(f"{v:.3f}" for v in values) + "\n").encode()
        return client.post(f"/v1/assets/arm/blocks?seq={seq}&sample_rate_hz=100", data=body,
                           content_type="text/csv")

    first = csv_post(1, x)
    assert first.status_code == 201, first.get_json()
    again = csv_post(1, x)
    assert again.status_code == 201 and again.get_json() == first.get_json()
    last_differs = x.copy()
    last_differs[-1] += 1.0
    assert_problem(csv_post(1, last_differs), 409, "sequence-conflict")
    p = client.get("/v1/assets/arm/points/a").get_json()
    assert p["damage_if_ended"] == pytest.approx(whole(x).damage, rel=1e-12)


def test_a_retry_of_a_block_stored_before_fingerprints_had_a_scheme_replays(client, app):
    # Blocks stored by an earlier version carry the SHA-256 of their bytes:
    # the same block again (a pipeline resending after the service was
    # upgraded) replays; other bytes at that number still conflict.
    import hashlib
    import sqlite3
    from pathlib import Path

    from service.store.sqlite import DB_NAME

    setup_asset(client)
    x = np.random.default_rng(4).standard_normal(3000) * 80
    first = post(client, "arm", 1, {"a": x})
    assert first.status_code == 201
    con = sqlite3.connect(Path(app.config["DATA_DIR"]) / DB_NAME)
    with con:
        assert con.execute("UPDATE blocks SET content_hash = ? WHERE seq = 1", (
            hashlib.sha256(pq_bytes({"a": x})).hexdigest(),)).rowcount == 1
    con.close()
    again = post(client, "arm", 1, {"a": x})
    assert again.status_code == 201 and again.get_json() == first.get_json()
    assert_problem(post(client, "arm", 1, {"a": x + 1}), 409, "sequence-conflict")
    assert len(client.get("/v1/assets/arm/blocks").get_json()["items"]) == 1


def test_gaps_and_late_blocks_need_consent(client):
    setup_asset(client)
    rng = np.random.default_rng(2)
    b1, b2, b3 = (rng.standard_normal(1500) * 70 for _ in range(3))
    assert post(client, "arm", 1, {"a": b1}).status_code == 201
    gap = post(client, "arm", 3, {"a": b3})
    assert_problem(gap, 409, "sequence-conflict", expected=2)
    assert post(client, "arm", 3, {"a": b3}, allow_gap="true").status_code == 201
    assert_problem(post(client, "arm", 2, {"a": b2}), 409, "sequence-conflict")
    r = post(client, "arm", 2, {"a": b2}, allow_late="true")
    assert r.status_code == 201
    # Counted in sequence order: the same as posting 1, 2, 3 in turn.
    p = client.get("/v1/assets/arm/points/a").get_json()
    assert p["damage_if_ended"] == pytest.approx(whole(np.concatenate([b1, b2, b3])).damage,
                                                 rel=1e-12)
    reasons = [h["reason"] for h in
               client.get("/v1/assets/arm/points/a/history").get_json()["items"]]
    assert reasons == ["block", "block", "late_block"]


def test_void_recounts_without_the_block(client):
    setup_asset(client)
    rng = np.random.default_rng(3)
    b1, b2, b3 = (rng.standard_normal(1500) * 70 for _ in range(3))
    ids = [post(client, "arm", i + 1, {"a": b}).get_json()["block"]["id"]
           for i, b in enumerate((b1, b2, b3))]
    r = client.post(f"/v1/assets/arm/blocks/{ids[1]}/void")
    assert r.status_code == 200 and r.get_json()["block"]["voided"] is True
    p = client.get("/v1/assets/arm/points/a").get_json()
    assert p["damage_if_ended"] == pytest.approx(whole(np.concatenate([b1, b3])).damage,
                                                 rel=1e-12)
    assert p["last_seq"] == 3
    assert_problem(client.post(f"/v1/assets/arm/blocks/{ids[1]}/void"), 409,
                   "sequence-conflict")
    assert post(client, "arm", 4, {"a": b2}).status_code == 201  # numbering goes on
    hist = client.get("/v1/assets/arm/points/a/history").get_json()["items"]
    assert [h["reason"] for h in hist] == ["block", "block", "block", "void", "block"]


def test_new_settings_version_recounts_and_is_reported(client):
    setup_asset(client)
    x = np.random.default_rng(4).standard_normal(3000) * 70 + 40
    post(client, "arm", 1, {"a": x})
    r = client.put("/v1/assets/arm/points/a/settings", json={"settings": {
        "curve": "IIW:FAT80", "mean_stress_method": "goodman", "ultimate_strength": 500.0,
        "allowable_damage": 0.5}})
    assert r.status_code == 200, r.get_json()
    p = r.get_json()
    assert p["settings_version"] == 2 and p["allowable_damage"] == 0.5
    ref = whole(x, 0.0, AssessmentOptions(mean_stress_method="goodman", ultimate_strength=500.0),
                catalogue_curve("IIW:FAT80"))
    assert p["damage_if_ended"] == pytest.approx(ref.damage, rel=1e-12)
    assert p["consumed_percent"] == pytest.approx(100 * p["damage"] / 0.5)
    hist = client.get("/v1/assets/arm/points/a/history?format=csv").get_data(as_text=True)
    assert hist.splitlines()[-1].split(",")[1:4:2] == ["settings", "2"]


# ---------------------------------------------------------------- bad input


@pytest.mark.parametrize("case", ["no_asset", "no_point", "nan", "no_rate", "unit", "no_seq",
                                  "gate_fraction"])
def test_bad_blocks_are_refused_and_nothing_is_counted(client, case):
    setup_asset(client, points=("a", "b"))
    good = np.random.default_rng(5).standard_normal(100) * 50
    if case == "no_asset":
        r = post(client, "nope", 1, {"a": good})
        assert_problem(r, 404, "not-found", field="asset")
    elif case == "no_point":
        assert_problem(post(client, "arm", 1, {"a": good, "zz": good}), 422, "unknown-name",
                       field="point")
    elif case == "nan":
        bad = good.copy()
        bad[7] = np.nan
        assert_problem(post(client, "arm", 1, {"a": good, "b": bad}), 422,
                       "invalid-load-history", channel="b", sample_index=7)
    elif case == "no_rate":
        r = client.post("/v1/assets/arm/blocks?seq=1", data=pq_bytes({"a": good}),
                        content_type=PARQUET)
        assert_problem(r, 422, "invalid-parameter", field="sample_rate_hz")
    elif case == "unit":
        assert_problem(post(client, "arm", 1, {"a": good}, unit="ksi"), 422,
                       "invalid-parameter", field="unit")
    elif case == "no_seq":
        r = client.post("/v1/assets/arm/blocks?sample_rate_hz=10", data=pq_bytes({"a": good}),
                        content_type=PARQUET)
        assert_problem(r, 400, "bad-request", field="seq")
    elif case == "gate_fraction":
        r = client.post("/v1/assets/arm/points", json={
            "name": "c", "unit": "MPa", "settings": {"curve": "EN1993-1-9:71",
                                                     "gate_fraction": 0.02}})
        assert_problem(r, 422, "invalid-parameter", field="gate_fraction")
    for p in ("a", "b"):
        s = client.get(f"/v1/assets/arm/points/{p}").get_json()
        assert s["damage"] == 0.0 and s["last_seq"] is None and "no_blocks" in s["flags"]
    assert client.get("/v1/assets/arm/blocks").get_json()["items"] == []


def test_oversized_block_is_413_and_not_counted(tmp_path):
    from tests.api.conftest import make_app

    app = make_app(tmp_path, MAX_UPLOAD_MB=0.01)
    c = app.test_client()
    setup_asset(c)
    r = post(c, "arm", 1, {"a": np.random.default_rng(0).standard_normal(20_000)})
    assert_problem(r, 413)
    assert c.get("/v1/assets/arm/points/a").get_json()["last_seq"] is None
    app.extensions["cycleledger.jobs"].shutdown()


def test_registration_errors(client):
    assert_problem(client.post("/v1/assets/none/points", json={"name": "a", "unit": "MPa"}),
                   404, "not-found")
    setup_asset(client)
    assert_problem(client.post("/v1/assets", json={"name": "arm"}), 409, "name-taken")
    assert_problem(client.post("/v1/assets/arm/points", json={"name": "a", "unit": "MPa"}),
                   422, "invalid-parameter", field="curve")  # settings name a curve
    assert_problem(client.post("/v1/assets/arm/points", json={
        "name": "a", "unit": "MPa", "settings": {"curve": "EN1993-1-9:71"}}), 409, "name-taken")
    assert_problem(client.post("/v1/assets/arm/points", json={"name": "s", "unit": "strain"}),
                   422, "invalid-parameter", field="youngs_modulus")
    assert_problem(client.post("/v1/assets/arm/points", json={"name": "u", "unit": "furlong"}),
                   422, "unknown-name", field="unit")


# ---------------------------------------------------------------- feeds


def test_feed_has_stable_flat_columns_and_filters(client):
    setup_asset(client, "arm", ("a", "b"))
    setup_asset(client, "boom", ("c",))
    x = np.random.default_rng(6).standard_normal(1000) * 80
    post(client, "arm", 1, {"a": x, "b": 2 * x})
    js = client.get("/v1/feeds/points").get_json()
    assert js["columns"] == ["asset", "point", "damage", "consumed_percent",
                             "projected_hours_remaining", "damage_rate_per_hour",
                             "recorded_hours", "residue_damage", "last_block_at",
                             "runout", "settings_version", "flags", "signal_findings"]
    assert [(r["asset"], r["point"]) for r in js["items"]] == [("arm", "a"), ("arm", "b"),
                                                               ("boom", "c")]
    only = client.get("/v1/feeds/points?asset=boom").get_json()["items"]
    assert [r["point"] for r in only] == ["c"] and only[0]["flags"] == ["no_blocks"]
    assert client.get("/v1/feeds/points?since=2999-01-01T00:00:00Z").get_json()["items"] == []
    # Times are RFC 3339 with their offset (issue 17): compared as times, not
    # as text; anything else is refused.
    assert len(client.get("/v1/feeds/points?since=2000-01-01T01:00:00%2B01:00")
               .get_json()["items"]) == 3
    for bad in ("2999-01-01", "yesterday", "2026-12-01T08:00:00"):
        assert_problem(client.get(f"/v1/feeds/points?since={bad}"), 400, "bad-request",
                       field="since")
    csv = client.get("/v1/feeds/points", headers={"Accept": "text/csv"}).get_data(as_text=True)
    lines = csv.strip().splitlines()
    assert lines[0] == ",".join(js["columns"]) and len(lines) == 4


def test_metrics_exposition(client):
    setup_asset(client)
    post(client, "arm", 1, {"a": np.random.default_rng(7).standard_normal(500) * 80})
    text = client.get("/metrics").get_data(as_text=True)
    line = next(l for l in text.splitlines()
                if l.startswith('cycleledger_point_damage{asset="arm",point="a"}'))
    point = client.get("/v1/assets/arm/points/a").get_json()
    assert float(line.split()[-1]) == point["damage"]
    # prometheus_client's exposition (issue 18): latency histograms per route
    # template and status, the build, the process, and per point what a
    # silent rig is alerted on; units in the names.
    assert "# TYPE cycleledger_http_request_duration_seconds histogram" in text
    assert ('cycleledger_http_request_duration_seconds_count{method="POST",'
            'route="/v1/assets/<asset>/blocks",status="201"} 1.0') in text
    assert 'cycleledger_build_info{version="' in text
    assert "process_cpu_seconds_total" in text
    assert 'cycleledger_point_allowable_damage{asset="arm",point="a"} 1.0' in text
    last = next(l for l in text.splitlines()
                if l.startswith('cycleledger_point_last_block_timestamp_seconds{asset="arm"'))
    assert abs(float(last.split()[-1]) - __import__("time").time()) < 600
    rec = next(l for l in text.splitlines()
               if l.startswith('cycleledger_point_recorded_seconds{asset="arm",point="a"}'))
    assert float(rec.split()[-1]) == pytest.approx(point["recorded_hours"] * 3600)
    assert 'cycleledger_jobs{state="done"}' in text


# ---------------------------------------------------------------- concurrency


def test_concurrent_pipelines_lose_nothing_and_count_nothing_twice(tmp_path):
    # Two pipelines post blocks for their own points of one asset at the
    # same time, and two more race on one point with the same block
    # sequence (each retries on refusal): the totals must equal counting
    # each point's concatenated history once.
    from waitress import create_server

    from service.client import Client, ServiceError

    app = create_app({"DATA_DIR": str(tmp_path / "d")})
    server = create_server(app, host="127.0.0.1", port=0, threads=8)
    thread = threading.Thread(target=server.run, daemon=True)
    thread.start()
    url = f"http://127.0.0.1:{server.effective_port}"
    try:
        c = Client(url, timeout_s=60)
        c.post_json("/v1/assets", {"name": "rig"})
        for p in ("p1", "p2", "p3"):
            c.post_json("/v1/assets/rig/points", {"name": p, "unit": "MPa",
                                                  "settings": {"curve": "EN1993-1-9:71"}})
        rng = np.random.default_rng(8)
        data = {p: [rng.standard_normal(3000) * 70 for _ in range(6)] for p in ("p1", "p2", "p3")}
        errors = []

        def pipeline(points, blocks):
            cl = Client(url, timeout_s=60)
            for i in blocks:
                body = pq_bytes({p: data[p][i] for p in points})
                for _ in range(3000):
                    try:
                        cl.request("POST", "/v1/assets/rig/blocks", body=body,
                                   content_type=PARQUET,
                                   params={"seq": i + 1, "sample_rate_hz": 50})
                        break
                    except ServiceError as exc:
                        if exc.status != 409:
                            errors.append(exc)
                            return
                        threading.Event().wait(0.01)  # its predecessor is not in yet
                else:
                    errors.append(f"block {i + 1} of {points} never accepted")
                    return

        workers = [threading.Thread(target=pipeline, args=(["p1"], range(6))),
                   threading.Thread(target=pipeline, args=(["p2"], range(6))),
                   threading.Thread(target=pipeline, args=(["p3"], [0, 2, 4])),
                   threading.Thread(target=pipeline, args=(["p3"], [1, 3, 5]))]
        for w in workers:
            w.start()
        for w in workers:
            w.join(timeout=120)
        assert not errors, errors
        for p in ("p1", "p2", "p3"):
            s = c.get_json(f"/v1/assets/rig/points/{p}")
            assert s["last_seq"] == 6
            ref = whole(np.concatenate(data[p]))
            assert s["damage_if_ended"] == pytest.approx(ref.damage, rel=1e-12), p
        blocks = c.get_json("/v1/assets/rig/blocks", limit=100)["items"]
        assert len(blocks) == 18
    finally:
        stop_waitress(server, thread)
        app.extensions["cycleledger.jobs"].shutdown()


def test_screening_of_blocks_refuses_reports_or_cleans(client):
    # Issue 16: a spike from interference in a block. "refuse" stores
    # nothing (422 naming the point and sample); "clean" counts the block
    # with the spike interpolated away, the same on every recount; "report"
    # counts it as is and says so in the block's answer.
    rng = np.random.default_rng(9)
    x = 60 * np.sin(np.arange(3000) / 30.0) + rng.normal(0, 0.4, 3000)
    spiky = x.copy()
    spiky[1200] += 700.0
    setup_asset(client, "rig", ("r", "c", "p"), None)
    for name, policy in (("r", "refuse"), ("c", "clean"), ("p", "report")):
        r = client.put(f"/v1/assets/rig/points/{name}/settings",
                       json={"settings": {"curve": "EN1993-1-9:71", "screening": policy}})
        assert r.status_code == 200, r.get_json()
    assert_problem(post(client, "rig", 1, {"r": spiky}), 422, "invalid-load-history",
                   channel="r", sample_index=1200)
    assert client.get("/v1/assets/rig/points/r").get_json()["last_seq"] is None
    answer = post(client, "rig", 1, {"c": spiky, "p": spiky}).get_json()
    assert answer["points"]["p"]["screening"]["findings"][0]["kind"] == "spike"
    assert answer["points"]["c"]["screening"]["cleaned"] is True
    from service.engine import screening

    cleaned = screening.clean(spiky, screening.screen(spiky, 100.0))[0]
    c = client.get("/v1/assets/rig/points/c").get_json()
    p = client.get("/v1/assets/rig/points/p").get_json()
    assert c["damage_if_ended"] == pytest.approx(whole(cleaned).damage, rel=1e-9)
    assert p["damage_if_ended"] == pytest.approx(whole(spiky).damage, rel=1e-9)
    assert p["damage_if_ended"] > 3 * c["damage_if_ended"]
    feed = client.get("/v1/feeds/points?asset=rig").get_json()["items"]
    assert {r["point"]: r["signal_findings"] for r in feed} == {"r": [], "c": ["spike"],
                                                               "p": ["spike"]}
    csv = client.get("/v1/feeds/points?asset=rig&format=csv").get_data(as_text=True)
    assert csv.splitlines()[0].endswith(",runout,settings_version,flags,signal_findings")
    # Booleans in CSV are written as in JSON (issue 17); point r has no
    # blocks, so its projection is unknown (runout false), not infinite.
    rows = {ln.split(",")[1]: ln for ln in csv.splitlines()[1:]}
    assert ",false," in rows["r"] and ",True," not in csv


def test_audit_trail_and_request_log(client, caplog):
    # Issue 18: who changed what, readable by an admin; each request one
    # JSON log record with its id, echoed in X-Request-Id.
    import logging

    from service.api.audit import JsonFormatter

    setup_asset(client, "rig", ("a",))
    x = np.random.default_rng(3).standard_normal(300) * 40
    b = post(client, "rig", 1, {"a": x}).get_json()["block"]["id"]
    assert client.post(f"/v1/assets/rig/blocks/{b}/void").status_code == 200
    with caplog.at_level(logging.INFO, logger="cycleledger.requests"):
        r = client.get("/v1/audit", headers={"X-Request-Id": "req-42"})
    assert r.headers["X-Request-Id"] == "req-42"
    actions = [(e["action"], e["target"]) for e in r.get_json()["items"]]
    assert actions[:2] == [("ledger.void_block", b), ("ledger.post_block", b)]
    assert actions[2:] == [("ledger.create_point", "a"), ("ledger.create_asset", "rig")]
    record = next(rec for rec in caplog.records if rec.name == "cycleledger.requests")
    line = json.loads(JsonFormatter().format(record))
    assert line["request_id"] == "req-42" and line["route"] == "/v1/audit"
    assert line["status"] == 200 and line["project"] == "default" and line["ms"] >= 0
