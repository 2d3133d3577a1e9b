"""Assessments over HTTP: results against published values, formats, jobs, errors."""

from __future__ import annotations

import io
import math

import numpy as np
import pyarrow.parquet as pq
import pytest

from service.engine import astm_e1049
from service.engine.damage import AssessmentOptions, assess
from service.engine.sn_catalogue import catalogue_curve
from tests.api.conftest import assert_problem, make_app, wait_for_job
from tests.api.test_histories import PARQUET, parquet_bytes, stored_files

EN71 = {"curve": "EN1993-1-9:71"}


def constant_amplitude(rng, n, mean=0.0):
    return np.tile([mean - rng / 2, mean + rng / 2], n + 1)


def upload(client, columns, rate=None):
    q = "unit=MPa" + (f"&sample_rate_hz={rate}" if rate else "")
    r = client.post(f"/v1/histories?{q}", data=parquet_bytes(columns), content_type=PARQUET)
    assert r.status_code == 201, r.get_json()
    return r.get_json()["id"]


def test_constant_amplitude_damage_matches_en1993(client):
    # Source: EN 1993-1-9 eq. (7.1), category 71: N = 2e6 (71 / 100)^3 at
    # 100 MPa; 2000 full cycles (+ the closing half) use 2000.5 / N.
    hid = upload(client, {"weld": constant_amplitude(100.0, 2000)}, rate=10.0)
    r = client.post("/v1/assessments", json={"history_id": hid, "settings": EN71})
    assert r.status_code == 201, r.get_json()
    a = r.get_json()
    p = a["points"]["weld"]
    n_f = 2e6 * (71 / 100) ** 3
    assert p["damage"] == pytest.approx(2000.5 / n_f, rel=1e-9)
    # Repeated, the recording closes into 2001 full cycles (ASTM E1049-85
    # sec. 5.4.4.1): life in repeats is that of the repetition.
    assert p["damage_per_repeat"] == pytest.approx(2001 / n_f, rel=1e-9)
    assert p["life_repeats"] == pytest.approx(n_f / 2001, rel=1e-9)
    duration_h = 4002 / 10.0 / 3600
    assert p["life_hours"] == pytest.approx(n_f / 2001 * duration_h, rel=1e-9)
    # EN 1993-1-9 Annex A: Delta sigma_E,2 = Delta sigma_C D^(1/3) on m = 3.
    assert p["equivalent_range"] == pytest.approx(71 * p["damage"] ** (1 / 3), rel=1e-9)
    assert (p["equivalent_slope"], p["equivalent_cycles"]) == (3.0, 2e6)
    assert p["curve"]["name"] == "EN1993-1-9:71" and "EN 1993-1-9" in p["curve"]["source"]
    assert p["runout"] is False and p["flags"] == []
    assert a["units"]["stress"] == "MPa"
    codes = {c["code"]: c for c in a["cautions"]}
    assert {"estimate_scatter", "method_choice", "engineer_sign_off"} <= set(codes)
    assert codes["yield_not_checked"]["points"] == ["weld"]  # said, not skipped
    assert len(a["cautions"]) == len({(c["code"], c["text"]) for c in a["cautions"]})
    assert client.get(r.headers["Location"]).get_json()["points"] == a["points"]


def test_http_result_equals_engine(client):
    # The service adds nothing to the numbers: same as calling the engine.
    x = np.random.default_rng(5).standard_normal(20_000) * 60 + 30
    hid = upload(client, {"p": x})
    settings = {"curve": "IIW:FAT80", "mean_stress_method": "goodman",
                "ultimate_strength": 600.0, "allowable_damage": 0.5}
    p = client.post("/v1/assessments", json={"history_id": hid, "settings": settings,
                                             "gate": 5.0}).get_json()["points"]["p"]
    ref = assess(astm_e1049(x, gate=5.0), catalogue_curve("IIW:FAT80"),
                 AssessmentOptions(mean_stress_method="goodman", ultimate_strength=600.0,
                                   allowable_damage=0.5))
    assert p["damage"] == ref.damage and p["reserve_factor"] == ref.reserve_factor
    assert p["equivalent_range"] == ref.equivalent_range
    assert p["cycles_counted"] == ref.cycles_counted


