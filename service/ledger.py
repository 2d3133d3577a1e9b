"""The running damage of each asset's points across successive blocks.

A block is a stretch of recording for some of an asset's points, with a
sequence number per point. Each point keeps the counting state of ASTM
E1049-85 (its unclosed residue) from block to block, so the damage of the
closed cycles after N blocks, plus what closing the residue would add, is
the damage of the concatenated history counted at once.

Totals are recomputed from the stored blocks whenever the history changes
other than by appending (a voided block, a late block, new settings); every
change is appended to the point's history of totals. Blocks for one point are
serialised by a lock per point (one service process per data directory), and
written in one transaction with the totals they produce.
"""

from __future__ import annotations

import math
import sqlite3
import threading
from concurrent.futures import ThreadPoolExecutor
from contextlib import ExitStack
from dataclasses import replace

import numpy as np

from service import declarations, digests, runs
from service.engine import hot_spot, screening
from service.engine._threads import in_one_thread
from service.engine.damage import AssessmentOptions, assess
from service.engine.errors import InvalidLoadHistory, InvalidParameter, unknown
from service.engine.rainflow import CountingState, close_residue, count_block
from service.engine.settings import (is_strain_life, point_from_dict, resolve,
                                     screening_from_dict, strain_life_from_dict)
from service.engine.strain_life import pseudo_of_stored
from service.engine.strain_life_blocks import LocalState, close_local, count_block_local
from service.store import ledger as sql
from service.store import parquet, sqlite

BLOCKS = parquet.BLOCKS
_HOUR_S = 3600.0


class LedgerConflict(Exception):
    """A block that cannot be counted as posted (gap, late, reused number or key)."""

    def __init__(self, detail: str, **extra):
        super().__init__(detail)
        self.detail = detail
        self.extra = extra


# ---------------------------------------------------------------- settings


def check_settings(settings, lookup) -> tuple[dict, dict]:
    """``(settings, resolved)`` of a ledger point, or raise.

    The same fields as an assessment's point settings, with the gate given
    in MPa (``gate``): a running history has no final range to take a
    fraction of, and the gate must stay the same for the residue to carry.
    """
    if not isinstance(settings, dict):
        raise InvalidParameter("settings must be an object", field="settings")
    toe = None
    if "hot_spot" in settings:
        # A hot-spot point: its gauges arrive as channels of the blocks.
        toe = declarations.hot_spot_spec("this point", {k: v for k, v in
                                                          settings["hot_spot"].items()
                                                          if k != "settings"}
                                         if isinstance(settings["hot_spot"], dict)
                                         else settings["hot_spot"], None)
    if "gate_fraction" in settings:
        raise InvalidParameter("a ledger point takes gate in MPa, not gate_fraction: a running "
                               "history has no final range", field="gate_fraction")
    gate = settings.get("gate", 0.0)
    if isinstance(gate, bool) or not isinstance(gate, (int, float)) or not (
            math.isfinite(gate) and gate >= 0):
        raise InvalidParameter(f"gate {gate!r} must be a number >= 0 (MPa)", field="gate")
    body = {k: v for k, v in settings.items() if k not in ("gate", "hot_spot")}
    resolved = resolve(body, lookup) if lookup else body
    if is_strain_life(resolved):
        if toe is not None:
            raise InvalidParameter("a hot-spot point is assessed on hot-spot S-N curves, not "
                                   "by strain-life", field="method")
        strain_life_from_dict(resolved)
    else:
        point_from_dict(resolved)
    resolved = {**resolved, "gate": float(gate)}
    if toe is not None:
        resolved["hot_spot"] = toe
    return dict(settings), resolved


def gauges_of(row: dict) -> list[str] | None:
    """The gauge channels of a hot-spot ledger point (None for a plain one)."""
    toe = row["resolved"].get("hot_spot")
    return toe["gauges"] if toe else None


def _model(resolved: dict):
    """``(curve, opts, gate, policy, thresholds, strain)``: ``strain`` is
    ``(material, params)`` for a strain-life point (curve None), else None."""
    settings = {k: v for k, v in resolved.items() if k not in ("gate", "hot_spot")}
    policy, thresholds = screening_from_dict(settings)
    gate = float(resolved.get("gate", 0.0))
    if is_strain_life(settings):
        material, params, opts = strain_life_from_dict(settings)
        return None, opts, gate, policy, thresholds, (material, params)
    curve, opts, _ = point_from_dict(settings)
    opts = replace(opts, reserve_factor=False, top_cycles=0)
    return curve, opts, gate, policy, thresholds, None


