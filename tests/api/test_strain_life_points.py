"""Strain-life points over HTTP (issue 20): a notch assessed by the local
strain approach in an assessment, its loops recounted on read, its plot and
page drawn; the engine's numbers (tests/engine/test_strain_life.py checks
them against the closed forms) reach the result unchanged."""

from __future__ import annotations

import numpy as np
import pytest

from service.engine import strain_life as sl
from tests.api.conftest import assert_problem

MATERIAL = {"youngs_modulus": 206000.0, "cyclic_strength_coefficient": 1150.0,
            "cyclic_hardening_exponent": 0.16, "fatigue_strength_coefficient": 1050.0,
            "fatigue_strength_exponent": -0.085, "fatigue_ductility_coefficient": 0.45,
            "fatigue_ductility_exponent": -0.6}


def nominal(n=3000, seed=9):
    return 60 + 140 * np.sin(np.arange(n) / 11.0) * (1 + 0.3 * np.sin(np.arange(n) / 700.0)) \
        + np.random.default_rng(seed).normal(0, 2.0, n)


def test_a_notch_point_by_strain_life(client):
    x = nominal()
    r = client.post("/v1/assessments", json={
        "samples": {"fillet": x.tolist(), "plain": x.tolist()}, "unit": "MPa",
        "sample_rate_hz": 100, "settings": {"curve": "EN1993-1-9:71"},
        "points": {"plain": {}, "fillet": {"method": "strain_life", "strain_life": {
            "material": MATERIAL, "input": "nominal", "kt": 2.8, "notch_rule": "glinka",
            "mean_stress_method": "smith_watson_topper"}}}})
    assert r.status_code == 201, r.get_json()
    a = r.get_json()
    p = a["points"]["fillet"]
    ref = sl.assess_strain_life(x, sl.StrainLifeMaterial(**MATERIAL), kt=2.8, rule="glinka",
                                mean_stress_method="smith_watson_topper", duration_s=30.0)
    assert p["damage"] == pytest.approx(ref.damage, rel=1e-12)
    assert p["reserve_factor"] == pytest.approx(ref.reserve_factor, rel=1e-9)
    assert p["life_hours"] == pytest.approx(ref.life_hours, rel=1e-12)
    assert p["strain_life"]["notch_rule"] == "glinka" and p["curve"]["name"] == "strain-life"
    # The settings come back under the names they were sent with (one name
    # per concept, issue 17), in the options and the strain_life block alike.
    sent = {"input": "nominal", "kt": 2.8, "notch_rule": "glinka",
            "mean_stress_method": "smith_watson_topper"}
    assert {k: p["options"][k] for k in sent} == sent
    assert {k: p["strain_life"][k] for k in sent} == sent
    assert not {"input_kind", "rule"} & (set(p["options"]) | set(p["strain_life"]))
    # max_range is the largest counted range of the history as sent (as in
    # stress-life), not a step between samples.
    ranges = np.abs(x[ref.loops["start_index"]] - x[ref.loops["end_index"]])
    assert p["max_range"] == pytest.approx(ranges.max(), rel=1e-12)
    assert p["max_range"] > 200.0
    worst = ref.top_loops(1)[0]
    assert p["top_cycles"][0]["strain_amplitude"] == pytest.approx(worst["strain_amplitude"],
                                                                  rel=1e-12)
    assert p["strain_life"]["max_strain_amplitude"] == pytest.approx(ref.max_strain_amplitude,
                                                                    rel=1e-12)
    assert "strain_life_method" in {c["code"] for c in p["cautions"]}
    # The stress-life point beside it is untouched by the strain-life one.
    assert a["points"]["plain"]["curve"]["name"] == "EN1993-1-9:71"
    # Recounts give the loops' damage; the plot and the page draw.
    cyc = client.get(a["links"]["points"]["fillet"]["cycles"]).get_json()
    assert sum(cyc["damage"]) == pytest.approx(p["damage"], rel=1e-9)
    svg = client.get(f"/v1/assessments/{a['id']}/plots/sn?point=fillet")
    assert svg.status_code == 200 and b"Strain-life curve" in svg.data
    page = client.get(f"/v1/assessments/{a['id']}/report").get_data(as_text=True)
    assert "local strain approach" in page


def test_an_estimated_material_is_labelled_and_bad_settings_refused(client):
    x = nominal(800)
    r = client.post("/v1/assessments", json={
        "samples": {"g": x.tolist()}, "unit": "MPa", "settings": {
            "method": "strain_life", "strain_life": {
                "estimate": {"method": "uniform_material_law", "ultimate_strength": 700},
                "kt": 2.0}}})
    assert r.status_code == 201, r.get_json()
    codes = {c["code"] for c in r.get_json()["points"]["g"]["cautions"]}
    assert "strain_life_estimate" in codes
    for settings, field in [
        ({"method": "strain_life", "strain_life": {"material": MATERIAL}, "curve": "IIW:FAT90"},
         "curve"),
        ({"method": "strain_life", "strain_life": {"material": MATERIAL, "kt": 0.5}}, "kt"),
        ({"method": "strain_life", "strain_life": {"material": MATERIAL,
                                                  "input": "local_elastic", "kt": 2}}, "kt"),
        ({"method": "strain_life", "strain_life": {}}, "strain_life"),
        ({"method": "energy"}, "method"),
    ]:
        r = client.post("/v1/assessments", json={"samples": {"g": x.tolist()}, "unit": "MPa",
                                                 "settings": settings})
        assert r.status_code == 422 and r.get_json()["field"] == field, (settings, r.get_json())
    # A hot-spot point cannot be a strain-life point.
    client.post("/v1/assets", json={"name": "lug"})
    r = client.post("/v1/assets/lug/points", json={
        "name": "a", "unit": "MPa", "settings": {
            "method": "strain_life", "strain_life": {"material": MATERIAL},
            "hot_spot": {"gauges": ["a", "b", "c"], "extrapolation": "fixed_distance"}}})
    assert_problem(r, 422, "invalid-parameter", field="method")


