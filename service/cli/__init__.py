"""The ``cycleledger`` command.

Subcommands
-----------
assess   count and assess the channels of a CSV or Parquet file, print a table
demo     start the service, post the bundled demo, print the table, keep serving
post     upload a recording to a running service, assess it, print the table
report   write an assessment's or an asset's HTML page (plots, tables, cautions)
duty-cycle  check a duty cycle (events, target) on a running service
edit     shorten a stored recording for a rig keeping its damage; write the drive signal
spectrum assess a vibration test profile of PSDs by spectral methods
curves   list the published S-N curves the catalogue holds
serve    run the HTTP service on embedded storage
keys     make, list and revoke API keys
backup   copy a data directory, also while the service runs; restore, check

One module a subcommand (``assess``, ``remote`` for post and report, ``demo``,
``serve``, ``keys``, ``batch`` with curves, ``duty`` for duty-cycle, edit and spectrum); ``main`` builds the parser.
"""

from __future__ import annotations

import argparse
import sys

from ._shared import _recording_args, _version
from .admin import add_parsers as add_admin_parsers
from .assess import _cmd_assess
from .batch import _cmd_batch, _cmd_curves
from .demo import _cmd_demo
from .duty import add_edit_parser, add_parser as add_duty_parser, add_spectrum_parser
from .keys import _keys_parser
from .remote import _cmd_post, _cmd_report
from .serve import _cmd_serve, serve_arguments
# The functions scripts and tests import from ``service.cli``.
from .assess import assess_file
from ._shared import print_report
from .remote import post_file
from .serve import is_loopback, stop_waitress, waitress_options

__all__ = ["main", "assess_file", "print_report", "post_file", "is_loopback", "stop_waitress",
           "waitress_options"]


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(prog="cycleledger", description=__doc__.splitlines()[0])
    parser.add_argument("--version", action="version", version=f"cycleledger {_version()}")
    sub = parser.add_subparsers(dest="command", required=True)
    p = sub.add_parser("assess", help="assess the channels of a recording")
    _recording_args(p, "unit of the samples (default MPa)")
    p.set_defaults(func=_cmd_assess)
    p = sub.add_parser("demo", help="start the service, post the bundled demo, keep serving")
    p.add_argument("--out", help="where to write the demo CSV")
    p.add_argument("--port", type=int, default=8350,
                   help="port on 127.0.0.1 (0: any free; default %(default)s)")
    p.add_argument("--data-dir", dest="data_dir",
                   help="data directory (default: $CYCLELEDGER_DATA_DIR or ./cycleledger-data)")
    p.add_argument("--no-wait", dest="no_wait", action="store_true",
                   help="stop the service after printing the table")
    p.add_argument("--offline", action="store_true",
                   help="assess in this process without the service")
    p.set_defaults(func=_cmd_demo)
    p = sub.add_parser("post", help="upload a recording to a running service and assess it")
    _recording_args(p, "unit of the samples (required by the service)")
    p.add_argument("--url", default="http://127.0.0.1:8350",
                   help="the service (default %(default)s)")
    p.set_defaults(func=_cmd_post)
    p = sub.add_parser("report", help="write an assessment's, an asset's or a duty cycle's "
                       "HTML page")
    who = p.add_mutually_exclusive_group(required=True)
    who.add_argument("assessment", nargs="?", help="assessment id (a_...)")
    who.add_argument("--asset", help="a ledger asset instead")
    who.add_argument("--duty-cycle", dest="duty_cycle", help="a duty cycle (d_...) instead")
    p.add_argument("--url", default="http://127.0.0.1:8350",
                   help="the service (default %(default)s)")
    p.add_argument("--out", help="file to write (default: <id>.html)")
    p.set_defaults(func=_cmd_report)
    add_duty_parser(sub)
    add_edit_parser(sub)
    add_spectrum_parser(sub)
    p = sub.add_parser("batch", help="assess every point of a Parquet dataset on Dask")
    p.add_argument("dataset", help="a Parquet file or a folder of them (successive stretches)")
    p.add_argument("--out", required=True, help="folder for points.parquet and summary.json")
    p.add_argument("--settings", help="JSON file: settings for every point")
    p.add_argument("--points", help="JSON file: settings per point over --settings")
    p.add_argument("--curve", help="catalogue designation for every point")
    p.add_argument("--mean-stress-method", dest="mean_stress_method",
                   help="mean-stress correction for every point (default none: range only)")
    p.add_argument("--unit", default="MPa", help="unit of the samples (default MPa)")
    p.add_argument("--youngs-modulus", dest="youngs_modulus", type=float,
                   help="E in MPa, for strain units")
    p.add_argument("--sample-rate-hz", dest="sample_rate_hz", type=float,
                   help="when there is no time_s column")
    gate = p.add_mutually_exclusive_group()
    gate.add_argument("--gate", type=float,
                      help="hysteresis gate for every point [MPa] (default 0: none)")
    gate.add_argument("--gate-fraction", dest="gate_fraction", type=float,
                      help="hysteresis gate as a fraction of each point's range over the "
                           "dataset (reads the samples twice; default 0)")
    p.add_argument("--partition-points", dest="partition_points", type=int, default=64,
                   help="points a task holds (memory per task: one file of them; default "
                        "%(default)s)")
    p.add_argument("--scheduler", help="Dask scheduler address (default: "
                   "$CYCLELEDGER_DASK_SCHEDULER, else a local cluster in this process)")
    p.add_argument("--threads", type=int, help="threads of the local cluster (default: cores)")
    p.add_argument("--json", action="store_true", help="print the summary as JSON")
    p.set_defaults(func=_cmd_batch)
    p = sub.add_parser("curves", help="list the catalogue of published S-N curves")
    p.set_defaults(func=_cmd_curves)
    p = sub.add_parser("serve", help="run the HTTP service (gunicorn, one process, threads)",
                       description="Every option may also come from the environment "
                       "(CYCLELEDGER_<OPTION>, e.g. CYCLELEDGER_PORT) or from a TOML file "
                       "(--config, a [serve] table with the options' names, e.g. port = 8350);"
                       " the command line wins over the environment, which wins over the "
                       "file, which wins over the defaults.")
    serve_arguments(p)
    p.set_defaults(func=_cmd_serve)
    _keys_parser(sub)
    add_admin_parsers(sub)
    args = parser.parse_args(argv)
    from service.engine.errors import EngineError

    try:
        return args.func(args)
    except (EngineError, FileNotFoundError, FileExistsError) as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2


if __name__ == "__main__":
    sys.exit(main())
