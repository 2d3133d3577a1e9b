"""``cycleledger backup``, ``restore`` and ``check``: a data directory kept safe."""

from __future__ import annotations

import json
import os
import sys


def _data_dir(args) -> str:
    return args.data_dir or os.environ.get("CYCLELEDGER_DATA_DIR") or "cycleledger-data"


def _cmd_backup(args) -> int:
    from service.store.backup import backup

    manifest = backup(_data_dir(args), args.dest)
    print(f"backed up {len(manifest['files'])} files and the database (schema "
          f"{manifest['schema_version']}) into {args.dest}")
    for rel in manifest["missing"]:
        print(f"  removed while copying (its row was deleted): {rel}", file=sys.stderr)
    return 0


def _cmd_restore(args) -> int:
    from service.store.backup import restore

    try:
        report = restore(args.source, _data_dir(args))
    except ValueError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 1
    print(f"restored {args.source} into {_data_dir(args)}: "
          + ("checks ok" if report["ok"] else json.dumps(report)))
    return 0 if report["ok"] else 1


def _cmd_check(args) -> int:
    from service.store.backup import check

    report = check(_data_dir(args))
    if args.json:
        print(json.dumps(report, indent=1))
    else:
        print(f"database: {report['integrity']}; {report['files']} files named by rows")
        for key in ("missing", "mismatched", "unreadable", "orphans"):
            for rel in report[key]:
                print(f"  {key}: {rel}")
        print("ok" if report["ok"] else "NOT OK")
    return 0 if report["ok"] else 1


def add_parsers(sub) -> None:
    """The three subcommands on the main parser."""
    help_dir = "data directory (default: $CYCLELEDGER_DATA_DIR or ./cycleledger-data)"
    p = sub.add_parser("backup", help="copy a data directory (also while the service runs)")
    p.add_argument("dest", help="a new, empty folder for the backup")
    p.add_argument("--data-dir", dest="data_dir", help=help_dir)
    p.set_defaults(func=_cmd_backup)
    p = sub.add_parser("restore", help="restore a backup into a new data directory")
    p.add_argument("source", help="the backup's folder")
    p.add_argument("--data-dir", dest="data_dir", help=help_dir + "; must be new or empty")
    p.set_defaults(func=_cmd_restore)
    p = sub.add_parser("check", help="integrity of a data directory or a backup")
    p.add_argument("--data-dir", dest="data_dir", help=help_dir)
    p.add_argument("--json", action="store_true", help="the report as JSON")
    p.set_defaults(func=_cmd_check)
