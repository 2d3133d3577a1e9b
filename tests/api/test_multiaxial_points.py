"""Multiaxial points over HTTP: rosettes and stress components declared in an
assessment, reduced, assessed, and recounted on read."""

from __future__ import annotations

import math

import numpy as np
import pytest

from service.engine.damage import assess_history
from service.engine.multiaxial import (assess_multiaxial, plane_stress_from_strains,
                                       rosette_strains)
from service.engine.sn_catalogue import catalogue_curve
from tests.api.conftest import assert_problem
from tests.engine.test_multiaxial import gauge_readings

EN71 = catalogue_curve("EN1993-1-9:71")
E, NU = 206_000.0, 0.3


def rosette_history(n=3000, seed=4):
    """Microstrain readings of a rectangular rosette on a proportional plane
    stress state S * lambda(t) (S = 120, 40, 35 MPa)."""
    lam = np.cumsum(np.random.default_rng(seed).normal(0, 0.08, n))
    a, b, c = (np.array(v) for v in gauge_readings(120.0, 40.0, 35.0, "rectangular", e=E,
                                                   nu=NU))
    return lam, {"ra": (a * lam * 1e6).tolist(), "rb": (b * lam * 1e6).tolist(),
                 "rc": (c * lam * 1e6).tolist()}


def test_rosette_point_is_reduced_assessed_and_recounted(client):
    lam, gauges = rosette_history()
    body = {"samples": {**gauges, "g1": (lam * 50).tolist()}, "unit": "microstrain",
            "units": {"g1": "MPa"}, "youngs_modulus": E, "sample_rate_hz": 100,
            "settings": {"curve": "EN1993-1-9:71"},
            "multiaxial": {"toe": {"rosette": "rectangular", "gauges": ["ra", "rb", "rc"],
                                   "poisson_ratio": NU,
                                   "reductions": ["signed_von_mises", "abs_max_principal",
                                                  "critical_plane"]}}}
    r = client.post("/v1/assessments", json=body)
    assert r.status_code == 201, r.get_json()
    a = r.get_json()
    assert set(a["points"]) == {"g1", "toe"}  # the gauges are not points of their own
    toe = a["points"]["toe"]
    m = toe["multiaxial"]
    assert m["kind"] == "rosette" and m["rosette"] == "rectangular" and m["gauges"] == ["ra", "rb", "rc"]
    assert set(m["damages"]) == {"signed_von_mises", "abs_max_principal", "critical_plane"}
    # Engine path on the same numbers (the service converts microstrain x E to MPa).
    ra, rb, rc = (np.asarray(gauges[k]) * 1e-6 * E for k in ("ra", "rb", "rc"))
    comps = np.stack(plane_stress_from_strains(*rosette_strains(ra, rb, rc), 1.0, NU), 1)
    ref = assess_multiaxial(comps, EN71, reductions=("signed_von_mises", "abs_max_principal",
                                                     "critical_plane"))
    assert toe["damage"] == pytest.approx(ref.governing.damage, rel=1e-12)
    assert m["reduction"] == ref.reduction
    # Proportional loading: the largest principal stress and the best plane agree
    # (the plane at the principal angle carries sigma_1), von Mises differs.
    p1 = 80.0 + math.hypot(40.0, 35.0)
    assert m["principal_rotation_deg"] < 1.0 and not m["non_proportional"]
    assert m["damages"]["critical_plane"] <= m["damages"]["abs_max_principal"] * (1 + 1e-9)
    assert max(m["damages"].values()) == toe["damage"]
    # Recount on read uses the governing history.
    cyc = client.get(f"/v1/assessments/{a['id']}/points/toe/cycles").get_json()
    assert sum(cyc["damage"]) == pytest.approx(toe["damage"], rel=1e-9)
    ranges = np.abs(np.subtract(cyc["stress_to"], cyc["stress_from"]))
    assert ranges.max() <= 2 * p1 * np.abs(lam).max() * (1 + 1e-9)
    for plot in ("sn", "range-mean"):
        assert client.get(f"/v1/assessments/{a['id']}/plots/{plot}?point=toe").status_code == 200
    assert client.get(f"/v1/assessments/{a['id']}/report").status_code == 200
    summary = client.get(f"/v1/assessments/{a['id']}/summary?format=csv").get_data(as_text=True)
    assert "toe" in summary