def test_points_override_settings_and_subset(client):
    x = np.random.default_rng(6).standard_normal(5000) * 80
    hid = upload(client, {"a": x, "b": x, "c": x})
    body = {"history_id": hid, "settings": EN71,
            "points": {"a": {}, "b": {"curve": "IIW:FAT80", "allowable_damage": 0.5}}}
    pts = client.post("/v1/assessments", json=body).get_json()["points"]
    assert set(pts) == {"a", "b"}
    assert pts["b"]["curve"]["name"] == "IIW:FAT80"
    assert pts["b"]["options"]["allowable_damage"] == 0.5


def test_inline_samples_in_strain(client):
    # 485.4 microstrain x 206000 MPa = 100 MPa (sigma = E eps, common practice).
    eps = constant_amplitude(100.0 / 206000 * 1e6, 50)
    r = client.post("/v1/assessments", json={
        "samples": {"g": eps.tolist()}, "unit": "microstrain", "youngs_modulus": 206000,
        "settings": EN71})
    p = r.get_json()["points"]["g"]
    assert p["max_range"] == pytest.approx(100.0, rel=1e-12)
    assert p["life_hours"] is None  # no sample rate given


def test_overload_and_runout_are_null_not_inf(client):
    r = client.post("/v1/assessments", json={
        "samples": {"hi": constant_amplitude(300.0, 5, mean=200.0).tolist(),
                    "lo": constant_amplitude(10.0, 5).tolist()},
        "unit": "MPa",
        "settings": {**EN71, "mean_stress_method": "goodman", "ultimate_strength": 340.0}})
    pts = r.get_json()["points"]
    assert pts["hi"]["damage"] is None and "static_overload" in pts["hi"]["flags"]
    assert pts["hi"]["life_repeats"] == 0.0
    assert pts["lo"]["damage"] == 0.0 and pts["lo"]["life_repeats"] is None
    assert pts["lo"]["runout"] is True and "below_fatigue_limit" in pts["lo"]["flags"]


def test_summary_cycles_and_matrix_formats(client):
    x = np.random.default_rng(8).standard_normal(3000) * 70
    hid = upload(client, {"a": x})
    a = client.post("/v1/assessments", json={"history_id": hid, "settings": EN71}).get_json()
    aid = a["id"]
    csv = client.get(f"/v1/assessments/{aid}/summary", headers={"Accept": "text/csv"})
    assert csv.mimetype == "text/csv"
    header, row = csv.get_data(as_text=True).strip().splitlines()
    assert header.startswith("point,damage,") and row.startswith("a,")
    assert float(row.split(",")[1]) == a["points"]["a"]["damage"]
    js = client.get(f"/v1/assessments/{aid}/summary?format=json").get_json()
    assert js["items"][0]["damage"] == a["points"]["a"]["damage"]

    cyc = client.get(a["links"]["points"]["a"]["cycles"]).get_json()
    ref = astm_e1049(x)
    assert cyc["stress_from"] == ref.stress_from.tolist()
    assert cyc["start_index"] == ref.start_index.tolist()
    assert math.fsum(cyc["damage"]) == pytest.approx(a["points"]["a"]["damage"], rel=1e-12)
    pq_bytes = client.get(a["links"]["points"]["a"]["cycles"] + "?format=parquet").data
    table = pq.read_table(io.BytesIO(pq_bytes))
    assert table.num_rows == len(ref)
    cyc_csv = client.get(a["links"]["points"]["a"]["cycles"] + "?format=csv")
    assert len(cyc_csv.get_data(as_text=True).strip().splitlines()) == len(ref) + 1

    m = client.get(f"/v1/assessments/{aid}/points/a/range-mean?range_bins=4&mean_bins=3")
    m = m.get_json()
    assert np.sum(m["cycles"]) + m["outside"] == pytest.approx(ref.total_count)
    assert len(m["cycles"]) == 4 and len(m["cycles"][0]) == 3
    base = f"/v1/assessments/{aid}/points/a/range-mean?range_bins=4&mean_bins=3"
    long = pq.read_table(io.BytesIO(client.get(base + "&format=parquet").data)).to_pandas()
    assert len(long) == 12 and long["cycles"].sum() == pytest.approx(np.sum(m["cycles"]))
    rows = client.get(base + "&format=csv").get_data(as_text=True).strip().splitlines()
    assert rows[0] == "range_lo_mpa,range_hi_mpa,mean_lo_mpa,mean_hi_mpa,cycles"
    assert len(rows) == 13
    assert_problem(client.get(f"/v1/assessments/{aid}/summary",
                              headers={"Accept": "image/png"}), 406, "not-acceptable")
    assert_problem(client.get(f"/v1/assessments/{aid}/summary?format=xml"), 400,
                   "bad-request")
    assert_problem(client.get(f"/v1/assessments/{aid}/points/zz/cycles"), 404, "not-found")


