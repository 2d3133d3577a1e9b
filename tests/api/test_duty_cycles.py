"""/v1/duty-cycles: events from stored assessments, histories and ledger spans.

References: the design life built sample by sample and counted at once
(ASTM E1049-85 by this engine's counter, itself held to the `rainflow`
package in tests/engine/test_rainflow.py), Miner's sum on EN 1993-1-9:2005
curve 71; the single-slope Basquin form N = C / S^m for the load-scale
closed form (damage scales by s^m).
"""

from __future__ import annotations

import numpy as np
import pytest

from service.engine.assessment import AssessmentOptions
from service.engine.damage import assess
from service.engine.rainflow import astm_e1049
from service.engine.sn_catalogue import catalogue_curve
from tests.api.conftest import assert_problem
from tests.api.test_ledger import PARQUET, pq_bytes, setup_asset

EN71 = catalogue_curve("EN1993-1-9:71")
RATE = 50.0
RNG = np.random.default_rng(21)
ROAD = {"g1": np.cumsum(RNG.normal(0, 8, 600)) + 30, "g2": RNG.normal(0, 25, 600)}
PAVE = {"g1": np.cumsum(RNG.normal(0, 15, 200)) - 40, "g2": RNG.normal(0, 40, 200)}


def _history(client, cols) -> str:
    r = client.post(f"/v1/histories?unit=MPa&sample_rate_hz={RATE}",
                    data=pq_bytes(cols), content_type=PARQUET)
    assert r.status_code == 201, r.get_json()
    return r.get_json()["id"]


def _design_damage(events, n, point, curve=EN71) -> float:
    one = np.concatenate([np.tile(cols[point], r) for cols, r in events])
    return assess(astm_e1049(np.tile(one, n)), curve,
                  AssessmentOptions(reserve_factor=False, top_cycles=0)).damage


def test_a_target_in_hours_is_the_concatenated_history_counted_at_once(client):
    road, pave = _history(client, ROAD), _history(client, PAVE)
    a = client.post("/v1/assessments", json={"history_id": road,
                                             "settings": {"curve": "EN1993-1-9:71"}})
    aid = a.get_json()["id"]
    # Road 12 s a pass, pave 4 s: 3 road passes (36 s) and 2 pave passes a duty
    # cycle (44 s); 0.0488... h of target = 4 duty cycles.
    hours = 4 * 44.0 / 3600
    r = client.post("/v1/duty-cycles", json={
        "name": "proving ground", "target": {"hours": hours},
        "settings": {"curve": "EN1993-1-9:71"},
        "events": [{"name": "road", "assessment_id": aid, "hours": 36.0 / 3600},
                   {"name": "pave", "history_id": pave, "repeats": 2}]})
    assert r.status_code == 201, r.get_json()
    doc = r.get_json()
    res = doc["result"]
    assert res["duty_cycles"] == pytest.approx(4.0)
    assert res["duty_cycle_hours"] == pytest.approx(44.0 / 3600)
    assert [e["repeats"] for e in res["events"]] == pytest.approx([3.0, 2.0])
    for point in ("g1", "g2"):
        p = res["points"][point]
        want = _design_damage([(ROAD, 3), (PAVE, 2)], 4, point)
        assert p["damage"] == pytest.approx(want, rel=1e-12)
        assert p["passed"] == (p["damage"] <= 1.0)
        # Life: the allowable sum over the settled damage of one duty cycle.
        assert p["life_duty_cycles"] == pytest.approx(1.0 / p["damage_per_duty_cycle"])
        assert p["life_hours"] == pytest.approx(p["life_duty_cycles"] * 44.0 / 3600)
        assert sum(e["damage_share"] for e in p["events"]) == pytest.approx(1.0)
        # The reserve factor brings the design damage to the allowable sum.
        scaled = assess(astm_e1049(np.tile(np.concatenate(
            [np.tile(ROAD[point], 3), np.tile(PAVE[point], 2)]), 4)), EN71,
            AssessmentOptions(load_factor=p["reserve_factor"], reserve_factor=False))
        assert scaled.damage == pytest.approx(1.0, rel=1e-6)
    assert doc["passed"] == all(p["passed"] for p in res["points"].values())
    got = client.get(doc["links"]["self"]).get_json()
    assert got["result"] == res and got["request"]["name"] == "proving ground"
    listed = client.get("/v1/duty-cycles").get_json()["duty_cycles"]
    assert [d["id"] for d in listed] == [doc["id"]] and "result" not in listed[0]


