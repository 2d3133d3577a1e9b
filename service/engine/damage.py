"""Palmgren-Miner damage, life and margins of one measured point.

``assess`` turns a counted history into what an engineer reports: damage,
life in repeats / hours / cycles, the stress reserve factor, the
damage-equivalent range, the cycles that hurt most, flags and cautions, and
the checks that say where the result stops being valid (static strength,
cycles below the fatigue limit, a curve and method that do not belong
together). ``assess_many`` (in ``many.py``) does the same for many points.

The model is in ``miner.py`` and ``mean_stress.py``; how the compiled passes
run (threads, stretches, the reserve search) is behind ``_passes.py``.
"""

from __future__ import annotations

import functools
import math
from dataclasses import replace

import numpy as np

from . import _damage_kernels as _dk
from . import _mean_stress_kernels as _msk
from . import _passes
from . import rainflow as _rf
from ._buffers import FLOATS, POOL
from ._passes import _FirstPassAlong, _Evaluator, _NO_ROWS, _reserve_factor, _top_rows
from ._threads import beside, helper_allowed, take_back
from .assessment import AssessmentOptions, PointAssessment
from .cautions import GENERAL, Caution, caution, unique
from .errors import InvalidParameter
from .mean_stress import (CODE_RULES, COMPRESSIVE_MEAN_POLICIES, MEAN_STRESS_METHODS,
                          check_strengths)
from .miner import equivalent_range, equivalent_range_from_damage, palmgren_miner
from .plausibility import strength_note
from .rainflow import CycleTable, as_history, astm_e1049, resolve_gate
from .sn_curve import SNCurve

#: Shown with every result: what the numbers are and are not.
CAUTIONS = tuple(c.text for c in GENERAL)

#: Flags that carry a caution of the same code.
FLAG_CAUTIONS = ("static_overload", "below_fatigue_limit", "no_cycles", "low_cycle_regime",
                 "above_yield", "range_above_static_limit")

#: Every flag a point's result can carry (an assessment's point or a ledger
#: point): one vocabulary for both, listed at /v1/methods.
FLAGS = ("no_cycles", "static_overload", "below_fatigue_limit", "low_cycle_regime",
         "allowable_reached", "above_yield", "range_above_static_limit", "no_blocks",
         "shear_interaction_exceeded")

_LOW_CYCLE_LIMIT = 1e4

#: Shares (of damage) from which a validity caution is shown: below this the
#: effect is within the scatter of any fatigue estimate (common practice).
_NOTICEABLE = 0.05
#: The residue's share of one pass's damage from which it is cautioned.
_RESIDUE_NOTICEABLE = 0.25
#: EN 1993-1-9:2005 sec. 8(1): ranges of frequent loads within 1.5 f_y
#: (normal) and 1.5 f_y / sqrt(3) (shear).
_EN_RANGE_LIMIT = 1.5


# ---------------------------------------------------------------------------- assess


def assess(table: CycleTable, curve: SNCurve, options: AssessmentOptions | None = None,
           *, duration_s: float | None = None, weighted: bool = False) -> PointAssessment:
    """
    Assess one point's counted cycles against an S-N curve by Miner's rule.

    Parameters
    ----------
    table : CycleTable
        Rainflow cycles of one pass of the history. [MPa]
    curve : SNCurve
        The curve, already with any below-limit treatment applied.
    options : AssessmentOptions
        Mean-stress method, strengths, factors, allowable damage.
    duration_s : float, optional
        Duration of the history, for the life in hours. [s]
    weighted : bool
        The counts are how often each row occurs (a design life's expected
        or combined cycles), not one pass of a history: no row is a half
        cycle of an open residue, so one repeat is the table as it stands.

    Returns
    -------
    PointAssessment

    Notes
    -----
    Each cycle's amplitude and mean are multiplied by ``load_factor``,
    corrected for mean stress, doubled to a range, multiplied by
    ``thickness_factor * strength_factor`` and entered in the curve;
    :math:`D = \\sum n_i / N_i`. The reserve factor is the scale on the whole
    history (before every factor) at which :math:`D` reaches
    ``allowable_damage``, found on the real curve (all segments, cut-off and
    mean-stress correction included).

    References
    ----------
    .. [1] M. A. Miner, "Cumulative damage in fatigue," *J. Appl. Mech.*,
       vol. 12, no. 3, pp. A159-A164, 1945.
    .. [2] EN 1993-1-9:2005, sec. 6 and 8 (partial factors, damage sum).
    """
    opts = options or AssessmentOptions()
    _check_duration(duration_s)
    evaluate = _Evaluator(table, curve, opts)
    n = len(table)
    # Kept memory when it fits (see _buffers): 1e6 fresh cycles cost ~2 ms in page faults.
    per_cycle = POOL.columns(n, FLOATS)[0][:n]
    first = evaluate(1.0, per_cycle, extras=True)
    return _complete(table, evaluate, per_cycle, first, curve, opts, duration_s, weighted)