def test_plane_stress_components_from_a_stored_history(client):
    # Out-of-phase normal and shear stresses: non-proportional, with a caution.
    import io

    import pyarrow as pa
    import pyarrow.parquet as pq

    t = np.linspace(0, 60 * np.pi, 6001)
    cols = {"sx": 150 * np.sin(t), "sy": np.zeros_like(t), "txy": 75 * np.cos(t)}
    buf = io.BytesIO()
    pq.write_table(pa.table(cols), buf)
    h = client.post("/v1/histories?unit=MPa&sample_rate_hz=50", data=buf.getvalue(),
                    content_type="application/vnd.apache.parquet").get_json()
    r = client.post("/v1/assessments", json={
        "history_id": h["id"], "settings": {"curve": "EN1993-1-9:71"},
        "multiaxial": {"web": {"components": {"sxx": "sx", "syy": "sy", "sxy": "txy"},
                               "plane_step_deg": 5}}})
    assert r.status_code == 201, r.get_json()
    web = r.get_json()["points"]["web"]
    assert set(r.get_json()["points"]) == {"web"}
    assert web["multiaxial"]["non_proportional"]
    # Echoed in the request's names (issue 17).
    assert web["multiaxial"]["components"] == {"sxx": "sx", "syy": "sy", "sxy": "txy"}
    assert any(c["code"] == "non_proportional" for c in web["cautions"])
    ref = assess_multiaxial(np.stack([cols["sx"], cols["sy"], cols["txy"]], 1), EN71,
                            plane_step_deg=5, duration_s=h["duration_s"])
    assert web["damage"] == pytest.approx(ref.governing.damage, rel=1e-12)
    assert web["life_hours"] == pytest.approx(ref.governing.life_hours, rel=1e-12)
    cyc = client.get(f"/v1/assessments/{r.get_json()['id']}/points/web/cycles").get_json()
    assert sum(cyc["damage"]) == pytest.approx(web["damage"], rel=1e-9)


@pytest.mark.parametrize("decl, field, status", [
    ({"rosette": "tee", "gauges": ["ra", "rb", "rc"], "poisson_ratio": 0.3}, "rosette", 422),
    ({"rosette": "delta", "gauges": ["ra", "rb"], "poisson_ratio": 0.3}, "gauges", 422),
    ({"rosette": "delta", "gauges": ["ra", "rb", "rc"]}, "poisson_ratio", 422),
    ({"rosette": "delta", "gauges": ["ra", "rb", "zz"], "poisson_ratio": 0.3},
     "multiaxial channel", 422),
    ({"components": {"sxx": "ra", "syy": "rb"}}, "components", 422),
    ({"rosette": "delta", "gauges": ["ra", "rb", "rc"], "poisson_ratio": 0.3,
      "components": {"sxx": "ra", "syy": "rb", "sxy": "rc"}}, "multiaxial", 422),
    ({"rosette": "delta", "gauges": ["ra", "rb", "rc"], "poisson_ratio": 0.3,
      "reductions": ["octahedral"]}, "reductions", 422),
    ({"rosette": "delta", "gauges": ["ra", "rb", "rc"], "poisson_ratio": 0.3,
      "plane_step_deg": 0}, "plane_step_deg", 422),
    ({"rosette": "delta", "gauges": ["ra", "rb", "rc"], "poisson_ratio": 0.3,
      "bogus": 1}, "multiaxial", 422),
    # Values of the wrong type where names are expected (were a 500).
    ({"rosette": ["delta"], "gauges": ["ra", "rb", "rc"], "poisson_ratio": 0.3}, "rosette", 422),
    ({"rosette": "delta", "gauges": [["ra"], "rb", "rc"], "poisson_ratio": 0.3}, "gauges", 422),
    ({"components": {"sxx": ["ra"], "syy": "rb", "sxy": "rc"}}, "components", 422),
    ({"components": {"sxx": "ra", "syy": "rb", "sxy": "rc"}, "reductions": "signed_tresca"},
     "reductions", 422),
])
def test_bad_multiaxial_declarations(client, decl, field, status):
    _, gauges = rosette_history(50)
    r = client.post("/v1/assessments", json={
        "samples": gauges, "unit": "microstrain", "youngs_modulus": E,
        "settings": {"curve": "EN1993-1-9:71"}, "multiaxial": {"pt": decl}})
    assert_problem(r, status, None if status != 422 else r.get_json()["type"].rsplit("/", 1)[1])
    assert r.get_json()["field"] == field


