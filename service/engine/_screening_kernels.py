"""Compiled kernels behind :mod:`service.engine.screening`.

Plain arrays in and out; the rules, their thresholds and the findings live in
``screening.py``. A clean signal costs one streaming pass, :func:`survey`;
:func:`signal_pass` runs only when a step is suspect.
"""

from __future__ import annotations

import numpy as np

from ._numba import kernel

@kernel
def signal_pass(x, step_limit, spike_samples, spikes, runs, fill):
    """One pass over the samples: the extremes, spikes, and every run of two
    or more equal samples. With ``fill`` the events are written into the
    arrays given (sized by a first pass without it: a clean signal needs no
    second pass, and no list is ever grown).

    Returns ``(spikes, runs, max, min)``.
    """
    n = x.shape[0]
    ns = 0
    nr = 0
    hi = x[0]
    lo = x[0]
    run_start = 0
    i = 1
    while i <= n:
        d = x[i] - x[i - 1] if i < n else 1.0  # a step past the end closes the last run
        if i < n:
            hi = max(hi, x[i])
            lo = min(lo, x[i])
        if d != 0.0:
            if i - 1 > run_start:  # a run of two or more equal samples ended
                if fill:
                    runs[nr, 0] = run_start
                    runs[nr, 1] = i - 1
                    runs[nr, 2] = x[run_start]
                nr += 1
            run_start = i
        # A spike: a step in beyond the limit, a step out of the opposite
        # sign within spike_samples, back to within a quarter of the step
        # (or half the limit, for a small spike on a steep flank).
        if i < n and abs(d) > step_limit:
            for k in range(1, spike_samples + 1):
                j = i + k
                if j >= n:
                    break
                out = x[j] - x[j - 1]
                if abs(out) > step_limit and out * d < 0.0:
                    if abs(x[j] - x[i - 1]) <= max(0.25 * abs(d), 0.5 * step_limit):
                        height = 0.0
                        for m in range(i, j + 1):
                            height = max(height, abs(x[m] - x[i - 1]))
                            hi = max(hi, x[m])
                            lo = min(lo, x[m])
                        if fill:
                            spikes[ns, 0] = i
                            spikes[ns, 1] = j - 1
                            spikes[ns, 2] = height
                        ns += 1
                        run_start = j
                        i = j  # continue after the spike
                    break
        i += 1
    return ns, nr, hi, lo


#: Low bits of the anchor hash that must be zero: one sample in 64 anchors.
ANCHOR_BITS = np.uint64(63)
_S29, _S17, _S45 = np.uint64(29), np.uint64(17), np.uint64(45)
#: Odd multipliers of an anchor key's second, third and fourth samples
#: (64-bit mixing constants: 2**64 over the golden ratio, and two of the
#: xxHash primes).
_KEY = np.uint64(0x9E3779B97F4A7C15)
_KEY2 = np.uint64(0xC2B2AE3D27D4EB4F)
_KEY3 = np.uint64(0x165667B19E3779F9)


#: A 64-bit de Bruijn sequence B(2, 6) and the table that turns the top six
#: bits of (an isolated bit times it) into the bit's index (the technique of
#: C. E. Leiserson, H. Prokop and K. H. Randall, "Using de Bruijn sequences
#: to index a 1 in a computer word," MIT, 1998).
_DE_BRUIJN = np.uint64(0x03F79D71B4CB0A89)
_BIT_INDEX = np.zeros(64, np.int64)
for _i in range(64):
    _BIT_INDEX[((1 << _i) * 0x03F79D71B4CB0A89 % (1 << 64)) >> 58] = _i
assert sorted(_BIT_INDEX.tolist()) == list(range(64))  # every index once: a true B(2, 6)
_S58 = np.uint64(58)


#: Bins of :func:`order_statistics`' histogram.
_BINS = 4096


@kernel
def order_statistics(a, ks, out):
    """``out[j]`` = the ``ks[j]``-th smallest value of ``a`` (0-based; ``ks``
    ascending), exactly, by a histogram: each value's bin over ``a``'s
    range (a monotone map), the bins counted, and only the values in the
    bin holding a rank sorted. Two passes that do not branch on the data,
    where a quickselect's branches mispredict on every fresh signal (10x
    slower here), and numpy's ``np.partition`` with two ranks measured
    130 us on 1e4 fresh samples against 20 us for this."""
    n = a.shape[0]
    lo = a[0]
    hi = a[0]
    for i in range(n):
        lo = min(lo, a[i])
        hi = max(hi, a[i])
    if hi == lo:
        for j in range(ks.shape[0]):
            out[j] = lo
        return
    # Monotone: rounding keeps the order of halves, differences and
    # products. Halves, so the range of any finite values is finite; a
    # range that halving lost (a few subnormals) is one bin.
    low = 0.5 * lo
    span = 0.5 * hi - low
    scale = (_BINS - 1) / span if span > 0.0 else 0.0
    bins = np.empty(n, np.int32)
    for i in range(n):
        v = (0.5 * a[i] - low) * scale
        # In range for finite values; anything else (a NaN) must not index
        # out of the counts.
        bins[i] = np.int32(v) if 0.0 < v < _BINS else (_BINS - 1 if v >= _BINS else 0)
    counts = np.zeros(_BINS, np.int64)
    for i in range(n):
        counts[bins[i]] += 1
    picked = np.empty(n)
    below = 0
    j = 0
    for b in range(_BINS):
        c = counts[b]
        if j < ks.shape[0] and ks[j] < below + c:
            m = 0
            for i in range(n):
                if bins[i] == b:
                    picked[m] = a[i]
                    m += 1
            ranked = np.sort(picked[:m])
            while j < ks.shape[0] and ks[j] < below + c:
                out[j] = ranked[ks[j] - below]
                j += 1
        below += c
        if j == ks.shape[0]:
            break