def _check_duration(duration_s):
    if duration_s is not None and (not math.isfinite(duration_s) or duration_s <= 0):
        raise InvalidParameter(f"duration_s {duration_s} must be positive", field="duration_s",
                               value=duration_s, limit=0.0)


def _complete(table, evaluate, per_cycle, first, curve, opts, duration_s,
              weighted: bool = False) -> PointAssessment:
    """Reserve factor, top cycles and the result, after the first pass."""
    n = len(table)
    damage, overloads, _, max_inv_life, eq_sum, max_range, total_count = first
    below_args = (table, curve, evaluate.args, opts.load_factor, damage)
    # A long table's below-limit pass goes to the helper thread while the
    # reserve search runs here (whose own passes then take their halves back).
    pending = (beside(_below_limit, *below_args) if n >= _passes._SPLIT_CYCLES else None)
    reserve = None
    if opts.reserve_factor and n and max_range > 0:
        reserve = _reserve_factor(evaluate, opts.allowable_damage, first)
    top_rows = _top_rows(per_cycle, opts.top_cycles) if opts.top_cycles and n else ()
    below = take_back(pending, _below_limit, *below_args) if pending is not None else None
    return _assemble(table, per_cycle, top_rows, damage, overloads, max_inv_life, max_range,
                     total_count, reserve, curve, opts, duration_s, evaluate.args,
                     onset=evaluate.overload_scale, below=below, weighted=weighted)


def _damage_only(table: CycleTable, args, scale: float) -> float:
    """Miner damage of ``table`` at ``scale`` (no per-cycle rows, no extras)."""
    if len(table) == 0:
        return 0.0
    return float(_dk.damage_pass(table.stress_from, table.stress_to, table.count, scale,
                                 *args, _NO_ROWS, False)[0])


def _per_repeat(table, per_cycle, damage, total_count, args, load_factor):
    """``(damage_per_repeat, cycles_per_repeat, residue_share)``.

    A recording that repeats closes its open residue with the next repeat:
    per repeat, the full cycles of one pass plus the cycles of the residue
    counted as a repeating block (ASTM E1049-85 sec. 5.4.4.1 for a repeating
    history). Equals counting the recording with ``residue="repeating_block"``
    (tested, ungated), so the life in repeats cannot exceed what repetition
    gives. With a gate, the junction of the residue's end and start is read
    without it (a reversal there smaller than the gate adds a small cycle:
    the conservative side).
    """
    seq, half_damage, closed, half_rows = _dk.residue_parts(
        table.stress_from, table.stress_to, table.count, per_cycle)
    if seq.shape[0] < 2:
        return damage, total_count, 0.0
    if not math.isfinite(damage):
        return damage, total_count, None
    frm, to = _dk.repeating_closure(seq)
    ones = np.ones(frm.shape[0])
    closure = 0.0
    if frm.shape[0]:
        closure = float(_dk.damage_pass(frm, to, ones, load_factor, *args, _NO_ROWS,
                                        False)[0])
    cycles = float(total_count) - 0.5 * half_rows + frm.shape[0]
    share = half_damage / damage if damage > 0 else 0.0
    return closed + closure, cycles, share


@functools.lru_cache(maxsize=256)
def _haibach_continuation(curve: SNCurve):
    """``(limit cycles, limit range, segments)`` of ``curve`` continued below
    its fatigue limit (or cut-off) by Haibach's slope; None without one."""
    limit_n = curve.fatigue_limit_cycles or curve.cutoff_cycles
    if limit_n is None:
        return None
    haibach = replace(curve, fatigue_limit_cycles=limit_n).below_limit("haibach")
    return float(limit_n), float(curve.range_at(limit_n)), _dk.curve_segments(haibach)


