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
from dataclasses import dataclass, field, replace

import numpy as np

from service import ledger as ledger_mod
from service.engine import cautions, duty_cycle
from service.engine.damage import assess
from service.engine.errors import InvalidParameter, unknown
from service.engine.settings import (MATERIAL_KEYS, is_strain_life, point_from_dict, resolve,
                                     thickness_note)
from service.runs import json_safe, point_samples
from service.store import ledger as ledger_sql
from service.store import parquet, sqlite

REQUEST_KEYS = {"name", "events", "target", "settings", "points", "gate", "variants"}
EVENT_KEYS = {"name", "assessment_id", "history_id", "ledger", "repeats", "hours", "distance",
              "share", "distance_per_repeat"}
#: Where an event's recording comes from.
EVENT_SOURCES = ("assessment_id", "history_id", "ledger")
#: How often an event occurs: per duty cycle, or as a share of the target.
EXPOSURES = ("repeats", "hours", "distance", "share")
#: What a design target is counted in.
TARGET_KINDS = ("repeats", "hours", "distance")
VARIANT_KEYS = {"name", "settings", "load_scale"}
#: Settings keys that, given in an override, replace these keys of the base.
_CURVE_KEYS = ("curve", "estimate", "curve_points", "basquin")
_TOP = 5
#: Share of the design damage in cycles between events from which it is cautioned.
_BETWEEN_NOTICEABLE = 0.05
_HOUR_S = 3600.0


class MissingSource(LookupError):
    """An event names a stored assessment, history or asset that is not there."""

    def __init__(self, detail: str, field_name: str):
        super().__init__(detail)
        self.detail, self.field = detail, field_name


@dataclass
class Event:
    """One event: where its recording is and what it gives per point."""

    name: str
    source: dict
    hours_per_pass: float | None
    distance_per_pass: float | None
    exposure: tuple[str, float]
    points: list[str]
    signal: object  # signal(point) -> ndarray [MPa]
    settings: dict = field(default_factory=dict)  # point -> stored settings
    gates: dict = field(default_factory=dict)  # point -> gate [MPa]
    governing: dict = field(default_factory=dict)  # point -> governing reduction text


def _number(value, where: str, positive: bool = True) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(
            value) or (positive and value <= 0):
        raise InvalidParameter(f"{where} {value!r} must be a positive number", field=where,
                               value=value if isinstance(value, (int, float)) else None)
    return float(value)


def _governing_text(res: dict) -> str | None:
    m = res.get("multiaxial")
    if m:
        plane = m.get("plane_angle_deg")
        return m.get("reduction", "") + (f" at {plane:g} deg" if plane is not None else "")
    return None


def _assessment_event(con, data_dir, project, name, ref) -> Event:
    row = sqlite.get_assessment(con, project, ref) if isinstance(ref, str) else None
    if row is None or row.get("state") != "done":
        raise MissingSource(f"event {name!r}: no finished assessment {ref!r}", "assessment_id")
    points = row["result"]["points"]
    dur = row["result"].get("duration_s")
    return Event(
        name, {"assessment_id": ref}, None if dur is None else dur / _HOUR_S, None,
        ("", 0.0), list(points), lambda p: point_samples(data_dir, row, p, con),
        {p: r["settings_used"] for p, r in points.items()},
        {p: float(r.get("gate_mpa") or 0.0) for p, r in points.items()},
        {p: _governing_text(r) for p, r in points.items()})


def _history_event(con, data_dir, project, name, ref) -> Event:
    row = sqlite.get_history(con, project, ref) if isinstance(ref, str) else None
    if row is None:
        raise MissingSource(f"event {name!r}: no history {ref!r}", "history_id")
    dur = row.get("duration_s")
    channels = [c["name"] for c in row["channels"]]
    return Event(name, {"history_id": ref}, None if dur is None else dur / _HOUR_S, None,
                 ("", 0.0), channels,
                 lambda p: parquet.read_channels(data_dir, row["file"], [p])[p])


