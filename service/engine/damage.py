"""Palmgren-Miner damage, life and margins of one measured point.

``assess`` turns a counted history into what an engineer reports: damage,
life in repeats / hours / cycles, the stress reserve factor, the
damage-equivalent range, the cycles that hurt most, flags and cautions.
``assess_many`` does the same for many points in one call.
"""

from __future__ import annotations

import gc
import math
import threading
from concurrent.futures import ThreadPoolExecutor
from contextlib import contextmanager
from dataclasses import dataclass, field, fields

import numpy as np

from . import _damage_kernels as _dk
from ._buffers import FLOATS, POOL, SHELF, TABLE
from ._threads import beside, helper_allowed, in_one_thread, take_back
from .errors import InvalidLoadHistory, InvalidParameter
from .mean_stress import (COMPRESSIVE_MEAN_POLICIES, MEAN_STRESS_METHODS,
                          check_strengths, equivalent_amplitude)
from . import rainflow as _rf
from .rainflow import CycleTable, as_history, astm_e1049, resolve_gate
from .sn_curve import SNCurve

#: Shown with every result: what the numbers are and are not.
CAUTIONS = (
    "Fatigue lives scatter by a factor of several; this is an estimate, to be "
    "confirmed by test.",
    "The result depends on the chosen S-N curve, mean-stress method and factors; "
    "check them against the applicable code.",
    "Decisions on safety need the judgment and sign-off of a qualified engineer.",
)

#: Flag -> caution text added to a result that carries the flag.
FLAG_CAUTIONS = {
    "static_overload": "At least one cycle reaches the static strength: this is not a "
                       "fatigue problem; damage is infinite and life zero.",
    "below_fatigue_limit": "Every cycle is below the curve's limit or cut-off: no damage is "
                           "predicted, which holds only if the curve's limit holds for this "
                           "detail and loading.",
    "no_cycles": "The history has no cycles (constant, or everything under the gate).",
    "low_cycle_regime": "Some cycles fail in under 1e4 cycles, where stress-based life "
                        "estimates lose accuracy (plasticity); consider a strain-life method.",
}

_LOW_CYCLE_LIMIT = 1e4

#: Mean samples per point above which assess_many uses its worker threads.
_THREADED_SAMPLES = 50_000


@dataclass(frozen=True)
class AssessmentOptions:
    """How a point is assessed. Stresses in MPa; the rest dimensionless.

    Attributes
    ----------
    mean_stress_method : str
        A key of ``MEAN_STRESS_METHODS``; ``none`` for as-welded details.
    compressive_mean : str
        Policy for compressive means, see ``equivalent_amplitude``.
    ultimate_strength, yield_strength, fatigue_strength_coefficient : float
        Material strengths. [MPa]
    walker_exponent : float
        Walker's gamma. [-]
    allowable_damage : float
        Miner sum at which failure is predicted (1.0; 0.5 is common for
        variable-amplitude welded details). [-]
    load_factor : float
        Partial factor on the fatigue load, gamma_Ff: multiplies the history. [-]
    strength_factor : float
        Partial factor on fatigue strength, gamma_Mf: divides the curve. [-]
    thickness_factor : float
        Multiplies the range entering the curve (e.g. (t/t_ref)^k). [-]
    equivalent_slope, equivalent_cycles : float
        Slope m [-] and reference cycles [cycles] of the equivalent range.
    top_cycles : int
        How many of the most damaging cycles to report.
    reserve_factor : bool
        Whether to solve for the stress reserve factor.
    """

    mean_stress_method: str = "none"
    compressive_mean: str = "no_benefit"
    ultimate_strength: float | None = None
    yield_strength: float | None = None
    fatigue_strength_coefficient: float | None = None
    walker_exponent: float | None = None
    allowable_damage: float = 1.0
    load_factor: float = 1.0
    strength_factor: float = 1.0
    thickness_factor: float = 1.0
    equivalent_slope: float = 3.0
    equivalent_cycles: float = 2e6
    top_cycles: int = 5
    reserve_factor: bool = True

    def __post_init__(self):
        # Reuse the dispatcher's checks so every caller gets the same errors.
        equivalent_amplitude(np.zeros(1), np.zeros(1), self.mean_stress_method,
                             ultimate_strength=self.ultimate_strength,
                             yield_strength=self.yield_strength,
                             fatigue_strength_coefficient=self.fatigue_strength_coefficient,
                             walker_exponent=self.walker_exponent,
                             compressive_mean=self.compressive_mean)
        for name in ("allowable_damage", "load_factor", "strength_factor",
                     "thickness_factor", "equivalent_slope", "equivalent_cycles"):
            v = getattr(self, name)
            if not isinstance(v, (int, float)) or not math.isfinite(v) or v <= 0:
                raise InvalidParameter(f"{name} {v} must be a positive number",
                                       field=name, value=v, limit=0.0)
        if not isinstance(self.top_cycles, int) or self.top_cycles < 0:
            raise InvalidParameter(f"top_cycles {self.top_cycles} must be a whole number >= 0",
                                   field="top_cycles", value=self.top_cycles, limit=0)

    def echo(self) -> dict:
        """The options as a plain dict (every value is a scalar or a string)."""
        return {f.name: getattr(self, f.name) for f in fields(self)}


