"""Fatigue editing: shorter drive signals that keep the damage.

A field recording is mostly stretches that do little damage on any channel.
:func:`damage_windows` ranks fixed windows of the recording by the largest
share of damage they carry on any channel and keeps the fewest that hold
the requested share on every channel (or fill a requested length);
:func:`joins` places each cut so that all channels meet at the closest
values the removed stretch offers; :func:`splice` cuts every channel at the
same instants (the phase between channels is kept). Cycles at or above a
protected range keep both their turning points, whatever they weigh.
:func:`peak_valley` keeps only the samples that are turning points (beyond a
gate) of some channel. The damage a result reports is always that of the
edited signal counted again, never an estimate.

Arrays are ``(channels, samples)``; stresses in MPa.

References
----------
.. [1] ASTM E1049-85 (Reapproved 2017), *Standard Practices for Cycle
   Counting in Fatigue Analysis*, sec. 5.4.4 (rainflow counting).
.. [2] M. A. Miner, "Cumulative damage in fatigue," *J. Appl. Mech.*,
   vol. 12, no. 3, pp. A159-A164, 1945.
.. [3] Peak-valley reduction with a hysteresis gate (range filter): common
   practice of rig drive-file preparation; see ASTM E1049-85 sec. 4 for peak
   and reversal definitions.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from .damage import assess
from .errors import InvalidParameter
from .rainflow import astm_e1049, turning_points

#: How far (samples) a cut may move into the removed stretch to find a
#: better join, at most.
JOIN_SEARCH = 64


def damage_per_sample(samples: int, start_index, end_index, per_cycle) -> np.ndarray:
    """Each cycle's damage split half to the sample of each of its turning
    points: where in time the damage is done. [-] per sample"""
    d = np.where(np.isfinite(per_cycle), per_cycle, 0.0)
    half = 0.5 * d
    return (np.bincount(np.asarray(start_index, np.int64), half, minlength=samples)
            + np.bincount(np.asarray(end_index, np.int64), half, minlength=samples))


def window_sums(per_sample: np.ndarray, window: int) -> np.ndarray:
    """Sums over consecutive windows of ``window`` samples (the last may be short)."""
    starts = np.arange(0, per_sample.shape[-1], window)
    return np.add.reduceat(per_sample, starts, axis=-1)


def protected_windows(samples: int, window: int, start_index, end_index, stress_range,
                      limit: float) -> np.ndarray:
    """Windows holding a turning point of a cycle whose range is at or above
    ``limit`` [MPa]: kept whatever their damage, so no such cycle is lost."""
    n_win = -(-samples // window)
    big = np.asarray(stress_range) >= limit
    out = np.zeros(n_win, bool)
    out[np.asarray(start_index)[big] // window] = True
    out[np.asarray(end_index)[big] // window] = True
    return out


def ranked_windows(window_damage: np.ndarray, protected: np.ndarray) -> np.ndarray:
    """Window order for keeping: protected windows first, then by the largest
    share of any channel's damage they carry (ties: earlier first)."""
    totals = window_damage.sum(axis=1, keepdims=True)
    shares = np.divide(window_damage, totals, out=np.zeros_like(window_damage),
                       where=totals > 0)
    score = shares.max(axis=0)
    score = np.where(protected, np.inf, score)
    return np.argsort(-score, kind="stable")


def damage_windows(window_damage: np.ndarray, protected: np.ndarray, *,
                   keep=0.95, length: float | None = None,
                   extra: int = 0) -> np.ndarray:
    """Which windows to keep (a boolean mask over the windows).

    Parameters
    ----------
    window_damage : ndarray (channels, windows)
        Damage done in each window on each channel. [-]
    protected : ndarray of bool (windows,)
        Windows that must stay.
    keep : float or sequence of float, optional
        Share of each channel's damage the windows kept must hold (one
        for all, or one per channel). [-]
    length : float, optional
        Share of the windows to keep instead (the most damaging first). [-]
    extra : int
        Windows to keep beyond the first set that meets ``keep`` (the
        caller's retry when the recount falls short). [-]

    Notes
    -----
    Windows are taken in the order of :func:`ranked_windows` until every
    channel's running share reaches ``keep``: the fewest windows in that
    order; a window that matters to one channel is kept for all (they are
    cut at the same instants).
    """
    if (keep is None) == (length is None):
        raise InvalidParameter("give keep (a share of damage) or length (a share of the "
                               "recording), one of them", field="keep")
    n_ch, n_win = window_damage.shape
    order = ranked_windows(window_damage, protected)
    if length is not None:
        if not 0.0 < length <= 1.0:
            raise InvalidParameter(f"length {length} must be in (0, 1]", field="length",
                                   value=length)
        k = max(int(np.ceil(length * n_win)), int(protected.sum()))
    else:
        shares_asked = _keep_per_channel(keep, n_ch)
        totals = window_damage.sum(axis=1, keepdims=True)
        shares = np.divide(window_damage[:, order], totals,
                           out=np.zeros((n_ch, n_win)), where=totals > 0)
        cum = np.cumsum(shares, axis=1)
        need = [int(np.searchsorted(c, k * (1 - 1e-12))) + 1 if t > 0 else 0
                for c, t, k in zip(cum, totals[:, 0], shares_asked)]
        k = max(need + [int(protected.sum()), 1])
    k = min(n_win, k + int(extra))
    kept = np.zeros(n_win, bool)
    kept[order[:k]] = True
    return kept