def _below_limit(table, curve, args, load_factor, damage):
    """How much of the spectrum lies below the curve's fatigue limit.

    Returns ``(report, caution or None)``; ``report`` is None for a curve
    without a limit or cut-off. The shares are counted on the curve
    continued below the limit by Haibach's slope 2m - 1, so that a curve
    which ignores those cycles still shows what they would do.
    """
    continued = _haibach_continuation(curve)
    if continued is None or len(table) == 0:
        return None, None
    limit_n, limit, segments = continued
    model, _ = args
    cb, ct, db, dt = _dk.split_at_limit(table.stress_from, table.stress_to, table.count,
                                        load_factor, model, segments, limit)
    report = {"limit_range": limit, "limit_cycles": float(limit_n),
              "cycles_share": cb / ct if ct > 0 else 0.0,
              "damage_share": db / dt if dt > 0 else 0.0}
    note = None
    if math.isfinite(damage) and dt > 0 and db > _NOTICEABLE * dt:
        kept = max(0.0, damage - (dt - db)) / db
        report["damage_kept"] = kept
        if kept < 0.5:
            note = caution("below_limit_damage", share=db / dt, limit=limit,
                           cycles_share=report["cycles_share"], kept=kept)
    return report, note


def _static_checks(table, curve, opts, max_range, reserve, args, onset=None):
    """Flags and cautions of static strength, and what limits the reserve."""
    flags, notes = [], []
    n = len(table)
    lf = opts.load_factor
    en = curve.name.startswith("EN1993-1-9:")
    if opts.yield_strength is None:
        notes.append(caution("yield_not_checked", extra=(
            ", nor ranges against EN 1993-1-9's 1.5 f_y" if en else "")))
    elif n:
        peak = lf * max(float(np.max(np.abs(table.stress_from))),
                        float(np.max(np.abs(table.stress_to))))
        if peak > opts.yield_strength:
            flags.append("above_yield")
            notes.append(caution("above_yield", peak=peak, yield_strength=opts.yield_strength))
        if en:
            shear = curve.family == "welded_shear"
            limit = _EN_RANGE_LIMIT * opts.yield_strength / (math.sqrt(3.0) if shear else 1.0)
            if lf * max_range > limit:
                flags.append("range_above_static_limit")
                notes.append(caution("range_above_static_limit", range=lf * max_range,
                                     limit=limit,
                                     rule="1.5 f_y / sqrt(3) in shear" if shear else "1.5 f_y"))
    limited = None
    if reserve is not None:
        if onset is None:  # the batch path: not kept from its first pass
            model, _ = args
            onset, _ = _msk._onset_and_range(table.stress_from, table.stress_to, 0, n,
                                            int(model[0]), model[1], model[2] != 0.0,
                                            model[3])
            onset /= lf
        limited = ("static_strength" if math.isfinite(onset) and reserve >= onset * (1 - 1e-9)
                   else "fatigue")
        if limited == "static_strength":
            notes.append(caution("reserve_limited_by_static_strength", reserve=reserve))
    return flags, notes, limited


def _method_checks(table, per_cycle, damage, curve, opts):
    """Cautions for a curve and a method that do not belong together."""
    notes = []
    method = opts.mean_stress_method
    for name in ("ultimate_strength", "yield_strength"):
        unusual = strength_note(getattr(opts, name), name)
        if unusual is not None:
            notes.append(caution("implausible_value", **unusual))
    if curve.family == "estimate" and curve.fatigue_limit_cycles is None:
        # sn_estimate builds a limit for steels only.
        notes.append(caution("estimate_not_steel"))
    if method == "haigh" and curve.stress_ratio is not None and abs(
            curve.stress_ratio - opts.haigh_stress_ratio) > 1e-9:
        notes.append(caution("haigh_ratio_mismatch", diagram=opts.haigh_stress_ratio,
                             curve=curve.stress_ratio))
    if method not in ("none",) + CODE_RULES and curve.family in ("welded", "welded_shear"):
        notes.append(caution("mean_stress_on_welded_curve", method=method))
    if (method == "none" and curve.stress_ratio == -1.0 and len(table)
            and 0 < damage < math.inf):
        tensile = (table.stress_from + table.stress_to) > 0.0
        share = float(np.sum(per_cycle[tensile])) / damage
        if share > _NOTICEABLE:
            notes.append(caution("tensile_mean_uncorrected", share=share))
    return notes