def test_large_request_runs_as_a_job(tmp_path):
    app = make_app(tmp_path, ASYNC_SAMPLES=10_000)
    client = app.test_client()
    x = np.random.default_rng(9).standard_normal(8000) * 60
    hid = upload(client, {"a": x, "b": 2 * x})
    r = client.post("/v1/assessments", json={"history_id": hid, "settings": EN71})
    assert r.status_code == 202, r.get_json()
    job = wait_for_job(client, r.headers["Location"])
    assert job["state"] == "done" and job["progress"]["fraction"] == 1.0, job
    assert job["progress"]["points_done"] == job["progress"]["points_total"] == 2, job
    result = client.get(job["links"]["result"]).get_json()
    # One point of 8000 samples is under the threshold: answered at once,
    # and the job's numbers for that point are the same.
    small = client.post("/v1/assessments", json={
        "samples": {"a": x.tolist()}, "unit": "MPa", "settings": EN71})
    assert small.status_code == 201, small.get_json()
    assert small.get_json()["points"]["a"]["damage"] == result["points"]["a"]["damage"] > 0, (
        small.get_json()["points"]["a"], result["points"]["a"])
    app.extensions["cycleledger.jobs"].shutdown()
    assert not app.config["contract_errors"], app.config["contract_errors"]


def test_prefer_respond_async(client):
    r = client.post("/v1/assessments", headers={"Prefer": "respond-async"}, json={
        "samples": {"a": [0, 100, -100, 100, -100, 0]}, "unit": "MPa", "settings": EN71})
    assert r.status_code == 202
    assert wait_for_job(client, r.headers["Location"])["state"] == "done"


@pytest.mark.parametrize("body,status,slug,members", [
    ({"settings": EN71}, 400, "bad-request", {"field": "history_id"}),
    ({"history_id": "h_nope", "settings": EN71}, 404, "not-found", {"field": "history_id"}),
    ({"samples": {"a": [1, 2, 3]}, "unit": "MPa", "settings": {"curve": "EN1993-1-9:7"}},
     422, "unknown-name", {"field": "curve"}),
    ({"samples": {"a": [1, 2, 3]}, "unit": "MPa",
      "settings": {**EN71, "mean_stress_method": "goodmann"}},
     422, "unknown-name", {"field": "mean_stress_method"}),
    ({"samples": {"a": [1, 2, 3]}, "unit": "MPa",
      "settings": {**EN71, "mean_stress_method": "goodman"}},
     422, "invalid-parameter", {"field": "ultimate_strength"}),
    ({"samples": {"a": [1, 2, 3]}, "unit": "MPa",
      "settings": {**EN71, "ultimate_strength": 300, "yield_strength": 400}},
     422, "invalid-parameter", {}),
    ({"samples": {"a": [1, 2, 3]}, "unit": "MPa", "settings": {**EN71, "speed": 3}},
     422, "invalid-parameter", {"field": "speed"}),
    ({"samples": {"a": [1, 2, 3]}, "unit": "MPa", "settings": EN71, "gate": 1,
      "gate_fraction": 0.1}, 422, "invalid-parameter", {"field": "gate"}),
    ({"samples": {"a": [1, 2, 3]}, "unit": "MPa", "settings": EN71, "residue": "loop"},
     422, "unknown-name", {"field": "residue"}),
    ({"samples": {"a": [1, 2, 3]}, "unit": "MPa", "settings": EN71,
      "points": {"zz": {}}}, 422, "unknown-name", {"field": "points"}),
    ({"samples": {"a": [1, 2, None]}, "unit": "MPa", "settings": EN71},
     422, "invalid-load-history", {"channel": "a", "sample_index": 2}),
    ({"samples": {"a": [1, 2, 3], "b": [1, 2]}, "unit": "MPa", "settings": EN71},
     422, "invalid-upload", {}),
    ({"samples": {"a": [1, 2, 3]}, "settings": EN71}, 422, "invalid-parameter",
     {"field": "unit"}),
    ({"samples": {"a": [1, 2, 3]}, "unit": "MPa", "settings": {"curve": 71}},
     422, None, {}),
    ({"samples": {"a": [1, 2, 3]}, "unit": "MPa", "settings": EN71, "gate": "big"},
     422, "invalid-parameter", {"field": "gate"}),
])
def test_bad_assessment_requests(client, app, body, status, slug, members):
    r = client.post("/v1/assessments", json=body)
    assert r.status_code == status, r.get_json()
    if slug:
        assert_problem(r, status, slug, **members)
    assert client.get("/v1/assessments").get_json()["items"] == []
    assert stored_files(app) == []


