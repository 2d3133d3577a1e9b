"""Duty cycles: recorded events combined into the cycles of a design life.

A duty cycle is a sequence of events (recordings of one kind of use: a
road, a manoeuvre, a shift on site), each occurring a number of times per
duty cycle; a design life is the duty cycle repeated a number of times.
:func:`combine` gives, per point, one weighted cycle table for the whole
design life and one for a single duty cycle in service, both exactly what
rainflow counting of the concatenated history would give, without ever
building it:

- the events are counted one after another through one counting state
  (``rainflow.count_block``), so the cycles formed *between* events (the
  largest often: a high mean in one event and a low one in the next) are
  counted, and small cycles are weighed against the curve together with
  everything else rather than lost in a per-event cut-off;
- an event repeated n times is counted three times only: from any state,
  the third pass of a block and every later one close the same cycles and
  leave the same state (tested over many seeded cases), so
  ``count(A^n) = pass_1 + pass_2 + (n - 2) pass_3``. Counts are weights:
  a fractional n (a share of hours) weighs the passes continuously
  (``min(n, 1)``, ``clip(n - 1, 0, 1)``, ``max(n - 2, 0)``) and is exact at
  whole numbers.

Counting works on each event's turning points (the samples between two
turning points never matter). Stresses in MPa.

References
----------
.. [1] ASTM E1049-85 (Reapproved 2017), *Standard Practices for Cycle
   Counting in Fatigue Analysis*, sec. 5.4.4 (rainflow counting).
.. [2] M. A. Miner, "Cumulative damage in fatigue," *J. Appl. Mech.*,
   vol. 12, no. 3, pp. A159-A164, 1945.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .errors import InvalidParameter
from .rainflow import CycleTable, CountingState, as_history, close_residue, count_block, \
    turning_points


@dataclass(frozen=True, eq=False)
class Combined:
    """The cycles of one point over a design life, with their events.

    Attributes
    ----------
    design : CycleTable
        Every cycle of the design life (the duty cycle ``target_repeats``
        times, the residue closed as half cycles at the end); ``count`` is
        the weight of the row (how many times it occurs). [MPa], [cycles]
    design_start_event, design_end_event : ndarray of int64
        Index (into the events) of the event holding each design row's
        first and second turning point. [-]
    per_duty_cycle : CycleTable
        The cycles one duty cycle adds once the load has settled into its
        repetition (the same as counting the duty cycle as a repeating
        block), for the life in duty cycles. [MPa], [cycles]
    turning_points : int
        Turning points of one duty cycle's stream (all events, repeats
        counted once). [-]
    """

    design: CycleTable
    design_start_event: np.ndarray
    design_end_event: np.ndarray
    per_duty_cycle: CycleTable
    turning_points: int


def pass_weights(repeats: float) -> tuple[float, float, float]:
    """Weights of the first, second and settled passes of a block repeated
    ``repeats`` times: exact at whole numbers, continuous between. [-]"""
    n = float(repeats)
    if not math.isfinite(n) or n <= 0:
        raise InvalidParameter(f"repeats {repeats} must be a positive number", field="repeats",
                               value=n, limit=0.0)
    return min(n, 1.0), min(max(n - 1.0, 0.0), 1.0), max(n - 2.0, 0.0)


class _Stream:
    """Counting through one state, every pass's rows weighted and kept with
    the stream positions of each pass (to find a row's event)."""

    def __init__(self, gate: float):
        self.gate = gate
        self.state: CountingState | None = None
        self.tables: list[CycleTable] = []
        self.weights: list[float] = []
        self.starts: list[int] = []  # stream index where each pass begins
        self.events: list[int] = []  # the event of each pass

    def count(self, points: np.ndarray, event: int, weight: float, keep: bool) -> CycleTable:
        offset = 0 if self.state is None else self.state.samples_seen
        table, self.state = count_block(points, self.state, gate=self.gate)
        self.starts.append(offset)
        self.events.append(event)
        if keep and weight > 0.0 and len(table):
            self.tables.append(table)
            self.weights.append(weight)
        return table

    def block(self, points: np.ndarray, event: int, repeats: float, keep: bool) -> None:
        """An event repeated ``repeats`` times: at most three passes."""
        for weight in pass_weights(repeats):
            if weight == 0.0:
                break
            self.count(points, event, weight, keep)

    def sweep(self, events, keep: bool, scale: float = 1.0) -> None:
        for i, (points, repeats) in enumerate(events):
            self.block(points, i, repeats * scale, keep)

    def closed(self) -> CycleTable:
        """The kept rows, counts multiplied by their weights."""
        if not self.tables:
            return CycleTable.empty()
        t = CycleTable.concat(self.tables)
        w = np.concatenate([np.full(len(x), wt) for x, wt in zip(self.tables, self.weights)])
        return CycleTable(t.stress_from, t.stress_to, t.count * w, t.start_index, t.end_index)

    def event_of(self, index: np.ndarray) -> np.ndarray:
        """The event holding each stream index."""
        at = np.searchsorted(np.asarray(self.starts, np.int64), index, side="right") - 1
        return np.asarray(self.events, np.int64)[np.maximum(at, 0)]


def combine(events, target_repeats: float = 1.0, *, gate: float = 0.0) -> Combined:
    r"""
    Cycles of a design life made of events, counted as one history.

    Parameters
    ----------
    events : sequence of (samples, repeats)
        Each event's history (one pass, in time order) [MPa] and how many
        times it occurs, one after another, per duty cycle [-].
    target_repeats : float
        Duty cycles in the design life. [-]
    gate : float
        Hysteresis gate of the counting. [MPa]

    Returns
    -------
    Combined

    Notes
    -----
    The design life is the stream
    :math:`(E_1^{n_1} E_2^{n_2} \ldots E_k^{n_k})^{N}` counted by the
    three-point method with the residue closed as half cycles at its end;
    at whole numbers the rows equal :func:`rainflow.astm_e1049` of that
    stream built sample by sample (tested). A repeated block is counted three
    times and its third pass weighted by :math:`n - 2` (see the module
    notes); the whole duty cycle repeated :math:`N` times the same way. The
    cycles per duty cycle in service are the settled third sweep.
    """
    checked = []
    for i, (samples, repeats) in enumerate(events):
        x = as_history(samples, min_samples=1, field_name=f"events[{i}]")
        pass_weights(repeats)
        _, values = turning_points(x) if x.shape[0] > 1 else (None, x)
        checked.append((values, float(repeats)))
    if not checked:
        raise InvalidParameter("a duty cycle needs at least one event", field="events")
    pass_weights(target_repeats)
    design = _Stream(gate)
    for weight in pass_weights(target_repeats):
        if weight == 0.0:
            break
        # The duty cycle's passes: each event's rows weighted by the sweep's
        # weight (whole sweeps scale every row alike).
        before = len(design.tables)
        design.sweep(checked, keep=True)
        for j in range(before, len(design.tables)):
            design.weights[j] *= weight
    tail = close_residue(design.state)
    if len(tail):
        design.tables.append(tail)
        design.weights.append(min(float(target_repeats), 1.0))
    table = design.closed()
    settled = _Stream(gate)
    for keep in (False, False, True):
        settled.sweep(checked, keep=keep)
    return Combined(table, design.event_of(table.start_index),
                    design.event_of(table.end_index), settled.closed(),
                    int(sum(v.shape[0] for v, _ in checked)))


def event_shares(per_cycle: np.ndarray, start_event: np.ndarray, end_event: np.ndarray,
                 events: int) -> np.ndarray:
    """Each event's part of the damage: a cycle's damage split half to the
    event of its first turning point and half to that of its second (a
    cycle formed between two events belongs to both). [-] (sums to 1)"""
    d = np.where(np.isfinite(per_cycle), per_cycle, 0.0)
    part = 0.5 * (np.bincount(start_event, d, minlength=events)
                  + np.bincount(end_event, d, minlength=events))
    total = float(part.sum())
    return part / total if total > 0 else np.zeros(events)