def screened(name: str, samples: np.ndarray, rate, model) -> tuple[np.ndarray, list]:
    """A block's samples of one point as they are counted, and the findings
    of its screening: by the point's policy reported, refused (422 naming
    the point and the sample: nothing is stored) or cleaned (the same
    cleaning again on every recount, so totals stay exact)."""
    policy, thresholds = model[3], model[4]
    if policy == "off":
        return samples, []
    findings = screening.screen(samples, rate, thresholds)
    if findings and policy == "refuse":
        raise InvalidLoadHistory(
            f"point {name!r} is refused by its screening: "
            + "; ".join(f.description for f in findings),
            sample_index=findings[0].first_sample, channel=name, field="screening")
    if findings and policy == "clean":
        samples = screening.clean(samples, findings, thresholds)[0]
    return samples, findings


def point_signal(name: str, channels: dict, rate, model, row: dict) -> tuple[np.ndarray, list]:
    """:func:`screened` for any ledger point: a plain point's channel, or a
    hot-spot point's gauges screened each (reported or refused; cleaning is
    for single channels) and extrapolated to the toe (``engine.hot_spot``)."""
    toe = row["resolved"].get("hot_spot")
    if toe is None:
        return screened(name, channels[name], rate, model)
    policy = model[3]
    findings = []
    report = model[:3] + ("report" if policy == "clean" else policy,) + model[4:]
    for g in toe["gauges"]:
        _, found = screened(g, channels[g], rate, report)
        for f in found:
            f.description = f"{g}: {f.description}"
        findings += found
    return hot_spot.extrapolate([channels[g] for g in toe["gauges"]], toe["weights"]), findings


def _damage(table, curve, opts: AssessmentOptions) -> tuple[float, bool]:
    if len(table) == 0:
        return 0.0, False
    r = assess(table, curve, opts)
    return r.damage, r.overload_cycles > 0


# ---------------------------------------------------------------- counting


def _start(row: dict) -> dict:
    """Totals of a point with nothing counted."""
    return {"last_seq": row.get("last_seq"), "counting_state": None, "damage": 0.0,
            "residue_damage": 0.0, "cycles": 0.0, "hours": 0.0, "overload": False,
            "last_block_at": None}


def _advance(totals: dict, samples: np.ndarray, block: dict, model) -> dict:
    """Totals after counting one more block of a point (``samples`` as
    :func:`screened` gives them)."""
    curve, opts, gate, _, _, strain = model
    if strain is not None:
        return _advance_strain_life(totals, samples, block, opts, gate, *strain)
    state = (CountingState.from_dict(totals["counting_state"])
             if totals["counting_state"] else None)
    table, state = count_block(samples, state, gate=gate)
    d, over = _damage(table, curve, opts)
    residue, _ = _damage(close_residue(state), curve, opts)
    return {"last_seq": totals["last_seq"], "counting_state": state.to_dict(),
            "damage": totals["damage"] + d, "residue_damage": residue,
            "cycles": totals["cycles"] + table.total_count,
            "hours": totals["hours"] + samples.shape[0] / block["sample_rate_hz"] / _HOUR_S,
            "overload": totals["overload"] or over,
            "last_block_at": block.get("recorded_at") or block["created_at"]}


def _advance_strain_life(totals, samples, block, opts, gate, material, params) -> dict:
    """:func:`_advance` for a strain-life point: the block followed through
    the notch with the memory and the residue's local states carried in the
    point's state (``engine.strain_life_blocks``), so the totals equal the
    whole history assessed at once."""
    scale, rule = pseudo_of_stored(material, params)
    msm = params["mean_stress_method"]
    held = (totals["counting_state"] or {}).get("strain_life")
    state = LocalState.from_dict(held) if held else None
    loops, state = count_block_local(samples * scale, state, material, rule=rule,
                                     mean_stress_method=msm, gate=gate * scale)
    tail = close_local(state, material, rule=rule, mean_stress_method=msm)
    over = bool(np.any(loops["reversals_to_failure"] == 0.0))
    d = math.inf if over else float(np.sum(loops["damage"]))
    return {"last_seq": totals["last_seq"], "counting_state": {"strain_life": state.to_dict()},
            "damage": totals["damage"] + d, "residue_damage": float(np.sum(tail["damage"])),
            "cycles": totals["cycles"] + float(np.sum(loops["count"])),
            "hours": totals["hours"] + samples.shape[0] / block["sample_rate_hz"] / _HOUR_S,
            "overload": totals["overload"] or over,
            "last_block_at": block.get("recorded_at") or block["created_at"]}