def _ledger_event(con, data_dir, project, name, span) -> Event:
    if not isinstance(span, dict) or not isinstance(span.get("asset"), str) or set(span) - {
            "asset", "from_seq", "to_seq"}:
        raise InvalidParameter(f"event {name!r}: ledger must be {{asset, from_seq?, to_seq?}}",
                               field="ledger")
    asset = ledger_sql.get_asset(con, project, span["asset"])
    if asset is None:
        raise MissingSource(f"event {name!r}: no asset {span['asset']!r}", "ledger")
    lo, hi = span.get("from_seq"), span.get("to_seq")
    for key, v in (("from_seq", lo), ("to_seq", hi)):
        if v is not None and (isinstance(v, bool) or not isinstance(v, int)):
            raise InvalidParameter(f"event {name!r}: {key} must be a whole number",
                                   field=key, value=v)
    rows = {r["point"]: r for r in ledger_sql.asset_points(con, asset["id"])}
    blocks = {}
    for p, row in rows.items():
        blocks[p] = [b for b in ledger_sql.point_blocks(con, asset["id"], p)
                     if (lo is None or b["seq"] >= lo) and (hi is None or b["seq"] <= hi)]
    points = [p for p in rows if blocks[p] and not is_strain_life(rows[p]["resolved"])]
    if not points:
        raise InvalidParameter(f"event {name!r}: asset {span['asset']!r} has no counted "
                               f"blocks in that span", field="ledger")
    spans = {p: sum(b["sample_count"] / b["sample_rate_hz"] for b in blocks[p])
             for p in points}
    hours = max(spans.values()) / _HOUR_S

    def signal(p):
        row = rows[p]
        model = ledger_mod._model(row["resolved"])
        names = ledger_mod.gauges_of(row) or [p]
        parts = []
        for b in blocks[p]:
            channels = parquet.read_channels(data_dir, b["file"], names)
            parts.append(ledger_mod.point_signal(p, channels, b["sample_rate_hz"], model,
                                                 row)[0])
        return np.concatenate(parts)

    settings = {p: {k: v for k, v in rows[p]["resolved"].items() if k not in ("gate",
                                                                                 "hot_spot")}
                for p in points}
    return Event(name, {"ledger": dict(span)}, hours, None, ("", 0.0), points, signal,
                 settings, {p: float(rows[p]["resolved"].get("gate", 0.0)) for p in points},
                 {p: "hot spot" if ledger_mod.gauges_of(rows[p]) else None for p in points})


_LOADERS = {"assessment_id": _assessment_event, "history_id": _history_event,
            "ledger": _ledger_event}


def load_events(con, data_dir, project: str, specs) -> list[Event]:
    """The events of a request, each with its source read (not yet its samples)."""
    if not isinstance(specs, list) or not specs:
        raise InvalidParameter("events must be a non-empty list", field="events")
    out, names = [], set()
    for i, spec in enumerate(specs):
        where = f"events[{i}]"
        if not isinstance(spec, dict):
            raise InvalidParameter(f"{where} must be an object", field="events")
        extra = set(spec) - EVENT_KEYS
        if extra:
            raise InvalidParameter(f"{where}: unknown field(s) {', '.join(sorted(extra))}",
                                   field=sorted(extra)[0])
        name = spec.get("name", f"event-{i + 1}")
        if not isinstance(name, str) or not name or name in names:
            raise InvalidParameter(f"{where}: name must be a text unique among the events",
                                   field="name", value=name)
        names.add(name)
        sources = [k for k in EVENT_SOURCES if k in spec]
        if len(sources) != 1:
            raise InvalidParameter(f"event {name!r}: give one of {', '.join(EVENT_SOURCES)}",
                                   field="events")
        exposures = [k for k in EXPOSURES if k in spec]
        if len(exposures) != 1:
            raise InvalidParameter(f"event {name!r}: give one of {', '.join(EXPOSURES)}",
                                   field="events")
        event = _LOADERS[sources[0]](con, data_dir, project, name, spec[sources[0]])
        kind = exposures[0]
        event.exposure = (kind, _number(spec[kind], f"{kind} of event {name!r}"))
        if "distance_per_repeat" in spec:
            event.distance_per_pass = _number(spec["distance_per_repeat"],
                                              f"distance_per_repeat of event {name!r}")
        out.append(event)
    return out


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
    amount = _number(target[kind], f"target {kind}") if kind else None
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


