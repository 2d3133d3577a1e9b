"""Duty cycles: stored recordings combined into a design life, checked against a target.

A duty-cycle request names events (a stored assessment, a stored history,
or a span of a ledger asset's blocks), each with its exposure per duty
cycle (``repeats``, ``hours`` or ``distance``) or its ``share`` of the
target, and a target (``repeats`` of the duty cycle, ``hours`` or
``distance``). For every point the events' counted histories are combined
by ``engine.duty_cycle.combine`` (one counting through the whole design
life, exact) and assessed on the point's curve: design damage, pass or fail
against the allowable sum, the reserve factor on the whole mix, the life in
duty cycles (hours, distance) and each event's share. ``variants`` are the
same duty cycle under other settings or a load scale, side by side, with
no new counting. Nothing here reads a request object: the API and the CLI
call :func:`run` and :func:`what_if`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from service.engine import cautions, duty_cycle
from service.engine.damage import assess
from service.engine.errors import InvalidParameter
from service.engine.extrapolation import extrapolate_matrix
from service.engine.settings import point_from_dict, resolve, thickness_note
from service.events import (Event, defaults_and_gate, fields, load_events, number, overlay,
                            point_settings, points_of)
from service import extrapolation
from service.extrapolation import METHOD as EXTRAPOLATION_METHOD
from service.runs import json_safe
from service.store import sqlite

REQUEST_KEYS = {"name", "events", "target", "settings", "points", "gate", "variants",
                "extrapolate"}
#: What a design target is counted in.
TARGET_KINDS = ("repeats", "hours", "distance")
VARIANT_KEYS = {"name", "settings", "load_scale"}
_TOP = 5
#: Share of the design damage in cycles between events from which it is cautioned.
_BETWEEN_NOTICEABLE = 0.05


def exposure(events: list[Event], target) -> dict:
    """Repeats of each event per duty cycle and duty cycles in the target.

    ``share`` events divide the target itself (the duty cycle is then the
    whole target); the others say how often they occur per duty cycle.
    """
    if target is None:
        target = {}
    if not isinstance(target, dict) or len(target) > 2 or set(target) - {
            *TARGET_KINDS, "distance_unit"}:
        raise InvalidParameter("target must be {repeats} | {hours} | {distance, "
                               "distance_unit?}", field="target")
    kinds = [k for k in TARGET_KINDS if k in target]
    if len(kinds) > 1:
        raise InvalidParameter("give one target: repeats, hours or distance", field="target")
    kind = kinds[0] if kinds else None
    amount = number(target[kind], "target", what=f"target {kind}") if kind else None
    shares = [e for e in events if e.exposure[0] == "share"]
    if shares and len(shares) != len(events):
        raise InvalidParameter("give every event a share, or none", field="share")
    repeats = []
    for e in events:
        how, value = e.exposure
        if how == "repeats":
            repeats.append(value)
        elif how == "share":
            if kind not in ("hours", "distance"):
                raise InvalidParameter("shares divide a target in hours or distance",
                                       field="target")
            repeats.append(value * amount / _per_pass(e, kind))
        else:
            repeats.append(value / _per_pass(e, how))
    if shares:
        total = sum(e.exposure[1] for e in events)
        if abs(total - 1.0) > 1e-6:
            raise InvalidParameter(f"the shares add up to {total:.6g}, not 1", field="share",
                                   value=total)
    hours = _total(events, repeats, "hours_per_pass")
    distance = _total(events, repeats, "distance_per_pass")
    if shares or kind is None:
        n = 1.0
    elif kind == "repeats":
        n = amount
    else:
        per_duty = hours if kind == "hours" else distance
        if per_duty is None:
            raise InvalidParameter(f"a target in {kind} needs every event's {kind} per pass "
                                   + ("(a sample rate)" if kind == "hours" else
                                      "(distance_per_repeat)"), field="target")
        n = amount / per_duty
    return {"repeats": repeats, "duty_cycles": n, "duty_cycle_hours": hours,
            "duty_cycle_distance": distance, "target": dict(target) or None}


def _per_pass(e: Event, kind: str) -> float:
    per = e.hours_per_pass if kind == "hours" else e.distance_per_pass
    if per is None or per <= 0:
        raise InvalidParameter(
            f"event {e.name!r}: its {kind} per pass is not known: "
            + ("its recording has no sample rate" if kind == "hours"
               else "give distance_per_repeat"), field=kind)
    return per


def _total(events, repeats, attr) -> float | None:
    per = [getattr(e, attr) for e in events]
    if any(p is None for p in per):
        return None
    return float(sum(r * p for r, p in zip(repeats, per)))


def _variants(specs) -> list[dict]:
    if specs is None:
        return []
    if not isinstance(specs, list):
        raise InvalidParameter("variants must be a list", field="variants")
    out, names = [], set()
    for i, v in enumerate(specs):
        if not isinstance(v, dict) or set(v) - VARIANT_KEYS:
            raise InvalidParameter(f"variants[{i}] must be {{name, settings?, load_scale?}}",
                                   field="variants")
        name = v.get("name")
        if not isinstance(name, str) or not name or name in names:
            raise InvalidParameter(f"variants[{i}]: name must be a text unique among the "
                                   f"variants", field="name", value=name)
        names.add(name)
        settings = v.get("settings") or {}
        if not isinstance(settings, dict):
            raise InvalidParameter(f"variant {name!r}: settings must be an object",
                                   field="settings")
        scale = number(v.get("load_scale", 1.0), "load_scale",
                       what=f"load_scale of variant {name!r}")
        out.append({"name": name, "settings": settings, "load_scale": scale})
    return out


@dataclass
class _PointData:
    combined: duty_cycle.Combined
    gate: float


def _combine(point: str, events: list[Event], repeats, n, gate) -> _PointData:
    if gate is None:
        gate = max(e.gates.get(point, 0.0) for e in events)
    signals = [(e.signal(point), r) for e, r in zip(events, repeats)]
    return _PointData(duty_cycle.combine(signals, n, gate=gate), gate)


def _figures(data: _PointData, settings: dict, load_scale: float, expo: dict,
             allowable_check: bool, top: int = 0):
    """``(result, per-cycle damage)`` of one point under one set of settings."""
    curve, opts, estimate = point_from_dict(settings)
    opts = replace(opts, load_factor=opts.load_factor * load_scale, top_cycles=0)
    c = data.combined
    r = assess(c.design, curve, opts, weighted=True)
    per_cycle = np.array(r.damage_per_cycle, copy=True)
    one = assess(c.per_duty_cycle, curve, replace(opts, reserve_factor=False), weighted=True)
    d1 = one.damage
    life = math.inf if d1 == 0 else opts.allowable_damage / d1
    hours, distance = expo["duty_cycle_hours"], expo["duty_cycle_distance"]
    out = {
        "damage": r.damage, "allowable_damage": opts.allowable_damage,
        "passed": (r.damage <= opts.allowable_damage) if allowable_check else None,
        "reserve_factor": r.reserve_factor, "reserve_limited_by": r.reserve_limited_by,
        "damage_per_duty_cycle": d1, "life_duty_cycles": life,
        "life_hours": None if hours is None else life * hours,
        "life_distance": None if distance is None else life * distance,
        "equivalent_range": r.equivalent_range, "equivalent_slope": r.equivalent_slope,
        "equivalent_cycles": r.equivalent_cycles, "cycles_counted": r.cycles_counted,
        "max_range": r.max_range, "below_limit": r.below_limit,
        "flags": [f for f in r.flags if f != "allowable_reached" or allowable_check],
        "curve": r.curve, "options": r.options,
        "estimate": estimate.as_dict() if estimate is not None else None,
        "gate_mpa": data.gate,
    }
    notes = r.caution_dicts()
    note = thickness_note(settings, curve)
    if note is not None:
        notes.append(note.as_dict())
    return out, per_cycle, notes


def _assess_point(point, data, settings, events, expo, has_target, variants):
    out, per_cycle, notes = _figures(data, settings, 1.0, expo, has_target)
    c = data.combined
    shares = duty_cycle.event_shares(per_cycle, c.design_start_event, c.design_end_event,
                                     len(events))
    finite = math.isfinite(out["damage"]) and out["damage"] > 0
    out["events"] = [{"name": e.name, "repeats": r, "damage_share": float(s) if finite else None}
                     for e, r, s in zip(events, expo["repeats"], shares)]
    out["dominant_event"] = events[int(np.argmax(shares))].name if finite else None
    if finite:
        between = c.design_start_event != c.design_end_event
        share = float(np.sum(np.where(between, per_cycle, 0.0))) / out["damage"]
        out["between_events_share"] = share
        if share > _BETWEEN_NOTICEABLE and len(events) > 1:
            notes.append(cautions.caution("duty_cycle_order", share=share, order=", ".join(
                e.name for e in events)).as_dict())
        order = np.argsort(-per_cycle, kind="stable")[:_TOP]
        out["top_cycles"] = [{
            "stress_range": float(abs(c.design.stress_from[i] - c.design.stress_to[i])),
            "stress_mean": float(0.5 * (c.design.stress_from[i] + c.design.stress_to[i])),
            "count": float(c.design.count[i]), "damage_share": float(per_cycle[i]) /
            out["damage"], "events": sorted({events[int(c.design_start_event[i])].name,
                                             events[int(c.design_end_event[i])].name})}
            for i in order if per_cycle[i] > 0]
    else:
        out["between_events_share"] = None
        out["top_cycles"] = []
    governing = {e.governing.get(point) for e in events} - {None}
    if governing and len({e.governing.get(point) for e in events}) > 1:
        notes.append(cautions.caution("duty_cycle_governing", which="; ".join(
            f"{e.name}: {e.governing.get(point)}" for e in events)).as_dict())
    for e, r in zip(events, expo["repeats"]):
        if r < 1.0:
            notes.append(cautions.caution("duty_cycle_short_event", event=e.name,
                                          repeats=r).as_dict())
    out["settings_used"] = settings
    out["cautions"] = notes
    out["variants"] = {v["name"]: _variant(data, settings, v, expo, has_target)
                       for v in variants}
    return json_safe(out)


def _variant(data, settings, v, expo, has_target) -> dict:
    s = overlay(settings, v["settings"])
    out, _, notes = _figures(data, s, v["load_scale"], expo, has_target)
    keep = ("damage", "allowable_damage", "passed", "reserve_factor", "damage_per_duty_cycle",
            "life_duty_cycles", "life_hours", "life_distance", "equivalent_range", "flags")
    return {**{k: out[k] for k in keep}, "curve": out["curve"].get("name"),
            "mean_stress_method": out["options"].get("mean_stress_method"),
            "load_scale": v["load_scale"], "cautions": notes}


def _extrapolated(out: dict, data: _PointData, settings: dict, expo: dict) -> None:
    """The design life's spectrum extrapolated from one duty cycle (kernel
    density, ``engine.extrapolation``) beside the repeated one: repeating
    the recordings never makes a cycle larger than recorded; a design life
    of many duty cycles will. Adds ``extrapolated`` to ``out`` and a
    caution; the verdict stays the repeated one's."""
    c = data.combined.per_duty_cycle
    n = max(1.0, float(expo["duty_cycles"]))
    if len(c) == 0:
        out["extrapolated"] = None
        return
    curve, opts, _ = point_from_dict(settings)
    e = extrapolate_matrix(c, n)
    d_ex, d_sc, effect = extrapolation.damages(e, curve, opts)
    out["extrapolated"] = json_safe({
        "method": EXTRAPOLATION_METHOD, "factor": n, "damage": d_ex,
        "damage_scaled": d_sc, "extrapolation_effect": effect,
        "passed": d_ex <= opts.allowable_damage if out["passed"] is not None else None,
        "expected_above_observed": e.expected_above_observed,
        "observed_max_range": e.observed_max_range})
    out["cautions"].append(cautions.caution(
        "extrapolation_extremes", above=e.expected_above_observed, top=e.observed_max_range,
        factor=n).as_dict())


