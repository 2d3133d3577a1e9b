"""``cycleledger keys``: API keys made, listed and revoked on the machine that holds the data."""

from __future__ import annotations

import json
import os
import sys


def _keys_parser(sub) -> None:
    p = sub.add_parser("keys", help="make, list and revoke API keys (on the data directory)")
    p.add_argument("--data-dir", dest="data_dir",
                   help="data directory (default: $CYCLELEDGER_DATA_DIR or ./cycleledger-data)")
    ks = p.add_subparsers(dest="keys_command", required=True)
    c = ks.add_parser("create", help="make a key; its secret is printed once")
    c.add_argument("--project", required=True, help="the namespace the key reads and writes")
    c.add_argument("--scope", required=True, choices=["read", "write", "admin"],
                   help="read: GET; write: + histories, assessments, blocks; admin: + assets, "
                        "points, settings, voids, deletes, curves and materials")
    c.add_argument("--name", help="what the key is for (a rig, a dashboard)")
    c.add_argument("--rate-per-s", dest="rate_per_s", type=float,
                   help="this key's request rate (default: the service's)")
    c.add_argument("--json", action="store_true", help="machine-readable output")
    c.set_defaults(func=_cmd_keys_create)
    c = ks.add_parser("list", help="the keys (never their secrets)")
    c.add_argument("--project")
    c.add_argument("--json", action="store_true", help="machine-readable output")
    c.set_defaults(func=_cmd_keys_list)
    c = ks.add_parser("revoke", help="revoke a key for good (its requests get 401 at once)")
    c.add_argument("key_id", help="the key's id (k_...)")
    c.set_defaults(func=_cmd_keys_revoke)


def _keys_store(args):
    from service.store import sqlite

    data_dir = args.data_dir or os.environ.get("CYCLELEDGER_DATA_DIR", "cycleledger-data")
    sqlite.init(data_dir)
    return sqlite.connect(data_dir)


def _cmd_keys_create(args) -> int:
    from service.store import keys, sqlite

    con = _keys_store(args)
    try:
        row, secret = keys.create(con, args.project, args.scope, args.name, args.rate_per_s)
        sqlite.record_audit(con, args.project, "keys.create", target=row["id"])
    except ValueError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    finally:
        con.close()
    if args.json:
        print(json.dumps({**row, "secret": secret}))
    else:
        print(f"key {row['id']} for project {row['project']!r}, scopes "
              f"{' '.join(row['scopes'])}\n\n  {secret}\n\nThis secret is shown once and "
              f"not stored: keep it in your secret store. Send it as "
              f"`Authorization: Bearer <secret>` (or set CYCLELEDGER_API_KEY).")
    return 0


def _cmd_keys_list(args) -> int:
    from service.store import keys

    con = _keys_store(args)
    try:
        rows = keys.list_keys(con, args.project)
    finally:
        con.close()
    if args.json:
        print(json.dumps(rows))
        return 0
    print(f"{'id':<20} {'project':<16} {'scopes':<18} {'state':<8} {'created':<21} name")
    for r in rows:
        state = "revoked" if r["revoked_at"] else "active"
        print(f"{r['id']:<20} {r['project']:<16} {' '.join(r['scopes']):<18} {state:<8} "
              f"{r['created_at']:<21} {r['name'] or ''}")
    return 0


def _cmd_keys_revoke(args) -> int:
    from service.store import keys, sqlite

    con = _keys_store(args)
    try:
        held = con.execute("SELECT project FROM api_keys WHERE id = ?",
                           (args.key_id,)).fetchone()
        ok = keys.revoke(con, args.key_id)
        if ok:
            sqlite.record_audit(con, held[0], "keys.revoke", target=args.key_id)
    finally:
        con.close()
    if not ok:
        print(f"error: no active key {args.key_id!r}", file=sys.stderr)
        return 2
    print(f"revoked {args.key_id}")
    return 0
