"""Compiled kernels behind :mod:`service.engine.screening`.

Plain arrays in and out; the rules, their thresholds and the findings live in
``screening.py``. A clean signal costs :func:`suspect_steps` (a vectorised
count) and :func:`anchor_mask` (a vectorised hash test); :func:`signal_pass`
runs only when a step is suspect.
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


@kernel
def suspect_steps(x, step_limit):
    """How many steps exceed ``step_limit`` or are exactly zero: the only
    steps the rules of :func:`signal_pass` act on. A branch-free count (the
    compiler vectorises it), so a clean signal costs one streaming read."""
    c = 0
    for i in range(x.shape[0] - 1):
        d = x[i + 1] - x[i]
        c += (d > step_limit) | (d < -step_limit) | (d == 0.0)
    return c


#: Low bits of the anchor hash that must be zero: one sample in 64 anchors.
ANCHOR_BITS = np.uint64(63)
_S29, _S17, _S45 = np.uint64(29), np.uint64(17), np.uint64(45)
_FNV_OFFSET = np.uint64(0xCBF29CE484222325)
_FNV_PRIME = np.uint64(0x100000001B3)


@kernel
def anchor_mask(bits, mask):
    """Content-defined anchors for the repeated-block rule: ``mask[i]`` is
    true where an xor-shift hash of samples ``i`` and ``i + 1`` (their IEEE
    bit patterns ``bits``) has its low bits zero. The same content gives
    the same anchors wherever it lies, so a copy of a stretch has its
    anchors at the same places as the original (the idea of
    content-defined chunking: A. Muthitacharoen, B. Chen, D. Mazieres,
    "A low-bandwidth network file system," SOSP 2001)."""
    for i in range(bits.shape[0] - 1):
        b = bits[i]
        h = b ^ (b >> _S29) ^ (bits[i + 1] >> _S17) ^ (b >> _S45)
        mask[i] = (h & ANCHOR_BITS) == 0


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


@kernel
def mask_positions(words, out):
    """Positions of the true bytes of a boolean mask read as 64-bit words
    (``mask.view(np.uint64)``): a word of eight false bytes is skipped at
    once, and in the others each true byte is found from its lowest set bit
    (de Bruijn indexing) rather than by testing all eight. Returns how many
    were written, or -1 if ``out`` is too short."""
    m = 0
    cap = out.shape[0]
    one = np.uint64(1)
    for w in range(words.shape[0]):
        v = words[w]
        while v != 0:
            low = v & (~v + one)
            if m == cap:
                return -1
            out[m] = 8 * w + (_BIT_INDEX[(low * _DE_BRUIJN) >> _S58] >> 3)
            m += 1
            v ^= low
    return m


@kernel
def window_hashes(bits, anchors, window, out):
    """FNV-1a hash of the ``window`` samples from each anchor into ``out``;
    a window of one value throughout (a held run: its own rule) hashes to
    0 and is skipped by the caller."""
    for k in range(anchors.shape[0]):
        i = anchors[k]
        h = _FNV_OFFSET
        same = True
        for j in range(window):
            h = (h ^ bits[i + j]) * _FNV_PRIME
            same = same and bits[i + j] == bits[i]
        out[k] = np.uint64(0) if same else h


@kernel
def extend_match(bits, a, b, floor):
    """Around samples ``a < b`` known to start equal windows: how far back
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
