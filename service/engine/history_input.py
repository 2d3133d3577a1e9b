"""A load history as the counting takes it: checked samples and the gate
(split out of ``rainflow.py``, which re-exports them)."""

from __future__ import annotations

import numpy as np

from .errors import InvalidLoadHistory, InvalidParameter


def as_history(samples, *, min_samples: int = 2, field_name: str = "samples") -> np.ndarray:
    """Return ``samples`` as a contiguous float64 vector, or raise.

    Raises
    ------
    InvalidLoadHistory
        If the input is not a one-dimensional numeric sequence or is shorter
        than ``min_samples``. Non-finite values are caught later, inside the
        counting pass, where the check costs nothing extra.
    """
    if isinstance(samples, np.ndarray):
        arr = samples
    else:
        try:
            arr = np.asarray(samples)
        except (TypeError, ValueError) as exc:
            raise InvalidLoadHistory(f"{field_name} is not a numeric sequence: {exc}",
                                     field=field_name) from exc
    if arr.dtype.kind not in "iuf":
        items = arr.tolist() if isinstance(samples, np.ndarray) else samples
        bad = _first_non_numeric(items) if arr.ndim == 1 else None
        raise InvalidLoadHistory(
            f"{field_name} must be numbers; sample {bad} is {items[bad]!r}"
            if bad is not None else
            f"{field_name} must be numbers, got dtype {arr.dtype}",
            sample_index=bad, field=field_name)
    if arr.ndim != 1:
        raise InvalidLoadHistory(
            f"{field_name} must be one-dimensional, got shape {arr.shape}",
            field=field_name)
    if arr.shape[0] < min_samples:
        raise InvalidLoadHistory(
            f"{field_name} has {arr.shape[0]} sample(s); at least {min_samples} are needed",
            field=field_name)
    return np.ascontiguousarray(arr, dtype=np.float64)


def _first_non_numeric(items) -> int | None:
    for i, value in enumerate(items):
        if isinstance(value, (bool, np.bool_)) or not isinstance(
                value, (int, float, np.integer, np.floating)):
            return i
    return None


def _first_non_finite(x: np.ndarray) -> int:
    return int(np.flatnonzero(~np.isfinite(x))[0])


def resolve_gate(x: np.ndarray | None, gate: float = 0.0,
                 gate_fraction: float | None = None) -> float:
    """Absolute gate from ``gate`` [MPa] or ``gate_fraction`` of the range [-]."""
    if gate_fraction is not None:
        if gate:
            raise InvalidParameter("give gate or gate_fraction, not both",
                                   field="gate_fraction", value=gate_fraction)
        if not (0.0 <= gate_fraction < 1.0):
            raise InvalidParameter(
                f"gate_fraction {gate_fraction} must be in [0, 1)",
                field="gate_fraction", value=gate_fraction, limit=[0.0, 1.0])
        if x is None:
            raise InvalidParameter("gate_fraction needs the whole history; "
                                   "give an absolute gate for block counting",
                                   field="gate_fraction", value=gate_fraction)
        span = float(np.max(x) - np.min(x)) if x.size else 0.0
        return gate_fraction * span if np.isfinite(span) else 0.0
    gate = float(gate)
    if not np.isfinite(gate) or gate < 0.0:
        raise InvalidParameter(f"gate {gate} MPa must be finite and >= 0",
                               field="gate", value=gate, limit=0.0)
    return gate
