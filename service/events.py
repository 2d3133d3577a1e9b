"""Events: stored recordings named by a request, read as per-point histories.

An event is a stored assessment (each point's counted history, rebuilt as
the assessment counted it), a stored history (its channels), or a span of a
ledger asset's blocks (each point's counted signal, block after block).
Duty cycles and rig-field comparisons take their recordings from here, and
a point's settings from the first event that stored some, under the
request's.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from service import ledger as ledger_mod
from service.engine.errors import InvalidParameter, unknown
from service.engine.settings import MATERIAL_KEYS, is_strain_life, point_from_dict, resolve
from service.runs import point_samples
from service.store import ledger as ledger_sql
from service.store import parquet, sqlite

EVENT_KEYS = {"name", "assessment_id", "history_id", "ledger", "repeats", "hours", "distance",
              "share", "distance_per_repeat"}
#: Where an event's recording comes from.
EVENT_SOURCES = ("assessment_id", "history_id", "ledger")
#: How often an event occurs: per duty cycle, or as a share of the target.
EXPOSURES = ("repeats", "hours", "distance", "share")
#: Settings keys that, given in an override, replace these keys of the base.
_CURVE_KEYS = ("curve", "estimate", "curve_points", "basquin")
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


def fields(value, allowed, where: str, field: str | None = None) -> dict:
    """``value`` as an object holding only ``allowed`` keys, or a problem
    naming ``where`` (and the first unknown key)."""
    if not isinstance(value, dict):
        raise InvalidParameter(f"{where} must be an object", field=field or where)
    extra = set(value) - set(allowed)
    if extra:
        raise InvalidParameter(f"{where}: unknown field(s) {', '.join(sorted(extra))}",
                               field=sorted(extra)[0])
    return value


def defaults_and_gate(request: dict) -> tuple[dict, float | None]:
    """A request's ``settings`` (for every point) and ``gate`` [MPa] (None:
    the events' own), checked."""
    defaults = request.get("settings") or {}
    if not isinstance(defaults, dict):
        raise InvalidParameter("settings must be an object", field="settings")
    gate = request.get("gate")
    if gate is not None:
        gate = number(gate, "gate", positive=False)
        if gate < 0:
            raise InvalidParameter("gate must be >= 0", field="gate", value=gate)
    return defaults, gate


def stress_life(settings: dict, lookup, why: str):
    """``(settings, curve, options, estimate)`` of stress-life settings,
    stored references resolved; strain-life settings refused with ``why``."""
    if lookup is not None:
        settings = resolve(settings, lookup)
    if is_strain_life(settings):
        raise InvalidParameter(why, field="method")
    return (settings, *point_from_dict(settings))


def number(value, field: str, *, what: str | None = None, positive: bool = True,
           upper: float | None = None) -> float:
    """``value`` as a finite float (> 0 unless ``positive`` is false, <=
    ``upper`` when given), or a problem naming ``field`` (``what`` says
    where in the request, for the message)."""
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(
            value) or (positive and value <= 0) or (upper is not None and value > upper):
        limits = (" > 0" if positive else "") + (f" and <= {upper:g}" if upper is not None
                                                 else "")
        raise InvalidParameter(f"{what or field} {value!r} must be a number{limits}",
                               field=field,
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
        fields(spec, EVENT_KEYS, where, "events")
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
        event.exposure = (kind, number(spec[kind], kind, what=f"{kind} of event {name!r}"))
        if "distance_per_repeat" in spec:
            event.distance_per_pass = number(
                spec["distance_per_repeat"], "distance_per_repeat",
                what=f"distance_per_repeat of event {name!r}")
        out.append(event)
    return out


def source(con, data_dir, project, spec, name) -> Event:
    """One event named by ``spec`` (a source, no exposure), e.g. a rig run."""
    if not isinstance(spec, dict):
        raise InvalidParameter(f"{name} must be an object naming assessment_id, history_id "
                               f"or ledger", field=name)
    sources = [k for k in EVENT_SOURCES if k in spec]
    if len(sources) != 1 or set(spec) - set(EVENT_SOURCES):
        raise InvalidParameter(f"{name}: give one of {', '.join(EVENT_SOURCES)}", field=name)
    return _LOADERS[sources[0]](con, data_dir, project, name, spec[sources[0]])


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


def point_settings(point, events, defaults, own, lookup) -> dict:
    """The stored settings of the first event that has them, under the
    request's defaults and the point's own settings, references resolved."""
    base = next((e.settings[point] for e in events if point in e.settings), {})
    merged = overlay(overlay(base, defaults), own)
    merged.pop("method", None) if merged.get("method") == "stress_life" else None
    return stress_life(merged, lookup, f"point {point!r} is a strain-life point: events are "
                                       f"combined on S-N curves")[0]


def points_of(request: dict, events: list[Event]) -> dict:
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


