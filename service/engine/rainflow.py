"""Rainflow cycle counting per ASTM E1049-85, with gating and continuation.

Public entry points
-------------------
``astm_e1049``      count a whole history (residue as half cycles, or the
                    history treated as a repeating block).
``count_block``     count one block of a longer history and carry the
                    unclosed residue forward in a :class:`CountingState`.
``close_residue``   what the carried residue adds if the history ends now.
``turning_points``  the peaks and valleys that the counting sees.

Conventions (see DEVELOPERS.md, glossary): samples are stresses in MPa
(the counting itself is unit-free); sample indices are 0-based positions in
the whole history, across blocks; a plateau counts once, at its last sample;
the first and the last sample of a history are always points.
"""

from __future__ import annotations

import threading

import numpy as np

from . import _counting_kernels as _k
from ._buffers import POOL, codes_buffer
from ._threads import helper, helper_allowed
# The tables, the input checks and the first pass: one import path.
from .cycle_tables import CountingState, CycleTable
from .errors import IncompatibleState, InvalidLoadHistory, unknown
from .history_input import _first_non_finite, as_history, resolve_gate
from .turning import confirmed_points as _points

#: Residue treatments for :func:`astm_e1049`, keyed by their public names.
RESIDUE_TREATMENTS = ("half_cycles", "repeating_block")

# Headroom kept in a cycle table before it is trimmed by a copy: trimming
# small tables (the usual case for many short points) cost five copies a
# table for a few kilobytes saved.
_SLACK_ROWS = 64
_ROW_BYTES = 40
_TRIM_BYTES = 1 << 20


#: Samples from which an ungated count runs as a pipeline on two threads.
_PIPELINE_SAMPLES = 1 << 18
#: Chunk lengths of the pipeline: the first is short so counting starts
#: soon, later ones double up to the last size.
_FIRST_CHUNK = 1 << 14
_LAST_CHUNK = 1 << 17


class _Pipeline:
    """Turning points of a long ungated block chunk by chunk on the engine's
    helper thread, while the calling thread runs the stack pass over the
    chunks already done.

    Both threads take the next untaken chunk, the caller only when it would
    otherwise wait: on a smooth signal (where the stack is quicker than the
    turning points) the pass is shared, and a busy helper delays nothing.
    Chunks grow from short (so counting starts soon) to a fixed length. Each
    chunk starts from the state the whole pass would hold there (the sample
    before it and the sign of the last nonzero step, see
    ``direction_before``), so its codes, indices into the block, equal one
    pass's.
    :meth:`finish` must be called after use (it waits for the helper, which
    writes into this thread's scratch buffer).
    """

    def __init__(self, x: np.ndarray, state: CountingState | None, final: bool, sp: int):
        n = x.shape[0]
        self.x, self.xbits, self.final, self.sp = x, x.view(np.int64), final, sp
        self.first = state is None
        self.prev = 0.0 if state is None else state.candidate_value
        self.direction = 0 if state is None else state.direction
        bounds, size = [0], _FIRST_CHUNK
        while bounds[-1] < n:
            bounds.append(min(n, bounds[-1] + size))
            size = min(2 * size, _LAST_CHUNK)
        self.bounds = bounds
        chunks = len(bounds) - 1
        # Chunk c writes its codes from bounds[c] + c on (its length + 1).
        self.codes = codes_buffer(n + chunks + 1)
        self.results: list = [None] * chunks  # (k, d, bad) or an exception
        self.cv = threading.Condition(threading.Lock())
        self.front, self.back = 1, chunks - 1  # the caller takes chunk 0 now
        # Waking the helper takes 0.1-0.2 ms on this kind of machine: ask first.
        self.future = helper().submit(self._helper_loop)
        self.offset = 0 if state is None else state.samples_seen
        self.pre0 = (np.array([self.prev, 0.0, 0.0]),
                     np.array([0 if state is None else state.candidate_index, 0, 0],
                              np.int64))
        self._x0 = (float(x[0]), 0) if state is None else (state.start_max_value,
                                                           state.start_max_index)
        self.after = None
        self._run(0)

    def _claim(self):
        """The next untaken chunk, or None (call with ``cv`` held)."""
        if self.front > self.back:
            return None
        self.front += 1
        return self.front - 1

    def _helper_loop(self):
        while True:
            with self.cv:
                c = self._claim()
            if c is None:
                return
            self._run(c)

    def _run(self, c: int) -> None:
        try:
            b0, b1 = self.bounds[c], self.bounds[c + 1]
            out = self.codes[b0 + c:b1 + c + 1]
            if c == 0:
                res = _k.turning_points_plain(self.x[:b1], self.xbits[:b1], self.first,
                                              self.prev, self.direction, out, 0)
            else:
                d0 = _k.direction_before(self.x, b0, self.first, self.prev, self.direction)
                res = _k.turning_points_plain(self.x[b0:b1], self.xbits[b0:b1], False,
                                              self.x[b0 - 1], d0, out, b0)
        except BaseException as exc:  # handed to the caller, never lost
            res = exc
        with self.cv:
            self.results[c] = res
            self.cv.notify()

    def _result(self, c: int):
        """Chunk ``c``'s result; while it is not done, take the next untaken
        chunk, and wait only when none is left to take."""
        while True:
            with self.cv:
                res = self.results[c]
                if res is not None:
                    return res
                mine = self._claim()
                if mine is None:
                    self.cv.wait_for(lambda: self.results[c] is not None)
                    return self.results[c]
            self._run(mine)

    def segments(self):
        """Yield ``_stack`` segments in order, as their chunks are done."""
        x, n, chunks = self.x, self.x.shape[0], len(self.bounds) - 1
        k_seen = 0
        for c in range(chunks):
            res = self._result(c)
            if isinstance(res, BaseException):
                raise res
            k, d, bad = res
            b0, b1 = self.bounds[c], self.bounds[c + 1]
            if bad:
                j = b0 + _first_non_finite(x[b0:b1])
                raise InvalidLoadHistory(
                    f"sample {self.offset + j} is {x[j]}; samples must be finite numbers",
                    sample_index=self.offset + j)
            codes = self.codes[b0 + c:b1 + c + 1]
            if c == chunks - 1:
                self.after = (int(d), float(x[-1]), self.offset + n - 1, *self._x0, *self._x0)
                if self.final and d != 0:
                    codes[k] = n - 1
                    k += 1
            k_seen += k
            # Rows for the whole table, from the density of turning points
            # so far (5 % spare; the table grows if later chunks are busier).
            rows = _capacity(int(k_seen * 1.05 * n / b1) + 1, self.sp)
            yield codes, k, x, self.offset, *self.pre0, rows

    def finish(self) -> None:
        """Leave no chunk running: cancel the untaken ones and wait for the
        helper's current one (a helper that never started is cancelled)."""
        with self.cv:
            self.back = self.front - 1
        if not self.future.cancel():
            self.future.result()