@dataclass(frozen=True)
class PointAssessment:
    """Everything reported for one point. Stresses in MPa.

    ``damage`` [-] is the Miner sum of one pass of the history;
    ``life_repeats`` [-], ``life_hours`` [h] and ``life_cycles`` [cycles]
    are how long the point lasts at that rate until ``allowable_damage``;
    ``reserve_factor`` [-] is the factor on the whole history that brings the
    damage to ``allowable_damage``; ``equivalent_range`` [MPa] is the constant
    range that, applied ``equivalent_cycles`` times with slope
    ``equivalent_slope``, does the same damage as the corrected ranges.
    Infinite values mean no damage (lives, reserve) or static overload
    (damage); they are never NaN.
    """

    damage: float
    life_repeats: float
    life_hours: float | None
    life_cycles: float
    reserve_factor: float | None
    equivalent_range: float
    cycles_counted: float
    max_range: float
    overload_cycles: int
    flags: tuple
    top_cycles: list
    cautions: tuple
    options: dict
    curve: dict
    damage_per_cycle: np.ndarray = field(repr=False, compare=False)

    def summary(self) -> dict:
        """Plain values for a table or JSON (no per-cycle array)."""
        out = {k: getattr(self, k) for k in (
            "damage", "life_repeats", "life_hours", "life_cycles", "reserve_factor",
            "equivalent_range", "cycles_counted", "max_range", "overload_cycles")}
        out["flags"] = list(self.flags)
        return out


# ---------------------------------------------------------------------------- Miner


def palmgren_miner(count, cycles_to_failure):
    r"""
    Miner damage of each cycle, :math:`d_i = n_i / N_i`.

    Parameters
    ----------
    count : array-like
        Cycles counted (0.5 or 1.0 per row). [cycles]
    cycles_to_failure : array-like
        :math:`N_i` from the S-N curve; ``inf`` for no damage, ``0`` for a
        static failure. [cycles]

    Returns
    -------
    ndarray
        Damage of each row, :math:`D = \sum d_i`. [-]

    References
    ----------
    .. [1] A. Palmgren, "Die Lebensdauer von Kugellagern," *Z. Ver. Dtsch.
       Ing.*, vol. 68, pp. 339-341, 1924.
    .. [2] M. A. Miner, "Cumulative damage in fatigue," *J. Appl. Mech.*,
       vol. 12, no. 3, pp. A159-A164, 1945.
    """
    n = np.asarray(count, dtype=np.float64)
    nf = np.asarray(cycles_to_failure, dtype=np.float64)
    with np.errstate(divide="ignore"):
        return np.where(np.isinf(nf), 0.0, n / nf)