def test_wrong_content_type_and_malformed_json(client):
    assert_problem(client.post("/v1/assessments", data="x", content_type="text/plain"),
                   415, "unsupported-media-type")
    assert_problem(client.post("/v1/assessments", data="{", content_type="application/json"),
                   400, "malformed-body")


def test_deleting_a_history_keeps_what_its_assessments_need(client, app):
    x = np.random.default_rng(12).standard_normal(4000) * 70
    hid = upload(client, {"a": x})
    a = client.post("/v1/assessments", json={"history_id": hid, "settings": EN71}).get_json()
    assert client.delete(f"/v1/histories/{hid}").status_code == 204
    assert_problem(client.get(f"/v1/histories/{hid}"), 404, "not-found")
    cyc = client.get(a["links"]["points"]["a"]["cycles"]).get_json()
    assert math.fsum(cyc["damage"]) == pytest.approx(a["points"]["a"]["damage"], rel=1e-12)
    assert len(stored_files(app)) == 1  # the samples, now owned by the assessment


def test_limits_answer_413_and_429_with_retry_after(tmp_path):
    app = make_app(tmp_path, MAX_CHANNELS=2, MAX_SAMPLES_PER_CHANNEL=1000, MAX_QUEUED_JOBS=0)
    c = app.test_client()
    x = [0.0, 50.0, -50.0, 10.0]
    r = c.post("/v1/assessments", json={"samples": {"a": x, "b": x, "c": x}, "unit": "MPa",
                                         "settings": EN71})
    assert_problem(r, 413, "too-large", field="channels", limit=2)
    r = c.post("/v1/assessments", json={"samples": {"a": [0.0, 1.0] * 600}, "unit": "MPa",
                                         "settings": EN71})
    assert_problem(r, 413, "too-large", channel="a", limit=1000)
    r = c.post("/v1/assessments", headers={"Prefer": "respond-async"},
               json={"samples": {"a": x}, "unit": "MPa", "settings": EN71})
    assert_problem(r, 429, "too-many-jobs", limit=0)
    assert r.headers["Retry-After"] == "5"
    assert c.get("/v1/assessments").get_json()["items"] == []
    app.extensions["cycleledger.jobs"].shutdown()
    assert not app.config["contract_errors"], app.config["contract_errors"]


def test_unit_slips_are_refused_with_the_value_meant(client):
    # Issue 15, defect 9: E in GPa, a strength in psi (1 psi = 6.894757e-3
    # MPa, NIST SP 811 appendix B) answer 422 naming the probable value.
    r = client.post("/v1/histories?unit=microstrain&youngs_modulus=206",
                    data=b"g1\n0\n100\n-50\n", content_type="text/csv")
    assert_problem(r, 422, "invalid-parameter", field="youngs_modulus",
                   probable_value=206000.0, probable_unit="GPa")
    hid = upload(client, {"g": constant_amplitude(100.0, 10)})
    r = client.post("/v1/assessments", json={"history_id": hid, "settings": {
        "curve": "EN1993-1-9:71", "yield_strength": 51000}})
    assert_problem(r, 422, "invalid-parameter", field="yield_strength", probable_unit="psi")
    assert r.get_json()["probable_value"] == pytest.approx(51000 * 6.894757e-3)