def _capacity(points: int, residue: int) -> int:
    """Rows to allocate for the cycles of ``points`` new turning points.

    Rows = (points + start half cycles + residue) / 2 - 1 for a whole
    history; the last two terms grow like the log of the length on random
    loads, so 4096 spare rows almost always avoid a grow-and-copy, which
    would hold two copies of the table at once.
    """
    return points // 2 + residue + 4096


def _columns(rows: int, keep=None, m: int = 0) -> list[np.ndarray]:
    """Five cycle columns of ``rows`` rows (copying ``keep[:m]`` over), from
    the pool of columns no table uses any more when one fits."""
    cols = POOL.columns(rows)
    if keep is not None:
        for new, old in zip(cols, keep):
            new[:m] = old[:m]
    return cols


def _new_stack(spare: int, values=None, indices=None):
    """Residue stack arrays for the stack kernel: ``(sv, si, sp)`` holding
    ``values``/``indices`` (if given) above the kernel's NaN sentinels, with
    room for ``spare`` more entries."""
    sp = 0 if values is None else values.shape[0]
    size = _k.STACK_PAD + sp + spare
    sv, si = np.empty(size, np.float64), np.empty(size, np.int64)
    sv[:_k.STACK_PAD] = np.nan
    si[:_k.STACK_PAD] = 0
    if sp:
        sv[_k.STACK_PAD:_k.STACK_PAD + sp] = values
        si[_k.STACK_PAD:_k.STACK_PAD + sp] = indices
    return sv, si, sp


def _residue(sv, si, sp):
    """Views of the ``sp`` residue entries of stack arrays."""
    return sv[_k.STACK_PAD:_k.STACK_PAD + sp], si[_k.STACK_PAD:_k.STACK_PAD + sp]