def equivalent_range(stress_range, count, slope: float = 3.0,
                     reference_cycles: float = 2e6) -> float:
    r"""
    Damage-equivalent constant range at ``reference_cycles``.

    :math:`\Delta\sigma_{eq} = (\sum n_i \Delta\sigma_i^m / N_{ref})^{1/m}`;
    infinite ranges (overloads) are left out. [MPa]

    References
    ----------
    .. [1] EN 1993-1-9:2005, sec. 6.3 and Annex A (damage equivalent range
       at 2e6 cycles).
    """
    r = np.asarray(stress_range, dtype=np.float64)
    n = np.asarray(count, dtype=np.float64)
    ok = np.isfinite(r) & (r > 0)
    total = float(np.sum(n[ok] * r[ok] ** slope))
    return float((total / reference_cycles) ** (1.0 / slope))


# ---------------------------------------------------------------------------- kernel glue


_NO_ROWS = np.empty(0)


def _model_args(curve: SNCurve, opts: AssessmentOptions) -> tuple:
    """``(model, segments)``: what the damage kernel needs of the curve and
    the options."""
    method = opts.mean_stress_method
    needs = MEAN_STRESS_METHODS[method][1]
    param = {"ultimate_strength": opts.ultimate_strength,
             "yield_strength": opts.yield_strength,
             "fatigue_strength_coefficient": opts.fatigue_strength_coefficient,
             "walker_exponent": opts.walker_exponent}.get(needs) or 1.0
    clip = method in ("goodman", "soderberg", "morrow", "gerber") and (
        opts.compressive_mean == "zero"
        or (opts.compressive_mean == "no_benefit" and method != "gerber"))
    segments = _dk.curve_segments(curve)
    return (_dk.model_array(
        method, float(param), clip,
        float(opts.ultimate_strength) if opts.ultimate_strength else math.inf,
        opts.thickness_factor * opts.strength_factor, float(opts.equivalent_slope)),
        segments)


def _combine(a: tuple, b: tuple) -> tuple:
    """Two extras passes' outputs over consecutive rows, as one pass's."""
    return (a[0] + b[0], a[1] + b[1], a[2] + b[2], max(a[3], b[3]), a[4] + b[4],
            max(a[5], b[5]), min(a[6], b[6]), a[7] + b[7])


class _Evaluator:
    """Damage of the history scaled by ``s``, through the compiled loop."""

    def __init__(self, table: CycleTable, curve: SNCurve, opts: AssessmentOptions):
        self.curve = curve
        self.args = _model_args(curve, opts)
        self.segments = self.args[1]
        self.load_factor = opts.load_factor
        self.cols = (table.stress_from, table.stress_to, table.count)
        self.overload_scale = math.inf

    def __call__(self, s: float, per_cycle=None, extras: bool = False):
        """``(damage, overloads, slope, max_inv_life, eq_sum, max_range,
        total_count)`` at scale s.

        Per-cycle damage goes into ``per_cycle`` if given; the last four are
        computed only with ``extras`` (else 0).
        """
        rows = _NO_ROWS if per_cycle is None else per_cycle
        n = self.cols[0].shape[0]
        if extras and n >= _SPLIT_CYCLES:
            out = self._stretched(s, rows, n)
        else:
            out = _dk.damage_pass(*self.cols, s * self.load_factor, *self.args, rows, extras)
        return self.finish(out, extras)

    def finish(self, out: tuple, extras: bool):
        """The figures of :meth:`__call__` from the kernel's output ``out``."""
        d, over, weight = out[0], out[1], out[2]
        slope = weight / d if 0 < d < math.inf else None
        max_inv = 0.0
        if extras:
            if out[3] > 0:
                max_inv = _dk.inverse_life(self.segments, out[3])
            # Scale s at which the first cycle becomes a static overload.
            self.overload_scale = out[6] / self.load_factor
        return (d, over, slope, max_inv) + tuple(out[4:6]) + (out[7],)

    def damage_at(self, s: float) -> tuple[float, int, float]:
        """``(damage, overloads, slope_weight)`` at scale s (no per-cycle
        damage, no extras), summed as :func:`_stretches` groups them."""
        n = self.cols[0].shape[0]
        scale = s * self.load_factor
        if n < _SPLIT_CYCLES:
            out = _dk.damage_pass(*self.cols, scale, *self.args, _NO_ROWS, False)
        else:
            out = _combine_all(_run_jobs([_job(self.cols, lo, hi, scale, self.args, _NO_ROWS,
                                               False) for lo, hi in _stretches(n)]))
        return out[0], out[1], out[2]

    def _stretched(self, s: float, rows, n: int):
        """The first (extras) pass over stretches of rows on two threads (the
        kernel releases the GIL), combined in row order, so the result
        depends on the cycles alone."""
        scale = s * self.load_factor
        return _combine_all(_run_jobs([_job(self.cols, lo, hi, scale, self.args, rows, True)
                                       for lo, hi in _stretches(n)]))


