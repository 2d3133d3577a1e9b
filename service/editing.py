"""Edited drive signals: a stored recording shortened, keeping its damage.

Between the API (or the CLI) and ``engine.editing``: reads the stored
history, resolves each channel's settings (the same dictionaries as an
assessment's), edits by damage windows or by peak-valley reduction, counts
the edited signal again, and stores it (Parquet: ``source_index``,
``time_s`` when the rate is known, one column per channel) with a report
per channel: damage before and after, share kept, largest ranges kept,
length kept.
"""

from __future__ import annotations

import math

import numpy as np

from service.events import MissingSource, fields, number, stress_life
from service.engine import cautions
from service.engine.editing import edit_recording, reduce_recording
from service.engine.errors import InvalidParameter, unknown
from service.runs import json_safe
from service.store import parquet, sqlite

REQUEST_KEYS = {"history_id", "channels", "settings", "points", "method", "keep", "length",
                "window_s", "window_samples", "protect_range", "gate"}
#: How a recording is shortened.
EDIT_METHODS = ("damage_windows", "peak_valley")
_TOP = 5


def _per_channel(value, names, what: str) -> list[float | None]:
    if value is None:
        return [None] * len(names)
    if isinstance(value, dict):
        for k in value:
            if k not in names:
                raise unknown(what, k, names)
        return [None if value.get(n) is None else number(value[n], what) for n in names]
    v = number(value, what)
    return [v] * len(names)


def check(request: dict, history: dict, lookup=None) -> dict:
    """Everything an edit needs, checked before any work."""
    fields(request, REQUEST_KEYS, "the request", "body")
    names_all = [c["name"] for c in history["channels"]]
    names = request.get("channels") or names_all
    if not isinstance(names, list) or not all(isinstance(n, str) for n in names):
        raise InvalidParameter("channels must be a list of names", field="channels")
    for n in names:
        if n not in names_all:
            raise unknown("channels", n, names_all)
    method = request.get("method", "damage_windows")
    if method not in EDIT_METHODS:
        raise unknown("method", method, EDIT_METHODS)
    defaults = request.get("settings") or {}
    own = request.get("points") or {}
    if not isinstance(defaults, dict) or not isinstance(own, dict):
        raise InvalidParameter("settings and points must be objects", field="settings")
    for n in own:
        if n not in names:
            raise unknown("points", n, names)
    models, used = [], {}
    for n in names:
        merged, curve, opts, _ = stress_life(
            {**defaults, **(own.get(n) or {})}, lookup,
            "editing weighs cycles on S-N curves: strain-life settings are not taken here")
        models.append((curve, opts))
        used[n] = merged
    keep, length = request.get("keep"), request.get("length")
    if method == "damage_windows":
        if keep is not None and length is not None:
            raise InvalidParameter("give keep (share of damage) or length (share of the "
                                   "recording), not both", field="keep")
        if isinstance(keep, dict):
            for k in keep:
                if k not in names:
                    raise unknown("keep", k, names)
            keep = [number(keep.get(n, 0.95), "keep", upper=1.0) for n in names]
        else:
            keep = number(keep, "keep", upper=1.0) if keep is not None else (
                None if length is not None else 0.95)
        length = number(length, "length", upper=1.0) if length is not None else None
    elif keep is not None or length is not None:
        raise InvalidParameter("keep and length are for damage_windows; peak_valley keeps "
                               "every turning point beyond the gate", field="method")
    rate = history.get("sample_rate_hz")
    window = None
    if "window_samples" in request and "window_s" in request:
        raise InvalidParameter("give window_s or window_samples, not both", field="window_s")
    if "window_samples" in request:
        w = request["window_samples"]
        if isinstance(w, bool) or not isinstance(w, int) or w < 2:
            raise InvalidParameter("window_samples must be a whole number >= 2",
                                   field="window_samples")
        window = w
    elif "window_s" in request:
        if not rate:
            raise InvalidParameter("window_s needs the recording's sample rate; give "
                                   "window_samples", field="window_s")
        window = max(2, int(round(number(request["window_s"], "window_s") * rate)))
    gate = request.get("gate", 0.0)
    if isinstance(gate, bool) or not isinstance(gate, (int, float)) or not gate >= 0:
        raise InvalidParameter("gate must be a number >= 0", field="gate")
    return {"names": names, "models": models, "settings_used": used, "method": method,
            "keep": keep, "length": length, "window": window,
            "protect": _per_channel(request.get("protect_range"), names, "protect_range"),
            "gate": float(gate), "rate": rate}