def _stack(segments, sv, si, sp, half_rule, final, on_rows=None):
    """Second pass: run the stack kernel over each segment in turn, growing
    its arrays when it asks.

    ``segments`` yields ``(codes, k, x, offset, pre_v, pre_i, rows)``: the
    codes of one stretch of the history and the rows the whole table is
    expected to need (the first sizes the table; a later one that is larger
    sizes it when it has to grow). ``on_rows(cols, m, last)``, if given, is
    told after each segment, and once more (``last``) when the table is
    complete, that rows ``[0, m)`` of the five columns ``cols`` are final
    (it may read them from another thread, never write them).
    Returns ``(CycleTable, residue_values, residue_indices)``.
    """
    cols = None
    m = 0
    for codes, k, x, offset, pre_v, pre_i, rows in segments:
        if cols is None:
            cols = _columns(rows)
        j = 0
        while True:
            j, sp, m = _k.stack_pass(codes, j, k, x, offset, pre_v, pre_i, sv, si, sp,
                                     half_rule, *cols, m)
            if j >= k:
                break
            if sp + 1 > sv.shape[0] - _k.STACK_PAD:
                sv, si, _ = _new_stack(sp + 64, *_residue(sv, si, sp))
            if m + sp + 1 > cols[0].shape[0]:
                cols = _columns(max(m + m // 2, m + sp + 1, rows) + 64, cols, m)
        if on_rows is not None:
            on_rows(cols, m, False)
    if cols is None:
        cols = _columns(sp + 1)
    rv, ri = (r.copy() for r in _residue(sv, si, sp))
    if final and sp > 1:
        # What is left open is counted as half cycles, oldest first.
        need = m + sp - 1
        if need > cols[0].shape[0]:
            cols = _columns(need, cols, m)
        frm, to, cnt, s_ix, e_ix = cols
        frm[m:need], to[m:need], cnt[m:need] = rv[:-1], rv[1:], 0.5
        s_ix[m:need], e_ix[m:need] = ri[:-1], ri[1:]
        m = need
    if on_rows is not None:
        on_rows(cols, m, True)
    slack = cols[0].shape[0] - m
    if slack > _SLACK_ROWS and slack * _ROW_BYTES > _TRIM_BYTES and slack > m // 4:
        table = CycleTable(*(c[:m].copy() for c in cols))
    else:
        table = CycleTable(*(c[:m] for c in cols))
    return table, rv, ri


def count_block(samples, state: CountingState | None = None, *, gate: float = 0.0,
                final: bool = False) -> tuple[CycleTable, CountingState]:
    """Count one block of a history, carrying the unclosed residue forward.

    Parameters
    ----------
    samples : array-like
        The block's samples, in time order. [MPa]
    state : CountingState, optional
        The state returned for the previous block; ``None`` starts a history.
    gate : float
        Hysteresis gate: reversals smaller than this are not counted; the
        same for every block of a history. [MPa]
    final : bool
        If true the history ends with this block and the residue is counted
        as half cycles (as :func:`astm_e1049` does).

    Returns
    -------
    (CycleTable, CountingState)
        Cycles closed in this block, and the state to pass with the next one.

    Notes
    -----
    Counting blocks one after another and then :func:`close_residue` gives the
    very same rows as counting the concatenated history at once: the state
    keeps the pending extreme and the residue stack of the three-point method.
    """
    x = as_history(samples, min_samples=1 if state is None else 0)
    if state is not None:
        if float(gate) != state.gate:
            raise IncompatibleState(
                f"gate {gate} MPa differs from the history's gate {state.gate} MPa",
                field="gate", value=float(gate), history_gate=state.gate)
        gate = state.gate
    else:
        gate = resolve_gate(None, gate)
    return _count(x, state, gate, final)


def _count(x: np.ndarray, state: CountingState | None, gate: float,
           final: bool, on_rows=None) -> tuple[CycleTable, CountingState]:
    """Both passes over a validated block with a resolved gate (``on_rows``:
    see :func:`_stack`)."""
    offset = 0 if state is None else state.samples_seen
    if state is None:
        sv, si, sp = _new_stack(64)
    else:
        sv, si, sp = _new_stack(64, state.residue_values, state.residue_indices)
    if gate == 0.0 and x.shape[0] >= _PIPELINE_SAMPLES and helper_allowed():
        pipe = _Pipeline(x, state, final, sp)
        try:
            table, rv, ri = _stack(pipe.segments(), sv, si, sp, True, final, on_rows)
        finally:
            pipe.finish()
        after = pipe.after
    else:
        codes, k, pre_v, pre_i, after = _points(x, state, gate, final)
        table, rv, ri = _stack([(codes, k, x, offset, pre_v, pre_i, _capacity(k, sp))],
                               sv, si, sp, True, final, on_rows)
    return table, CountingState(gate, offset + x.shape[0], *after, rv, ri)


def close_residue(state: CountingState) -> CycleTable:
    """Half cycles the residue would add if the history ended after ``state``.

    Includes the pending last extreme, so ``count_block`` of every block plus
    this equals :func:`astm_e1049` of the whole history.
    """
    table, _ = count_block(np.empty(0), state, gate=state.gate, final=True)
    return table


def astm_e1049(samples, *, gate: float = 0.0, gate_fraction: float | None = None,
               residue: str = "half_cycles") -> CycleTable:
    r"""
    Rainflow cycles of a whole history by the ASTM E1049-85 three-point method.

    Parameters
    ----------
    samples : array-like
        Stress history, in time order. [MPa]
    gate : float, optional
        Hysteresis gate: reversals with a range below it are removed before
        counting. [MPa]
    gate_fraction : float, optional
        The gate as a fraction of the history's range (max - min), instead
        of ``gate``. [-]
    residue : {"half_cycles", "repeating_block"}
        ``half_cycles`` (the standard's default) counts what is left open at
        the end as half cycles. ``repeating_block`` treats the history as one
        period of a load that repeats in service: it is rearranged to start
        at its largest absolute turning point, and every cycle closes.

    Returns
    -------
    CycleTable
        One row per cycle with range, mean, count and sample indices.

    Raises
    ------
    InvalidLoadHistory
        Fewer than two samples, a non-numeric sample, or a sample that is
        NaN or infinite (the first such index is named).
    InvalidParameter, UnknownMethod
        A negative or non-finite gate, or an unknown residue treatment.

    Notes
    -----
    Let X be the range between the newest two points and Y the range before
    it. While X >= Y: if Y contains the starting point it is a half cycle and
    the starting point is dropped; otherwise Y is a full cycle and both its
    points are dropped. The counts sum to (points - 1) / 2. A constant history
    has no cycles. Rows are in the order the cycles close.

    References
    ----------
    .. [1] ASTM E1049-85 (Reapproved 2017), *Standard Practices for Cycle
       Counting in Fatigue Analysis*, sec. 5.4.4 and 5.4.4.1 (simplified
       counting for repeating histories). ASTM International. doi:10.1520/E1049-85R17
    .. [2] M. Matsuishi and T. Endo, "Fatigue of metals subjected to varying
       stress," Japan Soc. Mech. Eng., Fukuoka, 1968.
    """
    if residue not in RESIDUE_TREATMENTS:
        raise unknown("residue", residue, RESIDUE_TREATMENTS)
    x = as_history(samples)
    g = resolve_gate(x, gate, gate_fraction)
    if residue == "half_cycles":
        table, _ = _count(x, None, g, True)
        return table
    return _repeating_block(x, g)


def _repeating_block(x: np.ndarray, gate: float) -> CycleTable:
    codes, k, _, _, _ = _points(x, None, gate, True)
    if k < 2:
        return CycleTable.empty()
    idx = codes[:k].astype(np.int64)
    vals = x[idx]
    j = int(np.argmax(np.abs(vals)))
    # One period, from the largest point round to the same point again; the
    # junction of end and start may hide or create reversals, so re-extract.
    seq_v = np.concatenate([vals[j:], vals[:j], vals[j:j + 1]])
    seq_i = np.concatenate([idx[j:], idx[:j], idx[j:j + 1]])
    codes2, k2, pre_v, pre_i, _ = _points(seq_v, None, gate, True)
    table, _, _ = _stack([(codes2, k2, seq_v, 0, pre_v, pre_i, _capacity(k2, 0))],
                         *_new_stack(64), False, True)
    return CycleTable(table.stress_from, table.stress_to, table.count,
                      seq_i[table.start_index], seq_i[table.end_index])


def turning_points(samples, *, gate: float = 0.0,
                   gate_fraction: float | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Peaks and valleys the counting sees, with the first and last point.

    Returns
    -------
    (indices, values) : (ndarray of int64, ndarray of float64)
        Sample index [-] and value [MPa] of each turning point, in time order.
        A plateau is reported once, at its last sample.
    """
    x = as_history(samples)
    g = resolve_gate(x, gate, gate_fraction)
    codes, k, _, _, _ = _points(x, None, g, True)
    idx = codes[:k].astype(np.int64)
    return idx, x[idx]


def warm_up() -> None:
    """Compile (or load from cache) every kernel signature used in service."""
    x = np.array([0.0, 2.0, -1.0, 3.0, -2.0, 1.0])
    astm_e1049(x)
    astm_e1049(x, gate=0.5)
    astm_e1049(x, residue="repeating_block")
    _, st = count_block(x[:3])
    count_block(x[3:], st)
    close_residue(st)
    # What long blocks add: the state a chunk or half starts from, and the
    # move of a second half's codes after the first's.
    _k.direction_before(x, 3, True, 0.0, 0)
    _k.shift_codes(codes_buffer(8), 4, 0, 2, 0)
