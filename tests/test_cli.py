"""The cycleledger command: demo, assess, curves."""

import json
import math

import numpy as np
import pytest

from service.cli import main
from service.engine.damage import assess_history
from service.engine.sn_catalogue import catalogue_curve


def test_demo_prints_a_table_for_every_gauge(tmp_path, capsys):
    assert main(["demo", "--offline", "--out", str(tmp_path / "demo.csv")]) == 0
    out = capsys.readouterr().out
    for gauge in ("weld_toe_upper", "weld_toe_lower", "pin_lug", "cylinder_mount"):
        assert gauge in out
    assert "qualified engineer" in out


def test_assess_json_matches_the_engine(tmp_path, capsys):
    rng = np.random.default_rng(8)
    x = 50 * rng.standard_normal(4000)
    path = tmp_path / "rec.csv"
    path.write_text("time_s,g1\n" + "\n".join(f"{i / 100:.2f},{float(v)!r}" for i, v in enumerate(x)))
    assert main(["assess", str(path), "--curve", "EN1993-1-9:71", "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    expected = assess_history(x, catalogue_curve("EN1993-1-9:71"), duration_s=40.0)
    got = report["points"]["g1"]
    assert got["damage"] == pytest.approx(expected.damage, rel=1e-12)
    assert got["life_hours"] == pytest.approx(expected.life_hours, rel=1e-12)
    assert report["duration_s"] == pytest.approx(40.0)


def test_assess_strain_channel_with_modulus(tmp_path, capsys):
    path = tmp_path / "rec.csv"
    path.write_text("g1\n0\n500\n-500\n500\n0\n")
    assert main(["assess", str(path), "--curve", "EN1993-1-9:71", "--unit", "microstrain",
                 "--youngs-modulus", "200000", "--json"]) == 0
    got = json.loads(capsys.readouterr().out)["points"]["g1"]
    assert got["max_range"] == pytest.approx(200.0)


def test_unknown_channel_is_an_error(tmp_path, capsys):
    path = tmp_path / "rec.csv"
    path.write_text("g1\n0\n1\n0\n")
    cfg = tmp_path / "p.json"
    cfg.write_text(json.dumps({"points": {"g2": {"curve": "EN1993-1-9:71"}}}))
    assert main(["assess", str(path), "--points", str(cfg)]) == 2
    assert "'g2' is not in rec.csv" in capsys.readouterr().err


def test_overload_exits_non_zero(tmp_path, capsys):
    path = tmp_path / "rec.csv"
    path.write_text("g1\n0\n500\n0\n500\n")
    assert main(["assess", str(path), "--curve", "EN1993-1-9:71", "--mean-stress-method",
                 "none"]) == 0
    cfg = tmp_path / "p.json"
    cfg.write_text(json.dumps({"points": {"g1": {"curve": "EN1993-1-9:71",
                                                 "ultimate_strength": 400}}}))
    capsys.readouterr()
    assert main(["assess", str(path), "--points", str(cfg), "--json"]) == 1
    got = json.loads(capsys.readouterr().out)["points"]["g1"]
    assert got["damage"] is None or math.isinf(got["damage"])
    assert "static_overload" in got["flags"]


def test_curves_lists_the_catalogue(capsys):
    assert main(["curves"]) == 0
    out = capsys.readouterr().out
    assert "EN1993-1-9:71" in out and "DNV-RP-C203:D" in out and "IIW:FAT90" in out


def test_non_numeric_cell_names_channel_and_row(tmp_path, capsys):
    path = tmp_path / "rec.csv"
    path.write_text("g1\n0\n1\nabc\n0\n")
    assert main(["assess", str(path), "--curve", "EN1993-1-9:71"]) == 2
    assert "channel 'g1' row 2 is 'abc'" in capsys.readouterr().err


@pytest.mark.parametrize("host, allowed", [("127.0.0.1", True), ("127.0.0.2", True),
                                           ("::1", True), ("localhost", True),
                                           ("0.0.0.0", False), ("192.168.1.20", False),
                                           ("rig-server.local", False)])
def test_serve_is_open_to_this_machine_only(host, allowed, capsys):
    # Without access control the service must not listen beyond loopback
    # (common practice for an unauthenticated service).
    from service.cli import is_loopback

    assert is_loopback(host) == allowed
    if not allowed:
        assert main(["serve", "--host", host, "--port", "1"]) == 2
        assert "refusing" in capsys.readouterr().err