def test_rosette_gauges_must_be_strains_and_components_stresses(client):
    _, gauges = rosette_history(50)
    r = client.post("/v1/assessments", json={
        "samples": gauges, "unit": "MPa", "settings": {"curve": "EN1993-1-9:71"},
        "multiaxial": {"pt": {"rosette": "rectangular", "gauges": ["ra", "rb", "rc"],
                              "poisson_ratio": 0.3}}})
    assert_problem(r, 422, "invalid-parameter", field="gauges")
    r = client.post("/v1/assessments", json={
        "samples": gauges, "unit": "microstrain", "youngs_modulus": E,
        "settings": {"curve": "EN1993-1-9:71"},
        "multiaxial": {"pt": {"components": {"sxx": "ra", "syy": "rb", "sxy": "rc"}}}})
    assert_problem(r, 422, "invalid-parameter", field="components")


def test_a_multiaxial_point_is_named_apart_from_its_channels(client):
    _, gauges = rosette_history(50)
    r = client.post("/v1/assessments", json={
        "samples": gauges, "unit": "microstrain", "youngs_modulus": E,
        "settings": {"curve": "EN1993-1-9:71"},
        "multiaxial": {"ra": {"rosette": "rectangular", "gauges": ["ra", "rb", "rc"],
                              "poisson_ratio": 0.3}}})
    assert_problem(r, 422, "invalid-parameter", field="multiaxial")


def test_shear_planes_over_http(client):
    # Torsion-like loading (only txy): with critical_plane_shear and the EN
    # 1993-1-9 shear curve, the result names the reduction that governed and
    # its cycles and S-N plot use the shear curve.
    t = np.linspace(0, 40 * np.pi, 4001)
    tau = (90 * np.sin(t) + 20 * np.sin(7.3 * t)).tolist()
    zero = [0.0] * len(tau)
    r = client.post("/v1/assessments", json={
        "samples": {"sx": zero, "sy": zero, "txy": tau}, "unit": "MPa",
        "settings": {"curve": "EN1993-1-9:71"},
        "multiaxial": {"shaft": {"components": {"sxx": "sx", "syy": "sy", "sxy": "txy"},
                                 "reductions": ["critical_plane", "critical_plane_shear"],
                                 "plane_step_deg": 15,
                                 "shear_settings": {"curve": "EN1993-1-9:shear-80"}}}})
    assert r.status_code == 201, r.get_json()
    a = r.get_json()
    p = a["points"]["shaft"]
    ref_shear = assess_history(np.asarray(tau), catalogue_curve("EN1993-1-9:shear-80")).damage
    ref_normal = assess_history(np.asarray(tau), EN71).damage
    assert p["multiaxial"]["damages"]["critical_plane_shear"] == pytest.approx(ref_shear,
                                                                              rel=1e-12)
    assert p["multiaxial"]["damages"]["critical_plane"] == pytest.approx(ref_normal, rel=1e-12)
    assert p["damage"] == pytest.approx(max(ref_shear, ref_normal), rel=1e-12)
    governing = p["multiaxial"]["reduction"]
    assert p["curve"]["name"] == ("EN1993-1-9:shear-80" if governing == "critical_plane_shear"
                                  else "EN1993-1-9:71")
    cyc = client.get(f"/v1/assessments/{a['id']}/points/shaft/cycles").get_json()
    assert sum(cyc["damage"]) == pytest.approx(p["damage"], rel=1e-9)
    assert client.get(f"/v1/assessments/{a['id']}/plots/sn?point=shaft").status_code == 200
    # Without shear settings, or on a 3-D state: refused up front.
    r = client.post("/v1/assessments", json={
        "samples": {"sx": zero, "sy": zero, "txy": tau}, "unit": "MPa",
        "settings": {"curve": "EN1993-1-9:71"},
        "multiaxial": {"shaft": {"components": {"sxx": "sx", "syy": "sy", "sxy": "txy"},
                                 "reductions": ["critical_plane_shear"]}}})
    assert_problem(r, 422, "invalid-parameter", field="shear_settings")


