"""/v1/spectra: vibration test profiles assessed from PSDs.

Sources: Bendat's narrow-band closed form (NASA CR-33, 1964) for a PSD
table; |H|^2 G_a for a PSD through a transfer function (linear systems,
common practice); for a history's load case, Welch's PSD of the samples and
rainflow counting (ASTM E1049-85) of the same samples as the time-domain
reference, within Dirlik's usual accuracy (from memory: some 10-15 %).
"""

from __future__ import annotations

import numpy as np
import pytest

from service.engine import spectral as sp
from tests.api.conftest import assert_problem
from tests.api.test_ledger import PARQUET, pq_bytes

F = np.linspace(0.0, 80.0, 321)
WIDE = np.where((F >= 2.0) & (F <= 40.0), 20.0, 0.0)
BASQUIN4 = {"basquin": {"slope": 4.0, "intercept": 1e14}}


def test_a_psd_table_by_every_method(client):
    r = client.post("/v1/spectra", json={
        "name": "shaker x", "settings": BASQUIN4,
        "load_cases": [{"name": "x", "exposure_s": 7200.0,
                        "psd": {"frequency_hz": F.tolist(), "psd": WIDE.tolist()}}]})
    assert r.status_code == 201, r.get_json()
    doc = r.get_json()
    res = doc["result"]
    mom = sp.moments(F, WIDE)
    nb = res["methods"]["narrow_band"]
    assert nb["damage"] == pytest.approx(sp.narrow_band_damage(mom, 7200.0, 4.0, 1e14),
                                         rel=1e-5)
    assert res["governing_method"] == "dirlik" and doc["damage"] == res["methods"]["dirlik"][
        "damage"]
    assert res["methods"]["dirlik"]["damage"] == pytest.approx(
        sp.dirlik_damage(mom, 7200.0, 4.0, 1e14), rel=1e-4)
    # One slope: the reserve factor s with s^4 D = 1; the life in profiles 1/D.
    for m in res["methods"].values():
        assert m["reserve_factor"] == pytest.approx(m["damage"] ** -0.25, rel=1e-6)
        assert m["life_hours"] == pytest.approx(2.0 / m["damage"], rel=1e-9)
    assert res["load_cases"][0]["moments"]["nu0"] == pytest.approx(mom.nu0)
    assert {c["code"] for c in res["cautions"]} >= {"spectral_gaussian",
                                                    "zhao_baker_coefficients"}
    assert client.get(doc["links"]["self"]).get_json()["result"] == res
    assert [s["id"] for s in client.get("/v1/spectra").get_json()["spectra"]] == [doc["id"]]
    page = client.get(doc["links"]["report"])
    assert page.status_code == 200 and "data-method='dirlik'" in page.get_data(as_text=True)
    svg = client.get(f"/v1/spectra/{doc['id']}/plots/ranges?case=x&format=svg")
    assert svg.status_code == 200 and b"<svg" in svg.data
    assert client.get(f"/v1/spectra/{doc['id']}/plots/psd?format=png").status_code == 200
    assert_problem(client.get(f"/v1/spectra/{doc['id']}/plots/ranges"), 400, "bad-request")
    assert client.delete(f"/v1/spectra/{doc['id']}").status_code == 204
    assert_problem(client.get(doc["links"]["self"]), 404, "not-found")


def test_an_acceleration_psd_through_a_transfer_function(client):
    # G_sigma = |H|^2 G_a: with a flat gain of 5 MPa/g, 25 times the PSD.
    ga = WIDE / 25.0
    common = {"settings": BASQUIN4, "methods": ["narrow_band"]}
    a = client.post("/v1/spectra", json={**common, "load_cases": [{
        "exposure_s": 100.0, "acceleration_psd": {"frequency_hz": F.tolist(),
                                                  "psd": ga.tolist()},
        "transfer": {"frequency_hz": [0.0, 100.0], "gain": [5.0, 5.0]}}]})
    b = client.post("/v1/spectra", json={**common, "load_cases": [{
        "exposure_s": 100.0, "psd": {"frequency_hz": F.tolist(), "psd": WIDE.tolist()}}]})
    assert a.status_code == b.status_code == 201, a.get_json()
    assert a.get_json()["damage"] == pytest.approx(b.get_json()["damage"], rel=1e-12)