def recount(con, data_dir, row: dict) -> dict:
    """A point's totals from scratch over its stored blocks, in sequence order."""
    model = _model(row["resolved"])
    totals = _start(row)
    names = gauges_of(row) or [row["point"]]
    for block in sql.point_blocks(con, row["asset_id"], row["point"]):
        channels = parquet.read_channels(data_dir, block["file"], names)
        samples, _ = point_signal(row["point"], channels, block["sample_rate_hz"], model, row)
        totals = _advance(totals, samples, block, model)
    return totals


# ---------------------------------------------------------------- locks

_locks: dict = {}
_locks_guard = threading.Lock()


def _lock(data_dir, asset_id: str, point: str) -> threading.Lock:
    key = (str(data_dir), asset_id, point)
    with _locks_guard:
        return _locks.setdefault(key, threading.Lock())


def point_locks(data_dir, asset_id: str, points) -> ExitStack:
    """Hold the locks of ``points`` (taken in name order, so never a deadlock)."""
    stack = ExitStack()
    for p in sorted(points):
        stack.enter_context(_lock(data_dir, asset_id, p))
    return stack


# ---------------------------------------------------------------- blocks


def check_block(con, asset: str, up, points_rows: dict) -> None:
    """The block's channels are registered points with their registered units."""
    for name, unit in up.source_units.items():
        row = points_rows.get(name)
        if row is None:
            raise unknown("point", name, sorted(points_rows))
        if unit != row["unit"]:
            raise InvalidParameter(
                f"channel {name!r} is in {unit}; point {name!r} of asset {asset!r} is "
                f"registered in {row['unit']}", field="unit", value=unit)
    if not up.sample_rate_hz:
        raise InvalidParameter("a block needs sample_rate_hz (or a time column): the ledger "
                               "projects damage per recorded hour", field="sample_rate_hz")


def sequence_check(con, asset_id: str, seq: int, row: dict, content_hash: str,
                   allow_gap: bool, allow_late: bool, body=None):
    """``None`` to count the block, ``"late"`` to count it by recounting, or the
    earlier block to replay when this is a retry of it (the same bytes:
    :func:`service.digests.same_body`, ``body`` serving a block stored before
    fingerprints had a scheme). Raises LedgerConflict."""
    point = row["point"]
    held = sql.block_at(con, asset_id, point, seq)
    if held is not None:
        if digests.same_body(held["content_hash"], content_hash, body):
            return held
        raise LedgerConflict(f"sequence number {seq} of point {point!r} already holds block "
                             f"{held['id']} with other content", point=point, seq=seq,
                             block_id=held["id"])
    last = row["last_seq"]
    if last is None:
        last = 0  # a point's first block is number 1 (or any, with allow_gap)
    if seq == last + 1:
        return None
    if seq > last + 1:
        if allow_gap:
            return None
        raise LedgerConflict(f"point {point!r} expects sequence number {last + 1}, got {seq} "
                             f"(a gap); post the missing blocks, or allow_gap=true",
                             point=point, seq=seq, expected=last + 1)
    if allow_late:
        return "late"
    raise LedgerConflict(f"point {point!r} is at sequence number {last}; {seq} arrives late. "
                         f"Send allow_late=true to count it in order (the point is recounted)",
                         point=point, seq=seq, expected=last + 1)