def overlay(base: dict, over: dict) -> dict:
    """``over`` on ``base``: a curve, a material or an allowable given in
    ``over`` replaces all of ``base``'s keys that name the same thing."""
    out = dict(base)
    if any(k in over for k in _CURVE_KEYS):
        for k in _CURVE_KEYS + ("below_limit",):
            out.pop(k, None)
    if "material" in over:
        for k in MATERIAL_KEYS:
            out.pop(k, None)
    if "design_fatigue_factor" in over or "allowable_damage" in over:
        out.pop("design_fatigue_factor", None)
        out.pop("allowable_damage", None)
    if "mean_stress_method" in over:
        for k in ("haigh_diagram", "haigh_stress_ratio"):
            out.pop(k, None)
    out.update(over)
    return out


def _point_settings(point, events, defaults, own, lookup) -> dict:
    """The stored settings of the first event that has them, under the
    request's defaults and the point's own settings, references resolved."""
    base = next((e.settings[point] for e in events if point in e.settings), {})
    merged = overlay(overlay(base, defaults), own)
    merged.pop("method", None) if merged.get("method") == "stress_life" else None
    if lookup is not None:
        merged = resolve(merged, lookup)
    if is_strain_life(merged):
        raise InvalidParameter(f"point {point!r} is a strain-life point: duty cycles combine "
                               f"stress-life points", field="method")
    point_from_dict(merged)
    return merged


def _points(request: dict, events: list[Event]) -> dict:
    points = request.get("points")
    common = [p for p in events[0].points if all(p in e.points for e in events[1:])]
    if points is None:
        if not common:
            raise InvalidParameter("the events have no point in common", field="points")
        return {p: {} for p in common}
    if isinstance(points, list):
        points = {p: {} for p in points}
    if not isinstance(points, dict) or not points:
        raise InvalidParameter("points must be a list of names or {point: settings}",
                               field="points")
    for p, own in points.items():
        if p not in common:
            raise unknown("points", p, common)
        if not isinstance(own, dict):
            raise InvalidParameter(f"settings of point {p!r} must be an object",
                                   field="points")
    return points


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
        scale = _number(v.get("load_scale", 1.0), f"load_scale of variant {name!r}")
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
    r = assess(c.design, curve, opts)
    per_cycle = np.array(r.damage_per_cycle, copy=True)
    one = assess(c.per_duty_cycle, curve, replace(opts, reserve_factor=False))
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
    notes = [x for x in r.caution_dicts() if x["code"] != "residue_share"]
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


