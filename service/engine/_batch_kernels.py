"""Many short points in one compiled call: count, assess, solve the reserve.

For a point of a few thousand samples the Python around each kernel call
costs more than the kernels, and two threads calling kernels point by point
spend their time handing the GIL back and forth. ``count_points`` and
``assess_counted`` do everything for a run of points in two calls, so two threads
each take half the points and run side by side.

It uses the same kernels as the one-point path (``turning_points_plain``,
``stack_pass``, ``damage_pass``, ``top_k``, and :func:`reserve_search`,
which the one-point path calls too), so the results equal
``assess_history``'s; the tests compare them.
"""

from __future__ import annotations

import math

import numpy as np

from ._counting_kernels import STACK_PAD, stack_pass, turning_points_plain
from ._damage_kernels import damage_pass, top_k
from ._numba import kernel


@kernel
def count_whole(x, codes, sv, si, frm, to, cnt, s_ix, e_ix):
    """Ungated ASTM E1049-85 count of a whole history into rows sized ``len(x)``;
    the residue closes as half cycles. Returns ``(rows, bad)``."""
    n = x.shape[0]
    k, d, bad = turning_points_plain(x, x.view(np.int64), True, 0.0, 0, codes, 0)
    if d != 0:
        codes[k] = n - 1
        k += 1
    pre_v = np.zeros(3)
    pre_i = np.zeros(3, np.int64)
    for q in range(STACK_PAD):
        sv[q] = np.nan
    _, sp, m = stack_pass(codes, 0, k, x, 0, pre_v, pre_i, sv, si, 0, True,
                          frm, to, cnt, s_ix, e_ix, 0)
    for q in range(STACK_PAD, STACK_PAD + sp - 1):
        frm[m] = sv[q]
        to[m] = sv[q + 1]
        cnt[m] = 0.5
        s_ix[m] = si[q]
        e_ix[m] = si[q + 1]
        m += 1
    return m, bad


@kernel
def reserve_search(frm, to, cnt, load_factor, model, segments, target, d, slope, s_over):
    """The reserve-factor search (see ``damage._reserve_factor``): the smallest
    scale whose damage reaches ``target`` (NaN for none within 1e-6..1e6). ``d`` and ``slope``
    are the damage and slope at scale 1 (slope NaN when undefined),
    ``s_over`` the scale at which the first cycle becomes an overload."""
    none = np.empty(0)
    log_t = math.log(target)
    x_lo = math.log(1e-6)
    x_hi = math.log(1e6)
    has_lo = False
    has_hi = False
    flo = 0.0
    fhi = 0.0
    s = 1.0
    if 1.0 < s_over < 1e6 and d < math.inf and d < target:
        below = s_over * (1.0 - 1e-12)
        d_below = damage_pass(frm, to, cnt, below * load_factor, model, segments, none,
                              False)[0]
        if d_below < target:
            return s_over
        x_hi = math.log(below)
        has_hi = True
        fhi = math.log(d_below) - log_t
        if abs(fhi) < 1e-8:
            return below
    prev_ok = False
    prev_x = 0.0
    prev_f = 0.0
    prev_g = math.nan  # the exact slope f' at prev_x
    for _ in range(100):
        g = slope  # exact slope at this point (before any secant replaces it)
        if d == 0.0:
            f = -math.inf
        elif d == math.inf:
            f = math.inf
        else:
            f = math.log(d) - log_t
        if abs(f) < 1e-8:
            return s
        x = math.log(s)
        if f < 0:
            x_lo = x
            flo = f
            has_lo = True
        else:
            x_hi = x
            fhi = f
            has_hi = True
        if x_hi - x_lo < 1e-10:
            break
        if (prev_ok and abs(f) < 1e-3 and g > 0 and prev_g > 0 and abs(prev_f) < math.inf
                and x != prev_x):
            # Close already: a Newton step corrected for the curvature seen
            # between the last two exact slopes. Taken without another pass
            # when that correction is tiny (the terms it leaves are smaller
            # still, far below the 1e-8 that ends the search).
            newton = -f / g
            corr = 0.5 * (g - prev_g) / (x - prev_x) * newton * newton / g
            x_new = x + newton - corr
            if abs(corr) < 1e-7 and x_lo < x_new < x_hi:
                return math.exp(x_new)
        if (prev_ok and abs(f) < math.inf and abs(prev_f) < math.inf
                and 0 < abs(x - prev_x) < 0.05):
            secant = (f - prev_f) / (x - prev_x)
            if secant > 0:
                slope = secant
        prev_ok = True
        prev_x = x
        prev_f = f
        prev_g = g
        x_new = math.nan
        if slope > 0 and abs(f) < math.inf:
            x_new = x - f / slope
            if abs(f) < 1e-6 and x_lo < x_new < x_hi:
                return math.exp(x_new)
        elif has_lo and has_hi and abs(flo) < math.inf and abs(fhi) < math.inf:
            x_new = x_hi - fhi * (x_hi - x_lo) / (fhi - flo)
        if not (x_lo < x_new < x_hi):
            if not has_hi:
                x_new = min(x_lo + math.log(4.0), x_hi)
            elif not has_lo:
                x_new = max(x_hi - math.log(4.0), x_lo)
            else:
                x_new = 0.5 * (x_lo + x_hi)
        if x_new == x:
            break
        s = math.exp(x_new)
        out = damage_pass(frm, to, cnt, s * load_factor, model, segments, none, False)
        d = out[0]
        slope = out[2] / d if 0.0 < d < math.inf else math.nan
    if not has_hi:
        return math.nan
    return math.exp(x_hi)