#: Cycles from which passes run on two threads (about 0.7 ms of work; below
#: it the hand-off costs more than it saves). The batch path never reaches it
#: (its points have at most 32768 cycles).
_SPLIT_CYCLES = 1 << 16
#: Rows in a stretch: from _SPLIT_CYCLES rows on, a pass sums its damage
#: stretch by stretch in row order, whichever thread did which stretch and
#: whether or not the count was still running (see _FirstPassAlong).
_STRETCH = 1 << 15


def _stretches(n: int) -> list[tuple[int, int]]:
    """Row ranges ``[lo, hi)`` of the stretches of a table of ``n`` rows."""
    return [(lo, min(lo + _STRETCH, n)) for lo in range(0, n, _STRETCH)]


def _job(cols, lo: int, hi: int, scale: float, args, rows, extras: bool) -> tuple:
    """The damage kernel's arguments for rows ``[lo, hi)``."""
    return (cols[0][lo:hi], cols[1][lo:hi], cols[2][lo:hi], scale, *args,
            rows[lo:hi] if rows.shape[0] else rows, extras)


def _combine_all(outs: list) -> tuple:
    """Kernel outputs of consecutive stretches as one, combined in order."""
    total = outs[0]
    for out in outs[1:]:
        total = _combine(total, out)
    return total


def _run_jobs(jobs: list, started: list | None = None) -> list:
    """``damage_pass`` of every job, outputs in order. The helper thread
    takes jobs from the front and this thread from the back (one thread
    inside ``one_thread``); ``started``, if given, holds futures already
    submitted for some jobs (None where not): those the helper has not begun
    are taken back and done here."""
    outs: list = [None] * len(jobs)
    if started is None:
        started = [None] * len(jobs)
        if len(jobs) > 1 and helper_allowed():
            lock = threading.Lock()
            claims = {"front": 0, "back": len(jobs) - 1}

            def take_front():
                while True:
                    with lock:
                        if claims["front"] > claims["back"]:
                            return
                        i = claims["front"]
                        claims["front"] += 1
                    outs[i] = _dk.damage_pass(*jobs[i])

            helper_done = beside(take_front)
            while True:
                with lock:
                    if claims["front"] > claims["back"]:
                        break
                    i = claims["back"]
                    claims["back"] -= 1
                outs[i] = _dk.damage_pass(*jobs[i])
            take_back(helper_done, lambda: None)
            return outs
    for i in range(len(jobs) - 1, -1, -1):
        future = started[i]
        if future is None or future.cancel():
            outs[i] = _dk.damage_pass(*jobs[i])
    for i, future in enumerate(started):
        if outs[i] is None:
            outs[i] = future.result()
    return outs


