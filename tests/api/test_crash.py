"""Nothing acknowledged is lost: the service killed with SIGKILL mid-stream."""

from __future__ import annotations

import io
import os
import signal
import socket
import sqlite3
import subprocess
import sys
import threading
import time

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from service.client import Client, ServiceError
from service.engine import astm_e1049
from service.engine.damage import assess
from service.engine.sn_catalogue import catalogue_curve

PARQUET = "application/vnd.apache.parquet"


def _port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _start(data_dir, port) -> subprocess.Popen:
    proc = subprocess.Popen(
        [sys.executable, "-m", "service.cli", "serve", "--host", "127.0.0.1", "--port",
         str(port), "--data-dir", str(data_dir), "--threads", "4"],
        stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)
    c = Client(f"http://127.0.0.1:{port}", timeout_s=5)
    deadline = time.monotonic() + 120
    while not c.ready():
        if proc.poll() is not None or time.monotonic() > deadline:
            os.killpg(proc.pid, signal.SIGKILL)
            raise RuntimeError("service did not start")
        time.sleep(0.1)
    return proc


def _block(seq: int) -> np.ndarray:
    return np.random.default_rng(seq).standard_normal(20_000) * 70


def _body(seq: int) -> bytes:
    buf = io.BytesIO()
    pq.write_table(pa.table({"g": _block(seq)}), buf)
    return buf.getvalue()


@pytest.mark.slow
def test_sigkill_during_posting_loses_nothing_acknowledged(tmp_path):
    # The durability test: kill -9 the whole service (master and
    # worker) while a pipeline posts blocks, restart it on the same data
    # directory, and check the store.
    data = tmp_path / "data"
    port = _port()
    proc = _start(data, port)
    acked = []
    try:
        c = Client(f"http://127.0.0.1:{port}", timeout_s=30)
        c.post_json("/v1/assets", {"name": "rig"})
        c.post_json("/v1/assets/rig/points", {"name": "g", "unit": "MPa",
                                              "settings": {"curve": "EN1993-1-9:71"}})
        stop = threading.Event()

        def pipeline():
            seq = 1
            while not stop.is_set():
                try:
                    c.request("POST", "/v1/assets/rig/blocks", body=_body(seq),
                              content_type=PARQUET, params={"seq": seq, "sample_rate_hz": 100})
                except ServiceError:
                    return  # the service is gone
                acked.append(seq)
                seq += 1

        t = threading.Thread(target=pipeline)
        t.start()
        while len(acked) < 8:
            time.sleep(0.01)
        os.killpg(proc.pid, signal.SIGKILL)  # mid-request, most likely
        proc.wait(timeout=30)
        stop.set()
        t.join(timeout=60)
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
    n_acked = len(acked)
    # The files and the database as the crash left them, then restarted.
    con = sqlite3.connect(data / "cycleledger.sqlite3")
    assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    con.close()
    proc = _start(data, port)
    try:
        c = Client(f"http://127.0.0.1:{port}", timeout_s=30)
        blocks = c.get_json("/v1/assets/rig/blocks", limit=1000)["items"]
        seqs = sorted(b["seq"] for b in blocks)
        # Every acknowledged block is there exactly once; at most the one in
        # flight at the kill is there too (committed, answer lost).
        assert seqs == list(range(1, len(seqs) + 1))
        assert n_acked <= len(seqs) <= n_acked + 1
        # Totals equal a recount of the stored blocks.
        status = c.get_json("/v1/assets/rig/points/g")
        whole = np.concatenate([_block(s) for s in seqs])
        ref = assess(astm_e1049(whole), catalogue_curve("EN1993-1-9:71"))
        assert status["damage_if_ended"] == pytest.approx(ref.damage, rel=1e-12)
        assert status["last_seq"] == len(seqs)
        # No half-written files: every stored block file is readable, no
        # temporary file survives the restart.
        leftovers = [p.name for p in (data / "blocks").iterdir() if p.name.startswith(".tmp-")]
        assert leftovers == []
        files = sorted((data / "blocks").glob("*.parquet"))
        assert len(files) == len(seqs)
        for f in files:
            assert pq.read_table(f).num_rows == 20_000
        # The pipeline resumes where the store is.
        nxt = len(seqs) + 1
        c.request("POST", "/v1/assets/rig/blocks", body=_body(nxt), content_type=PARQUET,
                  params={"seq": nxt, "sample_rate_hz": 100})
    finally:
        os.killpg(proc.pid, signal.SIGTERM)
        proc.wait(timeout=30)


def test_restart_removes_files_no_row_names_and_keeps_the_rest(tmp_path):
    # A crash between renaming a file into place and committing its row
    # leaves a file nothing names; the next start removes it (and temporary
    # files), and keeps every file a history, block or assessment names.
    from tests.api.conftest import make_app

    app = make_app(tmp_path, WARM_KERNELS=False)
    r = app.test_client().post("/v1/histories?unit=MPa", data=b"g\n1\n2\n3\n",
                               content_type="text/csv")
    assert r.status_code == 201
    app.extensions["cycleledger.jobs"].shutdown()
    data = tmp_path / "data"
    named = sorted(p.name for p in (data / "histories").iterdir())
    assert len(named) == 1
    orphans = [data / "blocks" / "b_0123456789abcdef.parquet",
               data / "histories" / "h_0123456789abcdef.parquet",
               data / "histories" / ".tmp-abc.upload"]
    for p in orphans:
        p.parent.mkdir(exist_ok=True)
        p.write_bytes(b"PAR1")
    app = make_app(tmp_path, WARM_KERNELS=False)
    try:
        assert not any(p.exists() for p in orphans)
        assert sorted(p.name for p in (data / "histories").iterdir()) == named
        hid = r.get_json()["id"]
        assert app.test_client().get(f"/v1/histories/{hid}").status_code == 200
    finally:
        app.extensions["cycleledger.jobs"].shutdown()
