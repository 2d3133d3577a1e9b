"""``cycleledger serve``: the HTTP service under gunicorn (and the in-process server of demo and tests)."""

from __future__ import annotations

import os
import sys

from ._shared import _version


def stop_waitress(server, thread, timeout_s: float = 10.0) -> None:
    """Stop a waitress server running on ``thread`` from inside its own loop.

    Closing its sockets from another thread races the loop's ``select`` (an
    EBADF in the server thread); a thunk pulled through waitress's trigger
    closes every channel inside the loop, which then ends on an empty map.
    """
    if not thread.is_alive():
        return  # its loop has ended already (and closed its trigger)
    try:
        server.trigger.pull_trigger(lambda: [ch.close() for ch in list(server._map.values())])
    except OSError:
        # The loop ended between the check and the pull (its trigger is
        # closed with it); there is nothing left to stop.
        if thread.is_alive():
            raise
    thread.join(timeout=timeout_s)


def is_loopback(host: str) -> bool:
    """Whether ``host`` only accepts connections from this machine."""
    import ipaddress

    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


def waitress_options(app) -> dict:
    """waitress settings for large uploads.

    By default waitress reads 8 kB at a time and spools bodies above 512 kB
    to a temporary file; a 64 MB Parquet upload then costs more in the server
    than in the engine. Bodies up to the upload limit stay in memory and are
    read in 4 MB pieces.
    """
    limit = app.config["MAX_CONTENT_LENGTH"]
    return {"max_request_body_size": limit + 2**20, "inbuf_overflow": limit + 2**20,
            "recv_bytes": 2**22}


def _cmd_serve(args) -> int:
    import logging

    from gunicorn.app.base import BaseApplication

    from service.api import create_app

    from service.store import keys, sqlite

    data_dir = args.data_dir or os.environ.get("CYCLELEDGER_DATA_DIR", "cycleledger-data")
    sqlite.init(data_dir)
    con = sqlite.connect(data_dir)
    try:
        keyed = keys.any_active(con)
    finally:
        con.close()
    if not keyed and not is_loopback(args.host):
        # Open mode (no keys): every client could read and change everything.
        print(f"error: refusing to serve on {args.host} without API keys: anyone who can "
              f"reach it could read and change every result. Make a key first "
              f"(cycleledger keys create --project NAME --scope admin), or bind to "
              f"127.0.0.1.", file=sys.stderr)
        return 2

    logging.basicConfig(level=logging.INFO, format="%(asctime)s %(name)s %(message)s")
    config = {"DATA_DIR": args.data_dir} if args.data_dir else {}
    if args.max_upload_mb is not None:
        config["MAX_UPLOAD_MB"] = args.max_upload_mb
    if args.job_workers is not None:
        config["JOB_WORKERS"] = args.job_workers
    if args.async_samples is not None:
        config["ASYNC_SAMPLES"] = args.async_samples
    for flag, setting in (("max_channels", "MAX_CHANNELS"),
                          ("max_samples_per_channel", "MAX_SAMPLES_PER_CHANNEL"),
                          ("max_queued_jobs", "MAX_QUEUED_JOBS")):
        if getattr(args, flag) is not None:
            config[setting] = getattr(args, flag)
    if args.scheduler:
        config["DASK_SCHEDULER"] = args.scheduler
    if args.rate_per_s is not None:
        config["RATE_PER_S"] = args.rate_per_s
    if args.rate_burst is not None:
        config["RATE_BURST"] = args.rate_burst
    access = ("API keys required" if keyed else
              "OPEN: no API keys, so it answers clients on this machine without one")

    class Server(BaseApplication):
        # One worker process with request threads: jobs and their state live
        # in this process, and gunicorn hands a request body to the app as it
        # arrives, so an upload is written to disk while it is received.
        def load_config(self):
            for key, value in {
                    "bind": f"{args.host}:{args.port}", "workers": 1,
                    "worker_class": "gthread", "threads": args.threads,
                    "timeout": 600, "graceful_timeout": 30, "keepalive": 5,
                    "control_socket_disable": True, "accesslog": "-",
                    "errorlog": "-"}.items():
                self.cfg.set(key, value)

        def load(self):
            app = create_app(config)
            print(f"cycleledger {_version()} serving on http://{args.host}:{args.port}/v1/ "
                  f"(data in {app.config['DATA_DIR']}; {access}; Ctrl-C stops)", flush=True)
            return app

    Server().run()
    return 0