def test_the_echo_in_request_names_reads_back_as_the_plan_and_old_results_are_rewritten():
    import json
    import sqlite3

    from service.declarations import echo as _echo, unecho as _unecho
    from service.store.migrations import MIGRATIONS

    rosette = {"kind": "rosette", "layout": "delta", "channels": ["a", "b", "c"],
               "poisson_ratio": 0.3, "reduction": "signed_von_mises"}
    tensor = {"kind": "plane_stress", "components": ["sxx", "syy", "sxy"],
              "channels": ["x", "y", "t"], "reduction": "critical_plane"}
    for spec in (rosette, tensor):
        echoed = _echo(spec)
        assert "channels" not in echoed and "layout" not in echoed
        assert _unecho(echoed) == spec
    assert _echo(rosette)["rosette"] == "delta" and _echo(rosette)["gauges"] == ["a", "b", "c"]
    # Results stored before the echo (and before `options`) are rewritten once,
    # by store migration 10, into what the code reads now.
    con = sqlite3.connect(":memory:")
    con.execute("CREATE TABLE assessments (id TEXT, result TEXT)")
    old = {"points": {"r": {"settings": {"residue": "half_cycles"}, "multiaxial": rosette},
                      "t": {"settings": {"residue": "repeating_block"}, "multiaxial": tensor},
                      "u": {"settings": {"residue": "half_cycles"}}}}
    con.execute("INSERT INTO assessments VALUES ('a_1', ?), ('a_2', NULL)", (json.dumps(old),))
    MIGRATIONS[10](con)
    new = json.loads(con.execute("SELECT result FROM assessments WHERE id = 'a_1'").fetchone()[0])
    assert new["points"]["r"]["multiaxial"] == _echo(rosette)
    assert new["points"]["t"]["multiaxial"] == _echo(tensor)
    assert new["points"]["t"]["options"] == {"residue": "repeating_block"}
    assert all("settings" not in p for p in new["points"].values())


def test_shear_interaction_of_a_weld_by_en1993_and_iiw(client):
    # Normal stress across a weld (syy) and shear along it (sxy), in
    # proportion (a fixed principal direction): EN 1993-1-9 eq. (8.3) sums
    # the two parts' usages; IIW's Gough-Pollard takes CV 1.0 (proportional)
    # or 0.5 when told the loading is non-proportional (from memory).
    from service.engine import weld_interaction as wi

    lam = np.cumsum(np.random.default_rng(17).normal(0, 0.1, 4000))
    sxx, syy, sxy = 10 * lam, 90 * lam, 45 * lam
    body = {"samples": {"sx": sxx.tolist(), "sy": syy.tolist(), "txy": sxy.tolist()},
            "unit": "MPa", "sample_rate_hz": 100, "settings": {"curve": "EN1993-1-9:71"},
            "multiaxial": {"seam": {
                "components": {"sxx": "sx", "syy": "sy", "sxy": "txy"},
                "reductions": ["signed_von_mises"],
                "shear_settings": {"curve": "EN1993-1-9:shear-100"},
                "shear_interaction": {"rule": "en1993-1-9", "normal": "syy"}}}}
    r = client.post("/v1/assessments", json=body)
    assert r.status_code == 201, r.get_json()
    block = r.get_json()["points"]["seam"]["multiaxial"]["shear_interaction"]
    s = assess_history(syy, EN71, duration_s=40.0)
    t = assess_history(sxy, catalogue_curve("EN1993-1-9:shear-100"), duration_s=40.0)
    ref = wi.check("en1993-1-9", s, t)
    assert block["value"] == pytest.approx(ref.value, rel=1e-12)
    assert block["value"] == pytest.approx(s.damage + t.damage, rel=1e-12)
    assert block["normal_component"] == "syy" and block["loading"] == "proportional"
    assert block["passed"] == (ref.value <= 1.0)
    assert block["life_hours"] == pytest.approx(40.0 / 3600.0 / ref.value, rel=1e-9)
    body["multiaxial"]["seam"]["settings"] = {"curve": "IIW:FAT71"}
    body["multiaxial"]["seam"]["shear_settings"] = {"curve": "IIW:shear-FAT100"}
    body["multiaxial"]["seam"]["shear_interaction"] = {"rule": "iiw", "normal": "syy",
                                                       "loading": "non_proportional"}
    r = client.post("/v1/assessments", json=body)
    block = r.get_json()["points"]["seam"]["multiaxial"]["shear_interaction"]
    assert block["limit"] == 0.5 and block["loading"] == "non_proportional"
    # Without a shear curve, or on a 3-D tensor, the declaration is refused.
    del body["multiaxial"]["seam"]["shear_settings"]
    assert_problem(client.post("/v1/assessments", json=body), 422, "invalid-parameter",
                   field="shear_settings")