def post_block(con, data_dir, asset_id: str, seq: int, up, body, *, recorded_at=None,
               idempotency_key=None, content_hash: str, allow_gap=False,
               allow_late=False, respond) -> tuple[dict, bool]:
    """Count a block for its points and store it with the new totals.

    ``body`` is the request's bytes or the file they were spooled to (kept
    as the block's file when ``up.stored_as_sent``). ``respond(block_row,
    statuses)`` builds the answer, which is stored so a retry gets it
    again. Returns ``(answer, replayed)``.
    """
    if idempotency_key is not None:
        held = sql.block_by_key(con, asset_id, idempotency_key)
        if held is not None:
            if held["seq"] == seq and digests.same_body(held["content_hash"], content_hash,
                                                        body):
                return held["response"], True
            raise LedgerConflict(f"Idempotency-Key {idempotency_key!r} was used for block "
                                 f"{held['id']} with other content", block_id=held["id"])
    names = counted_points(con, asset_id, up.channels)
    with point_locks(data_dir, asset_id, names):
        rows = {n: sql.get_point(con, asset_id, n) for n in names}
        plans = {n: sequence_check(con, asset_id, seq, rows[n], content_hash, allow_gap,
                                   allow_late, body) for n in names}
        replays = [p for p in plans.values() if isinstance(p, dict)]
        if replays:
            if len(replays) == len(names) and len({b["id"] for b in replays}) == 1:
                return replays[0]["response"], True
            raise LedgerConflict("sequence number {seq} is already used by some of these "
                                 "points in another block".format(seq=seq), seq=seq)
        # Screened before anything is stored: a refused point stores nothing.
        models = {n: _model(rows[n]["resolved"]) for n in names}
        counted, findings = {}, {}
        for n in names:
            counted[n], findings[n] = point_signal(n, up.channels, up.sample_rate_hz, models[n],
                                                   rows[n])
        block_id = sqlite.new_id("b")
        rel = (parquet.adopt(data_dir, BLOCKS, block_id, body) if up.stored_as_sent
               else parquet.write_columns(data_dir, BLOCKS, block_id, up.channels))
        block = {"id": block_id, "asset_id": asset_id, "seq": seq, "created_at": sqlite.now(),
                 "recorded_at": recorded_at, "idempotency_key": idempotency_key,
                 "content_hash": content_hash, "sample_rate_hz": up.sample_rate_hz,
                 "sample_count": up.sample_count, "points": names, "file": rel}
        try:
            # In-order points advance from their state; a late block means a
            # recount of that point, done inside the transaction below.
            def advance(n):
                t = _advance(_current(rows[n]), counted[n], block, models[n])
                t["last_seq"] = seq if rows[n]["last_seq"] is None else max(
                    seq, rows[n]["last_seq"])
                return n, t

            in_order = [n for n in names if plans[n] is None]
            if len(in_order) > 1 and up.sample_count >= runs.THREADED_SAMPLES:
                # Long blocks: points side by side (the kernels release the GIL).
                with ThreadPoolExecutor(runs.POINT_WORKERS) as pool:
                    totals = dict(pool.map(in_one_thread(advance), in_order))
            else:
                totals = dict(map(advance, in_order))
            with sqlite.write(con):
                try:
                    sql.insert_block(con, block)
                except sqlite3.IntegrityError:
                    # Only the Idempotency-Key can collide here (sequence numbers
                    # are checked under the points' locks): a concurrent request
                    # took it for other points.
                    raise LedgerConflict(f"Idempotency-Key {idempotency_key!r} is in use by "
                                         f"another block") from None
                for n in names:
                    if plans[n] == "late":
                        t = recount(con, data_dir, rows[n])
                        t["last_seq"] = rows[n]["last_seq"]
                        totals[n] = t
                    sql.save_totals(con, asset_id, n, totals[n],
                                    "late_block" if plans[n] == "late" else "block", block_id)
                statuses = {n: status(sql.get_point(con, asset_id, n)) for n in names}
                for n in names:
                    statuses[n]["screening"] = {
                        "policy": models[n][3], "findings": [f.as_dict() for f in findings[n]],
                        "cleaned": models[n][3] == "clean" and bool(findings[n])}
                answer = respond(block, statuses)
                sql.set_block_response(con, block_id, answer)
        except BaseException:
            parquet.remove(data_dir, rel)
            raise
    return answer, False


def counted_points(con, asset_id: str, channels) -> list[str]:
    """The points a block's ``channels`` advance: each channel registered as
    a point, and each hot-spot point whose gauges the block carries (all of
    them, or the block is refused naming the missing ones)."""
    names = [n for n in channels if sql.get_point(con, asset_id, n) is not None]
    for row in sql.asset_points(con, asset_id):
        gauges = gauges_of(row)
        if not gauges or not any(g in channels for g in gauges):
            continue
        missing = [g for g in gauges if g not in channels]
        if missing:
            raise InvalidParameter(f"hot-spot point {row['point']!r} needs every gauge in a "
                                   f"block; missing: {', '.join(missing)}", field="channels",
                                   value=missing)
        names.append(row["point"])
    return names