def run(con, data_dir, project: str, request: dict, lookup=None) -> dict:
    """Edit a stored history and store the edited signal; the stored row."""
    hid = request.get("history_id")
    history = sqlite.get_history(con, project, hid) if isinstance(hid, str) else None
    if history is None:
        raise MissingSource(f"no history {hid!r}", "history_id")
    c = check(request, history, lookup)
    read = parquet.read_channels(data_dir, history["file"], c["names"])
    x = np.vstack([read[n] for n in c["names"]])
    gates = [c["gate"]] * len(c["names"])
    if c["method"] == "damage_windows":
        e = edit_recording(x, c["models"], keep=c["keep"], length=c["length"],
                           window=c["window"], protect_range=c["protect"], gates=gates, top=_TOP)
    else:
        e = reduce_recording(x, c["models"], gates=gates, top=_TOP)
    edited, index = e.samples, e.kept_index
    before, after = e.damage_before, e.damage_after
    big_before, big_after = e.largest_ranges_before, e.largest_ranges_after
    pieces, window = e.pieces, (e.window or None)
    n = x.shape[1]
    channels = {}
    for k, name in enumerate(c["names"]):
        kept = 1.0 if before[k] == 0 else (after[k] / before[k] if math.isfinite(before[k])
                                          else None)
        channels[name] = {
            "damage_before": before[k], "damage_after": after[k], "damage_kept": kept,
            "largest_ranges_before": big_before[k].tolist(),
            "largest_ranges_after": big_after[k].tolist(),
            "protect_range": c["protect"][k], "curve": c["models"][k][0].name,
            "settings_used": c["settings_used"][name]}
    kept_shares = [ch["damage_kept"] for ch in channels.values()
                   if ch["damage_kept"] is not None]
    notes = [cautions.caution("edit_scope")]
    if c["method"] == "peak_valley":
        notes.append(cautions.caution("edit_peak_valley"))
    asked = (dict(zip(c["names"], c["keep"])) if isinstance(c["keep"], list)
             else {n: c["keep"] for n in c["names"]}) if c["keep"] is not None else {}
    for name, ch in channels.items():
        ch["keep"] = asked.get(name)
        if ch["keep"] is not None and ch["damage_kept"] is not None and \
                ch["damage_kept"] < ch["keep"]:
            notes.append(cautions.caution("edit_short", keep=ch["keep"], kept=ch["damage_kept"]))
    rate = c["rate"]
    result = {
        "method": c["method"], "history_id": history["id"], "samples_before": n,
        "samples_after": int(index.shape[0]), "length_kept": index.shape[0] / n,
        "duration_before_s": n / rate if rate else None,
        "duration_after_s": index.shape[0] / rate if rate else None,
        "window_samples": window, "pieces": pieces,
        "keep": (dict(zip(c["names"], c["keep"])) if isinstance(c["keep"], list)
                 else c["keep"]), "length": c["length"],
        "gate_mpa": c["gate"], "damage_kept_min": min(kept_shares) if kept_shares else None,
        "channels": channels,
        "cautions": [{k: v for k, v in g.items() if k != "points"} for g in cautions.general()]
        + [n.as_dict() for n in notes],
    }
    eid = sqlite.new_id("e")
    cols = {"source_index": index.astype(np.int64)}
    if rate:
        cols["time_s"] = np.arange(index.shape[0]) / rate
        cols["source_time_s"] = index / rate
    cols.update({name: edited[k] for k, name in enumerate(c["names"])})
    rel = parquet.write_columns(data_dir, parquet.EDITS, eid, cols)
    row = {"id": eid, "project": project, "history_id": history["id"],
           "created_at": sqlite.now(), "request": json_safe(request),
           "result": json_safe(result), "file": rel}
    sqlite.insert_owning_file(con, sqlite.insert_edit, row, data_dir, rel)
    return row
