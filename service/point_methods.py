"""Points assessed other than as one stress-life channel: hot-spot points
(gauges extrapolated to a weld toe), the normal-and-shear check of a weld,
and strain-life points (the local strain approach). ``runs.assess_point``
sends them here; the results have its shape.
"""

from __future__ import annotations

import math

import numpy as np

from service import declarations, runs
from service.engine import cautions, hot_spot, screening, strain_life, weld_interaction
from service.engine.damage import assess_history
from service.engine.rainflow import CycleTable, astm_e1049, resolve_gate
from service.engine.settings import screening_from_dict, strain_life_from_dict


def assess_hot_spot(point, gate, gate_fraction, residue, duration_s):
    """A hot-spot point: its gauges screened, extrapolated to the weld toe
    (``engine.hot_spot``), and the hot-spot history assessed as one channel.
    Cleaning applies to single channels: a hot-spot point's findings are
    reported (or refused)."""
    spec = point.hot_spot
    policy, thresholds = screening_from_dict(point.settings)
    rate = point.sample_count / duration_s if duration_s else None
    findings = []
    for g in spec["gauges"]:
        for f in runs._screened(g, point.samples[g], rate, policy, thresholds):
            f.description = f"{g}: {f.description}"
            findings.append(f)
    ex = declarations.hot_spot_plan(spec)
    history = hot_spot.extrapolate([point.samples[g] for g in spec["gauges"]], ex.weights)
    inner = runs.PlannedPoint(point.name, history, {**point.settings, "screening": "off"})
    out, damage_per_cycle = runs.assess_point(inner, gate, gate_fraction, residue, duration_s)
    extra = [cautions.caution(
        "hot_spot_extrapolated", method=ex.method,
        positions=", ".join(f"{p:.3g} mm" for p in ex.positions_mm),
        weights=", ".join(f"{w:.4g}" for w in ex.weights)), *ex.cautions]
    if out["curve"]["name"] not in hot_spot.HOT_SPOT_CURVES:
        extra.append(cautions.caution("hot_spot_curve", curve=out["curve"]["name"]))
    if findings:
        table = astm_e1049(history, gate=out["gate_mpa"], residue=residue)
        screening.damage_shares(findings, table.start_index, table.end_index, damage_per_cycle)
        extra.append(runs.findings_caution(findings))
    out.update(settings_used=point.settings,
               screening=runs._signal_block("report" if policy == "clean" else policy,
                                            findings, None),
               cautions=out["cautions"] + [c.as_dict() for c in extra],
               hot_spot={k: v for k, v in spec.items() if k != "kind"})
    return runs.json_safe(out), damage_per_cycle


def interaction(spec, comps, curve, opts, shear_curve, shear_opts, non_proportional, gate,
                 residue, duration_s):
    """The weld's normal stress (``sxx`` or ``syy``, across the weld) and its
    shear (``sxy``) counted and assessed on their own curves and combined by
    the declared rule (``engine.weld_interaction``)."""
    si = spec["shear_interaction"]
    normal = comps[("sxx", "syy").index(si["normal"])]
    parts = [assess_history(x, c, o, gate=gate, residue=residue, duration_s=duration_s)
             for x, c, o in ((normal, curve, opts), (comps[2], shear_curve, shear_opts))]
    return weld_interaction.check(si["rule"], *parts, normal_component=si["normal"],
                                  non_proportional=non_proportional, loading=si["loading"],
                                  comparison_value=si["comparison_value"],
                                  duration_s=duration_s)


