"""Many points in one call: ``assess_many``.

Short points (2-D input up to 65536 samples) take a compiled batch path
(``_batch_kernels``: count a run of points, then assess them and solve each
reserve factor in numba) on two threads over alternate runs; longer ones run
the one-point path side by side. Both build their results with
``damage._assemble``, so a point's figures are the same whichever path it
took, to the last bit (tested).
"""

from __future__ import annotations

import gc
import math
from concurrent.futures import ThreadPoolExecutor
from contextlib import contextmanager

import numpy as np

from ._buffers import FLOATS, POOL, SHELF, TABLE
from ._passes import _Evaluator
from ._threads import in_one_thread
from .assessment import AssessmentOptions
from .damage import _assemble, assess_history
from .errors import InvalidLoadHistory, InvalidParameter
from .rainflow import CycleTable
from .sn_curve import SNCurve

#: Mean samples per point above which assess_many uses its worker threads.
_THREADED_SAMPLES = 50_000

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
    from . import _damage_kernels as _dk

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
            d, over, max_sr, _eq_sum, max_range, reserve, total = st_py[r]
            max_inv = _dk.inverse_life(seg_py, max_sr) if max_sr > 0 else 0.0
            tops = tops_np[r] if opts.top_cycles else ()
            out.append((str(j + r), _assemble(
                table, per_cycle[o:o + m], tops, d, over, max_inv, max_range, total,
                None if math.isnan(reserve) else float(reserve), curve, opts, duration_s,
                ev.args, echo=dict(echo), description=description)))
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