def test_shares_of_a_target_and_what_if(client):
    road, pave = _history(client, ROAD), _history(client, PAVE)
    curve = {"basquin": {"slope": 4.0, "intercept": 1e13}}
    r = client.post("/v1/duty-cycles", json={
        "target": {"hours": 10.0}, "settings": curve,
        "events": [{"name": "road", "history_id": road, "share": 0.75},
                   {"name": "pave", "history_id": pave, "share": 0.25}],
        "variants": [{"name": "10 % more load", "load_scale": 1.1}]})
    assert r.status_code == 201, r.get_json()
    res = r.get_json()["result"]
    # 7.5 h of 12 s road passes, 2.5 h of 4 s pave passes; the whole target is
    # one duty cycle.
    assert [e["repeats"] for e in res["events"]] == pytest.approx([2250.0, 2250.0])
    assert res["duty_cycles"] == 1.0
    for p in res["points"].values():
        # On a single slope m = 4 without a limit, damage scales by s^4.
        v = p["variants"]["10 % more load"]
        assert v["damage"] == pytest.approx(p["damage"] * 1.1 ** 4, rel=1e-9)
        assert v["reserve_factor"] == pytest.approx(p["reserve_factor"] / 1.1, rel=1e-6)
    did = r.get_json()["id"]
    w = client.post(f"/v1/duty-cycles/{did}/what-if", json={"variants": [
        {"name": "steeper", "settings": {"basquin": {"slope": 5.0, "intercept": 1e15}}},
        {"name": "curve 71", "settings": {"curve": "EN1993-1-9:71"}}]})
    assert w.status_code == 200, w.get_json()
    g1 = w.get_json()["points"]["g1"]
    assert g1["baseline"]["damage"] == pytest.approx(res["points"]["g1"]["damage"])
    assert g1["variants"]["curve 71"]["curve"] == "EN1993-1-9:71"
    assert g1["variants"]["steeper"]["damage"] != pytest.approx(g1["baseline"]["damage"])


def test_a_ledger_span_is_an_event(client):
    setup_asset(client, "crane", points=("g1",))
    for seq in (1, 2, 3):
        r = client.post(f"/v1/assets/crane/blocks?seq={seq}&sample_rate_hz={RATE}",
                        data=pq_bytes({"g1": ROAD["g1"][(seq - 1) * 200:seq * 200]}),
                        content_type=PARQUET)
        assert r.status_code == 201, r.get_json()
    r = client.post("/v1/duty-cycles", json={
        "events": [{"name": "lifts", "ledger": {"asset": "crane", "from_seq": 1, "to_seq": 2},
                    "repeats": 5}], "target": {"repeats": 3}})
    assert r.status_code == 201, r.get_json()
    p = r.get_json()["result"]["points"]["g1"]
    one = ROAD["g1"][:400]
    assert p["damage"] == pytest.approx(_design_damage([({"g1": one}, 5)], 3, "g1"),
                                        rel=1e-12)
    assert r.get_json()["result"]["events"][0]["hours_per_pass"] == pytest.approx(8 / 3600)


def test_report_page_and_plots(client):
    road, pave = _history(client, ROAD), _history(client, PAVE)
    r = client.post("/v1/duty-cycles", json={
        "target": {"repeats": 1e5}, "settings": {"curve": "EN1993-1-9:71"},
        "events": [{"name": "road", "history_id": road, "repeats": 1},
                   {"name": "pave", "history_id": pave, "repeats": 1}],
        "variants": [{"name": "curve 90", "settings": {"curve": "EN1993-1-9:90"}}]})
    doc = r.get_json()
    page = client.get(doc["links"]["report"])
    assert page.status_code == 200 and page.mimetype == "text/html"
    text = page.get_data(as_text=True)
    for p, res in doc["result"]["points"].items():
        assert f"data-point='{p}'" in text
        assert ("fail" if not res["passed"] else "pass") in text
    assert "data-variant='curve 90'" in text and "id='plot-events'" in text
    again = client.get(doc["links"]["report"], headers={"If-None-Match": page.headers["ETag"]})
    assert again.status_code == 304
    svg = client.get(f"/v1/duty-cycles/{doc['id']}/plots/events?format=svg")
    assert svg.status_code == 200 and b"<svg" in svg.data and b"road" in svg.data
    assert_problem(client.get(f"/v1/duty-cycles/{doc['id']}/plots/nope"), 404, "not-found")


