"""The real service on loopback: waitress, the Python client, `cycleledger post` and
the README's main command (`cycleledger demo`). Everything binds 127.0.0.1 and
is stopped by the test."""

from __future__ import annotations

import json
import threading
import time

import numpy as np
import pandas as pd
import pytest
from waitress import create_server

from service.api import create_app
from tests.api.conftest import stop_waitress
from service.cli import main
from service.client import Client, ServiceError
from service.engine.damage import assess_history
from service.engine.sn_catalogue import catalogue_curve


@pytest.fixture
def served(tmp_path):
    app = create_app({"DATA_DIR": str(tmp_path / "data"), "ASYNC_SAMPLES": 50_000})
    server = create_server(app, host="127.0.0.1", port=0, threads=4)
    thread = threading.Thread(target=server.run, daemon=True)
    thread.start()
    yield f"http://127.0.0.1:{server.effective_port}"
    stop_waitress(server, thread)
    app.extensions["cycleledger.jobs"].shutdown()


def test_client_keeps_its_connection_alive_and_survives_a_closed_one(served):
    # Issue 18: one connection per thread for many requests (no TCP set-up
    # each time); a connection dropped while idle is replaced at once.
    import socket

    with Client(served, timeout_s=60) as c:
        assert c.ready()
        port = c._local.conn.sock.getsockname()[1]
        for _ in range(5):
            assert c.get_json("/v1/version")["name"] == "cycleledger"
        assert c._local.conn.sock.getsockname()[1] == port  # the same connection
        c._local.conn.sock.shutdown(socket.SHUT_RDWR)  # as if the service had closed it
        t0 = time.monotonic()
        assert c.get_json("/v1/version")["api"] == "v1"
        assert time.monotonic() - t0 < c.backoff_s  # a new connection, not a back-off
        assert c._local.conn.sock.getsockname()[1] != port
    assert c._local.conn is None  # closed on leaving the block
    unreachable = Client("http://127.0.0.1:1", retries=0)
    with pytest.raises(ServiceError) as err:
        unreachable.get_json("/v1/version")
    assert err.value.status == 0 and err.value.problem["title"] == "Unreachable"


def test_client_streams_a_file_from_disk_and_again_on_a_retry(served, tmp_path, monkeypatch):
    # Issue 18: a recording goes up as it is, read from disk in blocks (never
    # whole in memory); a retry sends it again from its start.
    import http.client

    x = np.random.default_rng(6).standard_normal(20_000) * 40
    path = tmp_path / "run.csv"
    path.write_text("time_s,g1\n" + "\n".join(f"{i / 100:.2f},{v:.3f}" for i, v in enumerate(x)))
    sent = []
    real = http.client.HTTPConnection.request

    def request(self, method, url, body=None, headers=None, **kw):
        sent.append((type(body).__name__, headers.get("Content-Length")))
        if len(sent) == 1 and method == "POST":  # the first try is lost on the way
            self.close()
            raise ConnectionResetError("lost")
        return real(self, method, url, body=body, headers=headers, **kw)

    monkeypatch.setattr(http.client.HTTPConnection, "request", request)
    with Client(served, timeout_s=60, backoff_s=0.01) as c:
        h = c.upload_history(path, unit="MPa")
    assert sent[0] == sent[1] == ("BufferedReader", str(path.stat().st_size))
    assert h["sample_count"] == x.size and h["channels"][0]["name"] == "g1"
    with pytest.raises(FileNotFoundError):
        Client(served).upload_history(tmp_path / "missing.csv")


def test_client_round_trip_with_a_job(served):
    c = Client(served, timeout_s=60)
    assert c.ready()
    x = np.random.default_rng(4).standard_normal(40_000) * 50
    h = c.upload_history(pd.DataFrame({"a": x, "b": 1.5 * x}), unit="MPa", sample_rate_hz=200.0)
    seen = []
    a = c.assess(history_id=h["id"], settings={"curve": "EN1993-1-9:80"}, progress=seen.append)
    assert seen and seen[-1]["state"] == "done"  # 80k samples x points > threshold: a job
    table = c.summary(a["id"])
    ref = assess_history(x, catalogue_curve("EN1993-1-9:80"), duration_s=200.0)
    assert table.loc["a", "damage"] == ref.damage
    assert table.loc["a", "life_hours"] == pytest.approx(ref.life_hours, rel=1e-12)
    got = c.samples(a["id"], "b")
    np.testing.assert_array_equal(got["samples"], 1.5 * x)
    assert list(got.columns) == ["time_s", "samples"]
    cyc = c.cycles(a["id"], "b")
    assert cyc["damage"].sum() == pytest.approx(table.loc["b", "damage"], rel=1e-12)
    with pytest.raises(ServiceError) as err:
        c.assess(history_id=h["id"], settings={"curve": "EN1993-1-9:81"})
    assert err.value.status == 422 and err.value.problem["field"] == "curve"


