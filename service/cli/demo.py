"""``cycleledger demo``: start the service, post the bundled demo, print the table."""

from __future__ import annotations

from pathlib import Path

from ._shared import print_report
from .assess import assess_file
from .remote import post_file
from .serve import stop_waitress, waitress_options


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
                     f"/v1/assessments/{a}/points/pin_lug/range-mean", "/v1/curves",
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