def _assemble(table, per_cycle, top_rows, damage, overloads, max_inv_life, max_range,
              total_count, reserve, curve, opts, duration_s, args, echo=None,
              description=None, onset=None, below=None, weighted=False):
    """The :class:`PointAssessment` from the computed figures (shared by the
    one-point and the batch path). ``table`` gives the rows of ``top_rows``;
    ``args`` are the kernel's ``(model, segments)`` for the checks' passes;
    ``onset`` the scale at which the first cycle becomes a static overload,
    when the first pass kept it; ``below`` the result of :func:`_below_limit`
    when it was computed beside the reserve search."""
    n = per_cycle.shape[0]
    flags = []
    if n == 0:
        flags.append("no_cycles")
    if overloads:
        flags.append("static_overload")
    elif n and damage == 0.0:
        flags.append("below_fatigue_limit")
    if not overloads and max_inv_life > 1.0 / _LOW_CYCLE_LIMIT:
        flags.append("low_cycle_regime")
    if math.isfinite(damage) and damage >= opts.allowable_damage:
        flags.append("allowable_reached")  # as the ledger says of its running sum
    if weighted:
        per_repeat, cycles_per_repeat, residue_share = damage, total_count, None
    else:
        per_repeat, cycles_per_repeat, residue_share = _per_repeat(
            table, per_cycle, damage, total_count, args, opts.load_factor)
    life = math.inf if per_repeat == 0 else opts.allowable_damage / per_repeat
    top = []
    rows = np.asarray(top_rows, np.int64)
    rows = rows[rows >= 0]
    if rows.shape[0]:
        # One gather per column and plain floats: numpy scalars one at a
        # time cost most of a short point's bookkeeping.
        cols = zip(table.start_index[rows].tolist(), table.end_index[rows].tolist(),
                   table.stress_from[rows].tolist(), table.stress_to[rows].tolist(),
                   table.count[rows].tolist(), per_cycle[rows].tolist())
        finite = math.isfinite(damage)
        for s_i, e_i, f, t, c, d in cols:
            if d == 0:
                break
            top.append({
                "start_index": s_i, "end_index": e_i,
                "stress_range": abs(f - t), "stress_mean": 0.5 * (f + t),
                "count": c, "damage": d, "damage_share": d / damage if finite else None,
            })
    range_factor = opts.load_factor * opts.thickness_factor * opts.strength_factor
    eq_range, eq_slope = equivalent_range_from_damage(
        damage, curve, opts.equivalent_cycles, opts.equivalent_slope, range_factor)
    static_flags, static_notes, limited = _static_checks(table, curve, opts, max_range,
                                                         reserve, args, onset)
    flags += static_flags
    below, below_note = below or _below_limit(table, curve, args, opts.load_factor, damage)
    notes: list[Caution] = list(GENERAL)
    notes += [caution(f) for f in flags if f in FLAG_CAUTIONS and f not in static_flags]
    notes += static_notes
    notes += _method_checks(table, per_cycle, damage, curve, opts)
    if below_note is not None:
        notes.append(below_note)
    if residue_share is not None and residue_share > _RESIDUE_NOTICEABLE:
        notes.append(caution("residue_share", share=residue_share))
    notes += [caution("curve_note", note=t) for t in curve.notes]
    return PointAssessment(
        damage=float(damage), life_repeats=float(life),
        life_hours=None if duration_s is None else float(life * duration_s / 3600.0),
        # Infinite life stays infinite even with no cycles (inf * 0 is NaN).
        life_cycles=math.inf if math.isinf(life) else float(life * cycles_per_repeat),
        reserve_factor=reserve,
        equivalent_range=float(eq_range), cycles_counted=float(total_count),
        max_range=float(max_range), overload_cycles=int(overloads), flags=tuple(flags),
        top_cycles=top, cautions=unique(notes), options=echo or opts.echo(),
        curve=dict(description or curve.description), damage_per_cycle=per_cycle,
        damage_per_repeat=float(per_repeat), residue_damage_share=residue_share,
        equivalent_slope=float(eq_slope), equivalent_cycles=float(opts.equivalent_cycles),
        reserve_limited_by=limited, below_limit=below)