def test_client_ledger_workflow_and_the_old_method_names(served):
    # The ledger through the client: asset, point, two blocks, the point's
    # figures and the feed, against the engine on the two blocks counted at
    # once (ASTM E1049-85: the residue carried across blocks makes the joins
    # exact). The names before the glossary pass still work, with a warning.
    rng = np.random.default_rng(12)
    x = np.cumsum(rng.normal(0, 15, 6000))
    with Client(served, timeout_s=60) as c:
        c.create_asset("crane", "jib gauges")
        with pytest.warns(DeprecationWarning, match="create_point"):
            c.add_point("crane", "old", unit="MPa", settings={"curve": "EN1993-1-9:71"})
        c.create_point("crane", "j1", unit="MPa", settings={"curve": "EN1993-1-9:71"})
        for seq, part in enumerate((x[:2500], x[2500:]), 1):
            c.post_block("crane", seq, {"j1": part, "old": part}, sample_rate_hz=100.0)
        point = c.point("crane", "j1")
        feed = c.feed(asset="crane").set_index("point")
        with pytest.warns(DeprecationWarning, match="upload_history"):
            assert c.upload(pd.DataFrame({"a": x}), unit="MPa", sample_rate_hz=100.0)["id"]
    ref = assess_history(x, catalogue_curve("EN1993-1-9:71"))
    # The ledger's damage is that of the closed cycles; damage_if_ended adds
    # the residue as half cycles: the history counted at once.
    assert point["damage_if_ended"] == pytest.approx(ref.damage, rel=1e-12)
    assert point["recorded_hours"] == pytest.approx(60.0 / 3600.0)
    assert feed.loc["j1", "damage"] == point["damage"]
    assert feed.loc["old", "damage"] == point["damage"]


def test_post_command_prints_json_and_exit_codes(served, tmp_path, capsys):
    x = np.tile([-60.0, 60.0], 500)
    csv = tmp_path / "rig.csv"
    pd.DataFrame({"time_s": np.arange(x.size) / 100.0, "g": x}).to_csv(csv, index=False)
    code = main(["post", str(csv), "--url", served, "--unit", "MPa",
                 "--curve", "EN1993-1-9:71", "--json"])
    out = json.loads(capsys.readouterr().out)
    assert code == 0
    # Source: EN 1993-1-9 eq. (7.1): 120 MPa range on category 71,
    # N = 2e6 (71/120)^3; 1000 reversals make (1000 - 1) / 2 = 499.5 cycles
    # (ASTM E1049-85: every range between reversals is half a cycle).
    n_f = 2e6 * (71 / 120) ** 3
    assert out["points"]["g"]["cycles_counted"] == 499.5
    assert out["points"]["g"]["damage"] == pytest.approx(499.5 / n_f, rel=1e-9)
    assert main(["post", str(csv), "--url", served, "--unit", "furlong",
                 "--curve", "EN1993-1-9:71"]) == 2
    assert "unit" in capsys.readouterr().err
    assert main(["post", str(csv), "--url", "http://127.0.0.1:9", "--unit", "MPa",
                 "--curve", "EN1993-1-9:71"]) == 3


def test_demo_command_starts_posts_and_stops(tmp_path, capsys):
    # The README's main command without the final wait.
    code = main(["demo", "--no-wait", "--port", "0", "--data-dir", str(tmp_path / "d"),
                 "--out", str(tmp_path / "demo.csv")])
    out = capsys.readouterr().out
    assert code == 0
    for gauge in ("weld_toe_upper", "weld_toe_lower", "pin_lug", "cylinder_mount"):
        assert gauge in out
    assert "Service on http://127.0.0.1:" in out and "/summary?format=csv" in out
    # The design life and the vibration profile made from the same recording.
    assert "duty cycle loader arm rig test, 100 h" in out and "payload +10 %" in out
    assert "dirlik" in out and "/v1/duty-cycles/d_" in out and "/v1/spectra/s_" in out
    # The lug's hole by the local strain approach, beside the gauge's stress-life.
    assert "pin_lug's hole as a notch by the local strain approach (Kt = 2.4" in out
    assert "the gauge itself, by stress-life" in out and "[strain_life_estimate]" in out
    assert out.count("/v1/assessments/a_") >= 5      # the notch's report among the links


