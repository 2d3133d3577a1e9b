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


# Fields of the reserve search's state (``reserve_begin`` / ``reserve_step``).
(_LOG_T, _X_LO, _X_HI, _HAS_LO, _HAS_HI, _FLO, _FHI, _S, _PREV_OK, _PREV_X, _PREV_F,
 _PREV_G, _PHASE, _ITER, _RESULT, _D1, _SLOPE1, _S_OVER, _BELOW, _TARGET) = range(20)
_STATE_FIELDS = 20


@kernel
def reserve_begin(target, d, slope, s_over):
    """The state of a reserve-factor search (see ``damage._reserve_factor``)
    for damage ``target``; ``d`` and ``slope`` are the damage and slope at
    scale 1 (slope NaN when undefined), ``s_over`` the scale at which the
    first cycle becomes an overload. Drive it with :func:`reserve_step`."""
    st = np.zeros(_STATE_FIELDS)
    st[_TARGET] = target
    st[_LOG_T] = math.log(target)
    st[_X_LO] = math.log(1e-6)
    st[_X_HI] = math.log(1e6)
    st[_S] = 1.0
    st[_PREV_G] = math.nan  # the exact slope f' at prev_x
    st[_RESULT] = math.nan
    st[_D1] = d
    st[_SLOPE1] = slope
    st[_S_OVER] = s_over
    return st


@kernel
def _finish(st, value):
    st[_RESULT] = value
    return math.nan


@kernel
def reserve_step(st, d, slope):
    """Advance the search with the damage ``d`` and slope at the scale it
    last asked for (at the first call: scale 1). Returns the next scale to
    evaluate, or NaN when done; the factor is then ``st[_RESULT]`` (NaN for
    none within 1e-6..1e6). One algorithm for every caller: the compiled
    loop of :func:`reserve_search` and the two-thread passes of long tables."""
    phase = st[_PHASE]
    if phase == 0.0:
        s_over = st[_S_OVER]
        if 1.0 < s_over < 1e6 and d < math.inf and d < st[_TARGET]:
            # Damage grows to the target only up to the overload onset, or
            # the reserve is the onset itself: look just below it first.
            st[_BELOW] = s_over * (1.0 - 1e-12)
            st[_PHASE] = 1.0
            return st[_BELOW]
        st[_PHASE] = 2.0
        return _loop_step(st, d, slope)
    if phase == 1.0:
        if d < st[_TARGET]:
            return _finish(st, st[_S_OVER])
        st[_X_HI] = math.log(st[_BELOW])
        st[_HAS_HI] = 1.0
        st[_FHI] = math.log(d) - st[_LOG_T]
        if abs(st[_FHI]) < 1e-8:
            return _finish(st, st[_BELOW])
        st[_PHASE] = 2.0
        return _loop_step(st, st[_D1], st[_SLOPE1])
    return _loop_step(st, d, slope)


@kernel
def _loop_step(st, d, slope):
    """One Newton/secant/bisection step in log-log space (at most 100)."""
    if st[_ITER] >= 100:
        return _end(st)
    st[_ITER] += 1
    s = st[_S]
    log_t = st[_LOG_T]
    g = slope  # exact slope at this point (before any secant replaces it)
    if d == 0.0:
        f = -math.inf
    elif d == math.inf:
        f = math.inf
    else:
        f = math.log(d) - log_t
    if abs(f) < 1e-8:
        return _finish(st, s)
    x = math.log(s)
    if f < 0:
        st[_X_LO] = x
        st[_FLO] = f
        st[_HAS_LO] = 1.0
    else:
        st[_X_HI] = x
        st[_FHI] = f
        st[_HAS_HI] = 1.0
    x_lo, x_hi = st[_X_LO], st[_X_HI]
    if x_hi - x_lo < 1e-10:
        return _end(st)
    prev_ok, prev_x, prev_f, prev_g = st[_PREV_OK] != 0.0, st[_PREV_X], st[_PREV_F], st[_PREV_G]
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
            return _finish(st, math.exp(x_new))
    if (prev_ok and abs(f) < math.inf and abs(prev_f) < math.inf
            and 0 < abs(x - prev_x) < 0.05):
        secant = (f - prev_f) / (x - prev_x)
        if secant > 0:
            slope = secant
    st[_PREV_OK] = 1.0
    st[_PREV_X] = x
    st[_PREV_F] = f
    st[_PREV_G] = g
    has_lo, has_hi = st[_HAS_LO] != 0.0, st[_HAS_HI] != 0.0
    flo, fhi = st[_FLO], st[_FHI]
    x_new = math.nan
    if slope > 0 and abs(f) < math.inf:
        x_new = x - f / slope
        if abs(f) < 1e-6 and x_lo < x_new < x_hi:
            return _finish(st, math.exp(x_new))
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
        return _end(st)
    st[_S] = math.exp(x_new)
    return st[_S]


@kernel
def _end(st):
    """The search stopped without meeting the target exactly: the bracket's
    upper end, if there is one."""
    return _finish(st, math.exp(st[_X_HI]) if st[_HAS_HI] != 0.0 else math.nan)


@kernel
def reserve_search(frm, to, cnt, load_factor, model, segments, target, d, slope, s_over):
    """The reserve-factor search over one table in one compiled loop: the
    smallest scale whose damage reaches ``target`` (NaN for none within
    1e-6..1e6); arguments as :func:`reserve_begin`."""
    none = np.empty(0)
    st = reserve_begin(target, d, slope, s_over)
    s = reserve_step(st, d, slope)
    while not math.isnan(s):
        out = damage_pass(frm, to, cnt, s * load_factor, model, segments, none, False)
        d = out[0]
        s = reserve_step(st, d, out[2] / d if 0.0 < d < math.inf else math.nan)
    return st[_RESULT]


@kernel
def count_points(block, xt, rows, frm, to, cnt, s_ix, e_ix, bad):
    """Count every point (column) of a samples x points ``block``.

    The block is first copied row by row into ``xt`` (points x samples):
    each row of the block is read once, whole, and every point's samples
    end up contiguous (reading a column of a row-major slice of a wide array
    instead touched a new page every sample or two). Point r's rows go to
    row r of the 2-D outputs; ``rows[r]`` of them.
    """
    n, b = block.shape
    for q in range(n):
        for r in range(b):
            xt[r, q] = block[q, r]
    codes = np.empty(n + 1, np.int32)
    sv = np.empty(n + 2 + STACK_PAD)
    si = np.empty(n + 2 + STACK_PAD, np.int64)
    for r in range(b):
        m, flag = count_whole(xt[r], codes, sv, si, frm[r], to[r], cnt[r], s_ix[r], e_ix[r])
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
        stats[r, 0] = d
        stats[r, 1] = out[1]
        stats[r, 2] = out[3]
        stats[r, 3] = out[4]
        stats[r, 4] = out[5]
        stats[r, 5] = math.nan
        stats[r, 6] = out[7]
        if want_reserve and m > 0 and out[5] > 0:
            slope = out[2] / d if 0.0 < d < math.inf else math.nan
            stats[r, 5] = reserve_search(f, t, c, load_factor, model, segments, target, d,
                                         slope, out[6] / load_factor)
        best = top_k(pc, k_top)
        for q in range(k_top):
            top[r, q] = best[q] if q < best.shape[0] else -1