class _FirstPassAlong:
    """The first (extras) damage pass at scale 1 taken along with a long
    count: called as the count's ``on_rows``, it hands each stretch of rows
    (see ``_stretches``) to the helper thread as soon as the count has closed
    it. In a long count the helper finishes its share of the turning points
    before the caller's stack pass ends, and spends the rest on these.

    Stretches are only handed out once the table has ``_SPLIT_CYCLES`` rows
    (a shorter table is one stretch, done at the end), and their sums are
    combined in row order: the figures are those of ``assess(table)`` to
    the last bit. At the end the caller takes the stretches the helper has
    not begun, from the back.
    """

    def __init__(self, curve: SNCurve, opts: AssessmentOptions):
        self.args = _model_args(curve, opts)
        self.scale = 1.0 * opts.load_factor
        self.jobs: list = []
        self.started: list = []
        self.per_cycle = np.empty(0)

    def __call__(self, cols, m: int, last: bool) -> None:
        if cols[0].shape[0] > self.per_cycle.shape[0]:
            # New or grown: stretches under way write the old array, so let
            # them finish before it is copied over (growth is rare).
            done = len(self.jobs) * _STRETCH
            outs = _run_jobs(self.jobs, self.started)
            self.started = [_Done(out) for out in outs]
            per_cycle = POOL.columns(cols[0].shape[0], FLOATS)[0]
            per_cycle[:done] = self.per_cycle[:done]
            self.per_cycle = per_cycle
        if last or m < _SPLIT_CYCLES:
            return
        while (len(self.jobs) + 1) * _STRETCH <= m:
            lo = len(self.jobs) * _STRETCH
            job = _job(cols, lo, lo + _STRETCH, self.scale, self.args, self.per_cycle, True)
            self.jobs.append(job)
            self.started.append(beside(_dk.damage_pass, *job))

    def result(self, table) -> tuple[np.ndarray, tuple]:
        """``(per-cycle damage, kernel output)`` over the whole table."""
        n = len(table)
        cols = (table.stress_from, table.stress_to, table.count)
        per_cycle = self.per_cycle[:n]
        if n < _SPLIT_CYCLES:
            return per_cycle, _dk.damage_pass(*cols, self.scale, *self.args, per_cycle, True)
        jobs, started = list(self.jobs), list(self.started)
        for lo, hi in _stretches(n)[len(jobs):]:
            # The rest go to the helper too; the caller takes back from the
            # end whatever it has not begun.
            jobs.append(_job(cols, lo, hi, self.scale, self.args, self.per_cycle, True))
            started.append(beside(_dk.damage_pass, *jobs[-1]))
        return per_cycle, _combine_all(_run_jobs(jobs, started))


class _Done:
    """A finished job's output where a future is expected."""

    def __init__(self, out):
        self.out = out

    def cancel(self) -> bool:
        return False

    def result(self):
        return self.out


def _reserve_factor(evaluate, target: float, first) -> float | None:
    """Smallest scale s with damage(s) >= target (None: none within 1e-6..1e6).

    damage(s) is non-decreasing in s and close to a power law, so Newton
    steps in log-log space converge in two or three evaluations (the exact
    local slope, mean-stress correction included, comes with each pass; a
    secant over a short step also sees knees and the cut-off). A bracket
    damage(lo) < target <= damage(hi) is kept; a step that leaves it, or a
    zero or infinite damage (cut-off, overload), grows or bisects it; a
    reserve limited by static overload is found from its onset directly.
    The search's steps are compiled (``_batch_kernels.reserve_step``) and
    shared with the batch path, so both give the same factor; a short table
    runs the whole search in one compiled loop, a long one (from
    ``_SPLIT_CYCLES`` cycles) evaluates each scale on two threads.
    """
    from . import _batch_kernels as _bk

    d, _, slope = first[:3]
    model, segments = evaluate.args
    slope = math.nan if slope is None else slope
    n = evaluate.cols[0].shape[0]
    if n < _SPLIT_CYCLES:
        s = _bk.reserve_search(*evaluate.cols, evaluate.load_factor, model, segments, target,
                               d, slope, evaluate.overload_scale)
    else:
        st = _bk.reserve_begin(target, d, slope, evaluate.overload_scale)
        step = _bk.reserve_step(st, d, slope)
        while not math.isnan(step):
            d, _, weight = evaluate.damage_at(step)
            step = _bk.reserve_step(st, d, weight / d if 0.0 < d < math.inf else math.nan)
        s = st[_bk._RESULT]
    return None if math.isnan(s) else float(s)


# ---------------------------------------------------------------------------- assess


def assess(table: CycleTable, curve: SNCurve, options: AssessmentOptions | None = None,
           *, duration_s: float | None = None) -> PointAssessment:
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
    return _complete(table, evaluate, per_cycle, first, curve, opts, duration_s)


