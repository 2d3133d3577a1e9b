"""The seam between the damage model and the compiled passes (private).

Everything that decides how a pass over a cycle table is run lives here:
the kernel's arguments from a curve and options, passes split into
stretches on the engine's two threads and summed in one fixed order (so a
result never depends on who computed what), the first pass taken along with
a long count, the reserve-factor search and the top cycles. ``damage.py``
calls these without knowing about threads.
"""

from __future__ import annotations

import math
import threading

import numpy as np

from . import _damage_kernels as _dk
from ._buffers import FLOATS, POOL
from ._threads import beside, helper_allowed, take_back
from .assessment import AssessmentOptions
from .mean_stress import (FIXED_PARAMETERS, MEAN_STRESS_METHODS, clips_compressive_mean,
                          haigh_reference, haigh_zero_mean)
from .rainflow import CycleTable
from .sn_curve import SNCurve

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
    param = FIXED_PARAMETERS.get(method, param)
    table = None
    if method == "haigh":
        points = opts.haigh_diagram
        param = haigh_zero_mean(points)
        k = len(points)
        table = ([float(k)] + [m for m, _ in points] + [a for _, a in points]
                 + [haigh_reference(points, opts.haigh_stress_ratio)])
    clip = clips_compressive_mean(method, opts.compressive_mean)
    segments = _dk.curve_segments(curve)
    # The kernel's power sum (eq_sum) is not what the equivalent range is
    # made from any more (that comes from the damage, see miner.py); it is
    # kept at slope 3 as a cheap by-product for the tests of the kernels.
    return (_dk.model_array(
        method, float(param), clip,
        float(opts.ultimate_strength) if opts.ultimate_strength else math.inf,
        opts.thickness_factor * opts.strength_factor, 3.0, table),
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

