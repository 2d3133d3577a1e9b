"""Compiled kernels behind :mod:`service.engine.rainflow`.

Two passes, kept apart because that is faster than one fused loop: the first
finds turning points (a branch-free compaction for the ungated case), the
second runs the ASTM E1049-85 three-point stack over them. Kernels take and
return plain arrays and scalars; all validation and bookkeeping of
continuation state lives in ``rainflow.py``.

Point codes
-----------
Turning points are written as *local* sample indices into the block. A point
that lies before the block (carried in the continuation state) is written as
a negative code ``-1, -2, -3`` that indexes the small ``pre_v``/``pre_i``
tables passed to :func:`stack_pass`.
"""

from __future__ import annotations

import numpy as np

from ._numba import kernel, prefetch

#: Turning points ahead whose sample the stack pass asks the cache for.
_AHEAD = 32

#: Exponent mask of an IEEE-754 double; all ones means inf or NaN.
_EXP = np.int64(0x7FF0000000000000)


@kernel
def turning_points_plain(x, xbits, first, prev, direction, out):
    """Ungated turning points of one block.

    ``out`` (length ``len(x) + 1``) receives local indices; ``-1`` stands for
    the sample before the block. A plateau counts once, at its last sample.
    Returns ``(k, direction, bad)`` where ``bad`` is nonzero if any sample is
    inf or NaN.
    """
    n = x.shape[0]
    k = 0
    d = direction
    bad = 0
    start = 0
    last = prev
    if first:
        out[0] = 0
        k = 1
        last = x[0]
        start = 1
        bad |= (xbits[0] & _EXP) == _EXP
    for i in range(start, n):
        xi = x[i]
        bad |= (xbits[i] & _EXP) == _EXP
        dx = xi - last
        s = np.int64(dx > 0.0) - np.int64(dx < 0.0)
        # Branch-free compaction: always write, advance only on a reversal.
        out[k] = i - 1
        k += np.int64(s * d < 0)
        d = s if s != 0 else d
        last = xi
    return k, d, bad


@kernel
def direction_before(x, h, first, prev, direction):
    """The direction ``turning_points_plain`` holds after ``x[:h]``: the sign
    of the last nonzero step (against ``prev`` for the first sample of a
    continued block), else ``direction``."""
    j = h - 1
    while j >= 1:
        dx = x[j] - x[j - 1]
        if dx > 0.0:
            return 1
        if dx < 0.0:
            return -1
        j -= 1
    if not first and h >= 1:
        dx = x[0] - prev
        if dx > 0.0:
            return 1
        if dx < 0.0:
            return -1
    return direction


@kernel
def shift_codes(codes, src, dst, k, add):
    """codes[dst:dst + k] = codes[src:src + k] + add, in place (dst <= src)."""
    for i in range(k):
        codes[dst + i] = codes[src + i] + add


@kernel
def turning_points_gated(x, xbits, gate, first, st_v, st_d, out):
    """Turning points of one block behind a hysteresis gate.

    A reversal is confirmed only once the signal has come back from the
    running extreme by at least ``gate`` (and by more than zero). Before the
    first confirmation the running maximum and minimum are tracked; when their
    spread first reaches the gate, the older of the two becomes the start
    point. ``st_v`` = (candidate, max, min) values and ``st_d`` the direction
    from the previous block; codes -1, -2, -3 in ``out`` name those three.

    Returns ``(k, d, c, jc, cmax, jmax, cmin, jmin, bad)``.
    """
    n = x.shape[0]
    k = 0
    bad = 0
    if first:
        d = 0
        c = x[0]
        jc = 0
        cmax = x[0]
        jmax = 0
        cmin = x[0]
        jmin = 0
    else:
        d = st_d
        c = st_v[0]
        jc = -1
        cmax = st_v[1]
        jmax = -2
        cmin = st_v[2]
        jmin = -3
    for i in range(n):
        xi = x[i]
        bad |= (xbits[i] & _EXP) == _EXP
        if d == 0:
            if xi > cmax:
                cmax = xi
                jmax = i
            elif xi < cmin:
                cmin = xi
                jmin = i
            else:
                continue
            span = cmax - cmin
            if span >= gate and span > 0.0:
                if jmax == i:
                    out[k] = jmin
                    d = 1
                else:
                    out[k] = jmax
                    d = -1
                k += 1
                c = xi
                jc = i
        elif d > 0:
            if xi >= c:
                c = xi
                jc = i
            elif c - xi >= gate:
                out[k] = jc
                k += 1
                d = -1
                c = xi
                jc = i
        else:
            if xi <= c:
                c = xi
                jc = i
            elif xi - c >= gate:
                out[k] = jc
                k += 1
                d = 1
                c = xi
                jc = i
    return k, d, c, jc, cmax, jmax, cmin, jmin, bad


@kernel
def stack_pass(tp, j, ntp, x, offset, pre_v, pre_i, sv, si, sp, half_rule,
               frm, to, cnt, s_ix, e_ix, m):
    """ASTM E1049-85 three-point counting over ``tp[j:ntp]``.

    ``sv``/``si`` hold the residue (values, global indices) with ``sp``
    entries. With ``half_rule`` a range that contains the starting point is a
    half cycle (the standard's rule); without it every closed range is a full
    cycle (the simplified method for a history rearranged to start at its
    largest point). Closed cycles are written from row ``m`` on.

    The arrays are never reallocated here (numba would then count references
    on every access, several times slower): when the stack or the outputs may
    overflow before the next point, the kernel returns early and the caller
    grows them and calls again from ``j``. Returns ``(j, sp, m)``.
    """
    cap = frm.shape[0]
    scap = sv.shape[0]
    last = ntp - 1
    ahead = x.shape[0] > 0
    while j < ntp:
        # One push closes at most ``sp`` cycles and adds one stack entry.
        if sp + 1 > scap or m + sp + 1 > cap:
            return j, sp, m
        code = tp[j]
        # Sparse turning points (1 in 20 samples on a smooth signal) make
        # x[code] a cache miss each; ask for the one _AHEAD points on now.
        if ahead:
            prefetch(x, max(tp[min(j + _AHEAD, last)], 0))
        if code >= 0:
            v = x[code]
            g = offset + code
        else:
            v = pre_v[-code - 1]
            g = pre_i[-code - 1]
        # The new point X3 = v stays in a register until no range closes: it
        # is compared with the top two entries, which close as a cycle while
        # |X3 - X2| >= |X2 - X1|; then it is pushed once.
        while sp >= 2:
            x2 = sv[sp - 1]
            x1 = sv[sp - 2]
            if abs(v - x2) < abs(x2 - x1):
                break
            frm[m] = x1
            to[m] = x2
            s_ix[m] = si[sp - 2]
            e_ix[m] = si[sp - 1]
            if sp == 2 and half_rule:
                # Y holds the starting point: half cycle, drop the start.
                cnt[m] = 0.5
                sv[0] = x2
                si[0] = si[1]
                sp = 1
            else:
                cnt[m] = 1.0
                sp -= 2
            m += 1
        sv[sp] = v
        si[sp] = g
        sp += 1
        j += 1
    return j, sp, m
