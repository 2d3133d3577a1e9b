"""The first pass of counting: the turning points of one block, as codes
(indices into the block, or negative for points carried in the state), and
the state after the block. Split out of ``rainflow.py``; the strain-life
blocks follow the same points (``strain_life_blocks``).
"""

from __future__ import annotations

import numpy as np

from . import _counting_kernels as _k
from ._buffers import codes_buffer
from ._threads import helper, helper_allowed, take_back
from .cycle_tables import CountingState
from .errors import InvalidLoadHistory
from .history_input import _first_non_finite


def confirmed_points(x: np.ndarray, state: CountingState | None, gate: float,
                     final: bool):
    """First pass over one block: turning-point codes and the state after it.

    Returns ``(codes, k, pre_v, pre_i, after)`` where ``after`` is the tuple of
    scalar state fields after the block.
    """
    n = x.shape[0]
    first = state is None
    offset = 0 if first else state.samples_seen
    xbits = x.view(np.int64)
    codes = codes_buffer(n + 2)
    if gate == 0.0:
        prev = 0.0 if first else state.candidate_value
        k, d, bad = _plain_points(x, xbits, first, prev, 0 if first else state.direction,
                                  codes)
        pre_v = np.array([prev, 0.0, 0.0])
        pre_i = np.array([0 if first else state.candidate_index, 0, 0], np.int64)
        if n:
            cand = (float(x[-1]), offset + n - 1)
        else:
            cand = (state.candidate_value, state.candidate_index)
        x0 = (float(x[0]), 0) if first else (state.start_max_value, state.start_max_index)
        after = (int(d), *cand, *x0, *x0)
        if final and d != 0:
            codes[k] = n - 1 if n else -1
            k += 1
    else:
        if first:
            st_v = np.zeros(3)
            pre_i = np.zeros(3, np.int64)
            d0 = 0
        else:
            st_v = np.array([state.candidate_value, state.start_max_value,
                             state.start_min_value])
            pre_i = np.array([state.candidate_index, state.start_max_index,
                              state.start_min_index], np.int64)
            d0 = state.direction
        k, d, c, jc, cmax, jmax, cmin, jmin, bad = _k.turning_points_gated(
            x, xbits, gate, first, st_v, d0, codes)
        pre_v = st_v

        def glob(j):
            return int(offset + j) if j >= 0 else int(pre_i[-j - 1])

        after = (int(d), float(c), glob(jc), float(cmax), glob(jmax),
                 float(cmin), glob(jmin))
        if final and d != 0:
            codes[k] = jc
            k += 1
    if bad:
        j = _first_non_finite(x)
        raise InvalidLoadHistory(
            f"sample {offset + j} is {x[j]}; samples must be finite numbers",
            sample_index=offset + j)
    return codes, int(k), pre_v, pre_i, after


#: Samples from which the ungated turning-point pass runs on two threads.
_SPLIT_SAMPLES = 1 << 18


def _plain_points(x, xbits, first: bool, prev: float, direction: int, codes):
    """``turning_points_plain`` over the block, in two halves on two threads
    when it is long. The state a half starts from is known without the other
    half (the last sample before it and the sign of the last nonzero step),
    so the halves are exact; the second half's codes are moved down after the
    first's. ``codes`` holds ``len(x) + 2``."""
    n = x.shape[0]
    if n < _SPLIT_SAMPLES or not helper_allowed():
        return _k.turning_points_plain(x, xbits, first, prev, direction, codes, 0)

    h = n // 2
    d_h = _k.direction_before(x, h, first, prev, direction)
    second = (_k.turning_points_plain, x[h:], xbits[h:], False, x[h - 1], d_h,
              codes[h + 1:], h)
    later = helper().submit(*second)
    k1, _, bad1 = _k.turning_points_plain(x[:h], xbits[:h], first, prev, direction,
                                          codes[:h + 1], 0)
    k2, d, bad2 = take_back(later, *second)
    _k.shift_codes(codes, h + 1, k1, k2, 0)  # after the first half's codes
    return k1 + k2, d, bad1 | bad2