def _check_duration(duration_s):
    if duration_s is not None and (not math.isfinite(duration_s) or duration_s <= 0):
        raise InvalidParameter(f"duration_s {duration_s} must be positive", field="duration_s",
                               value=duration_s, limit=0.0)


def _top_rows(per_cycle: np.ndarray, k: int):
    """Rows of the ``k`` most damaging cycles, largest first (ties: earliest),
    as ``top_k`` gives them; a long table is searched in two halves on two
    threads and the two lists merged."""
    n = per_cycle.shape[0]
    if n < _SPLIT_CYCLES:
        return _dk.top_k(per_cycle, k)
    h = n // 2
    later = beside(_dk.top_k, per_cycle[h:], k)
    first = _dk.top_k(per_cycle[:h], k).tolist()
    second = [h + int(i) for i in take_back(later, _dk.top_k, per_cycle[h:], k)]
    return sorted(first + second, key=lambda i: (-per_cycle[i], i))[:k]


def _complete(table, evaluate, per_cycle, first, curve, opts, duration_s) -> PointAssessment:
    """Reserve factor, top cycles and the result, after the first pass."""
    n = len(table)
    damage, overloads, _, max_inv_life, eq_sum, max_range, total_count = first
    reserve = None
    if opts.reserve_factor and n and max_range > 0:
        reserve = _reserve_factor(evaluate, opts.allowable_damage, first)
    top_rows = _top_rows(per_cycle, opts.top_cycles) if opts.top_cycles and n else ()
    return _assemble(table, per_cycle, top_rows, damage, overloads, max_inv_life, eq_sum,
                     max_range, total_count, reserve, curve, opts, duration_s)


def _assemble(table, per_cycle, top_rows, damage, overloads, max_inv_life, eq_sum, max_range,
              total_count, reserve, curve, opts, duration_s, echo=None, description=None):
    """The :class:`PointAssessment` from the computed figures (shared by the
    one-point and the batch path). ``table`` gives the rows of ``top_rows``."""
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
    life = math.inf if damage == 0 else opts.allowable_damage / damage
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
    eq_range = float((eq_sum / opts.equivalent_cycles) ** (1.0 / opts.equivalent_slope))
    cautions = CAUTIONS + tuple(FLAG_CAUTIONS[f] for f in flags) + tuple(curve.notes)
    return PointAssessment(
        damage=float(damage), life_repeats=float(life),
        life_hours=None if duration_s is None else float(life * duration_s / 3600.0),
        # Infinite life stays infinite even with no cycles (inf * 0 is NaN).
        life_cycles=math.inf if math.isinf(life) else float(life * total_count),
        reserve_factor=reserve,
        equivalent_range=eq_range, cycles_counted=float(total_count),
        max_range=float(max_range), overload_cycles=int(overloads), flags=tuple(flags),
        top_cycles=top, cautions=cautions, options=echo or opts.echo(),
        curve=dict(description or curve.description), damage_per_cycle=per_cycle)


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
    if evaluate.cols[0].shape[0] >= _SPLIT_CYCLES:
        return float(evaluate.damage_at(1.0)[0])
    return float(_dk.damage_pass(*evaluate.cols, 1.0 * evaluate.load_factor, *evaluate.args,
                                 _NO_ROWS, False)[0])


#: Longest point (samples) for the batch path; longer points are few enough
#: for the one-point path, and the batch sizes its buffers by the length.
_BATCH_MAX_SAMPLES = 65536
_BATCH_POINTS = 64
_RUN_SAMPLES = 320_000


