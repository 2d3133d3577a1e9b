"""Backups taken while the service runs, restored and checked (issue 18)."""

from __future__ import annotations

import io
import threading
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

from service import ledger
from service.api import create_app
from service.cli import main
from service.store import ledger as sql
from service.store import sqlite as store
from service.store.backup import backup, check, restore


def _pq(cols):
    buf = io.BytesIO()
    pq.write_table(pa.table(cols), buf)
    return buf.getvalue()


def _busy_service(data):
    app = create_app({"DATA_DIR": str(data), "WARM_KERNELS": False, "TESTING": True})
    c = app.test_client()
    assert c.post("/v1/assets", json={"name": "arm"}).status_code == 201
    for p in ("a", "b"):
        assert c.post("/v1/assets/arm/points", json={
            "name": p, "unit": "MPa", "settings": {"curve": "EN1993-1-9:71"}}).status_code == 201
    x = np.random.default_rng(1).standard_normal(4000) * 60
    h = c.post("/v1/histories?unit=MPa&sample_rate_hz=100",
               data=_pq({"g": x}), content_type="application/vnd.apache.parquet").get_json()
    a = c.post("/v1/assessments", json={"history_id": h["id"],
                                        "settings": {"curve": "EN1993-1-9:71"}}).get_json()
    return app, c, a


def test_a_backup_taken_while_blocks_arrive_restores_consistent_totals(tmp_path):
    data = tmp_path / "data"
    app, c, a = _busy_service(data)
    rng = np.random.default_rng(2)
    stop, started = threading.Event(), threading.Event()

    def post_blocks():
        seq = 0
        while not stop.is_set() and seq < 200:
            seq += 1
            if seq == 6:
                started.set()  # some blocks in, more arriving during the backup
            x = rng.standard_normal(500) * 50
            r = c.post(f"/v1/assets/arm/blocks?seq={seq}&sample_rate_hz=100",
                       data=_pq({"a": x, "b": 2 * x}),
                       content_type="application/vnd.apache.parquet")
            assert r.status_code == 201, r.get_json()

    writer = threading.Thread(target=post_blocks)
    writer.start()
    try:
        assert started.wait(60)
        manifest = backup(data, tmp_path / "backup")
    finally:
        stop.set()
        writer.join()
    assert manifest["missing"] == [] and manifest["files"]
    assert check(tmp_path / "backup")["ok"]
    report = restore(tmp_path / "backup", tmp_path / "restored")
    assert report["ok"], report
    # The restored directory serves, and every point's totals are those of
    # a recount of the blocks it holds: the database and the files agree.
    restored = create_app({"DATA_DIR": str(tmp_path / "restored"), "WARM_KERNELS": False,
                           "TESTING": True})
    rc = restored.test_client()
    got = rc.get(f"/v1/assessments/{a['id']}").get_json()
    assert got["points"] == a["points"]
    con = store.connect(tmp_path / "restored")
    try:
        for row in sql.list_points(con, "default"):
            again = ledger.recount(con, tmp_path / "restored", row)
            assert again["damage"] == row["damage"] and again["cycles"] == row["cycles"]
            assert row["last_seq"] is not None
    finally:
        con.close()


def test_check_finds_missing_changed_and_orphan_files(tmp_path, capsys):
    data = tmp_path / "data"
    _busy_service(data)
    assert main(["backup", str(tmp_path / "bk"), "--data-dir", str(data)]) == 0
    assert main(["check", "--data-dir", str(tmp_path / "bk")]) == 0
    files = sorted(Path(tmp_path / "bk").rglob("*.parquet"))
    assert len(files) == 1                                              # the history
    files[0].write_bytes(files[0].read_bytes()[:-10] + b"0123456789")   # damaged
    (Path(tmp_path / "bk") / "histories" / "stray.parquet").write_bytes(b"PAR1")
    r = check(tmp_path / "bk")
    assert not r["ok"] and r["mismatched"] == [str(files[0].relative_to(tmp_path / "bk"))]
    assert r["orphans"] == ["histories/stray.parquet"]
    assert main(["restore", str(tmp_path / "bk"), "--data-dir", str(tmp_path / "r")]) == 1
    files[0].unlink()
    assert str(files[0].relative_to(tmp_path / "bk")) in check(tmp_path / "bk")["missing"]
    assert main(["check", "--data-dir", str(tmp_path / "bk")]) == 1
    capsys.readouterr()
