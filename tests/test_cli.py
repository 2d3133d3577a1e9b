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


def test_assess_takes_an_absolute_gate_or_a_fraction_not_both(tmp_path, capsys):
    # Issue 17: `gate` and `gate_fraction` are offered wherever a gate is.
    rng = np.random.default_rng(9)
    x = 50 * rng.standard_normal(4000)
    path = tmp_path / "rec.csv"
    path.write_text("time_s,g1\n" + "\n".join(f"{i / 100:.2f},{float(v)!r}" for i, v in enumerate(x)))
    assert main(["assess", str(path), "--curve", "EN1993-1-9:71", "--gate", "30", "--json"]) == 0
    got = json.loads(capsys.readouterr().out)["points"]["g1"]
    expected = assess_history(x, catalogue_curve("EN1993-1-9:71"), duration_s=40.0, gate=30.0)
    assert got["damage"] == pytest.approx(expected.damage, rel=1e-12)
    assert got["cycles_counted"] == expected.cycles_counted
    with pytest.raises(SystemExit):
        main(["assess", str(path), "--gate", "30", "--gate-fraction", "0.1"])


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
def test_serve_without_keys_is_open_to_this_machine_only(host, allowed, tmp_path, capsys):
    # Without API keys the service must not listen beyond loopback (common
    # practice for an unauthenticated service).
    from service.cli import is_loopback

    assert is_loopback(host) == allowed
    if not allowed:
        assert main(["serve", "--host", host, "--port", "1", "--data-dir",
                     str(tmp_path)]) == 2
        assert "refusing" in capsys.readouterr().err


def test_serve_with_keys_may_listen_beyond_loopback(tmp_path, capsys, monkeypatch):
    from gunicorn.app.base import BaseApplication

    started = []
    monkeypatch.setattr(BaseApplication, "run", lambda self: started.append(self.cfg.bind))
    assert main(["keys", "--data-dir", str(tmp_path), "create", "--project", "rig",
                 "--scope", "write"]) == 0
    capsys.readouterr()
    assert main(["serve", "--host", "0.0.0.0", "--port", "8351", "--data-dir",
                 str(tmp_path)]) == 0
    assert started == [["0.0.0.0:8351"]]


def test_keys_create_list_revoke(tmp_path, capsys):
    d = ["keys", "--data-dir", str(tmp_path)]
    assert main(d + ["create", "--project", "rig-7", "--scope", "write", "--name", "rig 7 daq",
                     "--json"]) == 0
    made = json.loads(capsys.readouterr().out)
    assert made["secret"].startswith(f"clk_{made['id']}_") and len(made["secret"]) > 40
    assert made["scopes"] == ["read", "write"] and made["project"] == "rig-7"
    assert main(d + ["create", "--project", "rig-7", "--scope", "read"]) == 0
    shown = capsys.readouterr().out
    assert "shown once" in shown
    assert main(d + ["list", "--json"]) == 0
    listed = json.loads(capsys.readouterr().out)
    assert [k["scopes"] for k in listed] == [["read", "write"], ["read"]]
    assert made["secret"] not in json.dumps(listed) and "secret_hash" not in listed[0]
    assert main(d + ["revoke", made["id"]]) == 0
    assert main(d + ["revoke", made["id"]]) == 2  # already revoked
    assert main(d + ["list"]) == 0
    table = capsys.readouterr().out
    assert "revoked" in table and "active" in table and made["secret"] not in table
    assert main(d + ["create", "--project", "../etc", "--scope", "read"]) == 2
    assert "project name" in capsys.readouterr().err


def test_assess_reads_a_decimal_comma_csv_as_the_service_does(tmp_path, capsys):
    # The command reads with the service's reader: a semicolon export with
    # decimal commas, a preamble and a units row (microstrain, ms) gives the
    # damage of the same samples in MPa.
    rng = np.random.default_rng(4)
    x = np.round(300 * rng.standard_normal(2000), 2)                 # microstrain
    rows = [f"{i * 2};{str(float(v)).replace('.', ',')}" for i, v in enumerate(x)]
    path = tmp_path / "rig.csv"
    path.write_text("Prüfstand 2\n\nZeit;SG1\nms;µm/m\n" + "\n".join(rows) + "\n",
                    encoding="utf-8")
    assert main(["assess", str(path), "--curve", "EN1993-1-9:71", "--youngs-modulus",
                 "206000", "--time-column", "Zeit", "--json"]) == 0
    got = json.loads(capsys.readouterr().out)
    expected = assess_history(x * 1e-6 * 206000, catalogue_curve("EN1993-1-9:71"),
                              duration_s=4.0)
    assert got["points"]["SG1"]["damage"] == pytest.approx(expected.damage, rel=1e-12)
    assert got["duration_s"] == pytest.approx(4.0)


def test_version(capsys):
    import service

    with pytest.raises(SystemExit) as done:
        main(["--version"])
    assert done.value.code == 0
    assert capsys.readouterr().out.strip() == f"cycleledger {service.__version__}"


def test_serve_options_from_command_line_environment_file_and_defaults(tmp_path):
    # Precedence (README "Operating the service"): command line, then
    # CYCLELEDGER_<NAME>, then the [serve] table of --config, then defaults.
    import argparse

    from service.cli.serve import SERVE_OPTIONS, resolve_serve_options

    toml = tmp_path / "cycleledger.toml"
    toml.write_text('[serve]\nport = 9001\nthreads = 4\nmax_upload_mb = 64\n'
                    'data_dir = "/srv/a"\n')
    args = argparse.Namespace(config=str(toml), **dict.fromkeys(SERVE_OPTIONS))
    args.threads = 2
    env = {"CYCLELEDGER_PORT": "9002", "CYCLELEDGER_RATE_PER_S": "5"}
    got = resolve_serve_options(args, env)
    assert got["threads"] == 2                 # command line
    assert got["port"] == 9002                 # environment over file
    assert got["rate_per_s"] == 5.0            # environment
    assert got["max_upload_mb"] == 64.0 and got["data_dir"] == "/srv/a"   # file
    assert got["host"] == "127.0.0.1" and got["max_queued_jobs"] == 16    # defaults
    with pytest.raises(ValueError) as err:
        resolve_serve_options(args, {"CYCLELEDGER_PORT": "eighty"})
    assert "CYCLELEDGER_PORT" in str(err.value)
    toml.write_text("[serve]\nprot = 1\n")
    with pytest.raises(ValueError) as err:
        resolve_serve_options(args, {})
    assert "prot" in str(err.value)


def test_every_option_has_help_and_shows_its_default():
    # Issue 17: every CLI option says what it does, and its default when it
    # has one (argparse's %(default)s or the words "default").
    import argparse

    import service.cli as cli

    parsers = []
    real = argparse.ArgumentParser.parse_args

    def capture(self, args=None, namespace=None):
        parsers.append(self)
        raise SystemExit(0)

    argparse.ArgumentParser.parse_args = capture
    try:
        with pytest.raises(SystemExit):
            cli.main(["--help"])
    finally:
        argparse.ArgumentParser.parse_args = real
    missing = []
    for action in parsers[0]._subparsers._group_actions[0].choices.items():
        name, sub = action
        for a in sub._actions:
            if not a.option_strings or a.dest in ("help",):
                continue
            text = a.help or ""
            if not text:
                missing.append(f"{name} {a.option_strings[0]}: no help")
            elif a.default not in (None, False) and "default" not in text:
                missing.append(f"{name} {a.option_strings[0]}: default {a.default!r} not shown")
    assert not missing, missing