def evaluate(con, data_dir, project: str, request: dict, lookup=None) -> dict:
    """The result of a duty-cycle request (not stored). See the module notes."""
    fields(request, REQUEST_KEYS, "the request", "body")
    events = load_events(con, data_dir, project, request.get("events"))
    expo = exposure(events, request.get("target"))
    points = points_of(request, events)
    defaults, gate = defaults_and_gate(request)
    variants = _variants(request.get("variants"))
    if lookup is not None:
        variants = [{**v, "settings": resolve(v["settings"], lookup)} for v in variants]
    settings = {p: point_settings(p, events, defaults, own, lookup)
                for p, own in points.items()}
    for v in variants:
        for p, s in settings.items():
            point_from_dict(overlay(s, v["settings"]))  # every error before any counting
    extrapolate = request.get("extrapolate", False)
    if not isinstance(extrapolate, bool):
        raise InvalidParameter("extrapolate must be true or false", field="extrapolate")
    has_target = expo["target"] is not None
    results = {}
    for p in points:
        data = _combine(p, events, expo["repeats"], expo["duty_cycles"], gate)
        results[p] = _assess_point(p, data, settings[p], events, expo, has_target, variants)
        if extrapolate:
            _extrapolated(results[p], data, settings[p], expo)
    verdicts = [r["passed"] for r in results.values()]
    worst = min(results, key=lambda p: (results[p]["reserve_factor"]
                                        if results[p]["reserve_factor"] is not None
                                        else -math.inf)) if results else None
    return json_safe({
        "events": [{"name": e.name, "source": e.source, "repeats": r,
                    "hours_per_pass": e.hours_per_pass,
                    "distance_per_pass": e.distance_per_pass,
                    "exposure": {e.exposure[0]: e.exposure[1]}}
                   for e, r in zip(events, expo["repeats"])],
        "target": expo["target"], "duty_cycles": expo["duty_cycles"],
        "duty_cycle_hours": expo["duty_cycle_hours"],
        "duty_cycle_distance": expo["duty_cycle_distance"],
        "passed": None if not has_target else all(verdicts),
        "worst_point": worst,
        "points": results,
        "units": {"stress": "MPa", "damage": "-", "life_hours": "h"},
        "cautions": cautions.merge({p: r["cautions"] for p, r in results.items()}),
    })


def run(con, data_dir, project: str, request: dict, lookup=None) -> dict:
    """Evaluate and store a duty cycle; the stored row."""
    result = evaluate(con, data_dir, project, request, lookup)
    return sqlite.store_doc(con, "duty_cycles", "d", project, request.get("name"),
                            json_safe(request), result)


def what_if(con, data_dir, project: str, row: dict, variants, lookup=None) -> dict:
    """A stored duty cycle again under ``variants`` (recounted from its
    sources, not stored): the baseline and each variant side by side."""
    request = {**row["request"], "variants": variants}
    result = evaluate(con, data_dir, project, request, lookup)
    return {"duty_cycle_id": row["id"], "points": {
        p: {"baseline": {k: r[k] for k in ("damage", "passed", "reserve_factor",
                                            "life_duty_cycles", "life_hours")}
            | {"curve": r["curve"].get("name")},
            "variants": r["variants"]} for p, r in result["points"].items()}}