def _assess_batch(array: np.ndarray, curve: SNCurve, opts: AssessmentOptions,
                  duration_s, workers: int) -> dict:
    """:func:`assess_many` for short points: whole runs of points per compiled
    calls (``_batch_kernels.count_points`` then ``assess_counted``), on
    ``workers`` threads."""
    if duration_s is not None and (not math.isfinite(duration_s) or duration_s <= 0):
        raise InvalidParameter(f"duration_s {duration_s} must be positive", field="duration_s",
                               value=duration_s, limit=0.0)
    from . import _batch_kernels as _bk

    n, points = array.shape
    ev = _Evaluator(CycleTable.empty(), curve, opts)
    model, segments = ev.args
    k_top = max(int(opts.top_cycles), 1)
    stats = np.zeros((points, 7))
    top = np.full((points, k_top), -1, np.int64)
    echo, description = opts.echo(), curve.description
    seg_py = segments.tolist()

    # Runs of points: about _RUN_SAMPLES samples (a run's buffers stay near
    # the caches: 1000 x 1e4 took 85 ms in runs of 64 points, 73 in runs of
    # 32; 100 x 65536 took 69-96 ms in runs of 32-64, 48 in runs of 8), 8 to
    # _BATCH_POINTS points, and at least two runs a worker so the threads
    # finish together.
    per_run = max(8, min(_BATCH_POINTS, _RUN_SAMPLES // n))
    per_run = max(1, min(per_run, -(-points // (2 * max(workers, 1)))))

    def run(j):
        block = array[:, j:j + per_run]
        if block.dtype != np.float64:
            block = block.astype(np.float64)
        b = block.shape[1]
        # The run's cycle rows live only until its results are built (no
        # result keeps a view of them), so they go back on the shelf after:
        # fresh pages for 64 points x 1e4 samples cost more than counting.
        bufs = SHELF.take((b, n), TABLE + FLOATS)
        try:
            return counted_run(j, block, b, *bufs)
        finally:
            SHELF.give_back(bufs)

    def counted_run(j, block, b, frm, to, cnt, s_ix, e_ix, xt):
        nrows = np.empty(b, np.int64)
        bad = np.zeros(b, np.int64)
        _bk.count_points(block, xt, nrows, frm, to, cnt, s_ix, e_ix, bad)
        for r in np.flatnonzero(bad):
            # A bad sample: the one-point path raises the precise error.
            try:
                assess_history(np.ascontiguousarray(block[:, r]), curve, opts,
                               duration_s=duration_s)
            except InvalidLoadHistory as exc:
                exc.channel = str(j + r)
                exc.details["channel"] = str(j + r)
                raise
        offsets = np.zeros(b, np.int64)
        offsets[1:] = np.cumsum(nrows)[:-1]
        total_rows = int(nrows.sum())
        per_cycle = POOL.columns(total_rows, FLOATS)[0][:total_rows]
        st = stats[j:j + b]
        _bk.assess_counted(nrows, offsets, frm, to, cnt, ev.load_factor, model, segments,
                           opts.allowable_damage, bool(opts.reserve_factor), k_top, per_cycle,
                           st, top[j:j + b])
        out = []
        # Plain Python numbers from here on: numpy scalars cost several
        # times more in the per-point bookkeeping, which holds the GIL.
        rows_py, offs_py, st_py = nrows.tolist(), offsets.tolist(), st.tolist()
        tops_np = top[j:j + b, :opts.top_cycles]
        for r in range(b):
            m, o = rows_py[r], offs_py[r]
            table = CycleTable(frm[r, :m], to[r, :m], cnt[r, :m], s_ix[r, :m], e_ix[r, :m])
            d, over, max_sr, eq_sum, max_range, reserve, total = st_py[r]
            max_inv = _dk.inverse_life(seg_py, max_sr) if max_sr > 0 else 0.0
            tops = tops_np[r] if opts.top_cycles else ()
            out.append((str(j + r), _assemble(
                table, per_cycle[o:o + m], tops, d, over, max_inv, eq_sum, max_range, total,
                None if math.isnan(reserve) else float(reserve), curve, opts, duration_s,
                echo=dict(echo), description=description)))
        return out

    starts = range(0, points, per_run)
    with _collector_paused():
        if workers > 1 and len(starts) > 1:
            with ThreadPoolExecutor(max_workers=workers) as pool:
                parts = list(pool.map(run, starts))
        else:
            parts = [run(j) for j in starts]
        return {name: r for part in parts for name, r in part}


@contextmanager
def _collector_paused():
    """Pause Python's cyclic garbage collector while results are built.

    A batch builds a few thousand result objects, none of them in a cycle;
    each allocation burst makes the collector walk every tracked object in
    the process (about 150,000 once numpy, scipy and numba are loaded: 70 ms
    a full pass), which cost 20-25 ms of a 1000-point call. Collection is
    only deferred, not lost; if another thread paused it first, that thread
    turns it back on.
    """
    was_on = gc.isenabled()
    if was_on:
        gc.disable()
    try:
        yield
    finally:
        if was_on:
            gc.enable()


def _column_items(array: np.ndarray, block: int = 32):
    """``("0", column), ...`` of a 2-D array, each column contiguous.

    Columns are copied 32 at a time as they are needed: a strided column
    costs a cache miss per sample, and a whole-array transpose would hold a
    second copy of everything at once.
    """
    for j in range(0, array.shape[1], block):
        rows = np.ascontiguousarray(array[:, j:j + block].T)
        for k in range(rows.shape[0]):
            yield str(j + k), rows[k]


def assess_many(histories, curve: SNCurve, options: AssessmentOptions | None = None, *,
                gate: float = 0.0, residue: str = "half_cycles",
                duration_s: float | None = None, workers: int = 2) -> dict:
    """
    Assess many points at once: ``{name: samples}`` or a 2-D array (one
    column per point) in, ``{name: PointAssessment}`` out.

    The compiled kernels release the GIL, so ``workers`` threads count
    points side by side once points are long enough (on average
    ``_THREADED_SAMPLES`` samples) to pay for handing the GIL back and
    forth; shorter points run one after another, which measured faster. A
    point that fails validation raises for the whole call, naming the point
    (``channel``) so the caller can drop or fix it.
    """
    if isinstance(histories, np.ndarray):
        if histories.ndim != 2:
            raise InvalidParameter("a history array must be 2-D: samples x points",
                                   field="samples")
        if (gate == 0.0 and residue == "half_cycles" and histories.dtype.kind in "iuf"
                and 2 <= histories.shape[0] <= _BATCH_MAX_SAMPLES):
            return _assess_batch(histories, curve, options or AssessmentOptions(),
                                 duration_s, workers)
        items = _column_items(histories)
        n_items, mean_size = histories.shape[1], histories.shape[0]
    else:
        items = list(histories.items())
        n_items = len(items)
        mean_size = sum(np.size(v) for _, v in items) / max(n_items, 1)
    opts = options or AssessmentOptions()

    def one(item):
        name, samples = item
        try:
            return name, assess_history(samples, curve, opts, gate=gate, residue=residue,
                                        duration_s=duration_s)
        except InvalidLoadHistory as exc:
            exc.channel = name
            exc.details["channel"] = name
            raise

    if workers <= 1 or n_items < 4 or mean_size < _THREADED_SAMPLES:
        return dict(one(it) for it in items)
    with ThreadPoolExecutor(max_workers=workers) as pool:
        return dict(pool.map(in_one_thread(one), items))


def warm_up() -> None:
    """Compile (or load from cache) the damage kernels for every method."""
    from .sn_curve import basquin_range

    x = np.array([0.0, 200.0, -100.0, 300.0, -200.0, 100.0])
    curve = basquin_range(3.0, 1e12)
    for method in MEAN_STRESS_METHODS:
        opts = AssessmentOptions(mean_stress_method=method, ultimate_strength=900.0,
                                 yield_strength=600.0, fatigue_strength_coefficient=1200.0,
                                 walker_exponent=0.5)
        assess_history(x, curve, opts)
    assess_many(np.tile(x, (2, 1)).T.copy(), curve)  # the batch kernels
    from . import _batch_kernels as _bk

    # Steps of the reserve search as long tables drive them from Python.
    st = _bk.reserve_begin(1.0, 0.5, 3.0, math.inf)
    _bk.reserve_step(st, 0.5, 3.0)


__all__ = ["AssessmentOptions", "PointAssessment", "CAUTIONS", "palmgren_miner",
           "equivalent_range", "assess", "assess_history", "assess_many",
           "COMPRESSIVE_MEAN_POLICIES", "check_strengths"]
