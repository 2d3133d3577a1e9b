"""Compiled mean-stress corrections: each cycle's range as it enters the curve.

The numpy functions of ``mean_stress.py`` are the definitions; these loops
evaluate the same formulas inside the damage passes of ``_damage_kernels.py``
(one straight loop per method, selects instead of branches, so that each
vectorises; ``tests/engine/test_damage.py`` holds the two equal), and find
the scale at which a cycle first becomes a static overload.
"""

from __future__ import annotations

import math

from ._numba import njit, simd

#: Codes of the mean-stress methods inside the kernel.
METHOD_CODES = {"none": 0, "goodman": 1, "gerber": 2, "soderberg": 3, "morrow": 4,
                "smith_watson_topper": 5, "walker": 6, "asme_elliptic": 7,
                "en1993_reduced_compression": 8, "dnv_base_material": 8,
                "dnv_stress_relieved": 8, "iiw_enhancement_case1": 9,
                "iiw_enhancement_case2": 9, "haigh": 10}

@simd
def _equivalent_ranges(frm, to, lo, hi, scale, method, param, clip, ultimate,
                       range_factor, sr, gr, table):
    """``sr[i - lo]`` = corrected range ``2 sigma_ar range_factor`` of cycle i,
    and ``gr[i - lo]`` = d log sr / d log scale (1 where the range scales
    with the load; 1/den for Goodman-type corrections, (1 + r^2)/(1 - r^2)
    for Gerber, 1/(1 - r^2) for the ASME ellipse), for the reserve search's
    slope.

    Static overloads (breakdown of the correction, or a peak above
    ``ultimate``) get ``inf``. Returns the number of overloads.
    """
    n = hi - lo
    half = 0.5 * scale
    two = 2.0 * range_factor
    inf = math.inf
    # Every branch is one straight loop so that each vectorises; the sum of
    # the ranges is inf exactly when some cycle is an overload.
    acc = 0.0
    if method == 0 or method == 5 or method == 6 or method == 8 or method == 9:
        gr[:n] = 1.0
    if method == 0:
        for j in range(n):
            f = frm[lo + j]
            t = to[lo + j]
            a = abs(f - t) * half
            v = inf if (f + t) * half + a > ultimate else two * a
            sr[j] = v
            acc += v
    elif method == 5:
        for j in range(n):
            f = frm[lo + j]
            t = to[lo + j]
            a = abs(f - t) * half
            smax = (f + t) * half + a
            v = two * math.sqrt(smax * a) if smax > 0.0 else 0.0
            v = inf if smax > ultimate else v
            sr[j] = v
            acc += v
    elif method == 6:
        for j in range(n):
            f = frm[lo + j]
            t = to[lo + j]
            a = abs(f - t) * half
            smax = (f + t) * half + a
            v = 0.0
            if smax > 0.0:
                v = two * math.pow(smax, 1.0 - param) * math.pow(a, param)
            v = inf if smax > ultimate else v
            sr[j] = v
            acc += v
    elif method == 8:
        # The codes' reduced compressive part: param is k (0.6 or 0.8).
        for j in range(n):
            f = frm[lo + j]
            t = to[lo + j]
            a = abs(f - t) * half
            mean = (f + t) * half
            top = mean + a
            bottom = mean - a
            tension = max(top, 0.0) - max(bottom, 0.0)
            compression = min(top, 0.0) - min(bottom, 0.0)
            v = range_factor * (tension + param * compression)
            v = inf if top > ultimate else v
            sr[j] = v
            acc += v
    elif method == 9:
        # IIW f(R): param is the case (1 or 2); R < -1 when no tensile peak.
        c0 = 1.2 if param == 1.0 else 0.9
        f_max = 1.6 if param == 1.0 else 1.3
        for j in range(n):
            f = frm[lo + j]
            t = to[lo + j]
            a = abs(f - t) * half
            mean = (f + t) * half
            top = mean + a
            bottom = mean - a
            r = bottom / top if top > 0.0 else -2.0
            fr = min(max(c0 - 0.4 * r, 1.0), f_max)
            v = two * a / fr
            v = inf if top > ultimate else v
            sr[j] = v
            acc += v
    elif method == 10:
        # A Haigh diagram: table = [k, means (k), amplitudes (k), A_ref];
        # A(mean) linear between points, held below the first, the last
        # segment extended above the last; sr = 2 a A_ref / A, inf at A <= 0.
        k = int(table[0])
        aref = table[1 + 2 * k]
        last = (table[2 * k] - table[2 * k - 1]) / (table[k] - table[k - 1])
        for j in range(n):
            f = frm[lo + j]
            t = to[lo + j]
            a = abs(f - t) * half
            mean = (f + t) * half
            amp = table[1 + k]
            slope = 0.0
            if mean > table[k]:
                amp = table[2 * k] + last * (mean - table[k])
                slope = last
            else:
                for p in range(1, k):
                    if mean > table[p]:
                        m0 = table[p]
                        a0 = table[k + p]
                        sl = (table[k + p + 1] - a0) / (table[p + 1] - m0)
                        amp = a0 + sl * (mean - m0)
                        slope = sl
            v = two * a * aref / amp if amp > 0.0 else inf
            v = 0.0 if a == 0.0 else v
            v = inf if mean + a > ultimate else v
            sr[j] = v
            gr[j] = 1.0 - mean * slope / amp if amp > 0.0 else 1.0
            acc += v
    elif method == 7:
        # ASME ellipse: den = sqrt(1 - r^2), d log sr / d log s = 1 / (1 - r^2).
        inv = 1.0 / param
        for j in range(n):
            f = frm[lo + j]
            t = to[lo + j]
            a = abs(f - t) * half
            mean = (f + t) * half
            mu = max(mean, 0.0) if clip else mean
            r = mu * inv
            q = 1.0 - r * r
            den = math.sqrt(q) if q > 0.0 else 0.0
            v = two * a / den if den > 0.0 else inf
            v = 0.0 if a == 0.0 else v
            v = inf if mean + a > ultimate else v
            sr[j] = v
            gr[j] = 1.0 / q if q > 0.0 else 1.0
            acc += v
    else:
        inv = 1.0 / param
        gerber = method == 2
        for j in range(n):
            f = frm[lo + j]
            t = to[lo + j]
            a = abs(f - t) * half
            mean = (f + t) * half
            mu = max(mean, 0.0) if clip else mean
            r = mu * inv
            den = 1.0 - r * r if gerber else 1.0 - r
            v = two * a / den if den > 0.0 else inf
            v = 0.0 if a == 0.0 else v
            v = inf if mean + a > ultimate else v
            sr[j] = v
            g = (1.0 + r * r) / den if gerber else 1.0 / den
            gr[j] = g if den > 0.0 else 1.0
            acc += v
    over = 0
    if acc == inf:
        for j in range(n):
            over += sr[j] == inf
    return over