def _demo_csv(tmp_path):
    from service import demo

    return demo.write(tmp_path / "data" / "loader_arm_rig.csv")


def test_pipeline_example_posts_waits_and_fetches(served, tmp_path):
    import subprocess
    import sys
    from pathlib import Path

    csv = _demo_csv(tmp_path)
    script = Path(__file__).resolve().parents[2] / "examples" / "pipeline.py"
    out = subprocess.run([sys.executable, str(script), str(csv), "--url", served],
                         capture_output=True, text=True, timeout=300)
    assert out.returncode == 0, out.stderr
    assert "pin_lug" in out.stdout
    written = sorted(p.name for p in csv.parent.glob("*.cycles.parquet"))
    assert len(written) == 4 and pd.read_parquet(csv.parent / written[0]).shape[0] > 0


def test_rig_test_example_edits_uploads_and_compares(served, tmp_path):
    # The example's figures are the service's: the drive signal it wrote is
    # the stored edit's, and each gauge keeps at least the share asked.
    import subprocess
    import sys
    from pathlib import Path

    csv = _demo_csv(tmp_path)
    script = Path(__file__).resolve().parents[2] / "examples" / "rig_test.py"
    out = subprocess.run([sys.executable, str(script), str(csv), "--url", served,
                          "--keep", "0.9"], capture_output=True, text=True, timeout=300)
    assert out.returncode == 0, out.stderr
    rows = {line.split()[0]: line.split()[1:] for line in out.stdout.splitlines()[2:]}
    assert set(rows) == {"weld_toe_upper", "weld_toe_lower", "pin_lug", "cylinder_mount"}
    for kept, ratio, per_hour in rows.values():
        assert float(kept) >= 0.9 and float(ratio) > 0.5 and float(per_hour) > 1.0
    drive = pd.read_csv(csv.with_name("loader_arm_rig-drive.csv"))
    assert {"source_index", "time_s", "weld_toe_upper"} <= set(drive.columns)


def test_curl_examples_run(served, tmp_path):
    import shutil
    import subprocess
    from pathlib import Path

    if shutil.which("curl") is None:
        pytest.skip("curl is not installed")
    examples = Path(__file__).resolve().parents[2] / "examples"
    work = tmp_path / "ex"
    shutil.copytree(examples, work, ignore=shutil.ignore_patterns("data", "__pycache__"))
    import os
    import sys

    out = subprocess.run(["sh", str(work / "curl.sh"), served], capture_output=True,
                         text=True, timeout=300, env={**os.environ, "PYTHON": sys.executable})
    assert out.returncode == 0, out.stderr
    assert "point,damage" in out.stdout and "unknown-name" in out.stdout
    for heading in ("a duty cycle", "extrapolated", "a shorter drive signal", "as a PSD"):
        assert heading in out.stdout
    assert "source_index,time_s,source_time_s,weld_toe_upper" in out.stdout


def test_report_command_writes_the_page(served, tmp_path, capsys):
    c = Client(served, timeout_s=60)
    a = c.assess(samples={"g": list(np.tile([-60.0, 60.0], 200))}, unit="MPa",
                 settings={"curve": "EN1993-1-9:71"})
    out = tmp_path / "page.html"
    assert main(["report", a["id"], "--url", served, "--out", str(out)]) == 0
    text = out.read_text()
    assert text.startswith("<!DOCTYPE html>") and "<svg" in text
    assert main(["report", "a_missing", "--url", served, "--out", str(out)]) == 2