def registered_channels(rows) -> dict:
    """``{channel: (unit, youngs_modulus)}`` a block of these points may
    carry: each point's own channel, and each hot-spot point's gauges in the
    unit of their point."""
    out = {}
    for p in rows:
        for g in gauges_of(p) or []:
            out.setdefault(g, (p["unit"], p["youngs_modulus"]))
    for p in rows:
        if not gauges_of(p):
            out[p["point"]] = (p["unit"], p["youngs_modulus"])
    return out


def _current(row: dict) -> dict:
    return {k: row[k] for k in ("last_seq", "counting_state", "damage", "residue_damage",
                                "cycles", "hours", "last_block_at")} | {
        "overload": bool(row["overload"])}


def void(con, data_dir, asset_id: str, block_id: str) -> dict:
    """Void a block and recount its points; ``{point: status}``."""
    block = sql.get_block(con, asset_id, block_id)
    if block is None:
        raise KeyError(block_id)
    with point_locks(data_dir, asset_id, block["points"]):
        with sqlite.write(con):
            if not sql.void_block(con, block_id):
                raise LedgerConflict(f"block {block_id} is already void", block_id=block_id)
            for n in block["points"]:
                row = sql.get_point(con, asset_id, n)
                t = recount(con, data_dir, row)
                t["last_seq"] = row["last_seq"]
                sql.save_totals(con, asset_id, n, t, "void", block_id)
            return {n: status(sql.get_point(con, asset_id, n)) for n in block["points"]}


def new_settings(con, data_dir, asset_id: str, point: str, settings: dict, resolved: dict) -> dict:
    """Store a new settings version and recount the point under it."""
    with point_locks(data_dir, asset_id, [point]):
        with sqlite.write(con):
            sql.add_settings_version(con, asset_id, point, settings, resolved)
            row = sql.get_point(con, asset_id, point)
            t = recount(con, data_dir, row)
            t["last_seq"] = row["last_seq"]
            sql.save_totals(con, asset_id, point, t, "settings", None)
            return status(sql.get_point(con, asset_id, point))


# ---------------------------------------------------------------- reporting


def status(row: dict) -> dict:
    """A point's running figures and projections (JSON-ready; inf -> None).

    ``damage`` counts the closed cycles; ``damage_if_ended`` adds the
    residue closed as half cycles (the figure a count of the whole history
    at once gives). Rate and projections use the closed damage per recorded
    hour.
    """
    allowable = float(row["resolved"].get("allowable_damage", 1.0))
    damage = float(row["damage"])
    hours = float(row["hours"])
    rate = damage / hours if hours > 0 else None
    if rate is None or not math.isfinite(damage):
        remaining = 0.0 if not math.isfinite(damage) else None
    elif rate == 0:
        remaining = math.inf
    else:
        remaining = max(allowable - damage, 0.0) / rate
    flags = []
    if row["overload"] or not math.isfinite(damage):
        flags.append("static_overload")
    if damage >= allowable:
        flags.append("allowable_reached")
    if row["last_seq"] is None:
        flags.append("no_blocks")
    out = {
        "asset": row["asset"], "point": row["point"], "unit": row["unit"],
        "settings_version": row["settings_version"], "last_seq": row["last_seq"],
        "damage": damage, "residue_damage": float(row["residue_damage"]),
        "damage_if_ended": damage + float(row["residue_damage"]),
        "allowable_damage": allowable,
        "consumed_percent": 100.0 * damage / allowable,
        "recorded_hours": hours, "cycles_counted": float(row["cycles"]),
        "damage_rate_per_hour": rate,
        "projected_hours_remaining": remaining,
        "runout": remaining is not None and math.isinf(remaining),
        "last_block_at": row["last_block_at"], "updated_at": row["updated_at"],
        "flags": flags,
    }
    from service.runs import json_safe

    return json_safe(out)


def check_samples(up) -> None:
    """Blocks need at least one sample a channel (engine checks the rest)."""
    for name, x in up.channels.items():
        if x.shape[0] < 1:
            raise InvalidLoadHistory(f"channel {name!r} is empty", channel=name)