def _keep_per_channel(keep, channels: int) -> np.ndarray:
    """``keep`` as one share per channel, each in (0, 1]."""
    k = np.broadcast_to(np.asarray(keep, dtype=np.float64), (channels,)) \
        if np.ndim(keep) == 0 else np.asarray(keep, dtype=np.float64)
    if k.shape != (channels,) or not np.all((k > 0.0) & (k <= 1.0)):
        raise InvalidParameter(f"keep {keep!r} must be a share in (0, 1], one or one per "
                               "channel", field="keep")
    return k


def joins(x: np.ndarray, kept: np.ndarray, window: int,
          search: int = JOIN_SEARCH) -> list[tuple[int, int]]:
    """Sample ranges ``[start, stop)`` to keep, with each cut placed where
    every channel meets best.

    Each run of kept windows is a piece; across a removed stretch the end of
    one piece may move forward and the start of the next back (into the
    stretch, ``search`` samples at most, never overlapping) to the pair of
    instants at which the largest mismatch over channels, scaled by each
    channel's range, is smallest. A join then adds a step no larger than
    that mismatch.
    """
    n = x.shape[1]
    idx = np.flatnonzero(kept)
    if idx.size == 0:
        return []
    breaks = np.flatnonzero(np.diff(idx) > 1)
    firsts = np.concatenate([[idx[0]], idx[breaks + 1]])
    lasts = np.concatenate([idx[breaks], [idx[-1]]])
    pieces = [[int(f) * window, min(n, (int(l) + 1) * window)] for f, l in zip(firsts, lasts)]
    scale = np.ptp(x, axis=1)
    scale = np.where(scale > 0, scale, 1.0)[:, None, None]
    for a, b in zip(pieces[:-1], pieces[1:]):
        gap = b[0] - a[1]
        s = max(1, min(search, gap // 2))
        ends = np.arange(a[1] - 1, a[1] - 1 + s)          # last sample kept of a
        begins = np.arange(b[0] - s + 1, b[0] + 1)          # first sample kept of b
        mismatch = np.abs(x[:, ends][:, :, None] - x[:, begins][:, None, :]) / scale
        worst = mismatch.max(axis=0)
        i, j = np.unravel_index(int(np.argmin(worst)), worst.shape)
        a[1], b[0] = int(ends[i]) + 1, int(begins[j])
    return [(s0, s1) for s0, s1 in pieces]


def splice(x: np.ndarray, ranges: list[tuple[int, int]]) -> tuple[np.ndarray, np.ndarray]:
    """``(edited, kept_index)``: the kept ranges of every channel, joined,
    and the original sample index of each edited sample."""
    keep = np.concatenate([np.arange(s0, s1) for s0, s1 in ranges]) if ranges else \
        np.empty(0, np.int64)
    return x[:, keep], keep


def peak_valley(x: np.ndarray, gates) -> np.ndarray:
    """Original indices of the samples to keep: every sample that is a
    turning point (beyond its channel's gate [MPa]) of some channel, with the
    first and last sample. Each channel's own turning points are all kept,
    so its rainflow count is unchanged; the others keep their values at
    those instants (the phase between channels stays)."""
    n = x.shape[1]
    keep = np.zeros(n, bool)
    keep[[0, n - 1]] = True
    for row, g in zip(x, gates):
        idx, _ = turning_points(row, gate=float(g))
        keep[idx] = True
    return np.flatnonzero(keep)


@dataclass(frozen=True)
class Edited:
    """An edited recording and what it keeps.

    Attributes
    ----------
    samples : ndarray (channels, kept samples)
        The edited signal. [MPa]
    kept_index : ndarray of int64
        Original sample index of each edited sample. [-]
    damage_before, damage_after : ndarray (channels,)
        Miner damage of one pass of the original and of the edited signal,
        each counted at once. [-]
    largest_ranges_before, largest_ranges_after : list of ndarray
        Each channel's largest cycle ranges (up to ``top``), full and half
        cycles alike, before and after. [MPa]
    pieces : int
        Stretches joined. [-]
    window : int
        Window length used (0: no windows, a peak-valley reduction). [samples]
    samples_before : int
        Samples of the original. [-]
    """

    samples: np.ndarray
    kept_index: np.ndarray
    damage_before: np.ndarray
    damage_after: np.ndarray
    largest_ranges_before: list
    largest_ranges_after: list
    pieces: int
    window: int
    samples_before: int

    @property
    def damage_kept(self) -> np.ndarray:
        """Share of each channel's damage the edited signal does. [-]"""
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(self.damage_before > 0, self.damage_after / self.damage_before,
                            1.0)

    @property
    def length_kept(self) -> float:
        """Share of the samples kept. [-]"""
        return self.kept_index.shape[0] / max(1, self.samples_before)


def _count_and_damage(row, gate, curve, opts):
    table = astm_e1049(row, gate=gate)
    r = assess(table, curve, replace(opts, reserve_factor=False, top_cycles=0))
    return table, np.array(r.damage_per_cycle, copy=True), r.damage


def _largest(table, top: int) -> np.ndarray:
    rng = table.stress_range
    return np.sort(rng)[::-1][:top].copy()


def edit_recording(x: np.ndarray, models, *, keep=0.95,
                   length: float | None = None, window: int | None = None,
                   protect_range=None, gates=None, top: int = 5,
                   retries: int = 30) -> Edited:
    """Shorten a multi-channel recording keeping the damage of every channel.

    Parameters
    ----------
    x : ndarray (channels, samples)
        The recording. [MPa]
    models : sequence of (SNCurve, AssessmentOptions)
        Each channel's curve and options (damage of one pass, residue as
        half cycles).
    keep, length : float
        Share of each channel's damage to keep (one for all, or a sequence
        with one per channel), or share of the windows to keep (one of
        them). [-]
    window : int, optional
        Window length; default ``max(16, samples // 2000)``. [samples]
    protect_range : sequence of float, optional
        Per channel, the range from which a cycle keeps both its turning
        points. [MPa]
    gates : sequence of float, optional
        Per channel, the hysteresis gate of the counting. [MPa]
    top : int
        Largest ranges reported per channel.
    retries : int
        Times the kept set may grow when the recount of the joined signal
        falls short of ``keep`` (joins change the cycles that cross them).

    Returns
    -------
    Edited
    """
    x = np.ascontiguousarray(x, np.float64)
    if x.ndim != 2 or x.shape[1] < 2:
        raise InvalidParameter("a recording to edit needs channels of two samples or more",
                               field="samples")
    n_ch, n = x.shape
    gates = [0.0] * n_ch if gates is None else list(gates)
    window = int(window or max(16, n // 2000))
    if window < 2 or window > n:
        raise InvalidParameter(f"window {window} samples must be from 2 to the recording's "
                               f"{n}", field="window", value=window)
    tables, per_cycles, before = [], [], []
    for row, g, (curve, opts) in zip(x, gates, models):
        t, d, total = _count_and_damage(row, g, curve, opts)
        tables.append(t)
        per_cycles.append(d)
        before.append(total)
    n_win = -(-n // window)
    wd = np.vstack([window_sums(damage_per_sample(n, t.start_index, t.end_index, d), window)
                    for t, d in zip(tables, per_cycles)])
    protected = np.zeros(n_win, bool)
    if protect_range is not None:
        for t, limit in zip(tables, protect_range):
            if limit is not None:
                protected |= protected_windows(n, window, t.start_index, t.end_index,
                                               t.stress_range, float(limit))
    extra = 0
    step = max(1, n_win // 100)
    for _ in range(retries + 1):
        kept = damage_windows(wd, protected, keep=keep, length=length, extra=extra)
        ranges = joins(x, kept, window)
        edited, index = splice(x, ranges)
        after, after_tables = [], []
        for row, g, (curve, opts) in zip(edited, gates, models):
            t, _, total = _count_and_damage(row, g, curve, opts) if row.shape[0] > 1 else \
                (None, None, 0.0)
            after.append(total)
            after_tables.append(t)
        before_a, after_a = np.array(before), np.array(after)
        short = keep is not None and np.any(
            (before_a > 0) & (after_a < _keep_per_channel(keep, n_ch) * before_a * (1 - 1e-12)))
        if not short or kept.all():
            break
        extra += step
    out = Edited(edited, index, before_a, after_a,
                 [_largest(t, top) for t in tables],
                 [_largest(t, top) if t is not None else np.empty(0) for t in after_tables],
                 len(ranges), window, n)
    return out


def reduce_recording(x: np.ndarray, models, *, gates=None, top: int = 5) -> Edited:
    """:func:`peak_valley` of a recording, with the same report as
    :func:`edit_recording` (each channel counted once before and once
    after). Each channel's cycles are unchanged, so its damage too."""
    x = np.ascontiguousarray(x, np.float64)
    n_ch, n = x.shape
    gates = [0.0] * n_ch if gates is None else list(gates)
    index = peak_valley(x, gates)
    edited = x[:, index]
    before = [_count_and_damage(r, g, *m) for r, g, m in zip(x, gates, models)]
    after = [_count_and_damage(r, g, *m) for r, g, m in zip(edited, gates, models)]
    return Edited(edited, index, np.array([b[2] for b in before]),
                  np.array([a[2] for a in after]), [_largest(b[0], top) for b in before],
                  [_largest(a[0], top) for a in after], 1, 0, n)
