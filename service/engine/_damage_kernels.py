"""Compiled damage evaluation: mean-stress correction, S-N curve and Miner.

The numpy functions in ``mean_stress.py`` and ``sn_curve.py`` are the
definitions; these loops (and the mean-stress loops of
``_mean_stress_kernels.py``) evaluate the same formulas without temporaries,
because the reserve-factor search evaluates the whole history several times.
``tests/engine/test_damage.py`` checks that the two agree.

Why the loops look the way they do: each is a straight loop over a chunk of
cycles with selects instead of branches, one loop per mean-stress method and
per curve segment, so LLVM turns it into SIMD code. That needs numpy's error
model (numba's default division checks for zero and blocks vectorising) and
``fastmath`` without ``nnan``/``ninf`` (infinite ranges mark static
overloads and must survive). Sums are not left to the vectoriser: a
re-associated reduction may group terms differently with the alignment of the
arrays, so the same request could give results that differ in the last bit.
``_sum8`` adds in one fixed order instead (eight interleaved partial sums),
which differs from a left-to-right sum by rounding only (~1e-15 relative).
"""

from __future__ import annotations

import functools
import math

import numpy as np

from ._mean_stress_kernels import METHOD_CODES, _equivalent_ranges, _onset_and_range
from ._numba import kernel, njit, simd

#: Cycles per chunk: the scratch row of equivalent ranges stays in L1.
_CHUNK = 1024



@njit(cache=True, nogil=True, inline="always", error_model="numpy",
      fastmath={"reassoc", "nsz"})
def _ipow(x, m):
    # x**m for a whole m in 1..31 by binary powering with selects: a fixed
    # five-step loop that vectorises; within a few ulps of pow.
    r = 1.0
    p = x
    for b in range(5):
        r = r * p if (m >> b) & 1 else r
        p = p * p
    return r


def _whole(m: float) -> int:
    """``m`` as an int when :func:`_ipow` can raise to it, else 0."""
    return int(m) if float(m).is_integer() and 1 <= m <= 31 else 0


@simd
def _segment_damage(sr, gr, n, cnt, lo, inv_s, c, m, whole, s_lo, s_hi, d, w):
    """Damage of ranges ``sr[:n]`` on one segment [s_lo, s_hi) of the curve.

    Adds ``cnt[lo + j] * (sr / S_a)^m / N_a`` into ``d[j]`` and that times
    ``m * gr[j]`` (d log d / d log scale) into ``w[j]`` for the ranges on the
    segment. No running sum here:
    the sums are taken by :func:`_sum8` in a fixed order, so a result never
    depends on where numpy placed the arrays.
    """
    # The catalogues' slopes 3 and 5 get loops of their own (two or three
    # multiplies instead of the five-step power).
    if whole == 3:
        for j in range(n):
            s = sr[j]
            q = s * inv_s
            on = (s >= s_lo) & (s < s_hi)
            v = cnt[lo + j] * (q * q * q) * c if on else 0.0
            d[j] += v
            w[j] += v * m * gr[j]
    elif whole == 5:
        for j in range(n):
            s = sr[j]
            q = s * inv_s
            q2 = q * q
            on = (s >= s_lo) & (s < s_hi)
            v = cnt[lo + j] * (q2 * q2 * q) * c if on else 0.0
            d[j] += v
            w[j] += v * m * gr[j]
    elif whole:
        for j in range(n):
            s = sr[j]
            on = (s >= s_lo) & (s < s_hi)
            v = cnt[lo + j] * _ipow(s * inv_s, whole) * c if on else 0.0
            d[j] += v
            w[j] += v * m * gr[j]
    else:
        for j in range(n):
            s = sr[j]
            if (s >= s_lo) & (s < s_hi):
                v = cnt[lo + j] * math.pow(s * inv_s, m) * c
                d[j] += v
                w[j] += v * m * gr[j]


@simd
def _power_terms(sr, n, cnt, lo, inv_rf, k, whole, e):
    """``e[j] = cnt * (sr * inv_rf)^k`` for finite, positive ranges, else 0."""
    if whole:
        for j in range(n):
            s = sr[j]
            ok = (s > 0.0) & (s < math.inf)
            e[j] = cnt[lo + j] * _ipow(s * inv_rf, whole) if ok else 0.0
    else:
        for j in range(n):
            s = sr[j]
            e[j] = 0.0
            if (s > 0.0) & (s < math.inf):
                e[j] = cnt[lo + j] * math.pow(s * inv_rf, k)


