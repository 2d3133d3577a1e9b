"""Hot-spot points over HTTP (issue 19): gauges at a weld toe declared in an
assessment, extrapolated to the toe, assessed on a hot-spot curve, and
recounted on read.

Sources: IIW recommendations (Hobbacher 2016) sec. 2.2.3 and DNV-RP-C203
(2016) sec. 4.3 for the extrapolation (checked in tests/engine/test_hot_spot.py
by its defining interpolation); IIW FAT 90 from the catalogue.
"""

from __future__ import annotations

import io

import numpy as np
import pyarrow.parquet as pq
import pytest

from service.engine.damage import assess_history
from service.engine.sn_catalogue import catalogue_curve
from tests.api.conftest import assert_problem

FAT90 = catalogue_curve("IIW:FAT90")
T = 20.0                                   # plate thickness [mm]
POSITIONS = (0.4 * T, 0.9 * T, 1.4 * T)    # quadratic rule's reference points


def toe_load(n=4000, seed=8):
    """A hot-spot stress history at the toe [MPa] and the readings of three
    gauges on the quadratic structural-stress field it scales."""
    h = np.cumsum(np.random.default_rng(seed).normal(0, 9.0, n))
    field = [1.0 - 0.018 * x + 0.0002 * x * x for x in POSITIONS]
    return h, {f"hs{i + 1}": (h * f).tolist() for i, f in enumerate(field)}


def test_a_hot_spot_point_is_extrapolated_assessed_and_recounted(client):
    h, gauges = toe_load()
    body = {"samples": {**gauges}, "unit": "MPa", "sample_rate_hz": 200,
            "settings": {"curve": "IIW:FAT90"},
            "hot_spot": {"toe": {"gauges": ["hs1", "hs2", "hs3"],
                                 "extrapolation": "quadratic", "thickness_mm": T}}}
    r = client.post("/v1/assessments", json=body)
    assert r.status_code == 201, r.get_json()
    a = r.get_json()
    assert list(a["points"]) == ["toe"]          # the gauges are not points of their own
    p = a["points"]["toe"]
    ref = assess_history(h, FAT90, duration_s=20.0)
    # The quadratic field is extrapolated exactly: the toe's own history.
    assert p["damage"] == pytest.approx(ref.damage, rel=1e-9)
    assert p["cycles_counted"] == ref.cycles_counted
    block = p["hot_spot"]
    assert block["gauges"] == ["hs1", "hs2", "hs3"]
    np.testing.assert_allclose(block["weights"], [2.52, -2.24, 0.72], atol=1e-12)
    assert block["positions_mm"] == pytest.approx(list(POSITIONS))
    codes = {c["code"] for c in p["cautions"]}
    assert "hot_spot_extrapolated" in codes and "hot_spot_curve" not in codes
    # Recounts rebuild the hot-spot history from the stored gauges.
    cyc = client.get(a["links"]["points"]["toe"]["cycles"]).get_json()
    assert sum(cyc["damage"]) == pytest.approx(p["damage"], rel=1e-9)
    r = client.get(a["links"]["points"]["toe"]["samples"] + "?format=parquet")
    got = pq.read_table(io.BytesIO(r.data)).column("samples").to_numpy()
    np.testing.assert_allclose(got, h, rtol=1e-9, atol=1e-9)
    # The report page draws it like any point.
    assert client.get(f"/v1/assessments/{a['id']}/report").status_code == 200


def test_hot_spot_on_a_nominal_curve_and_gauges_off_their_points_are_cautioned(client):
    h, gauges = toe_load()
    body = {"samples": gauges, "unit": "MPa", "settings": {"curve": "EN1993-1-9:71"},
            "points": {"hs1": {}},
            "hot_spot": {"toe": {"gauges": ["hs1", "hs3"], "extrapolation": "linear",
                                 "thickness_mm": T, "positions_mm": [8.0, 28.0]}}}
    r = client.post("/v1/assessments", json=body)
    assert r.status_code == 201, r.get_json()
    pts = r.get_json()["points"]
    assert set(pts) == {"hs1", "toe"}
    codes = [c["code"] for c in pts["toe"]["cautions"]]
    assert "hot_spot_curve" in codes and "hot_spot_gauge_position" in codes
    # Linear through 8 and 28 mm at 0: w = (28/20, -8/20).
    assert pts["toe"]["hot_spot"]["weights"] == pytest.approx([1.4, -0.4], abs=1e-12)