@kernel
def sample_stats(ys, ds, n, stride, lo_k, hi_k):
    """Whole-record statistics from the samples ``ys`` (samples 0, stride,
    ... of a record of ``n``) and steps ``ds`` (into samples stride,
    2 stride, ...).

    Returns ``(step scale, trend change, p_lo, p_hi, sd of ys, sd of ds)``:
    the median absolute deviation of the steps from their (upper) median
    over 0.6745, the rise from start to end of the least-squares line
    through ``ys`` against their sample numbers, the ``lo_k``-th and
    ``hi_k``-th smallest of ``ys``, and the standard deviations (over the
    count, as numpy's ``std``; two passes, the mean first).
    """
    k = ys.shape[0]
    mean = 0.0
    for j in range(k):
        mean += ys[j]
    mean /= k
    centre = (k - 1) * stride / 2.0  # the mean sample number
    num = 0.0
    den = 0.0
    var = 0.0
    for j in range(k):
        c = j * stride - centre
        dev = ys[j] - mean
        num += c * dev
        den += c * c
        var += dev * dev
    kd = ds.shape[0]
    scale = 0.0
    var_d = 0.0
    rank = np.empty(2, np.int64)
    value = np.empty(2)
    if kd:
        mean_d = 0.0
        for j in range(kd):
            mean_d += ds[j]
        mean_d /= kd
        for j in range(kd):
            var_d += (ds[j] - mean_d) * (ds[j] - mean_d)
        var_d /= kd
        rank[0] = kd // 2  # the upper median
        order_statistics(ds, rank[:1], value)
        deviation = np.empty(kd)
        for j in range(kd):
            deviation[j] = abs(ds[j] - value[0])
        order_statistics(deviation, rank[:1], value)
        scale = value[0] / 0.6745
    rank[0] = lo_k
    rank[1] = hi_k
    order_statistics(ys, rank, value)
    return (scale, (num / den * (n - 1) if den > 0 else 0.0), value[0], value[1],
            np.sqrt(var / k), np.sqrt(var_d))


#: Samples per block of :func:`survey`: read once from memory, then from
#: the first-level cache by each of its loops.
_BLOCK = 2048
_MAGNITUDE = np.uint64(0x7FFFFFFFFFFFFFFF)  # an IEEE double's bits but its sign