# No fastmath: the order of this sum is fixed by the code (eight interleaved
# partial sums, then a tree), the same on every call and for any alignment
# of the array, and still wide enough to vectorise.
@njit(cache=True, nogil=True, inline="always")
def _sum8(x, n):
    a0 = a1 = a2 = a3 = a4 = a5 = a6 = a7 = 0.0
    m = n - n % 8
    for j in range(0, m, 8):
        a0 += x[j]
        a1 += x[j + 1]
        a2 += x[j + 2]
        a3 += x[j + 3]
        a4 += x[j + 4]
        a5 += x[j + 5]
        a6 += x[j + 6]
        a7 += x[j + 7]
    tail = 0.0
    for j in range(m, n):
        tail += x[j]
    return (((a0 + a1) + (a2 + a3)) + ((a4 + a5) + (a6 + a7))) + tail


@simd
def _copy_damage(sr, d, n, out, lo):
    for j in range(n):
        out[lo + j] = math.inf if sr[j] == math.inf else d[j]


# The inputs of these two are never NaN (histories are checked finite and the
# corrections cannot make one), which lets the max reductions vectorise.
@njit(cache=True, nogil=True, fastmath={"reassoc", "nsz", "nnan"})
def _max_finite(sr, n):
    out = 0.0
    for j in range(n):
        s = sr[j]
        out = max(out, s if s < math.inf else 0.0)
    return out


#: Rows of the ``model`` array of :func:`damage_pass`: method code, its
#: parameter, clip compressive means (0/1), ultimate strength (inf: none),
#: range factor, equivalent slope, the slope as a whole number (or 0).
MODEL_ROWS = 7
#: Rows of the ``segments`` array: 1/S_a, 1/N_a, m, m as a whole number
#: (or 0), lower and upper range of the segment.
SEGMENT_ROWS = 6


def model_array(method: str, param: float, clip: bool, ultimate: float, range_factor: float,
                eq_slope: float, table=None) -> np.ndarray:
    """The scalar settings of :func:`damage_pass` in one array (one argument),
    followed by a method's table when it has one (a Haigh diagram: k, the
    k means, the k amplitudes, the reference amplitude)."""
    head = [METHOD_CODES[method], param, 1.0 if clip else 0.0, ultimate, range_factor,
            eq_slope, _whole(eq_slope)]
    return np.array(head + ([0.0] if table is None else list(table)), np.float64)


@njit(cache=True, nogil=True, inline="always")
def _chunk_damage(frm, to, cnt, lo, hi, scale, method, param, clip, ultimate, range_factor,
                  segments, sr, gr, d, w, table):
    """One chunk (rows lo..hi) of a pass: corrected ranges into ``sr`` (and
    their slopes into ``gr``), each cycle's damage on the curve's
    ``segments`` into ``d`` (and its slope weight into ``w``). Returns the
    chunk's static overloads."""
    k = hi - lo
    over = _equivalent_ranges(frm, to, lo, hi, scale, method, param, clip, ultimate,
                              range_factor, sr, gr, table)
    d[:k] = 0.0
    w[:k] = 0.0
    for g in range(segments.shape[1]):
        _segment_damage(sr, gr, k, cnt, lo, segments[0, g], segments[1, g], segments[2, g],
                        int(segments[3, g]), segments[4, g], segments[5, g], d, w)
    return over


