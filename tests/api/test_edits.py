"""/v1/edits: shorter drive signals that keep the damage.

The edited signal is downloaded and counted again by the `rainflow` package
(ASTM E1049-85, an implementation independent of this service), and Miner's
sum on EN 1993-1-9:2005 curve 71 (eq. (7.1)-(7.2), m = 3 to 5e6, m = 5 to
the cut-off at 1e8) computed here from its (range, count) pairs: it must
equal the damage the report states.
"""

from __future__ import annotations

import io

import numpy as np
import pandas as pd
import pytest
import rainflow as reference

from tests.api.conftest import assert_problem
from tests.api.test_ledger import PARQUET, pq_bytes

RATE = 100.0


def rig_like(seed: int, n: int = 60_000, channels: int = 3) -> dict:
    """Bursts of load separated by quiet stretches (sensor noise only)."""
    rng = np.random.default_rng(seed)
    gain = np.zeros(n)
    pos = 0
    while pos < n:
        quiet, busy = int(rng.integers(2000, 6000)), int(rng.integers(500, 2500))
        gain[pos + quiet:pos + quiet + busy] = rng.uniform(0.6, 1.4)
        pos += quiet + busy
    t = np.arange(n) / RATE
    out = {}
    for c in range(channels):
        carrier = np.sin(2 * np.pi * (1.3 + 0.4 * c) * t + c)
        out[f"g{c + 1}"] = (90 * gain * carrier * (1 + 0.3 * rng.normal(size=n))
                            + 0.5 * rng.normal(size=n) + 10 * c)
    return out


def en71_damage(x: np.ndarray) -> float:
    """Miner's sum on EN 1993-1-9 curve 71 from the `rainflow` package's count."""
    d = 0.0
    for rng_, n in reference.count_cycles(list(x)):
        if rng_ >= 71.0 * (2e6 / 5e6) ** (1 / 3):            # above the knee: m = 3
            d += n / (2e6 * (71.0 / rng_) ** 3)
        else:
            knee = 71.0 * (2e6 / 5e6) ** (1 / 3)
            if rng_ >= knee * (5e6 / 1e8) ** (1 / 5):         # down to the cut-off: m = 5
                d += n / (5e6 * (knee / rng_) ** 5)
    return d


def _history(client, cols) -> str:
    r = client.post(f"/v1/histories?unit=MPa&sample_rate_hz={RATE}", data=pq_bytes(cols),
                    content_type=PARQUET)
    assert r.status_code == 201, r.get_json()
    return r.get_json()["id"]


def _signal(client, doc) -> pd.DataFrame:
    r = client.get(doc["links"]["signal"] + "?format=parquet")
    assert r.status_code == 200
    return pd.read_parquet(io.BytesIO(r.data))


def test_the_edited_signal_recounted_independently_does_the_stated_damage(client):
    cols = rig_like(1)
    hid = _history(client, cols)
    r = client.post("/v1/edits", json={"history_id": hid, "keep": 0.95, "window_s": 2.0,
                                       "settings": {"curve": "EN1993-1-9:71"}})
    assert r.status_code == 201, r.get_json()
    doc = r.get_json()
    res = doc["result"]
    sig = _signal(client, doc)
    assert len(sig) == res["samples_after"] < 0.7 * res["samples_before"]
    assert res["length_kept"] == pytest.approx(len(sig) / len(cols["g1"]))
    for name, ch in res["channels"].items():
        assert ch["damage_before"] == pytest.approx(en71_damage(cols[name]), rel=1e-9)
        assert ch["damage_after"] == pytest.approx(en71_damage(sig[name].to_numpy()),
                                                   rel=1e-9)
        assert ch["damage_kept"] >= 0.95
        # The phase between channels: every channel cut at the same instants.
        assert np.array_equal(sig[name].to_numpy(), cols[name][sig["source_index"]])
    assert res["damage_kept_min"] == min(c["damage_kept"] for c in res["channels"].values())
    assert np.all(np.diff(sig["source_index"]) > 0)
    assert {c["code"] for c in res["cautions"]} >= {"edit_scope", "engineer_sign_off"}
    csv = client.get(doc["links"]["signal"] + "?format=csv")
    assert csv.status_code == 200 and csv.mimetype == "text/csv"
    assert pd.read_csv(io.StringIO(csv.get_data(as_text=True)))["g2"].to_numpy() \
        == pytest.approx(sig["g2"].to_numpy())
    assert client.get(doc["links"]["self"]).get_json()["result"] == res
    page = client.get(doc["links"]["report"])
    assert page.status_code == 200 and page.mimetype == "text/html"
    text = page.get_data(as_text=True)
    for name, ch in res["channels"].items():
        assert f"data-channel='{name}'" in text
    assert "id='plot-kept'" in text and "edit_scope" in text


