"""``cycleledger demo``: start the service, post the bundled demo, print the table."""

from __future__ import annotations

from pathlib import Path

from service import formatting

from ._shared import print_report
from .duty import print_duty_cycle
from .assess import assess_file
from .remote import post_file
from .serve import stop_waitress, waitress_options


def _design_life(client, report: dict) -> tuple[dict, dict]:
    """The demo's design life and vibration profile: the rig recording as a
    duty cycle with a target of ``demo.DESIGN_HOURS`` (with a heavier
    payload as a what-if), and the
    upper weld toe's signal as a PSD load case (spectral methods against
    its own rainflow count). Printed and returned."""
    from service import demo

    duty = client.create_duty_cycle(
        [{"name": "dig and dump", "assessment_id": report["assessment_id"], "hours": 1.0}],
        target={"hours": demo.DESIGN_HOURS},
        name=f"loader arm rig test, {demo.DESIGN_HOURS} h",
        variants=[{"name": "payload +10 %", "load_scale": 1.1}])
    print()
    print_duty_cycle(duty)
    upper = demo.points()["points"]["weld_toe_upper"]
    spectrum = client.assess_spectrum(
        [{"name": "upper weld toe", "history_id": report["history_id"],
          "channel": "weld_toe_upper", "exposure_s": 3600.0}],
        settings=upper, name="loader arm, one hour of the rig signal as a PSD")
    res = spectrum["result"]
    td = res["time_domain"]["damage"]
    print(f"\nOne hour of the upper weld toe's signal as a PSD (Welch), damage by method "
          f"(time-domain counting: {formatting.number(td)}):")
    for m, r in res["methods"].items():
        if not r["applicable"]:
            print(f"  {m:<18} not applicable: {r['not_applicable']}")
            continue
        print(f"  {m:<18} {formatting.number(r['damage']):>10}  "
              f"({r['relative_to_time_domain']:+.0%} of counting)")
    for c in res["cautions"]:
        if c["code"] in ("non_gaussian", "spectral_gaussian"):
            print(f"  - [{c['code']}] {c['text']}")
    return duty, spectrum


def _notch(client, report: dict) -> dict:
    """The lug's hole by the local strain approach (the demo's ``notch``
    settings) beside the gauge's own stress-life result. Printed and
    returned."""
    from service import demo
    from service.engine.strain_life import MEAN_STRESS_NAMES

    config = demo.points()
    a = client.assess(history_id=report["history_id"], gate_fraction=config["gate_fraction"],
                      points=config["notch"])
    for name, p in a["points"].items():
        sl = p["strain_life"]
        m = p["options"]
        gauge = report["points"][name]
        print(f"\n{name}'s hole as a notch by the local strain approach (Kt = {m['kt']:g}, "
              f"{m['notch_rule'].capitalize()}'s rule, "
              f"{MEAN_STRESS_NAMES[m['mean_stress_method']]}; {sl['material']['source']}):")
        print(f"  damage {formatting.number(p['damage'])}, life "
              f"{formatting.number(p['life_hours'])} h (the gauge itself, by stress-life: "
              f"{formatting.number(gauge['life_hours'])} h), reserve factor "
              f"{formatting.number(p['reserve_factor'])} ({p['reserve_limited_by']})")
        print(f"  largest local strain amplitude {formatting.number(sl['max_strain_amplitude'])}, "
              f"peak local stress {formatting.number(sl['max_stress'])} MPa")
        for c in p["cautions"]:
            if c["code"].startswith("strain_life"):
                print(f"  - [{c['code']}] {c['text']}")
    return a


def _cmd_demo(args) -> int:
    from service import demo

    config = demo.points()
    csv = demo.write(Path(args.out) if args.out else demo.DEFAULT_CSV)
    if args.offline:
        print_report(assess_file(csv, config))
        return 0
    import threading

    from waitress import create_server

    from service.api import create_app
    from service.client import Client

    app = create_app({"DATA_DIR": args.data_dir} if args.data_dir else None)
    server = create_server(app, host="127.0.0.1", port=args.port, threads=8,
                           **waitress_options(app))
    url = f"http://127.0.0.1:{server.effective_port}"
    thread = threading.Thread(target=server.run, name="cycleledger-demo", daemon=True)
    thread.start()
    try:
        client = Client(url)
        report = post_file(client, csv, config)
        print_report(report)
        a = report["assessment_id"]
        duty, spectrum = _design_life(client, report)
        notch = _notch(client, report)
        from service.store import keys, sqlite

        con = sqlite.connect(app.config["DATA_DIR"])
        try:
            mode = ("API keys required" if keys.any_active(con)
                    else "open mode: no API keys, this machine only")
        finally:
            con.close()
        print(f"\nService on {url} (data in {app.config['DATA_DIR']}; {mode}). Look at:")
        for path in ("/  (the start page: assets, assessments, a form to assess a recording)",
                     f"/v1/assessments/{a}/report", "/v1/assessments/" + a,
                     f"/v1/assessments/{a}/summary?format=csv",
                     f"/v1/assessments/{a}/points/pin_lug/cycles?format=csv",
                     f"/v1/assessments/{a}/points/pin_lug/range-mean",
                     f"/v1/duty-cycles/{duty['id']}/report",
                     f"/v1/spectra/{spectrum['id']}/report",
                     f"/v1/assessments/{notch['id']}/report", "/v1/curves",
                     "/openapi.yaml"):
            print(f"  {url}{path}")
        if args.no_wait:
            return 0
        print("Serving until Ctrl-C.", flush=True)
        import signal

        def _stop(_sig, _frame):
            raise KeyboardInterrupt

        signal.signal(signal.SIGTERM, _stop)  # a service manager's stop, like Ctrl-C
        while thread.is_alive():
            thread.join(0.5)
    except KeyboardInterrupt:
        print("\nstopped")
    finally:
        stop_waitress(server, thread)
        app.extensions["cycleledger.jobs"].shutdown()
    return 0