@kernel
def damage_pass(frm, to, cnt, scale, model, segments, per_cycle, extras):
    """Miner damage of cycles ``frm -> to`` with every stress times ``scale``.

    ``model`` holds the scalar settings (:data:`MODEL_ROWS`, built by
    :func:`model_array`) and ``segments`` the curve (:data:`SEGMENT_ROWS` x
    segments, from :func:`curve_segments`): on ``[lo_j, hi_j)`` a range S
    fails after ``(S / S_a)^-m / (1/N_a)`` cycles. Few arguments on purpose:
    numba types every argument on every call, which costs more than the loop
    on a short history. Writes per-cycle damage into ``per_cycle`` unless it
    is empty.

    Returns ``(damage, overloads, slope_weight, max_range_on_curve, eq_sum,
    max_range, overload_onset, total_count)``: damage (inf with any
    overload), overload cycles, the damage-weighted slope sum
    (``slope_weight / damage`` is d log D / d log s away from the cut-off),
    and, with ``extras``, the largest finite corrected range,
    ``sum count (S / range_factor)^eq_slope``, the largest unscaled range,
    the factor on the unscaled stresses at which the first cycle becomes a
    static overload and the sum of the counts (exact: halves and wholes).
    """
    method = int(model[0])
    param = model[1]
    clip = model[2] != 0.0
    ultimate = model[3]
    range_factor = model[4]
    eq_slope = model[5]
    eq_whole = int(model[6])
    table = model[MODEL_ROWS:]
    n = frm.shape[0]
    write_d = per_cycle.shape[0] > 0
    sr = np.empty(_CHUNK)
    gr = np.empty(_CHUNK)
    d = np.empty(_CHUNK)
    w = np.empty(_CHUNK)
    e = np.empty(_CHUNK)
    total = 0.0
    weight = 0.0
    over = 0
    max_sr = 0.0
    eq_sum = 0.0
    max_range = 0.0
    onset = math.inf
    counted = 0.0
    inv_rf = 1.0 / range_factor
    for lo in range(0, n, _CHUNK):
        hi = min(lo + _CHUNK, n)
        k = hi - lo
        over += _chunk_damage(frm, to, cnt, lo, hi, scale, method, param, clip, ultimate,
                              range_factor, segments, sr, gr, d, w, table)
        total += _sum8(d, k)
        weight += _sum8(w, k)
        if write_d:
            _copy_damage(sr, d, k, per_cycle, lo)
        if extras:
            _power_terms(sr, k, cnt, lo, inv_rf, eq_slope, eq_whole, e)
            eq_sum += _sum8(e, k)
            max_sr = max(max_sr, _max_finite(sr, k))
            o, r = _onset_and_range(frm, to, lo, hi, method, param, clip, ultimate)
            onset = min(onset, o)
            max_range = max(max_range, r)
            counted += _sum8(cnt[lo:hi], k)
    if over:
        total = math.inf
    return total, over, weight, max_sr, eq_sum, max_range, onset, counted


@simd
def _below_terms(sr, d, cnt, lo, n, limit, cb, db, dt):
    """Per cycle: its count and damage if its range is below ``limit``, and
    its damage if finite (selects, so the loop vectorises)."""
    for j in range(n):
        s = sr[j]
        below = s < limit
        cb[j] = cnt[lo + j] if below else 0.0
        db[j] = d[j] if below else 0.0
        dt[j] = d[j] if s < math.inf else 0.0


@kernel
def split_at_limit(frm, to, cnt, scale, model, segments, limit):
    """How much of a spectrum lies below a fatigue limit.

    Returns ``(count_below, count_total, damage_below, damage_total)``: the
    counts of cycles whose corrected range (as :func:`damage_pass` forms it)
    is below ``limit`` [MPa] and of all cycles, and their Miner damage on
    ``segments`` (the curve continued below the limit, e.g. by Haibach's
    slope, so that cycles under the limit have a damage to compare). Static
    overloads are left out of both damages (they are reported on their own).
    Sums in the fixed order of :func:`_sum8`.
    """
    method = int(model[0])
    param = model[1]
    clip = model[2] != 0.0
    ultimate = model[3]
    range_factor = model[4]
    table = model[MODEL_ROWS:]
    n = frm.shape[0]
    sr = np.empty(_CHUNK)
    gr = np.empty(_CHUNK)
    d = np.empty(_CHUNK)
    w = np.empty(_CHUNK)
    cb = np.empty(_CHUNK)
    db = np.empty(_CHUNK)
    dt = np.empty(_CHUNK)
    c_below = 0.0
    c_total = 0.0
    d_below = 0.0
    d_total = 0.0
    for lo in range(0, n, _CHUNK):
        hi = min(lo + _CHUNK, n)
        k = hi - lo
        _chunk_damage(frm, to, cnt, lo, hi, scale, method, param, clip, ultimate,
                      range_factor, segments, sr, gr, d, w, table)
        _below_terms(sr, d, cnt, lo, k, limit, cb, db, dt)
        c_below += _sum8(cb, k)
        c_total += _sum8(cnt[lo:hi], k)
        d_below += _sum8(db, k)
        d_total += _sum8(dt, k)
    return c_below, c_total, d_below, d_total


