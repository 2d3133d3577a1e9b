"""``cycleledger duty-cycle``: a duty cycle (a JSON file) checked by a running service."""

from __future__ import annotations

import json
import sys
from pathlib import Path

from ._shared import _fmt, service_error


def print_duty_cycle(doc: dict, out=None) -> None:
    """The verdict per point, the events and the cautions, for people."""
    out = out or sys.stdout
    res = doc["result"]
    target = ", ".join(f"{k} {v}" for k, v in (res.get("target") or {}).items()) or "none"
    print(f"duty cycle {doc.get('name') or doc['id']}  (target {target}; "
          f"{_fmt(res['duty_cycles'])} duty cycles of {_fmt(res['duty_cycle_hours'])} h; "
          f"stresses in MPa)", file=out)
    width = max([16] + [len(p) + 2 for p in res["points"]])
    cols = [("point", width), ("verdict", 9), ("damage", 10), ("allowable", 10),
            ("reserve", 9), ("life dc", 10), ("life h", 10), ("dominant event", 18),
            ("flags", 20)]
    print("".join(f"{c:<{w}}" for c, w in cols), file=out)
    for name, p in res["points"].items():
        verdict = "-" if p["passed"] is None else ("pass" if p["passed"] else "FAIL")
        row = [name, verdict, _fmt(p["damage"]), _fmt(p["allowable_damage"]),
               _fmt(p["reserve_factor"]), _fmt(p["life_duty_cycles"]), _fmt(p["life_hours"]),
               p.get("dominant_event") or "-", ",".join(p["flags"]) or "-"]
        print("".join(f"{str(v):<{w}}" for v, (_, w) in zip(row, cols)), file=out)
    print("\nEvents (repeats per duty cycle; share of each point's design damage):", file=out)
    for k, e in enumerate(res["events"]):
        shares = ", ".join(f"{p} {_fmt(r['events'][k]['damage_share'])}"
                           for p, r in res["points"].items())
        print(f"  - {e['name']}: {_fmt(e['repeats'])} repeats; {shares}", file=out)
    variants = [(p, n, v) for p, r in res["points"].items() for n, v in r["variants"].items()]
    if variants:
        print("\nWhat if:", file=out)
        for p, n, v in variants:
            verdict = "-" if v["passed"] is None else ("pass" if v["passed"] else "FAIL")
            print(f"  - {p} / {n}: {verdict}, damage {_fmt(v['damage'])}, reserve "
                  f"{_fmt(v['reserve_factor'])}, curve {v['curve']}", file=out)
    print("\nCautions:", file=out)
    for c in res["cautions"]:
        where = f" ({', '.join(c['points'])})" if c.get("points") else ""
        print(f"  - [{c['code']}] {c['text']}{where}", file=out)


def _post_file(args, route: str):
    """Post the JSON request in ``args.file`` to ``route``: ``(doc, None)``,
    or ``(None, exit code)`` when the service refuses it; with ``--json``
    the answer is printed here."""
    from service.client import Client, ServiceError

    request = json.loads(Path(args.file).read_text())
    try:
        doc = Client(args.url).post_json(route, request)[1]
    except ServiceError as exc:
        return None, service_error(exc)
    if args.json:
        json.dump(doc, sys.stdout, indent=2)
        print()
    return doc, None


def _cmd_duty_cycle(args) -> int:
    doc, code = _post_file(args, "/v1/duty-cycles")
    if doc is None:
        return code
    if not args.json:
        print_duty_cycle(doc)
        print(f"\n{args.url.rstrip('/')}{doc['links']['report']}")
    return 1 if doc["passed"] is False else 0


def add_parser(sub) -> None:
    p = sub.add_parser("duty-cycle", help="check a duty cycle (JSON file) on a running service",
                       description="Post a duty cycle: stored assessments, histories or "
                       "ledger spans as events with their repeats, hours, distance or share, "
                       "and a target; prints each point's verdict. Exit 1 if a point fails.")
    p.add_argument("file", help="JSON file: {events, target, settings?, points?, variants?}")
    p.add_argument("--url", default="http://127.0.0.1:8350",
                   help="the service (default %(default)s)")
    p.add_argument("--json", action="store_true", help="print the stored duty cycle as JSON")
    p.set_defaults(func=_cmd_duty_cycle)