@kernel
def count_points(block, rows, frm, to, cnt, s_ix, e_ix, bad):
    """Count every point (column) of a samples x points ``block``.

    Each column is copied into a contiguous scratch row first: reading a
    column of a row-major array column after column keeps the block's
    cache lines hot, so no transposed copy of the whole block is needed.
    Point r's rows go to row r of the 2-D outputs; ``rows[r]`` of them.
    """
    n, b = block.shape
    xcol = np.empty(n)
    codes = np.empty(n + 1, np.int32)
    sv = np.empty(n + 2 + STACK_PAD)
    si = np.empty(n + 2 + STACK_PAD, np.int64)
    for r in range(b):
        for q in range(n):
            xcol[q] = block[q, r]
        m, flag = count_whole(xcol, codes, sv, si, frm[r], to[r], cnt[r], s_ix[r], e_ix[r])
        rows[r] = m
        bad[r] = flag


@kernel
def assess_counted(rows, offsets, frm, to, cnt, load_factor, model, segments, target,
                   want_reserve, k_top, per_cycle, stats, top):
    """Assess counted points: per-cycle damage of point r into
    ``per_cycle[offsets[r]:offsets[r] + rows[r]]`` (one array for the whole
    run, no copies), ``stats[r]`` = (damage, overloads, largest range on the
    curve, eq_sum, largest range, reserve (NaN: none), total count) and
    ``top[r]`` the most damaging rows (-1 where fewer)."""
    for r in range(rows.shape[0]):
        m = rows[r]
        f = frm[r, :m]
        t = to[r, :m]
        c = cnt[r, :m]
        pc = per_cycle[offsets[r]:offsets[r] + m]
        out = damage_pass(f, t, c, load_factor, model, segments, pc, True)
        d = out[0]
        total = 0.0
        for q in range(m):
            total += c[q]
        stats[r, 0] = d
        stats[r, 1] = out[1]
        stats[r, 2] = out[3]
        stats[r, 3] = out[4]
        stats[r, 4] = out[5]
        stats[r, 5] = math.nan
        stats[r, 6] = total
        if want_reserve and m > 0 and out[5] > 0:
            slope = out[2] / d if 0.0 < d < math.inf else math.nan
            stats[r, 5] = reserve_search(f, t, c, load_factor, model, segments, target, d,
                                         slope, out[6] / load_factor)
        best = top_k(pc, k_top)
        for q in range(k_top):
            top[r, q] = best[q] if q < best.shape[0] else -1