def test_errors_name_the_event_and_nothing_is_stored(client):
    road = _history(client, ROAD)
    base = {"settings": {"curve": "EN1993-1-9:71"}}

    def post(**body):
        return client.post("/v1/duty-cycles", json={**base, **body})

    assert_problem(post(events=[{"name": "x", "assessment_id": "a_none", "repeats": 1}]),
                   404, "not-found", field="assessment_id")
    assert_problem(post(events=[{"name": "x", "history_id": road, "share": 0.5}],
                        target={"hours": 3}), 422, "invalid-parameter", field="share")
    assert_problem(post(events=[{"name": "x", "history_id": road, "share": 1.0},
                                {"name": "y", "history_id": road, "repeats": 2}],
                        target={"hours": 3}), 422, "invalid-parameter", field="share")
    assert_problem(post(events=[{"name": "x", "history_id": road, "repeats": 1}],
                        target={"distance": 3}), 422, "invalid-parameter", field="target")
    assert_problem(post(events=[{"name": "x", "history_id": road, "repeats": 0}]), 422, "invalid-parameter")
    assert_problem(post(events=[{"name": "x", "history_id": road, "repeats": 1,
                                 "hours": 2}]), 422, "invalid-parameter")
    assert_problem(post(events=[{"name": "x", "history_id": road, "repeats": 1}],
                        points=["nope"]), 422, "unknown-name")
    assert_problem(post(events=[{"name": "x", "history_id": road, "repeats": 1}],
                        variants=[{"name": "v", "settings": {"curve": "EN1993-1-9:7"}}]), 422, "unknown-name")
    assert client.get("/v1/duty-cycles").get_json()["duty_cycles"] == []


def test_delete(client):
    road = _history(client, ROAD)
    doc = client.post("/v1/duty-cycles", json={
        "settings": {"curve": "EN1993-1-9:71"},
        "events": [{"name": "road", "history_id": road, "repeats": 1}]}).get_json()
    assert doc["passed"] is None  # no target: no verdict
    assert client.delete(f"/v1/duty-cycles/{doc['id']}").status_code == 204
    assert_problem(client.get(f"/v1/duty-cycles/{doc['id']}"), 404, "not-found")
    assert_problem(client.delete(f"/v1/duty-cycles/{doc['id']}"), 404, "not-found")


def test_rig_against_field_is_the_damage_ratio_per_pass_and_per_hour(client):
    # Closed form on a Basquin curve N = C / S^4 (no limit): a rig run of 500
    # cycles of 200 MPa against a field span of 2000 cycles of 100 MPa does
    # (500 * 200^4) / (2000 * 100^4) = 4 times the damage; the rig run lasts
    # 20 s, the field span 80 s, so a rig hour stands for 16 field hours.
    rig = _history(client, {"g": np.tile([-100.0, 100.0], 500)})
    field_x = np.tile([-50.0, 50.0], 2000)
    field = client.post("/v1/histories?unit=MPa&sample_rate_hz=50",
                        data=pq_bytes({"g": field_x}), content_type=PARQUET).get_json()["id"]
    r = client.post("/v1/rig-comparisons", json={
        "rig": {"history_id": rig}, "field": {"history_id": field},
        "settings": {"basquin": {"slope": 4.0, "intercept": 1e14}}})
    assert r.status_code == 200, r.get_json()
    p = r.get_json()["points"]["g"]
    assert p["damage_rig"] == pytest.approx(500 * 200.0 ** 4 / 1e14, rel=1e-12)
    assert p["damage_field"] == pytest.approx(2000 * 100.0 ** 4 / 1e14, rel=1e-12)
    assert p["field_spans_per_rig_run"] == pytest.approx(4.0, rel=1e-12)
    assert p["rig_hours"] == pytest.approx(20 / 3600) and p["field_hours"] == pytest.approx(
        80 / 3600)
    assert p["acceleration_factor"] == pytest.approx(16.0, rel=1e-12)
    assert "rig_field_same_curve" in {c["code"] for c in r.get_json()["cautions"]}
    assert_problem(client.post("/v1/rig-comparisons", json={"rig": {"history_id": rig}}),
                   422, "invalid-parameter")