def test_a_ledger_strain_life_point_equals_the_whole_history(client):
    # Issue 20: block by block, the material memory and the residue's local
    # states carried in the point's state; after the last block the damage
    # with the residue closed (damage_if_ended) is that of the whole history
    # assessed at once, and a void recounts from the stored blocks.
    from tests.api.test_ledger import post

    x = nominal(5000, seed=4)
    client.post("/v1/assets", json={"name": "lug"})
    r = client.post("/v1/assets/lug/points", json={
        "name": "bore", "unit": "MPa", "settings": {
            "method": "strain_life", "gate": 2.0, "strain_life": {
                "material": MATERIAL, "kt": 2.6, "mean_stress_method": "morrow"}}})
    assert r.status_code == 201, r.get_json()
    ids = [post(client, "lug", seq, {"bore": part}, rate=100.0).get_json()["block"]["id"]
           for seq, part in enumerate(np.split(x, [1700, 1702, 3900]), 1)]
    point = client.get("/v1/assets/lug/points/bore").get_json()
    mat = sl.StrainLifeMaterial(**MATERIAL)
    whole = sl.assess_strain_life(x, mat, kt=2.6, mean_stress_method="morrow", gate=2.0,
                                  reserve_factor=False)
    assert point["damage_if_ended"] == pytest.approx(whole.damage, rel=1e-12)
    assert point["cycles_counted"] < whole.cycles_counted   # the residue still open
    assert client.post(f"/v1/assets/lug/blocks/{ids[2]}/void").status_code == 200
    point = client.get("/v1/assets/lug/points/bore").get_json()
    kept = sl.assess_strain_life(np.concatenate([x[:1702], x[3900:]]), mat, kt=2.6,
                                 mean_stress_method="morrow", gate=2.0, reserve_factor=False)
    assert point["damage_if_ended"] == pytest.approx(kept.damage, rel=1e-12)


def test_walker_needs_the_materials_exponent(client):
    # Walker's form with gamma from the material: the result equals the
    # engine's (tested by hand in tests/engine/test_strain_life.py); without
    # walker_exponent the point is refused before anything is counted.
    x = nominal()
    settings = {"method": "strain_life", "strain_life": {
        "material": {**MATERIAL, "walker_exponent": 0.55}, "kt": 2.5,
        "mean_stress_method": "walker"}}
    r = client.post("/v1/assessments", json={
        "samples": {"fillet": x.tolist()}, "unit": "MPa", "sample_rate_hz": 100,
        "points": {"fillet": settings}})
    assert r.status_code == 201, r.get_json()
    ref = sl.assess_strain_life(x, sl.StrainLifeMaterial(**MATERIAL, walker_exponent=0.55),
                                kt=2.5, mean_stress_method="walker", duration_s=30.0)
    assert r.get_json()["points"]["fillet"]["damage"] == pytest.approx(ref.damage, rel=1e-12)
    bare = {"method": "strain_life", "strain_life": {
        "material": MATERIAL, "kt": 2.5, "mean_stress_method": "walker"}}
    r = client.post("/v1/assessments", json={
        "samples": {"fillet": x.tolist()}, "unit": "MPa", "points": {"fillet": bare}})
    assert_problem(r, 422, "invalid-parameter", field="walker_exponent")


def test_a_reserve_set_by_static_overload_is_said_so(client):
    # A high tensile mean with a small amplitude: scaling up, Morrow's mean
    # reaches sigma_f' (no life left) long before fatigue uses the
    # allowable sum, so the factor is that onset and the result says so.
    x = 300 + 40 * np.sin(np.arange(400) / 5.0)
    r = client.post("/v1/assessments", json={
        "samples": {"bore": x.tolist()}, "unit": "MPa", "sample_rate_hz": 100,
        "settings": {"method": "strain_life", "strain_life": {
            "material": MATERIAL, "kt": 1.5, "mean_stress_method": "morrow"}}})
    assert r.status_code == 201, r.get_json()
    p = r.get_json()["points"]["bore"]
    ref = sl.assess_strain_life(x, sl.StrainLifeMaterial(**MATERIAL), kt=1.5,
                                mean_stress_method="morrow")
    assert ref.reserve_limited_by == "static_strength"
    assert p["reserve_factor"] == pytest.approx(ref.reserve_factor, rel=1e-9)
    assert p["reserve_limited_by"] == "static_strength"
    assert "reserve_limited_by_static_strength" in {c["code"] for c in p["cautions"]}


def test_short_strain_lives_are_cautioned_in_the_result(client):
    # A gauge at the notch root reading +-17 % strain: lives of a few
    # reversals, outside the strain-controlled test span (common practice).
    eps = np.tile([-0.17, 0.17], 10)
    r = client.post("/v1/assessments", json={
        "samples": {"root": (eps * MATERIAL["youngs_modulus"]).tolist()}, "unit": "MPa",
        "sample_rate_hz": 10, "settings": {"method": "strain_life", "strain_life": {
            "material": MATERIAL, "input": "local_strain", "mean_stress_method": "none"}}})
    assert r.status_code == 201, r.get_json()
    cautions = {c["code"]: c for c in r.get_json()["points"]["root"]["cautions"]}
    assert cautions["strain_life_short_lives"]["severity"] == "critical"