def assess_history(samples, curve: SNCurve, options: AssessmentOptions | None = None, *,
                   gate: float = 0.0, residue: str = "half_cycles",
                   duration_s: float | None = None) -> PointAssessment:
    """Count ``samples`` by rainflow and :func:`assess` the cycles.

    A long ungated history is assessed while it is counted: the first damage
    pass runs on the helper thread over the stretches of cycles closed so
    far (:class:`_FirstPassAlong`); the figures are the same as counting
    first and assessing after, to the last bit.
    """
    opts = options or AssessmentOptions()
    _check_duration(duration_s)
    x = as_history(samples)
    g = resolve_gate(x, gate)
    if (residue == "half_cycles" and g == 0.0 and x.shape[0] >= _rf._PIPELINE_SAMPLES
            and helper_allowed()):
        along = _FirstPassAlong(curve, opts)
        table, _ = _rf._count(x, None, 0.0, True, on_rows=along)
        per_cycle, out = along.result(table)
        evaluate = _Evaluator(table, curve, opts)
        first = evaluate.finish(out, True)
        return _complete(table, evaluate, per_cycle, first, curve, opts, duration_s)
    table = astm_e1049(x, gate=g, residue=residue)
    return assess(table, curve, opts, duration_s=duration_s)


def damage_of_history(samples, curve: SNCurve, options: AssessmentOptions | None = None, *,
                      gate: float = 0.0, residue: str = "half_cycles") -> float:
    """The Miner damage of one pass of ``samples`` and nothing else (what a
    scan over many candidate histories compares): no per-cycle damage, no
    extras, no reserve. Equal to ``assess_history(...).damage`` to the last
    bit (the same passes, summed in the same order)."""
    opts = options or AssessmentOptions()
    evaluate = _Evaluator(astm_e1049(samples, gate=gate, residue=residue), curve, opts)
    if evaluate.cols[0].shape[0] >= _passes._SPLIT_CYCLES:
        return float(evaluate.damage_at(1.0)[0])
    return float(_dk.damage_pass(*evaluate.cols, 1.0 * evaluate.load_factor, *evaluate.args,
                                 _NO_ROWS, False)[0])


#: Longest point (samples) for the batch path; longer points are few enough

def warm_up() -> None:
    """Compile (or load from cache) the damage kernels for every method."""
    from .sn_curve import basquin_range

    x = np.array([0.0, 200.0, -100.0, 300.0, -200.0, 100.0])
    curve = basquin_range(3.0, 1e12)
    for method in MEAN_STRESS_METHODS:
        opts = AssessmentOptions(mean_stress_method=method, ultimate_strength=900.0,
                                 yield_strength=600.0, fatigue_strength_coefficient=1200.0,
                                 walker_exponent=0.5,
                                 haigh_diagram=((0.0, 300.0), (800.0, 0.0)))
        assess_history(x, curve, opts)
    from .many import assess_many

    assess_many(np.tile(x, (2, 1)).T.copy(), curve)  # the batch kernels
    _dk.split_at_limit(x[:2], x[1:3], np.ones(2), 1.0, _passes._model_args(
        curve, AssessmentOptions())[0], _dk.curve_segments(curve), 100.0)
    _dk.repeating_closure(_dk.residue_parts(x[:3], x[1:4], np.full(3, 0.5), np.zeros(3))[0])
    from . import _batch_kernels as _bk

    # Steps of the reserve search as long tables drive them from Python.
    st = _bk.reserve_begin(1.0, 0.5, 3.0, math.inf)
    _bk.reserve_step(st, 0.5, 3.0)


def __getattr__(name: str):
    # The many-point path lives in many.py (which imports this module); the
    # old import path ``service.engine.damage.assess_many`` keeps working.
    if name == "assess_many":
        from .many import assess_many
        return assess_many
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


__all__ = ["AssessmentOptions", "PointAssessment", "CAUTIONS", "palmgren_miner",
           "equivalent_range", "assess", "assess_history", "assess_many",
           "COMPRESSIVE_MEAN_POLICIES", "check_strengths"]