def assess_strain_life(point, gate, gate_fraction, residue, duration_s):
    """A single channel by the local strain approach (``engine.strain_life``):
    screened like any point, then followed through the notch root loop by
    loop; the result has the stress-life result's shape (equivalent range
    and per-repeat figures do not apply: null; ``max_range`` and each top
    loop's ``stress_range`` are of the history as sent), and a
    ``strain_life`` block with the material, the method and the largest
    local values."""
    material, params, opts = strain_life_from_dict(point.settings)
    policy, thresholds = screening_from_dict(point.settings)
    rate = point.sample_count / duration_s if duration_s else None
    samples, findings, cleaned = runs.screen_channel(point.name, point.samples, rate, policy,
                                                     thresholds)
    g = resolve_gate(samples, gate or 0.0, gate_fraction)
    r = _strain_life(samples, material, params, opts, residue, g, duration_s)
    loops = r.loops
    ranges = np.abs(samples[loops["start_index"]] - samples[loops["end_index"]])
    extra = [cautions.caution(
        "strain_life_method", input=params["input_kind"].replace("_", " "),
        rule=("" if params["input_kind"] == "local_strain"
              else f", {params['rule'].capitalize()}'s rule with Kt = {params['kt']:g}"),
        mean=strain_life.MEAN_STRESS_NAMES[params["mean_stress_method"]],
        source=material.source)]
    if material.source.startswith("estimate"):
        extra.append(cautions.caution("strain_life_estimate", source=material.source))
    if findings:
        screening.damage_shares(findings, loops["start_index"], loops["end_index"],
                                loops["damage"])
        extra.append(runs.findings_caution(findings))
    extra.extend(strain_life.validity_cautions(loops, material))
    if r.reserve_limited_by == "static_strength":
        extra.append(cautions.caution("reserve_limited_by_static_strength",
                                      reserve=r.reserve_factor))
    damage = r.damage
    finite = math.isfinite(damage) and damage > 0
    order = np.argsort(-loops["damage"], kind="stable")[:10]
    top = [{"start_index": int(loops["start_index"][i]), "end_index": int(loops["end_index"][i]),
            "count": float(loops["count"][i]), "stress_range": float(ranges[i]),
            "stress_mean": float(loops["stress_mean"][i]),
            "strain_amplitude": float(loops["strain_amplitude"][i]),
            "stress_max": float(loops["stress_max"][i]),
            "reversals_to_failure": float(loops["reversals_to_failure"][i]),
            "damage": float(loops["damage"][i]),
            "damage_share": float(loops["damage"][i]) / damage if finite else None}
           for i in order if loops["damage"][i] > 0]
    out = {
        "point": point.name, "damage": damage, "damage_per_repeat": None,
        "residue_damage_share": None, "life_repeats": r.life_repeats,
        "life_hours": r.life_hours, "life_cycles": r.life_cycles,
        "reserve_factor": r.reserve_factor,
        "reserve_limited_by": r.reserve_limited_by,
        "equivalent_range": None, "equivalent_slope": None, "equivalent_cycles": None,
        "cycles_counted": r.cycles_counted,
        "max_range": float(ranges.max()) if ranges.size else 0.0,
        "overload_cycles": int(np.sum(loops["reversals_to_failure"] == 0.0)),
        "below_limit": None, "flags": list(r.flags), "runout": math.isinf(r.life_repeats),
        "gate_mpa": g, "top_cycles": top,
        "curve": {"name": "strain-life", "source": material.source,
                  "family": "strain_life"},
        "estimate": None,
        # In the request's names (the engine's keywords differ).
        "options": {"allowable_damage": opts.allowable_damage, "residue": residue,
                    "method": "strain_life", "input": params["input_kind"],
                    "notch_rule": params["rule"], "kt": params["kt"],
                    "mean_stress_method": params["mean_stress_method"]},
        "settings_used": point.settings,
        "cautions": [c.as_dict() for c in extra],
        "screening": runs._signal_block(policy, findings, cleaned),
        "strain_life": {"material": material.as_dict(),
                        "transition_reversals": material.transition_reversals(),
                        "max_strain_amplitude": r.max_strain_amplitude,
                        "max_stress": r.max_stress, **{k: v for k, v in r.method.items()
                                                      if k != "gate"}},
    }
    return runs.json_safe(out), loops["damage"]


def _strain_life(samples, material, params, opts, residue, gate, duration_s=None,
                 reserve_factor=True):
    """``engine.strain_life.assess_strain_life`` of a channel as stored [MPa]
    (a notch-root strain channel is stored as E times strain)."""
    to_input = strain_life.input_of_stored(material, params["input_kind"])
    return strain_life.assess_strain_life(samples * to_input, material, **params,
                                          allowable_damage=opts.allowable_damage,
                                          residue=residue, gate=gate * to_input,
                                          duration_s=duration_s,
                                          reserve_factor=reserve_factor)


def recount_strain_life(samples, res: dict):
    """A stored strain-life point's assessment again (no reserve search),
    from its samples and result: what the cycle table and the plots read."""
    material, params, opts = strain_life_from_dict(res["settings_used"])
    return material, _strain_life(samples, material, params, opts, res["options"]["residue"],
                                  res["gate_mpa"], reserve_factor=False)


def strain_life_cycles(samples, res: dict) -> tuple[CycleTable, np.ndarray]:
    """A strain-life point's cycle table (of the history as sent, MPa) and
    per-loop damage, recounted as the result was made."""
    _, r = recount_strain_life(samples, res)
    table = astm_e1049(samples, gate=res["gate_mpa"], residue=res["options"]["residue"])
    return table, r.loops["damage"]
