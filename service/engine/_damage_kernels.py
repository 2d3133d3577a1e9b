"""Compiled damage evaluation: mean-stress correction, S-N curve and Miner in one loop.

The numpy functions in ``mean_stress.py`` and ``sn_curve.py`` are the
definitions; this loop evaluates the same formulas in the same order without
temporaries, because the reserve-factor search evaluates the whole history
several times. ``tests/engine/test_damage.py`` checks that the two agree.
"""

from __future__ import annotations

import math

import numpy as np

from ._numba import kernel

#: Codes of the mean-stress methods inside the kernel.
METHOD_CODES = {"none": 0, "goodman": 1, "gerber": 2, "soderberg": 3, "morrow": 4,
                "smith_watson_topper": 5, "walker": 6}


@kernel
def _power(x, m):
    # Whole slopes (3, 4, 5, 22 in the codes) by multiplication: several
    # times faster than pow and within an ulp or two of it.
    k = int(m)
    if k == m and 0 < k <= 32:
        out = x
        for _ in range(k - 1):
            out *= x
        return out
    return math.pow(x, m)


@kernel
def fused_damage(frm, to, cnt, scale, method, param, clip, ultimate, range_factor,
                 anchor_s, anchor_n, slopes, knee_s, cutoff_s, eq_slope, per_cycle):
    """Miner damage of cycles ``frm -> to`` with every stress times ``scale``.

    Writes per-cycle damage into ``per_cycle`` unless it is empty. Returns
    ``(damage, overloads, slope_weight, max_inv_life, eq_sum, max_range)``:
    the damage (inf with any overload), the number of overload cycles, the
    damage-weighted slope sum (d log D / d log s without cut-off effects is
    ``slope_weight / damage``), the largest 1/N, the sum of
    ``count * (2 sigma_ar)^eq_slope`` and the largest unscaled range.
    """
    n = frm.shape[0]
    write_d = per_cycle.shape[0] > 0
    nk = knee_s.shape[0]
    total = 0.0
    weight = 0.0
    max_inv = 0.0
    eq_sum = 0.0
    max_range = 0.0
    over = 0
    for i in range(n):
        rng = abs(frm[i] - to[i])
        if rng > max_range:
            max_range = rng
        a = 0.5 * rng
        mean = 0.5 * (frm[i] + to[i])
        a = a * scale
        mean = mean * scale
        mu = mean
        if clip and mu < 0.0:
            mu = 0.0
        if method == 0:
            sar = a
        elif method == 5 or method == 6:
            smax = mean + a
            if smax > 0.0:
                if method == 5:
                    sar = math.sqrt(smax * a)
                else:
                    sar = math.pow(smax, 1.0 - param) * math.pow(a, param)
            else:
                sar = 0.0
        else:
            r = mu / param
            if method == 2:
                den = 1.0 - r * r
            else:
                den = 1.0 - r
            if a == 0.0:
                sar = 0.0
            elif den > 0.0:
                sar = a / den
            else:
                sar = math.inf
        d = 0.0
        if not (sar < math.inf) or mean + a > ultimate:
            over += 1
            d = math.inf
        else:
            if sar > 0.0:
                eq_sum += cnt[i] * _power(2.0 * sar, eq_slope)
            s = 2.0 * sar * range_factor
            if s > 0.0 and s >= cutoff_s:
                seg = 0
                while seg < nk and s < knee_s[seg]:
                    seg += 1
                inv = _power(s / anchor_s[seg], slopes[seg]) / anchor_n[seg]
                d = cnt[i] * inv
                weight += d * slopes[seg]
                if inv > max_inv:
                    max_inv = inv
        if write_d:
            per_cycle[i] = d
        total += d
    if over:
        total = math.inf
    return total, over, weight, max_inv, eq_sum, max_range


@kernel
def top_k(values, k):
    """Positions of the ``k`` largest values, largest first (ties: earliest)."""
    n = values.shape[0]
    k = min(k, n)
    best = np.empty(k, np.int64)
    bval = np.empty(k, np.float64)
    filled = 0
    for i in range(n):
        v = values[i]
        if filled < k:
            j = filled
            filled += 1
        elif v > bval[k - 1]:
            j = k - 1
        else:
            continue
        while j > 0 and bval[j - 1] < v:
            bval[j] = bval[j - 1]
            best[j] = best[j - 1]
            j -= 1
        bval[j] = v
        best[j] = i
    return best[:filled]