# Inputs are finite (checked histories) and the selects below never form
# NaN, so the min/max reductions may vectorise (nnan).
@njit(cache=True, nogil=True, error_model="numpy", fastmath={"reassoc", "nsz", "nnan"})
def _onset_and_range(frm, to, lo, hi, method, param, clip, ultimate):
    """``(onset, max_range)`` of cycles lo..hi: the smallest factor on the
    stresses at which one becomes a static overload (inf if none does),
    mirroring ``_equivalent_ranges`` (peak strictly above ``ultimate``, or
    the correction's denominator reaching zero: Goodman-type at mu >= param,
    Gerber and the ASME ellipse at |mu| >= param, a Haigh diagram at the
    mean where it reaches zero amplitude, param), and the largest unscaled
    range.

    The smallest of ``ultimate / peak`` over the cycles is ``ultimate`` over
    the largest peak (a correctly rounded quotient falls as the divisor
    grows), so the loop keeps maxima and divides once.
    """
    max_peak = 0.0
    max_mu = 0.0
    max_range = 0.0
    ratio = (1 <= method <= 4) | (method == 7) | (method == 10)
    gerber = (method == 2) | (method == 7)  # even in the mean: |mu| breaks down
    for i in range(lo, hi):
        rng = abs(frm[i] - to[i])
        a = 0.5 * rng
        mean = 0.5 * (frm[i] + to[i])
        max_peak = max(max_peak, mean + a)
        mu = max(mean, 0.0) if clip else mean
        mu = abs(mu) if gerber else mu
        # & not "and": a short-circuit is a branch, which stops vectorising.
        max_mu = max(max_mu, mu if (ratio & (a > 0.0)) else 0.0)
        max_range = max(max_range, rng)
    t_peak = ultimate / max_peak if max_peak > 0.0 else math.inf
    t_den = param / max_mu if max_mu > 0.0 else math.inf
    return min(t_peak, t_den), max_range


