"""The local strain approach block by block, exactly as the whole history.

A ledger point (or a batch point read file by file) receives its history in
blocks. Counting carries the rainflow residue between blocks
(``rainflow.count_block``); the local strain approach must carry two more
things: the material's memory (the open reversal points with their local
stress and strain, ``strain_life.Memory``) and the local state at every
turning point still in the residue, whose loops close later. The turning
points followed are those counting confirms in each block (the last extreme
stays pending until the next block says whether it is one), so following
block after block visits the same turning points in the same order as the
whole history, and every closed loop, and the residue closed at the end,
has the same tips: the damage of the blocks plus :func:`close_local` equals
``strain_life.assess_strain_life`` of the concatenated history (tested).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .rainflow import CountingState, close_residue, count_block
from .turning import confirmed_points as _confirmed_codes  # the counting's own points
from .strain_life import Memory, StrainLifeMaterial, follow, reversals_to_failure


def _confirmed_points(x: np.ndarray, state: CountingState | None, gate: float):
    """``(values, global indices)`` of the turning points counting confirms
    in this block (before the pending last extreme), in order."""
    codes, k, pre_v, pre_i, _ = _confirmed_codes(x, state, gate, False)
    codes = np.array(codes[:k], np.int64)  # the buffer is reused: copy it out
    offset = 0 if state is None else state.samples_seen
    values = np.where(codes >= 0, x[np.maximum(codes, 0)], pre_v[np.maximum(-codes - 1, 0)])
    index = np.where(codes >= 0, offset + codes, pre_i[np.maximum(-codes - 1, 0)])
    return values.astype(np.float64), index.astype(np.int64)


@dataclass
class LocalState:
    """What follows a history from block to block: the rainflow state, the
    material memory and the local state (stress [MPa], strain [-]) of each
    residue turning point by its sample index."""

    counting: CountingState
    memory: Memory
    tips: dict = field(default_factory=dict)

    def to_dict(self) -> dict:
        return {"counting": self.counting.to_dict(), "memory": self.memory.to_dict(),
                "tips": {str(i): [float(s), float(e)] for i, (s, e) in self.tips.items()}}

    @classmethod
    def from_dict(cls, data: dict) -> "LocalState":
        return cls(CountingState.from_dict(data["counting"]), Memory.from_dict(data["memory"]),
                   {int(i): (v[0], v[1]) for i, v in data["tips"].items()})


def _loops(table, tips: dict, material, mean_stress_method: str) -> dict:
    """Per-cycle local values and damage of ``table`` from the tips' states."""
    n = len(table)
    sa = np.empty(n)
    sb = np.empty(n)
    ea = np.empty(n)
    eb = np.empty(n)
    for j, (i0, i1) in enumerate(zip(table.start_index.tolist(), table.end_index.tolist())):
        sa[j], ea[j] = tips[i0]
        sb[j], eb[j] = tips[i1]
    strain_amp = 0.5 * np.abs(ea - eb)
    mean = 0.5 * (sa + sb)
    smax = np.maximum(sa, sb)
    nf = 0.5 * reversals_to_failure(strain_amp, material, mean_stress=mean, max_stress=smax,
                                    mean_stress_method=mean_stress_method)
    with np.errstate(divide="ignore"):
        dmg = np.where(np.isinf(nf), 0.0, table.count / nf)
    return {"start_index": table.start_index, "end_index": table.end_index,
            "count": table.count, "strain_amplitude": strain_amp, "stress_mean": mean,
            "stress_max": smax, "reversals_to_failure": 2.0 * nf, "damage": dmg}


def count_block_local(x, state: LocalState | None, material: StrainLifeMaterial, *,
                      rule: str, mean_stress_method: str, gate: float = 0.0):
    """``(loops, state)``: the loops closed in this block of the (pseudo or
    strain) history ``x``, with their local values and damage, and the state
    to pass with the next block."""
    x = np.ascontiguousarray(x, dtype=np.float64)
    before = None if state is None else state.counting
    values, index = _confirmed_points(x, before, gate)
    table, counting = count_block(x, before, gate=gate)
    sig, eps, memory = follow(values, material, rule, None if state is None else state.memory)
    tips = {} if state is None else dict(state.tips)
    tips.update(zip(index.tolist(), zip(sig.tolist(), eps.tolist())))
    loops = _loops(table, tips, material, mean_stress_method)
    keep = set(counting.residue_indices.tolist())
    return loops, LocalState(counting, memory, {i: v for i, v in tips.items() if i in keep})


def close_local(state: LocalState, material: StrainLifeMaterial, *, rule: str,
                mean_stress_method: str) -> dict:
    """The loops the residue would add as half cycles if the history ended
    now (the pending last extreme followed as the last turning point)."""
    c = state.counting
    table = close_residue(c)
    tips = dict(state.tips)
    if c.direction != 0 and c.candidate_index not in tips:
        sig, eps, _ = follow(np.array([c.candidate_value]), material, rule, state.memory)
        tips[c.candidate_index] = (float(sig[0]), float(eps[0]))
    return _loops(table, tips, material, mean_stress_method)