@functools.lru_cache(maxsize=256)
def curve_segments(curve):
    """The curve as the ``segments`` array of ``damage_pass`` (rows inv_s, c, m,
    whole, lo, hi; one column a segment).

    Segment j runs from its lower knee (or the cut-off) up to the knee above;
    on it N = N_a (S / S_a)^-m through its anchor (N_a, S_a).
    """
    anchors_n, anchors_s = curve._anchors()
    slopes = np.asarray(curve.slopes, np.float64)
    knees = anchors_s[1:]
    cut = float(curve.cutoff_range)
    nseg = slopes.shape[0]
    hi = np.concatenate([[math.inf], knees])
    lo = np.concatenate([knees, [0.0]])
    # A range must be above zero and at or above the cut-off to do damage.
    lo = np.maximum(lo, max(cut, np.nextafter(0.0, 1.0)))
    inv_s = 1.0 / anchors_s[:nseg]
    c = 1.0 / anchors_n[:nseg]
    whole = np.array([_whole(m) for m in slopes], np.float64)
    out = np.ascontiguousarray(np.vstack([inv_s, c, slopes, whole, lo, hi]))
    out.flags.writeable = False  # shared between calls through the cache
    return out


def inverse_life(segments, s: float) -> float:
    """1/N of range ``s`` on the segments of :func:`curve_segments` (0 below them).

    ``segments`` may also be the same rows as Python lists (``segments.tolist()``,
    what the batch path passes: plain floats are several times faster here).
    """
    inv_s, c, m, _, lo, hi = segments
    s = float(s)
    for g in range(len(m)):
        if lo[g] <= s < hi[g]:
            try:
                return (s * float(inv_s[g])) ** float(m[g]) * float(c[g])
            except OverflowError:  # a range of 1e300 MPa: 1/N is inf
                return math.inf
    return 0.0


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


@kernel
def residue_parts(frm, to, cnt, per_cycle):
    """The open residue of a one-pass count and the damage on either side.

    Returns ``(sequence, half_damage, closed_damage, half_rows)``: the
    residue's turning points (the chain of the half cycles in row order:
    each ends where the next begins), the summed damage of the half cycles
    and of the full ones (left to right: a fixed order), and how many half
    cycles there are. ``per_cycle`` holds each row's damage.
    """
    n = cnt.shape[0]
    half_rows = 0
    for i in range(n):
        if cnt[i] == 0.5:
            half_rows += 1
    seq = np.empty(half_rows + 1 if half_rows else 0)
    half_d = 0.0
    closed_d = 0.0
    k = 0
    for i in range(n):
        if cnt[i] == 0.5:
            if k == 0:
                seq[0] = frm[i]
            k += 1
            seq[k] = to[i]
            half_d += per_cycle[i]
        else:
            closed_d += per_cycle[i]
    return seq, half_d, closed_d, half_rows


@kernel
def repeating_closure(seq):
    """Cycles of ``seq`` (turning points) counted as a repeating block.

    ASTM E1049-85 sec. 5.4.4.1: the sequence is started at its largest
    absolute point and closed on that point again; reversals lost or made at
    the junction are re-read; then while the newest range X is at least the
    one before, Y, Y is one full cycle and its two points are dropped.
    Returns ``(stress_from, stress_to)`` of the cycles, all full, in the
    order they close.
    """
    n = seq.shape[0]
    j = 0
    for i in range(n):
        if abs(seq[i]) > abs(seq[j]):
            j = i
    # The rotated sequence with its first point repeated at the end, read
    # as turning points (plateaus and monotone runs collapse).
    pts = np.empty(n + 1)
    m = 0
    for r in range(n + 1):
        v = seq[(j + r) % n]
        if m >= 1 and v == pts[m - 1]:
            continue
        if m >= 2 and (pts[m - 1] - pts[m - 2]) * (v - pts[m - 1]) > 0.0:
            pts[m - 1] = v  # still rising (or falling): not a reversal
            continue
        pts[m] = v
        m += 1
    frm = np.empty(m)
    to = np.empty(m)
    stack = np.empty(m)
    sp = 0
    c = 0
    for r in range(m):
        stack[sp] = pts[r]
        sp += 1
        while sp >= 3:
            x = abs(stack[sp - 1] - stack[sp - 2])
            y = abs(stack[sp - 2] - stack[sp - 3])
            if x < y:
                break
            frm[c] = stack[sp - 3]
            to[c] = stack[sp - 2]
            c += 1
            stack[sp - 3] = stack[sp - 1]
            sp -= 2
    return frm[:c], to[:c]