def test_a_distance_target_the_order_caution_and_a_short_event(client):
    # Two events whose own cycles are small (20 MPa) about different means
    # (+100 and -60): the 180 MPa cycle between them carries all the damage on
    # EN 1993-1-9 curve 71, which the order caution says. Distances: 2 km a
    # pass of "up", 0.5 km of "down"; 3 + 2 passes = 7 km a duty cycle, so
    # 70 000 km are 10 000 duty cycles, each doing one 180 MPa cycle:
    # 1e4 / (2e6 (71/180)^3) (eq. (7.1)), but for the first rise and the end.
    up = _history(client, {"g": np.tile([90.0, 110.0], 50)})
    down = _history(client, {"g": np.tile([-70.0, -50.0], 50)})
    r = client.post("/v1/duty-cycles", json={
        "settings": {"curve": "EN1993-1-9:71"}, "target": {"distance": 70_000,
                                                            "distance_unit": "km"},
        "events": [{"name": "up", "history_id": up, "distance": 6.0,
                    "distance_per_repeat": 2.0},
                   {"name": "down", "history_id": down, "repeats": 2,
                    "distance_per_repeat": 0.5}]})
    assert r.status_code == 201, r.get_json()
    res = r.get_json()["result"]
    assert res["duty_cycle_distance"] == pytest.approx(7.0)
    assert res["duty_cycles"] == pytest.approx(10_000.0)
    p = res["points"]["g"]
    one = 1.0 / (2e6 * (71.0 / 180.0) ** 3)
    assert p["damage_per_duty_cycle"] == pytest.approx(one, rel=1e-12)
    assert 9_999 * one < p["damage"] < 10_000 * one
    assert p["life_distance"] == pytest.approx(7.0 / one, rel=1e-12)
    assert p["between_events_share"] == pytest.approx(1.0)
    codes = {c["code"] for c in p["cautions"]}
    assert "duty_cycle_order" in codes
    # Half a pass of an event: its cycles scaled, and said so.
    r = client.post("/v1/duty-cycles", json={
        "settings": {"curve": "EN1993-1-9:71"},
        "events": [{"name": "up", "history_id": up, "repeats": 0.5},
                   {"name": "down", "history_id": down, "repeats": 1}]})
    assert "duty_cycle_short_event" in {c["code"] for c in
                                        r.get_json()["result"]["points"]["g"]["cautions"]}


def test_the_design_life_extrapolated_beside_the_repeated_one(client):
    # A Gaussian event repeated 1000 times never exceeds its own largest
    # range; extrapolated (kernel density after Dressler et al., SAE 960569)
    # it does: the extrapolated design damage is at least the repeated one on
    # the same bins and, on a Gaussian process, within a few per cent of it
    # (tests/engine/test_extrapolation.py: 0 to +6 % against counting the
    # longer history).
    from scipy.signal import lfilter

    x = lfilter([1.0], [1, -1.2, 0.5], np.random.default_rng(4).normal(size=20_000)) * 25
    hid = _history(client, {"g": x + 50.0})
    r = client.post("/v1/duty-cycles", json={
        "settings": {"basquin": {"slope": 3.0, "intercept": 1e12}}, "target": {"repeats": 1000},
        "events": [{"name": "run", "history_id": hid, "repeats": 1}], "extrapolate": True})
    assert r.status_code == 201, r.get_json()
    p = r.get_json()["result"]["points"]["g"]
    ex = p["extrapolated"]
    assert ex["factor"] == 1000 and ex["expected_above_observed"] > 1
    # The engine's extrapolation of the settled duty cycle (one pass of the
    # event as a repeating block) to 1000 of them, on the same curve.
    from service.engine.extrapolation import extrapolate_matrix
    from service.engine.sn_curve import basquin_range

    one = astm_e1049(x + 50.0, residue="repeating_block")
    e = extrapolate_matrix(one, 1000.0)
    plain_opts = AssessmentOptions(reserve_factor=False, top_cycles=0)
    d_ex = assess(e.table(), basquin_range(3.0, 1e12), plain_opts).damage
    d_sc = assess(e.table("scaled"), basquin_range(3.0, 1e12), plain_opts).damage
    assert ex["damage"] == pytest.approx(d_ex, rel=1e-9)
    assert ex["extrapolation_effect"] == pytest.approx(d_ex / d_sc, rel=1e-9)
    assert d_ex > d_sc  # cycles beyond the largest recorded: damage scaling misses
    assert ex["damage_scaled"] == pytest.approx(p["damage"], rel=0.05)  # binning only
    assert "extrapolation_extremes" in {c["code"] for c in p["cautions"]}
    plain = client.post("/v1/duty-cycles", json={
        "settings": {"basquin": {"slope": 3.0, "intercept": 1e12}}, "target": {"repeats": 1000},
        "events": [{"name": "run", "history_id": hid, "repeats": 1}]}).get_json()
    assert "extrapolated" not in plain["result"]["points"]["g"]
