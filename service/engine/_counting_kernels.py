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
def turning_points_plain(x, xbits, first, prev, direction, out, base):
    """Ungated turning points of one stretch ``x`` that starts at index
    ``base`` of its block.

    ``out`` (length ``len(x) + 1``) receives block indices; ``base - 1``
    stands for the pending point before the stretch (``prev``; for
    ``base = 0`` that lies before the block: code ``-1``). A plateau counts
    once, at its last sample. Returns ``(k, direction, bad)`` where ``bad``
    is nonzero if any sample is inf or NaN.
    """
    n = x.shape[0]
    k = 0
    d = direction
    bad = 0
    start = 0
    last = prev
    if first:
        out[0] = base
        k = 1
        last = x[0]
        start = 1
        bad |= (xbits[0] & _EXP) == _EXP
    b1 = base - 1
    for i in range(start, n):
        xi = x[i]
        bad |= (xbits[i] & _EXP) == _EXP
        dx = xi - last
        s = np.int64(dx > 0.0) - np.int64(dx < 0.0)
        # Branch-free compaction: always write, advance only on a reversal.
        out[k] = b1 + i
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


#: Entries below a stack's bottom, always NaN: a comparison with NaN is
#: false, so the kernel's checks need no test of the stack's depth.
STACK_PAD = 2


@kernel
def stack_pass(tp, j, ntp, x, offset, pre_v, pre_i, sv, si, sp, half_rule,
               frm, to, cnt, s_ix, e_ix, m):
    """ASTM E1049-85 three-point counting over ``tp[j:ntp]``.

    ``sv``/``si`` hold the residue (values, global indices) with ``sp``
    entries from index ``STACK_PAD`` on; ``sv[:STACK_PAD]`` must be NaN. With
    ``half_rule`` a range that contains the starting point is a half cycle
    (the standard's rule); without it every closed range is a full cycle (the
    simplified method for a history rearranged to start at its largest
    point). Closed cycles are written from row ``m`` on; rows from ``m`` to
    ``m + sp`` may be overwritten as scratch.

    The arrays are never reallocated here (numba would then count references
    on every access, several times slower): when the stack or the outputs may
    overflow before the next point, the kernel returns early and the caller
    grows them and calls again from ``j``. Returns ``(j, sp, m)``.
    """
    cap = frm.shape[0]
    scap = sv.shape[0] - STACK_PAD
    last = ntp - 1
    ahead = x.shape[0] > 0
    q = sp + STACK_PAD  # one past the top entry
    a = sv[q - 1]  # top entry (X2), NaN when the stack is empty
    b = sv[q - 2]  # the one below (X1)
    while j < ntp:
        # One push closes at most ``sp`` cycles and adds one stack entry.
        if q - STACK_PAD + 1 > scap or m + q - STACK_PAD + 1 > cap:
            return j, q - STACK_PAD, m
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
        # The new point X3 = v closes X1-X2 as a cycle while |X3 - X2| >=
        # |X2 - X1|. Nine pushes in ten close at most one range, so the
        # first check is done without a branch (its row written whether or
        # not it counts, the stack top moved by 0 or 2) and only a second
        # closure, or a closure that empties the stack (the half-cycle rule),
        # takes the general loop. NaN below the bottom fails every check.
        c1 = abs(v - a) >= abs(a - b)
        frm[m] = b
        to[m] = a
        s_ix[m] = si[q - 2]
        e_ix[m] = si[q - 1]
        cnt[m] = 1.0
        q1 = q - 2 * np.int64(c1)
        top = sv[q1 - 1]
        below = sv[q1 - 2]
        if abs(v - top) >= abs(top - below) or q1 == STACK_PAD:
            q1 = q
            while q1 - STACK_PAD >= 2:
                x2 = sv[q1 - 1]
                x1 = sv[q1 - 2]
                if abs(v - x2) < abs(x2 - x1):
                    break
                frm[m] = x1
                to[m] = x2
                s_ix[m] = si[q1 - 2]
                e_ix[m] = si[q1 - 1]
                if q1 - STACK_PAD == 2 and half_rule:
                    # Y holds the starting point: half cycle, drop the start.
                    cnt[m] = 0.5
                    sv[STACK_PAD] = x2
                    si[STACK_PAD] = si[STACK_PAD + 1]
                    q1 -= 1
                else:
                    cnt[m] = 1.0
                    q1 -= 2
                m += 1
            top = sv[q1 - 1]
        else:
            m += np.int64(c1)
        sv[q1] = v
        si[q1] = g
        b = top
        a = v
        q = q1 + 1
        j += 1
    return j, q - STACK_PAD, m
