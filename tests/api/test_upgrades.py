"""A data directory outlives the service that made it (issue 18).

The fixture ``tests/fixtures/schema6`` was written by the service at schema
version 6 (a history, an assessment of it and a ledger point with two
blocks; the figures it answered are in ``schema6.json``). Upgraded in place,
every figure reads back the same; jobs accepted with 202 survive a restart.
"""

from __future__ import annotations

import json
import shutil
import sqlite3
import time
from pathlib import Path

import numpy as np
import pytest

from service.api import create_app
from service.store import sqlite as store

FIXTURES = Path(__file__).resolve().parents[1] / "fixtures"


def test_a_schema_6_directory_is_upgraded_in_place(tmp_path):
    data = tmp_path / "data"
    shutil.copytree(FIXTURES / "schema6", data)
    before = json.loads((FIXTURES / "schema6.json").read_text())
    app = create_app({"DATA_DIR": str(data), "WARM_KERNELS": False, "TESTING": True})
    con = sqlite3.connect(data / store.DB_NAME)
    assert con.execute("PRAGMA user_version").fetchone()[0] == store.SCHEMA_VERSION
    assert {"request", "input_file"} <= {r[1] for r in con.execute("PRAGMA table_info(jobs)")}
    con.close()
    client = app.test_client()
    a = client.get(f"/v1/assessments/{before['assessment_id']}").get_json()
    assert {k: v["damage"] for k, v in a["points"].items()} == before["damage"]
    p = client.get("/v1/assets/arm/points/p").get_json()
    # Names the API changed since schema 6 (issue 17: one name per concept).
    renamed = {"cycles": "cycles_counted"}
    assert {k: p[renamed.get(k, k)] for k in before["ledger"]} == before["ledger"]
    # The upgraded directory keeps working: a new block counts on from the
    # stored residue, and the old history can be assessed again.
    r = client.post("/v1/assets/arm/blocks?seq=3&sample_rate_hz=100", json={
        "channels": {"p": [0.0, 50.0, -50.0, 10.0]}})
    assert r.status_code == 201, r.get_json()
    again = client.post("/v1/assessments", json={"history_id": before["history_id"],
                                                 "settings": {"curve": "EN1993-1-9:71"}})
    assert again.status_code == 201
    # Started again, nothing more to migrate.
    assert store.init(data) == []


def test_a_newer_or_too_old_directory_is_refused(tmp_path):
    for version in (store.SCHEMA_VERSION + 1, 5):
        data = tmp_path / f"v{version}"
        data.mkdir()
        con = sqlite3.connect(data / store.DB_NAME)
        con.execute("CREATE TABLE t (x)")
        con.execute(f"PRAGMA user_version = {version}")
        con.close()
        with pytest.raises(store.IncompatibleStore) as err:
            store.init(data)
        assert str(version) in str(err.value)


def _wait(client, job_id, seconds=60):
    for _ in range(int(seconds / 0.05)):
        job = client.get(f"/v1/jobs/{job_id}").get_json()
        if job["state"] in ("done", "failed"):
            return job
        time.sleep(0.05)
    raise AssertionError(job)


def test_jobs_accepted_before_a_restart_run_after_it(tmp_path, monkeypatch):
    # The first service accepts two jobs (one inline, one on a stored
    # history) and stops before running them; the next one on the same
    # directory runs both, and their results equal the same requests run
    # at once.
    from service.jobs import JobRunner

    data = str(tmp_path / "data")
    x = np.random.default_rng(4).standard_normal(3000) * 60
    monkeypatch.setattr(JobRunner, "submit_assessment", lambda *a, **k: None)
    first = create_app({"DATA_DIR": data, "WARM_KERNELS": False, "TESTING": True}).test_client()
    body = {"samples": {"g": x.tolist()}, "unit": "MPa", "sample_rate_hz": 100,
            "settings": {"curve": "EN1993-1-9:71"}}
    inline = first.post("/v1/assessments", json=body, headers={"Prefer": "respond-async"})
    assert inline.status_code == 202
    h = first.post("/v1/histories", json={"channels": {"g": x.tolist()}, "unit": "MPa",
                                          "sample_rate_hz": 100}).get_json()
    stored = first.post("/v1/assessments", json={"history_id": h["id"],
                                                 "settings": {"curve": "EN1993-1-9:71"}},
                        headers={"Prefer": "respond-async"})
    assert stored.status_code == 202
    assert list((Path(data) / "jobs").iterdir())          # the inline samples are kept
    monkeypatch.undo()
    second = create_app({"DATA_DIR": data, "WARM_KERNELS": False, "TESTING": True})
    client = second.test_client()
    direct = client.post("/v1/assessments", json=body).get_json()["points"]["g"]["damage"]
    for r in (inline, stored):
        job = _wait(client, r.get_json()["id"])
        assert job["state"] == "done", job
        result = client.get(job["links"]["result"]).get_json()
        assert result["points"]["g"]["damage"] == direct
    assert not list((Path(data) / "jobs").iterdir())      # inputs removed when done
    second.extensions["cycleledger.jobs"].shutdown()
