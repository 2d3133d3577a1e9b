"""User curves and materials: stored by name, used from a point's settings."""

from __future__ import annotations

import numpy as np
import pytest

from service.engine.damage import AssessmentOptions, assess_history
from tests.api.conftest import assert_problem

CA = np.tile([-100.0, 100.0], 1001)  # 1000.5 cycles of 200 MPa (ASTM E1049-85 counting)


def test_user_curve_from_basquin_constants_gives_the_closed_form(client):
    # Basquin on range, N S^m = C (closed form): m = 4, C = 1e14 -> at
    # 200 MPa N = 1e14 / 200^4 = 62500; 1000.5 cycles use 1000.5 / 62500.
    r = client.post("/v1/user-curves", json={
        "name": "lug-rig", "basquin": {"slope": 4, "intercept": 1e14},
        "source": "our rig tests, 2026"})
    assert r.status_code == 201, r.get_json()
    assert r.get_json()["reference"] == "user:lug-rig"
    assert r.get_json()["curve"]["slopes"] == [4.0]
    a = client.post("/v1/assessments", json={
        "samples": {"lug": CA.tolist()}, "unit": "MPa",
        "settings": {"curve": "user:lug-rig"}}).get_json()
    p = a["points"]["lug"]
    assert p["damage"] == pytest.approx(1000.5 / 62500, rel=1e-12)
    assert p["curve"]["name"] == "user:lug-rig" and p["curve"]["source"] == "our rig tests, 2026"


def test_material_fills_strengths_and_settings_win(client):
    r = client.post("/v1/materials", json={"name": "S355-lot7", "ultimate_strength": 510,
                                           "yield_strength": 355, "source": "tensile test"})
    assert r.status_code == 201
    x = (CA + 50.0).tolist()  # mean 50 MPa
    body = {"samples": {"a": x}, "unit": "MPa",
            "settings": {"curve": "EN1993-1-9:71", "material": "S355-lot7",
                         "mean_stress_method": "goodman"}}
    p = client.post("/v1/assessments", json=body).get_json()["points"]["a"]
    ref = assess_history(np.asarray(x), _en71(),
                         AssessmentOptions(mean_stress_method="goodman", ultimate_strength=510.0,
                                           yield_strength=355.0))
    assert p["damage"] == ref.damage
    assert p["settings_used"]["ultimate_strength"] == 510.0
    body["settings"]["ultimate_strength"] = 600.0  # an explicit value beats the material's
    p = client.post("/v1/assessments", json=body).get_json()["points"]["a"]
    assert p["settings_used"]["ultimate_strength"] == 600.0


def _en71():
    from service.engine.sn_catalogue import catalogue_curve

    return catalogue_curve("EN1993-1-9:71")


def test_results_keep_what_they_used_after_the_entry_is_gone(client):
    client.post("/v1/user-curves", json={"name": "c1", "basquin": {"slope": 3,
                                                                   "intercept": 1e12}})
    a = client.post("/v1/assessments", json={"samples": {"a": CA.tolist()}, "unit": "MPa",
                                             "settings": {"curve": "user:c1"}}).get_json()
    assert client.delete("/v1/user-curves/c1").status_code == 204
    cyc = client.get(a["links"]["points"]["a"]["cycles"]).get_json()
    assert sum(cyc["damage"]) == pytest.approx(a["points"]["a"]["damage"], rel=1e-12)
    r = client.post("/v1/assessments", json={"samples": {"a": CA.tolist()}, "unit": "MPa",
                                             "settings": {"curve": "user:c1"}})
    assert_problem(r, 422, "unknown-name", field="curve")


def test_listing_reading_and_name_rules(client):
    assert client.get("/v1/materials").get_json()["items"] == []
    client.post("/v1/materials", json={"name": "m1", "ultimate_strength": 400})
    assert [m["name"] for m in client.get("/v1/materials").get_json()["items"]] == ["m1"]
    assert client.get("/v1/materials/m1").get_json()["ultimate_strength"] == 400.0
    assert_problem(client.post("/v1/materials", json={"name": "m1", "ultimate_strength": 300}),
                   409, "name-taken", field="name")
    assert_problem(client.post("/v1/materials", json={"name": "bad name!",
                                                      "ultimate_strength": 300}),
                   400, "bad-request", field="name")
    assert_problem(client.get("/v1/materials/zz"), 404, "not-found")
    assert_problem(client.delete("/v1/user-curves/zz"), 404, "not-found")


@pytest.mark.parametrize("path,body,status,slug,field", [
    ("/v1/materials", {"name": "m", "ultimate_strength": -5}, 422, "invalid-parameter",
     "ultimate_strength"),
    ("/v1/materials", {"name": "m", "ultimate_strength": 300, "yield_strength": 400}, 422,
     "invalid-parameter", "yield_strength"),
    ("/v1/materials", {"name": "m", "ultimate_strength": "hard"}, 422, "invalid-parameter",
     "ultimate_strength"),
    ("/v1/materials", {"name": "m"}, 422, "invalid-parameter", "ultimate_strength"),
    ("/v1/materials", {"name": "m", "hardness": 200}, 422, "invalid-parameter", "hardness"),
    ("/v1/user-curves", {"name": "c"}, 422, "invalid-parameter", "curve_points"),
    ("/v1/user-curves", {"name": "c", "curve_points": {"cycles": [1e4, 1e6],
                                                       "stress": [100, 200]}},
     422, "invalid-parameter", None),
    ("/v1/user-curves", {"name": "c", "curve_points": {"cycles": ["a", "b"],
                                                       "stress": [200, 100]}},
     422, "invalid-parameter", "curve_points"),
    ("/v1/user-curves", {"name": "c", "basquin": {"slope": -3, "intercept": 1e12}},
     422, "invalid-parameter", None),
])
def test_bad_entries_are_refused_and_not_stored(client, path, body, status, slug, field):
    r = client.post(path, json=body)
    b = assert_problem(r, status, slug)
    if field:
        assert b["field"] == field, b
    assert client.get(path).get_json()["items"] == []