@pytest.mark.parametrize("seed", range(6))
def test_no_cycle_above_the_protected_range_is_removed(client, seed):
    # Property: with a short target length the edit cuts deep, yet every
    # cycle at or above protect_range (ranges and counts) is still there.
    cols = rig_like(10 + seed, n=20_000, channels=2)
    hid = _history(client, cols)
    limit = 120.0
    r = client.post("/v1/edits", json={"history_id": hid, "length": 0.1,
                                       "window_samples": 50, "protect_range": limit,
                                       "settings": {"curve": "EN1993-1-9:71"}})
    assert r.status_code == 201, r.get_json()
    sig = _signal(client, r.get_json())
    for name in cols:
        def big(x):
            out = {}
            for rng_, n in reference.count_cycles(list(x)):
                if rng_ >= limit:
                    out[round(rng_, 9)] = out.get(round(rng_, 9), 0.0) + n
            return out
        before, after = big(cols[name]), big(sig[name].to_numpy())
        assert before, "the test signal must have cycles above the protected range"
        for rng_, n in before.items():
            assert after.get(rng_, 0.0) >= n, (name, rng_)


def test_peak_valley_keeps_every_channels_count(client):
    cols = rig_like(3, n=20_000)
    hid = _history(client, cols)
    r = client.post("/v1/edits", json={"history_id": hid, "method": "peak_valley",
                                       "settings": {"curve": "EN1993-1-9:71"}})
    assert r.status_code == 201, r.get_json()
    res = r.get_json()["result"]
    sig = _signal(client, r.get_json())
    for name, ch in res["channels"].items():
        # Each channel's turning points are all kept: the same cycles (the
        # `rainflow` package on both), the same damage.
        got = np.array(sorted(reference.count_cycles(list(sig[name]))))
        want = np.array(sorted(reference.count_cycles(list(cols[name]))))
        assert got.shape == want.shape and np.allclose(got, want, rtol=1e-12)
        assert ch["damage_kept"] == pytest.approx(1.0, rel=1e-12)
    assert res["length_kept"] < 1.0
    assert "edit_peak_valley" in {c["code"] for c in res["cautions"]}


def test_edit_errors(client):
    hid = _history(client, rig_like(4, n=2000))
    base = {"history_id": hid, "settings": {"curve": "EN1993-1-9:71"}}
    assert_problem(client.post("/v1/edits", json={**base, "history_id": "h_none"}), 404,
                   "not-found", field="history_id")
    assert_problem(client.post("/v1/edits", json={**base, "keep": 1.5}), 422,
                   "invalid-parameter", field="keep")
    assert_problem(client.post("/v1/edits", json={**base, "keep": 0.9, "length": 0.2}), 422,
                   "invalid-parameter")
    assert_problem(client.post("/v1/edits", json={**base, "channels": ["nope"]}), 422,
                   "unknown-name")
    assert_problem(client.post("/v1/edits", json={**base, "method": "peak_valley",
                                                  "keep": 0.9}), 422, "invalid-parameter")
    doc = client.post("/v1/edits", json=base).get_json()
    assert client.delete(f"/v1/edits/{doc['id']}").status_code == 204
    assert_problem(client.get(f"/v1/edits/{doc['id']}/signal"), 404, "not-found")


def test_a_share_to_keep_per_channel(client):
    # One channel asked for 99 %, the other for 50 %: each gets at least its
    # share (recounted here by the rainflow package), and the report says
    # what each asked.
    cols = rig_like(5, n=30_000, channels=2)
    hid = _history(client, cols)
    r = client.post("/v1/edits", json={"history_id": hid, "keep": {"g1": 0.99, "g2": 0.5},
                                       "window_s": 1.0,
                                       "settings": {"curve": "EN1993-1-9:71"}})
    assert r.status_code == 201, r.get_json()
    res = r.get_json()["result"]
    sig = _signal(client, r.get_json())
    assert res["channels"]["g1"]["keep"] == 0.99 and res["channels"]["g2"]["keep"] == 0.5
    assert en71_damage(sig["g1"].to_numpy()) >= 0.99 * en71_damage(cols["g1"])
    assert en71_damage(sig["g2"].to_numpy()) >= 0.5 * en71_damage(cols["g2"])
    assert_problem(client.post("/v1/edits", json={
        "history_id": hid, "keep": {"g9": 0.9}, "settings": {"curve": "EN1993-1-9:71"}}),
        422, "unknown-name")