def _cmd_edit(args) -> int:
    from service.client import Client, ServiceError

    request = json.loads(Path(args.settings).read_text()) if args.settings else {}
    if args.curve:
        request.setdefault("settings", {})["curve"] = args.curve
    for key in ("keep", "length", "window_s", "protect_range", "method", "gate"):
        value = getattr(args, key)
        if value is not None:
            request[key] = value
    client = Client(args.url)
    try:
        doc = client.edit(args.history, **request)
        signal = client.edited_signal(doc["id"])
    except ServiceError as exc:
        return service_error(exc)
    out = Path(args.out)
    if out.suffix == ".parquet":
        signal.to_parquet(out, index=False)
    else:
        signal.to_csv(out, index=False)
    res = doc["result"]
    if args.json:
        json.dump(doc, sys.stdout, indent=2)
        print()
        return 0
    print(f"edit {doc['id']} of {res['history_id']}: {res['method']}, kept "
          f"{_fmt(res['length_kept'])} of {res['samples_before']} samples in {res['pieces']} "
          f"pieces; wrote {out}")
    print(f"{'channel':<14}{'damage before':<16}{'after':<12}{'kept':<10}largest ranges kept")
    for name, ch in res["channels"].items():
        ranges = ", ".join(_fmt(r) for r in ch["largest_ranges_after"][:3])
        print(f"{name:<14}{_fmt(ch['damage_before']):<16}{_fmt(ch['damage_after']):<12}"
              f"{_fmt(ch['damage_kept']):<10}{ranges}")
    print("\nCautions:")
    for c in res["cautions"]:
        print(f"  - [{c['code']}] {c['text']}")
    return 0


def add_edit_parser(sub) -> None:
    p = sub.add_parser("edit", help="shorten a stored recording for a rig, keeping its damage",
                       description="Edit a stored history on a running service and write "
                       "the edited drive signal (CSV, or Parquet by the file's suffix).")
    p.add_argument("history", help="history id (h_...)")
    p.add_argument("--out", required=True, help="file for the edited signal (.csv, .parquet)")
    p.add_argument("--curve", help="catalogue designation for every channel")
    p.add_argument("--settings", help="JSON file: the edit request's fields (settings, "
                   "points, channels, ...); the options below override it")
    how = p.add_mutually_exclusive_group()
    how.add_argument("--keep", type=float, help="share of each channel's damage to keep "
                     "(default 0.95)")
    how.add_argument("--length", type=float, help="share of the recording to keep instead")
    p.add_argument("--window-s", dest="window_s", type=float, help="window length [s]")
    p.add_argument("--protect-range", dest="protect_range", type=float,
                   help="cycles at or above this range are kept whole [MPa]")
    p.add_argument("--method", choices=("damage_windows", "peak_valley"),
                   help="default damage_windows")
    p.add_argument("--gate", type=float, help="hysteresis gate [MPa]")
    p.add_argument("--url", default="http://127.0.0.1:8350",
                   help="the service (default %(default)s)")
    p.add_argument("--json", action="store_true", help="print the edit as JSON")
    p.set_defaults(func=_cmd_edit)


def _cmd_spectrum(args) -> int:
    doc, code = _post_file(args, "/v1/spectra")
    if doc is None:
        return code
    if args.json:
        return 0
    res = doc["result"]
    print(f"spectral assessment {doc.get('name') or doc['id']}: {len(res['load_cases'])} load "
          f"cases, {_fmt(res['profile_s'])} s a profile; curve {res['curve'].get('name')}")
    cols = [("method", 20), ("damage", 12), ("life rep.", 12), ("life h", 12),
            ("reserve", 10), ("vs counting", 12), ("flags", 20)]
    print("".join(f"{c:<{w}}" for c, w in cols))
    for m, r in res["methods"].items():
        if not r["applicable"]:
            print(f"{m:<20}not applicable (see the cautions)")
            continue
        rel = r.get("relative_to_time_domain")
        row = [m + (" *" if m == res["governing_method"] else ""), _fmt(r["damage"]),
               _fmt(r["life_repeats"]), _fmt(r["life_hours"]), _fmt(r["reserve_factor"]),
               "-" if rel is None else f"{rel:+.1%}", ",".join(r["flags"]) or "-"]
        print("".join(f"{str(v):<{w}}" for v, (_, w) in zip(row, cols)))
    print("(* governs)\n\nCautions:")
    for c in res["cautions"]:
        print(f"  - [{c['code']}] {c['text']}")
    print(f"\n{args.url.rstrip('/')}{doc['links']['report']}")
    return 0


def add_spectrum_parser(sub) -> None:
    p = sub.add_parser("spectrum", help="assess a vibration profile of PSDs on a running "
                       "service", description="Post a profile of PSD load cases (JSON: "
                       "load_cases, settings, methods?) and print each method's damage, "
                       "life and reserve factor.")
    p.add_argument("file", help="JSON file: {load_cases, settings, methods?, name?}")
    p.add_argument("--url", default="http://127.0.0.1:8350",
                   help="the service (default %(default)s)")
    p.add_argument("--json", action="store_true", help="print the stored result as JSON")
    p.set_defaults(func=_cmd_spectrum)