@pytest.mark.parametrize("decl, field", [
    ({"gauges": ["hs1", "hs2"], "extrapolation": "quadratic", "thickness_mm": T}, "gauges"),
    ({"gauges": ["hs1", "nope", "hs3"], "extrapolation": "quadratic", "thickness_mm": T},
     "hot-spot gauge"),
    ({"gauges": ["hs1", "hs2", "hs3"], "extrapolation": "quadratic"}, "thickness_mm"),
    ({"gauges": ["hs1", "hs2", "hs3"], "extrapolation": "spline", "thickness_mm": T},
     "extrapolation"),
    ({"gauges": ["hs1", "hs2", "hs3"], "extrapolation": "fixed_distance",
      "positions_mm": [12, 8, 4]}, "positions_mm"),
    ({"gauges": ["hs1", "hs2", "hs3"], "extrapolation": "fixed_distance", "angle": 3},
     "hot_spot"),
])
def test_bad_hot_spot_declarations_are_refused_before_counting(client, decl, field):
    _, gauges = toe_load(200)
    r = client.post("/v1/assessments", json={"samples": gauges, "unit": "MPa",
                                             "settings": {"curve": "IIW:FAT90"},
                                             "hot_spot": {"toe": decl}})
    assert r.status_code == 422 and r.get_json()["field"] == field, r.get_json()


def test_a_hot_spot_point_named_like_a_channel_is_refused(client):
    _, gauges = toe_load(200)
    r = client.post("/v1/assessments", json={
        "samples": gauges, "unit": "MPa", "settings": {"curve": "IIW:FAT90"},
        "hot_spot": {"hs1": {"gauges": ["hs1", "hs2", "hs3"],
                             "extrapolation": "fixed_distance"}}})
    assert_problem(r, 422, "invalid-parameter", field="hot_spot")


# ---------------------------------------------------------------- ledger


def _blocks(client, asset, parts, rate=200.0, **query):
    from tests.api.test_ledger import post

    return [post(client, asset, seq, cols, rate=rate, **query)
            for seq, cols in enumerate(parts, 1)]


def test_a_ledger_hot_spot_point_counts_its_gauges_block_by_block(client):
    # Microstrain gauges at the quadratic rule's points: the ledger's damage
    # after three blocks equals the hot-spot history counted at once (ASTM
    # E1049-85 with the residue carried; damage_if_ended closes it).
    E = 206_000.0
    h, gauges = toe_load(n=6000, seed=21)
    micro = {g: np.asarray(v) / E * 1e6 for g, v in gauges.items()}
    assert client.post("/v1/assets", json={"name": "boom"}).status_code == 201
    r = client.post("/v1/assets/boom/points", json={
        "name": "toe", "unit": "microstrain", "youngs_modulus": E,
        "settings": {"curve": "IIW:FAT90", "hot_spot": {
            "gauges": ["hs1", "hs2", "hs3"], "extrapolation": "quadratic",
            "thickness_mm": T}}})
    assert r.status_code == 201, r.get_json()
    assert r.get_json()["settings_used"]["hot_spot"]["weights"] == pytest.approx(
        [2.52, -2.24, 0.72], abs=1e-12)
    cuts = (0, 2000, 4100, 6000)
    parts = [{g: x[a:b] for g, x in micro.items()} for a, b in zip(cuts, cuts[1:])]
    answers = _blocks(client, "boom", parts)
    assert [a.status_code for a in answers] == [201, 201, 201], answers[-1].get_json()
    point = client.get("/v1/assets/boom/points/toe").get_json()
    ref = assess_history(h, FAT90)
    assert point["damage_if_ended"] == pytest.approx(ref.damage, rel=1e-9)
    assert point["recorded_hours"] == pytest.approx(6000 / 200.0 / 3600.0)
    # Voiding the middle block recounts from the stored gauges.
    block = answers[1].get_json()["block"]["id"]
    assert client.post(f"/v1/assets/boom/blocks/{block}/void").status_code == 200
    point = client.get("/v1/assets/boom/points/toe").get_json()
    joined = np.concatenate([h[:2000], h[4100:]])
    assert point["damage_if_ended"] == pytest.approx(assess_history(joined, FAT90).damage,
                                                     rel=1e-9)


def test_a_block_without_every_gauge_of_a_hot_spot_point_is_refused(client):
    _, gauges = toe_load(n=300)
    client.post("/v1/assets", json={"name": "mast"})
    client.post("/v1/assets/mast/points", json={
        "name": "toe", "unit": "MPa", "settings": {"curve": "IIW:FAT90", "hot_spot": {
            "gauges": ["hs1", "hs2", "hs3"], "extrapolation": "fixed_distance"}}})
    [r] = _blocks(client, "mast", [{"hs1": np.asarray(gauges["hs1"]),
                                    "hs2": np.asarray(gauges["hs2"])}])
    assert r.status_code == 422 and r.get_json()["field"] == "channels", r.get_json()
    assert "hs3" in r.get_json()["detail"]
    # A bad declaration is refused at registration.
    r = client.post("/v1/assets/mast/points", json={
        "name": "toe2", "unit": "MPa", "settings": {"curve": "IIW:FAT90", "hot_spot": {
            "gauges": ["hs1", "hs2"], "extrapolation": "quadratic", "thickness_mm": 10}}})
    assert r.status_code == 422 and r.get_json()["field"] == "gauges"
