"""A rig run against a field span: the test's acceleration factor, per point.

Both are events (``service.events``: a stored assessment, history or ledger
span), each assessed as a repeating block on the point's curve: the damage
one rig run does against one field span, and the same per hour.
"""

from __future__ import annotations

import math
from dataclasses import replace

from service.engine import cautions, duty_cycle
from service.engine.damage import assess
from service.engine.settings import point_from_dict
from service.events import defaults_and_gate, fields, point_settings, points_of, source
from service.runs import json_safe

COMPARE_KEYS = {"rig", "field", "settings", "points", "gate"}


def compare(con, data_dir, project: str, request: dict, lookup=None) -> dict:
    """A rig run against a field span, per point: the damage of one of each
    (each as a repeating block, the damage a repeat does in service or on
    the rig) and their ratio, per pass and per hour (the test's acceleration
    factor: field hours one rig hour stands for)."""
    fields(request, COMPARE_KEYS, "the request {rig, field, settings?, points?, gate?}",
           "body")
    events = [source(con, data_dir, project, request.get(k), k) for k in ("rig", "field")]
    points = points_of(request, events)
    defaults, gate = defaults_and_gate(request)
    out = {}
    for p, own in points.items():
        settings = point_settings(p, events, defaults, own, lookup)
        curve, opts, _ = point_from_dict(settings)
        opts = replace(opts, reserve_factor=False, top_cycles=0)
        g = max(e.gates.get(p, 0.0) for e in events) if gate is None else gate
        d, eq = [], []
        for e in events:
            c = duty_cycle.combine([(e.signal(p), 1.0)], 1.0, gate=g)
            r = assess(c.per_duty_cycle, curve, opts, weighted=True)
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