def test_a_history_against_its_own_rainflow_count(client):
    x = sp.synthesize(F, WIDE, 1200.0, 256.0, seed=5) + 40.0
    r = client.post("/v1/histories?unit=MPa&sample_rate_hz=256", data=pq_bytes({"g": x}),
                    content_type=PARQUET)
    hid = r.get_json()["id"]
    r = client.post("/v1/spectra", json={"settings": BASQUIN4, "load_cases": [
        {"name": "road", "history_id": hid, "exposure_s": 3600.0}]})
    assert r.status_code == 201, r.get_json()
    res = r.get_json()["result"]
    case = res["load_cases"][0]
    assert case["mean_stress_mpa"] == pytest.approx(40.0, abs=0.5)
    # Welch's PSD keeps the variance (Parseval).
    assert case["moments"]["m0"] == pytest.approx(x.var(), rel=0.03)
    td = res["time_domain"]["damage"]
    assert abs(res["methods"]["dirlik"]["relative_to_time_domain"]) < 0.15
    assert res["methods"]["dirlik"]["damage"] == pytest.approx(
        td * (1 + res["methods"]["dirlik"]["relative_to_time_domain"]))
    assert res["methods"]["narrow_band"]["relative_to_time_domain"] > 0.05  # wide band


def test_errors(client):
    def post(**body):
        return client.post("/v1/spectra", json={"settings": BASQUIN4, **body})

    ok = {"frequency_hz": F.tolist(), "psd": WIDE.tolist()}
    assert_problem(post(load_cases=[{"psd": ok}]), 422, "invalid-parameter",
                   field="exposure_s")
    assert_problem(post(load_cases=[{"psd": {"frequency_hz": [1, 2, 2], "psd": [1, 1, 1]},
                                     "exposure_s": 1}]), 422, "invalid-parameter",
                   field="psd", value=2)
    assert_problem(post(load_cases=[{"psd": ok, "exposure_s": 1}], methods=["nope"]), 422,
                   "unknown-name")
    assert_problem(post(load_cases=[{"history_id": "h_none", "exposure_s": 1}]), 404,
                   "not-found", field="history_id")
    assert_problem(post(load_cases=[{"acceleration_psd": ok, "exposure_s": 1}]), 422,
                   "invalid-parameter", field="transfer")


def test_a_method_that_does_not_apply_is_said_so(client):
    f = np.linspace(0.0, 250.0, 2001)
    g = np.exp(-0.5 * ((f - 2.0) / 0.3) ** 2) * 100.0 + 0.002
    case = {"exposure_s": 600.0, "psd": {"frequency_hz": f.tolist(), "psd": g.tolist()}}
    r = client.post("/v1/spectra", json={"settings": BASQUIN4, "load_cases": [case],
                                         "methods": ["zhao_baker", "dirlik"]})
    assert r.status_code == 201, r.get_json()
    res = r.get_json()["result"]
    zb = res["methods"]["zhao_baker"]
    assert zb["applicable"] is False and zb["damage"] is None
    assert res["governing_method"] == "dirlik"  # the first that applies
    assert "spectral_not_applicable" in {c["code"] for c in res["cautions"]}
    page = client.get(r.get_json()["links"]["report"]).get_data(as_text=True)
    assert "not applicable" in page
    only = client.post("/v1/spectra", json={"settings": BASQUIN4, "load_cases": [case],
                                            "methods": ["zhao_baker"]})
    assert_problem(only, 422, "invalid-parameter", field="methods")