def evaluate(con, data_dir, project: str, request: dict, lookup=None) -> dict:
    """The result of a duty-cycle request (not stored). See the module notes."""
    if not isinstance(request, dict):
        raise InvalidParameter("the request must be an object", field="body")
    extra = set(request) - REQUEST_KEYS
    if extra:
        raise InvalidParameter(f"unknown field(s): {', '.join(sorted(extra))}",
                               field=sorted(extra)[0])
    events = load_events(con, data_dir, project, request.get("events"))
    expo = exposure(events, request.get("target"))
    points = _points(request, events)
    defaults = request.get("settings") or {}
    if not isinstance(defaults, dict):
        raise InvalidParameter("settings must be an object", field="settings")
    gate = request.get("gate")
    if gate is not None:
        gate = _number(gate, "gate", positive=False)
        if gate < 0:
            raise InvalidParameter("gate must be >= 0", field="gate", value=gate)
    variants = _variants(request.get("variants"))
    if lookup is not None:
        variants = [{**v, "settings": resolve(v["settings"], lookup)} for v in variants]
    settings = {p: _point_settings(p, events, defaults, own, lookup)
                for p, own in points.items()}
    for v in variants:
        for p, s in settings.items():
            point_from_dict(overlay(s, v["settings"]))  # every error before any counting
    has_target = expo["target"] is not None
    results = {}
    for p in points:
        data = _combine(p, events, expo["repeats"], expo["duty_cycles"], gate)
        results[p] = _assess_point(p, data, settings[p], events, expo, has_target, variants)
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
    row = {"id": sqlite.new_id("d"), "project": project, "name": request.get("name"),
           "created_at": sqlite.now(), "request": json_safe(request), "result": result}
    with sqlite.write(con):
        sqlite.insert_duty_cycle(con, row)
    return row


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


COMPARE_KEYS = {"rig", "field", "settings", "points", "gate"}


def _source(con, data_dir, project, spec, name) -> Event:
    if not isinstance(spec, dict):
        raise InvalidParameter(f"{name} must be an object naming assessment_id, history_id "
                               f"or ledger", field=name)
    sources = [k for k in EVENT_SOURCES if k in spec]
    if len(sources) != 1 or set(spec) - set(EVENT_SOURCES):
        raise InvalidParameter(f"{name}: give one of {', '.join(EVENT_SOURCES)}", field=name)
    return _LOADERS[sources[0]](con, data_dir, project, name, spec[sources[0]])


def compare(con, data_dir, project: str, request: dict, lookup=None) -> dict:
    """A rig run against a field span, per point: the damage of one of each
    (each as a repeating block, the damage a repeat does in service or on
    the rig) and their ratio, per pass and per hour (the test's acceleration
    factor: field hours one rig hour stands for)."""
    if not isinstance(request, dict) or set(request) - COMPARE_KEYS:
        raise InvalidParameter("send {rig, field, settings?, points?, gate?}", field="body")
    events = [_source(con, data_dir, project, request.get(k), k) for k in ("rig", "field")]
    points = _points(request, events)
    defaults = request.get("settings") or {}
    if not isinstance(defaults, dict):
        raise InvalidParameter("settings must be an object", field="settings")
    gate = request.get("gate")
    if gate is not None:
        gate = _number(gate, "gate", positive=False)
    out = {}
    for p, own in points.items():
        settings = _point_settings(p, events, defaults, own, lookup)
        curve, opts, _ = point_from_dict(settings)
        opts = replace(opts, reserve_factor=False, top_cycles=0)
        g = max(e.gates.get(p, 0.0) for e in events) if gate is None else gate
        d, eq = [], []
        for e in events:
            c = duty_cycle.combine([(e.signal(p), 1.0)], 1.0, gate=g)
            r = assess(c.per_duty_cycle, curve, opts)
            d.append(r.damage)
            eq.append(r.equivalent_range)
        h = [e.hours_per_pass for e in events]
        ratio = d[0] / d[1] if d[1] > 0 else (math.inf if d[0] > 0 else None)
        per_hour = None
        if None not in h and d[1] > 0:
            per_hour = (d[0] / h[0]) / (d[1] / h[1])
        out[p] = {"damage_rig": d[0], "damage_field": d[1], "field_spans_per_rig_run": ratio,
                  "acceleration_factor": per_hour, "rig_hours": h[0], "field_hours": h[1],
                  "equivalent_range_rig": eq[0], "equivalent_range_field": eq[1],
                  "curve": curve.name, "gate_mpa": g}
    notes = [c for c in cautions.general()] + [
        cautions.caution("rig_field_same_curve").as_dict() | {"points": []}]
    return json_safe({"rig": events[0].source, "field": events[1].source, "points": out,
                      "cautions": notes})