@kernel
def survey(x, bits, stride, anchoring, ys, ds, lo_k, hi_k, pos, keys):
    """One streaming pass over a channel, block by block, for everything a
    clean signal needs; ``bits`` is ``x`` read as ``uint64``.

    * The largest step, in magnitude, and how many steps are exactly zero:
      a signal is scanned event by event (:func:`signal_pass`) only when a
      step exceeds the spike limit or is zero. (The largest magnitude is
      taken over the steps' IEEE bit patterns with the sign cleared, whose
      order as unsigned integers is their order as numbers; an integer
      maximum vectorises.)
    * Every ``stride``-th sample into ``ys`` (samples 0, stride, ...) and
      the step into every ``stride``-th sample into ``ds`` (samples
      stride, 2 stride, ...), and from them the whole-record statistics
      (:func:`sample_stats`, percentiles ``lo_k`` and ``hi_k``).
    * With ``anchoring``, the content-defined anchors of the repeated-block
      rule: samples ``i`` where an xor-shift hash of samples ``i`` and
      ``i + 1`` has its low bits zero, about one sample in 64. The same
      content gives the same anchors wherever it lies, so a copy of a
      stretch has its anchors at the same places as the original (the idea
      of content-defined chunking: A. Muthitacharoen, B. Chen, D. Mazieres,
      "A low-bandwidth network file system," SOSP 2001). Each anchor is
      written to ``pos`` with a key of its four samples to ``keys`` (the
      first's bits xor the others' times odd constants, :data:`_KEY`; two
      at the record's end), except an anchor on two equal samples (a held
      run: its own rule). Equal keys only make candidates, each checked
      sample by sample (:func:`copies`); four samples keep a quantised
      signal's chance coincidences few (a 12-bit record of 1e6 samples:
      no two keys alike of 15.7k, against 6.7k alike with two samples)
      and cost less than an FNV-1a hash of eight (screening a clean 1e6
      record: 0.80-0.84 ms against 0.90-0.95). A block's anchor flags are
      read as 64-bit words: a word of eight clear flags is skipped at once,
      and in the others each anchor is found from its lowest set bit (de
      Bruijn indexing) rather than by testing all eight.

    Returns ``(largest step, zero steps, anchors written, statistics)``;
    anchors -1 when there are more anchors, held ones included, than
    ``pos`` holds (far more than one in 64: the samples' low bits do not
    vary).
    """
    n = x.shape[0]
    steps = np.empty(_BLOCK)
    step_bits = steps.view(np.uint64)
    flags = np.zeros(_BLOCK, np.uint8)
    words = flags.view(np.uint64)
    cap = pos.shape[0]
    one = np.uint64(1)
    largest = np.uint64(0)
    zeros = 0
    found = 0
    seen = 0
    next_y, ky = 0, 0
    next_d, kd = stride, 0
    for a in range(0, n - 1, _BLOCK):
        b = min(a + _BLOCK, n - 1)
        # Views from 0, so the compiler sees no negative index (and vectorises).
        xs = x[a:b + 1]
        m = xs.shape[0] - 1
        for i in range(m):
            steps[i] = xs[i + 1] - xs[i]
        for i in range(m):
            u = step_bits[i] & _MAGNITUDE
            largest = max(largest, u)
            zeros += u == 0
        while next_y <= b:
            ys[ky] = x[next_y]
            ky += 1
            next_y += stride
        while next_d <= b:
            ds[kd] = x[next_d] - x[next_d - 1]
            kd += 1
            next_d += stride
        if not anchoring:
            continue
        bs = bits[a:b + 1]
        for i in range(m):
            v = bs[i]
            h = v ^ (v >> _S29) ^ (bs[i + 1] >> _S17) ^ (v >> _S45)
            flags[i] = (h & ANCHOR_BITS) == 0
        for k in range(m, _BLOCK):
            flags[k] = 0
        for w in range(_BLOCK // 8):
            if not anchoring:
                break
            v = words[w]
            while v != 0:
                low = v & (~v + one)
                v ^= low
                i = a + 8 * w + (_BIT_INDEX[(low * _DE_BRUIJN) >> _S58] >> 3)
                first = bits[i]  # i + 1 < n: the flags end a sample short
                second = bits[i + 1]
                key = first ^ (second * _KEY)
                if i + 3 < n:
                    key ^= bits[i + 2] * _KEY2 ^ bits[i + 3] * _KEY3
                seen += 1
                if seen > cap:
                    anchoring = False  # the rest of the pass still runs
                    break
                if first != second:
                    pos[found] = i
                    keys[found] = key
                    found += 1
    if n == 1:
        ys[0] = x[0]
    step_bits[0] = largest
    return (steps[0], zeros, (found if seen <= cap else -1),
            sample_stats(ys, ds, n, stride, lo_k, hi_k))


@kernel
def copies(bits, later, earlier, min_samples, out):
    """Stretches of at least ``min_samples`` samples that repeat an earlier
    stretch bit for bit, from candidate pairs of anchors (``later[k]`` may
    repeat ``earlier[k]``; sorted by ``later``): each pair is grown sample
    by sample (:func:`extend_match`), a pair inside a copy already found is
    skipped, and a pair that is not a copy (equal keys by chance, or a
    short coincidence) is dropped. Rows ``(first, last, source_first)``
    into ``out``; returns how many."""
    covered = -1
    m = 0
    for k in range(later.shape[0]):
        b = later[k]
        if b <= covered:
            continue
        a = earlier[k]
        back, fwd = extend_match(bits, a, b, covered + 1)
        if back + fwd >= min_samples:
            out[m, 0] = b - back
            out[m, 1] = b + fwd - 1
            out[m, 2] = a - back
            m += 1
            covered = b + fwd - 1
    return m


@kernel
def extend_match(bits, a, b, floor):
    """Around samples ``a < b`` known to start equal pairs: how far back
    (not before ``floor`` on the later side) and forward the two stretches
    stay equal bit for bit. Returns ``(back, forward)`` [samples]: the
    stretches are ``[a - back, a + forward)`` and ``[b - back, b + forward)``."""
    n = bits.shape[0]
    fwd = 0
    while b + fwd < n and bits[a + fwd] == bits[b + fwd]:
        fwd += 1
    back = 0
    while a - back - 1 >= 0 and b - back - 1 >= floor and bits[a - back - 1] == bits[b - back - 1]:
        back += 1
    return back, fwd