def test_a_thickness_correction_is_applied_and_said(client):
    # IIW recommendations 2016 sec. 3.5.3 (from memory): a 40 mm cruciform
    # joint as welded multiplies the ranges by (40/25)^0.3; the result says
    # how (t, t_eff, n and the source) in a caution.
    x = np.tile([-60.0, 80.0, -30.0, 110.0], 300)
    r = client.post("/v1/assessments", json={
        "samples": {"g": x.tolist()}, "unit": "MPa",
        "settings": {"curve": "IIW:FAT90", "thickness_mm": 40,
                     "joint": "cruciform_as_welded"}})
    assert r.status_code == 201, r.get_json()
    p = r.get_json()["points"]["g"]
    assert p["options"]["thickness_factor"] == pytest.approx((40 / 25) ** 0.3, rel=1e-12)
    note = next(c for c in p["cautions"] if c["code"] == "thickness_correction")
    assert "t = 40 mm" in note["text"] and "n = 0.3" in note["text"]
    from service.engine.damage import assess_history
    from service.engine.sn_catalogue import catalogue_curve

    ref = assess_history(x, catalogue_curve("IIW:FAT90").scaled((25 / 40) ** 0.3))
    assert p["damage"] == pytest.approx(ref.damage, rel=1e-12)


def test_a_points_matrix_extrapolated_to_longer_usage(client):
    # Kernel-density extrapolation (Dressler et al., SAE 960569): the total
    # count is the factor times the recorded one; on the same bins the
    # extrapolated matrix does at least the damage of plain scaling (it adds
    # cycles beyond the largest recorded) and no more than a tenth more on
    # a Gaussian process (slope 3, tests/engine/test_extrapolation.py).
    from scipy.signal import lfilter

    x = lfilter([1.0], [1, -1.2, 0.5], np.random.default_rng(8).normal(size=50_000)) * 20 + 30
    r = client.post("/v1/assessments", json={
        "samples": {"g": x.tolist()}, "unit": "MPa",
        "settings": {"basquin": {"slope": 3.0, "intercept": 1e12}}})
    aid = r.get_json()["id"]
    e = client.get(f"/v1/assessments/{aid}/points/g/extrapolation?factor=20")
    assert e.status_code == 200, e.get_json()
    doc = e.get_json()
    counted = r.get_json()["points"]["g"]["cycles_counted"]
    assert np.sum(doc["cycles"]) == pytest.approx(20 * counted, rel=1e-6)
    assert np.sum(doc["cycles_scaled"]) == pytest.approx(20 * counted, rel=1e-9)
    # The numbers are the engine's on the point's own cycles and curve.
    from service.engine.extrapolation import extrapolate_matrix
    from service.engine.sn_curve import basquin_range

    e = extrapolate_matrix(astm_e1049(x), 20.0)
    plain = AssessmentOptions(reserve_factor=False, top_cycles=0)
    d_ex = assess(e.table(), basquin_range(3.0, 1e12), plain).damage
    d_sc = assess(e.table("scaled"), basquin_range(3.0, 1e12), plain).damage
    assert doc["damage_extrapolated"] == pytest.approx(d_ex, rel=1e-9)
    assert doc["damage_scaled"] == pytest.approx(d_sc, rel=1e-9)
    assert doc["expected_above_observed"] == pytest.approx(e.expected_above_observed)
    assert doc["extrapolation_effect"] == pytest.approx(d_ex / d_sc, rel=1e-9)
    # Cycles beyond the largest recorded add damage plain scaling misses.
    assert d_ex > d_sc
    assert doc["expected_above_observed"] > 0 and "Dressler" in doc["method"]
    assert "extrapolation_extremes" in {c["code"] for c in doc["cautions"]}
    assert_problem(client.get(f"/v1/assessments/{aid}/points/g/extrapolation?factor=0.5"),
                   422, "invalid-parameter", field="factor")
