"""The counting's tables: the cycles counted (:class:`CycleTable`) and what
counting carries from one block of a history to the next
(:class:`CountingState`). Split out of ``rainflow.py``, which re-exports both.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

from .errors import IncompatibleState


@dataclass(frozen=True, eq=False)
class CycleTable:
    """Counted cycles, one row per full or half cycle.

    Attributes
    ----------
    stress_from, stress_to : ndarray of float64
        Values of the cycle's first and second turning point, in time order
        of the counting. [MPa]
    count : ndarray of float64
        1.0 for a full cycle, 0.5 for a half cycle. [cycles]
    start_index, end_index : ndarray of int64
        Sample indices of the two turning points in the whole history. For a
        repeating block ``end_index`` may precede ``start_index`` where the
        cycle wraps round the end of the block. [-]

    Range, mean, amplitude, maximum and minimum are derived on first use and
    cached.
    """

    stress_from: np.ndarray
    stress_to: np.ndarray
    count: np.ndarray
    start_index: np.ndarray
    end_index: np.ndarray

    @cached_property
    def stress_range(self) -> np.ndarray:
        """Stress range of each cycle, :math:`\\Delta\\sigma`. [MPa]"""
        return np.abs(self.stress_from - self.stress_to)

    @cached_property
    def stress_mean(self) -> np.ndarray:
        """Mean stress of each cycle, :math:`\\sigma_m`. [MPa]"""
        return 0.5 * (self.stress_from + self.stress_to)

    @cached_property
    def stress_amplitude(self) -> np.ndarray:
        """Stress amplitude, half the range, :math:`\\sigma_a`. [MPa]"""
        return 0.5 * self.stress_range

    @cached_property
    def stress_max(self) -> np.ndarray:
        """Larger of the cycle's two extremes. [MPa]"""
        return np.maximum(self.stress_from, self.stress_to)

    @cached_property
    def stress_min(self) -> np.ndarray:
        """Smaller of the cycle's two extremes. [MPa]"""
        return np.minimum(self.stress_from, self.stress_to)

    def __len__(self) -> int:
        return int(self.count.shape[0])

    @property
    def total_count(self) -> float:
        """Sum of the counts: (points - 1) / 2 for a whole history. [cycles]"""
        return float(self.count.sum())

    def to_frame(self):
        """The table as a pandas DataFrame, one row per cycle."""
        import pandas as pd

        return pd.DataFrame({
            "stress_range": self.stress_range,
            "stress_mean": self.stress_mean,
            "count": self.count,
            "start_index": self.start_index,
            "end_index": self.end_index,
            "stress_from": self.stress_from,
            "stress_to": self.stress_to,
        })

    def range_counts(self) -> dict[float, float]:
        """Total count per distinct range, ``{range: count}``, ranges sorted."""
        ranges, inverse = np.unique(self.stress_range, return_inverse=True)
        totals = np.bincount(inverse, weights=self.count, minlength=ranges.size)
        return {float(r): float(c) for r, c in zip(ranges, totals)}

    @classmethod
    def empty(cls) -> "CycleTable":
        f = np.empty(0, np.float64)
        i = np.empty(0, np.int64)
        return cls(f, f.copy(), f.copy(), i, i.copy())

    @classmethod
    def concat(cls, tables) -> "CycleTable":
        """Rows of several tables, one after another."""
        tables = list(tables)
        if not tables:
            return cls.empty()
        return cls(*(np.concatenate([getattr(t, name) for t in tables])
                     for name in ("stress_from", "stress_to", "count",
                                  "start_index", "end_index")))


@dataclass(frozen=True, eq=False)
class CountingState:
    """What counting must remember between blocks of one history.

    Attributes
    ----------
    gate : float
        Hysteresis gate the history is counted with; fixed for its life. [MPa]
    samples_seen : int
        Samples counted so far; the next block starts at this index. [-]
    direction : int
        +1 rising, -1 falling, 0 not yet moved (beyond the gate). [-]
    candidate_value, candidate_index : float, int
        The pending extreme in ``direction`` (ungated: the last sample). [MPa], [-]
    start_max_value, start_max_index, start_min_value, start_min_index
        Running extremes before the first reversal (gated counting). [MPa], [-]
    residue_values, residue_indices : ndarray
        Turning points not yet closed into a cycle, oldest first. [MPa], [-]
    """

    gate: float
    samples_seen: int
    direction: int
    candidate_value: float
    candidate_index: int
    start_max_value: float
    start_max_index: int
    start_min_value: float
    start_min_index: int
    residue_values: np.ndarray = field(repr=False)
    residue_indices: np.ndarray = field(repr=False)

    def to_dict(self) -> dict:
        """Plain-JSON form, for storing the state between requests."""
        out = {name: getattr(self, name) for name in self.__dataclass_fields__}
        out["residue_values"] = [float(v) for v in self.residue_values]
        out["residue_indices"] = [int(i) for i in self.residue_indices]
        return out

    @classmethod
    def from_dict(cls, data: dict) -> "CountingState":
        try:
            return cls(
                gate=float(data["gate"]), samples_seen=int(data["samples_seen"]),
                direction=int(data["direction"]),
                candidate_value=float(data["candidate_value"]),
                candidate_index=int(data["candidate_index"]),
                start_max_value=float(data["start_max_value"]),
                start_max_index=int(data["start_max_index"]),
                start_min_value=float(data["start_min_value"]),
                start_min_index=int(data["start_min_index"]),
                residue_values=np.asarray(data["residue_values"], np.float64),
                residue_indices=np.asarray(data["residue_indices"], np.int64),
            )
        except (KeyError, TypeError, ValueError) as exc:
            raise IncompatibleState(f"counting state is malformed: {exc}",
                                    field="state") from exc