def test_duty_cycle_through_the_client_and_the_command(served, tmp_path, capsys):
    # Two recordings as events, a target in hours; the command prints each
    # point's verdict and exits 1 when a point fails. Design damage checked
    # against the history built sample by sample and counted at once
    # (ASTM E1049-85) on EN 1993-1-9:2005 curve 71.
    from service.engine.rainflow import astm_e1049
    from service.engine.damage import assess

    c = Client(served)
    lift = {"g": np.tile([-50.0, 70.0], 100)}
    slew = {"g": np.tile([10.0, 40.0], 300)}
    ids = [c.upload_history(x, unit="MPa", sample_rate_hz=20.0)["id"] for x in (lift, slew)]
    events = [{"name": "lift", "history_id": ids[0], "repeats": 4},
              {"name": "slew", "history_id": ids[1], "repeats": 1}]
    doc = c.create_duty_cycle(events, target={"repeats": 2000},
                              settings={"curve": "EN1993-1-9:71"}, name="crane shift")
    one = np.concatenate([np.tile(lift["g"], 4), slew["g"]])
    want = assess(astm_e1049(np.tile(one, 2000)), catalogue_curve("EN1993-1-9:71")).damage
    table = c.duty_cycle_summary(doc["id"])
    assert table.loc["g", "damage"] == pytest.approx(want, rel=1e-12)
    assert bool(table.loc["g", "passed"]) == (want <= 1.0)
    side = c.what_if(doc["id"], [{"name": "double", "load_scale": 2.0}])
    assert side["points"]["g"]["variants"]["double"]["damage"] > want
    request = tmp_path / "shift.json"
    request.write_text(json.dumps({"events": events, "target": {"repeats": 2e5},
                                   "settings": {"curve": "EN1993-1-9:71"}}))
    code = main(["duty-cycle", str(request), "--url", served])
    out = capsys.readouterr().out
    assert code == 1 and "FAIL" in out and "lift" in out  # 100x the life used above
    request.write_text(json.dumps({"events": events, "target": {"repeats": 10},
                                   "settings": {"curve": "EN1993-1-9:71"}}))
    assert main(["duty-cycle", str(request), "--url", served, "--json"]) == 0
    stored = json.loads(capsys.readouterr().out)
    assert stored["passed"] is True
    page = tmp_path / "page.html"
    assert main(["report", "--duty-cycle", stored["id"], "--url", served,
                 "--out", str(page)]) == 0
    assert "Duty cycle" in page.read_text()


def test_edit_through_the_client_and_the_command(served, tmp_path, capsys):
    # The edited drive signal written by `cycleledger edit` is the one the
    # service stored; its damage recounted here (ASTM E1049-85, EN 1993-1-9
    # curve 71) is the damage the report states.
    from service.engine.damage import assess_history as ah
    from tests.api.test_edits import rig_like

    c = Client(served)
    cols = rig_like(7, n=20_000, channels=2)
    hid = c.upload_history(cols, unit="MPa", sample_rate_hz=100.0)["id"]
    out = tmp_path / "drive.csv"
    code = main(["edit", hid, "--url", served, "--curve", "EN1993-1-9:71", "--keep", "0.9",
                 "--window-s", "1", "--out", str(out)])
    printed = capsys.readouterr().out
    assert code == 0 and "damage before" in printed and "edit_scope" in printed
    drive = pd.read_csv(out)
    curve = catalogue_curve("EN1993-1-9:71")
    eid = printed.split()[1]
    res = c.get_json(f"/v1/edits/{eid}")["result"]
    for name in cols:
        d = ah(drive[name].to_numpy(), curve).damage
        assert d == pytest.approx(res["channels"][name]["damage_after"], rel=1e-9)
        assert d >= 0.9 * ah(cols[name], curve).damage
    back = c.edited_signal(eid)
    assert len(back) == len(drive) and list(back.columns)[:3] == ["source_index", "time_s",
                                                                  "source_time_s"]
    cmp = c.compare_rig_field({"history_id": hid},
                              {"history_id": hid}, settings={"curve": "EN1993-1-9:71"})
    assert cmp["points"]["g1"]["field_spans_per_rig_run"] == pytest.approx(1.0)


def test_spectrum_through_the_client_and_the_command(served, tmp_path, capsys):
    # Bendat's narrow-band closed form (NASA CR-33, 1964) through the client
    # and the command: N = 1e14 / S^4, a flat 2-40 Hz band at 20 MPa^2/Hz.
    from service.engine import spectral as sp

    f = np.linspace(0.0, 80.0, 321)
    g = np.where((f >= 2.0) & (f <= 40.0), 20.0, 0.0)
    case = {"name": "x", "exposure_s": 3600.0,
            "psd": {"frequency_hz": f.tolist(), "psd": g.tolist()}}
    settings = {"basquin": {"slope": 4.0, "intercept": 1e14}}
    c = Client(served)
    doc = c.assess_spectrum([case], settings=settings, methods=["narrow_band", "dirlik"])
    table = c.spectrum_summary(doc["id"])
    want = sp.narrow_band_damage(sp.moments(f, g), 3600.0, 4.0, 1e14)
    assert table.loc["narrow_band", "damage"] == pytest.approx(want, rel=1e-5)
    request = tmp_path / "profile.json"
    request.write_text(json.dumps({"load_cases": [case], "settings": settings}))
    assert main(["spectrum", str(request), "--url", served]) == 0
    out = capsys.readouterr().out
    assert "dirlik *" in out and "spectral_gaussian" in out
