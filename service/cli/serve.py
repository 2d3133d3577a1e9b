"""``cycleledger serve``: the HTTP service under gunicorn (and the in-process server of demo and tests)."""

from __future__ import annotations

import argparse
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
        # The loop is ending or has ended between the check and the pull:
        # its trigger is closed first, the thread returns a moment later.
        # Only a loop that is still running after the wait is an error.
        thread.join(timeout=timeout_s)
        if thread.is_alive():
            raise
        return
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


#: Options of ``serve``: name -> (type, default, help). Defaults apply last:
#: command line, then environment (CYCLELEDGER_<NAME>), then the TOML file.
SERVE_OPTIONS = {
    "host": (str, "127.0.0.1", "address to listen on"),
    "port": (int, 8350, "port to listen on"),
    "data_dir": (str, "cycleledger-data", "data directory"),
    "threads": (int, 8, "request threads"),
    "job_workers": (int, 1, "threads running large assessments"),
    "max_upload_mb": (float, 512.0, "largest request body; larger ones get 413"),
    "memory_body_mb": (float, 256.0, "uploads up to this size are read in memory (the "
                                     "largest buffer kept for the next), larger ones through "
                                     "a temporary file"),
    "async_samples": (int, 2_000_000, "samples x points above which an assessment becomes "
                                      "a job"),
    "scheduler": (str, None, "Dask scheduler address: jobs' points run on that cluster "
                             "(default: in this process)"),
    "max_channels": (int, 256, "channels in one request; more get 413"),
    "max_samples_per_channel": (int, 200_000_000, "samples in one channel of a request; "
                                                  "more get 413"),
    "max_queued_jobs": (int, 16, "jobs queued or running before new ones get 429"),
    "rate_per_s": (float, 50.0, "requests a second per API key before 429 (0: no limit)"),
    "rate_burst": (float, 100.0, "requests a key may send at once above its rate"),
}


def serve_arguments(p) -> None:
    """The options of ``serve`` (each also from the environment and a file)."""
    p.add_argument("--config", help="a TOML file with a [serve] table of these options")
    for name, (kind, default, text) in SERVE_OPTIONS.items():
        p.add_argument("--" + name.replace("_", "-"), dest=name, type=kind, default=None,
                       help=f"{text} (default {default}; env CYCLELEDGER_{name.upper()})")


def resolve_serve_options(args, environ=None) -> dict:
    """Every serve option from the command line, else the environment
    (``CYCLELEDGER_<NAME>``), else the ``[serve]`` table of ``--config``,
    else its default. Raises ValueError naming a bad value and where it
    came from."""
    import tomllib

    environ = os.environ if environ is None else environ
    table = {}
    if getattr(args, "config", None):
        with open(args.config, "rb") as f:
            table = tomllib.load(f).get("serve", {})
        unknown = set(table) - set(SERVE_OPTIONS)
        if unknown:
            raise ValueError(f"{args.config}: unknown serve option(s) {sorted(unknown)}; "
                             f"known: {sorted(SERVE_OPTIONS)}")
    out = {}
    for name, (kind, default, _) in SERVE_OPTIONS.items():
        given = getattr(args, name, None)
        env = environ.get(f"CYCLELEDGER_{name.upper()}")
        if given is not None:
            out[name] = given
            continue
        for source, value in ((f"CYCLELEDGER_{name.upper()}", env),
                              (args.config if table else "", table.get(name))):
            if value is None:
                continue
            try:
                out[name] = kind(value)
            except (TypeError, ValueError):
                raise ValueError(f"{name} {value!r} from {source} is not a "
                                 f"{kind.__name__}") from None
            break
        else:
            out[name] = default
    return out


def _cmd_serve(args) -> int:
    import logging

    from gunicorn.app.base import BaseApplication

    from service.api import create_app

    from service.store import keys, sqlite

    try:
        opts = resolve_serve_options(args)
    except (OSError, ValueError) as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    args = argparse.Namespace(**{**vars(args), **opts})
    data_dir = args.data_dir
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

    from service.api.audit import JsonFormatter

    # One JSON object a line on stderr (request log, job and error logs):
    # what a log collector or journald reads without parsing text.
    handler = logging.StreamHandler()
    handler.setFormatter(JsonFormatter())
    logging.basicConfig(level=logging.INFO, handlers=[handler])
    config = {"DATA_DIR": args.data_dir, "MAX_UPLOAD_MB": args.max_upload_mb,
              "MEMORY_BODY_MB": args.memory_body_mb,
              "JOB_WORKERS": args.job_workers, "ASYNC_SAMPLES": args.async_samples,
              "MAX_CHANNELS": args.max_channels,
              "MAX_SAMPLES_PER_CHANNEL": args.max_samples_per_channel,
              "MAX_QUEUED_JOBS": args.max_queued_jobs, "RATE_PER_S": args.rate_per_s,
              "RATE_BURST": args.rate_burst}
    if args.scheduler:
        config["DASK_SCHEDULER"] = args.scheduler
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
                    "control_socket_disable": True, "accesslog": None,
                    "errorlog": "-"}.items():
                self.cfg.set(key, value)

        def load(self):
            app = create_app(config)
            print(f"cycleledger {_version()} serving on http://{args.host}:{args.port}/v1/ "
                  f"(data in {app.config['DATA_DIR']}; {access}; Ctrl-C stops)", flush=True)
            return app

    Server().run()
    return 0
