r"""Screening a gauge signal for the faults every strain-gauge engineer knows.

A spike from electrical interference is one giant false cycle that can
dominate the damage; a saturated amplifier clips the peaks that do the harm;
a gauge that debonds goes flat or holds one value; a bridge drifts with
temperature; a signal sampled too slowly misses its peaks. Each finding says
its ``kind``, the samples it covers and its size; the caller adds the share
of the damage carried by the cycles it touches (:func:`damage_shares`).

The rules and their default thresholds (each settable through
:class:`Thresholds`; the defaults are judgment, stated here and in every
finding's description):

``spike``
    A run of at most ``spike_samples`` samples that leaves the signal and
    comes back: the step in and the step out both exceed ``spike_sigma``
    robust standard deviations of the first differences (the median
    absolute difference over 0.6745, as in Hampel's identifier [1]_), in
    opposite directions, and the signal comes back to within a quarter of
    the step (or half the limit) of where it left.
``clipping``
    At least ``clip_runs`` separate runs of two or more samples sitting
    exactly at the channel's largest (or smallest) value: an amplifier or
    converter at its full scale writes one value again and again [2]_.
``held``
    A run of at least ``held_samples`` identical samples (``zeros`` when the
    value is exactly 0): a data drop-out or a logger holding its last value.
``flat``
    Such a run covering at least ``flat_fraction`` of the record (a gauge
    that has come off, or a dead channel); ``dead`` when the whole channel
    is one value.
``repeated``
    A stretch of at least ``repeat_samples`` samples equal, bit for bit, to
    an earlier stretch of the record: a logger that wrote a buffer twice. A
    measured signal carries noise in its last bits and never repeats itself
    exactly over hundreds of samples; a held value is the ``held`` rule's.
    Found from content-defined anchors (about one sample in 64), so a copy
    of L samples is missed only if it holds no anchor: with probability
    about exp(-L/64), 3e-4 at the default 512.
``drift``
    The least-squares straight line through the record rises (or falls) by
    more than ``drift_fraction`` of the signal's 1-99 % range from start to
    end: a zero that moved (temperature, a bridge that was not balanced)
    [2]_; a stationary load of many cycles fits a line of almost no slope.
``undersampled``
    Fewer than ``min_samples_per_reversal`` samples between reversals, as
    the ratio of the spread of the steps to the spread of the signal tells
    it (exact for a sine: :func:`_samples_per_reversal`): peaks between
    samples are missed, so ranges read too small.

References
----------
.. [1] R. K. Pearson, "Outliers in process modeling and identification,"
   *IEEE Trans. Control Syst. Technol.*, vol. 10, no. 1, pp. 55-63, 2002
   (the Hampel identifier, MAD scale). doi:10.1109/87.974338
.. [2] K. Hoffmann, *An Introduction to Measurements using Strain Gages*.
   Darmstadt, Germany: Hottinger Baldwin Messtechnik, 1989 (zero drift,
   amplifier range).
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field

import numpy as np

from ._screening_kernels import copies, signal_pass, survey
from .errors import InvalidParameter

#: Findings, in the order they are reported.
FINDING_KINDS = ("spike", "clipping", "held", "zeros", "flat", "dead", "repeated", "drift",
                 "undersampled")
#: What to do with findings: assess and report them, refuse the point, or
#: clean what can be cleaned (spikes, drift) and report both results.
SCREENING_POLICIES = ("report", "refuse", "clean", "off")
#: Most findings of one kind listed in full (the count is always given).
_MAX_LISTED = 20


@dataclass(frozen=True)
class Thresholds:
    """Thresholds of the screening rules (module notes)."""

    spike_sigma: float = 8.0
    spike_samples: int = 3
    clip_runs: int = 2
    held_samples: int = 50
    flat_fraction: float = 0.05
    drift_fraction: float = 0.1
    min_samples_per_reversal: float = 3.0
    repeat_samples: int = 512

    def __post_init__(self):
        for name, value in asdict(self).items():
            if not isinstance(value, (int, float)) or isinstance(value, bool) or not (
                    math.isfinite(value) and value > 0):
                raise InvalidParameter(f"screening threshold {name} {value!r} must be a "
                                       "positive number", field=name, value=value)
        if not self.flat_fraction < 1:
            raise InvalidParameter("flat_fraction must be below 1", field="flat_fraction")


_DEFAULT = Thresholds()


@dataclass
class Finding:
    """One fault found in a channel.

    ``first_sample`` and ``last_sample`` bound it (inclusive); ``count``
    how many such events the record has (a finding may stand for many
    spikes or runs, of which ``events`` lists the first ``_MAX_LISTED`` as
    ``[first, last]``); ``size`` its size in the signal's unit (a spike's
    height over its surroundings, a clipped value, a held value, a drift);
    ``damage_share`` the share of the point's damage in cycles that touch
    it (None until :func:`damage_shares`, or when not meaningful).
    """

    kind: str
    first_sample: int
    last_sample: int
    count: int
    size: float
    description: str
    events: list = field(default_factory=list)
    damage_share: float | None = None

    def as_dict(self) -> dict:
        return asdict(self)


def _spike_limit(x: np.ndarray, st: "_Stats", th: Thresholds) -> float:
    """The step beyond which a spike is suspected: ``spike_sigma`` robust
    standard deviations of the steps, or of one quantum where a quantised
    signal's steps have a zero MAD. [signal unit]"""
    scale = st.step_scale
    if scale == 0.0:
        steps = np.abs(np.diff(x[: min(x.shape[0], 200_000)]))
        steps = steps[steps > 0]
        scale = float(steps.min()) if steps.size else 0.0
    return th.spike_sigma * scale if scale > 0 else math.inf


def _scan(x, sv: "_Survey", step_limit, spike_samples, held_min):
    """``(spikes (k, 3): first, last, height; clip_top, clip_bottom (runs, 2);
    held (runs, 3): first, last, value; max; min)`` of ``x``; max and min
    are None when no step is suspect (beyond the limit or zero, as the
    pass ``sv`` over ``x`` tells: nothing there needs them)."""
    none3 = np.empty((0, 3))
    none2 = np.empty((0, 2), np.int64)
    if not (sv.largest_step > step_limit or sv.zero_steps > 0):
        return none3, none2, none2, none3, None, None
    ns, nr, hi, lo = signal_pass(x, step_limit, spike_samples, none3, none3, False)
    spikes, runs = none3, none3
    if ns or nr:
        spikes, runs = np.empty((ns, 3)), np.empty((nr, 3))
        signal_pass(x, step_limit, spike_samples, spikes, runs, True)
    value = runs[:, 2]
    length = runs[:, 1] - runs[:, 0] + 1
    at_top, at_bottom = (value == hi) & (hi > lo), (value == lo) & (hi > lo)
    top = runs[at_top, :2].astype(np.int64)
    bottom = runs[at_bottom, :2].astype(np.int64)
    held = runs[~at_top & ~at_bottom & (length >= held_min)]
    return spikes, top, bottom, held, hi, lo


#: Samples taken evenly over a record for the statistics of the whole-record
#: rules (the median of that many is within about 2 % of the whole's).
_SAMPLE = 10_000


@dataclass(frozen=True)
class _Stats:
    """Statistics of a record from ~:data:`_SAMPLE` samples spread evenly
    over it (taken in the one pass, :func:`survey`; shared by the rules)."""

    step_scale: float     # robust sd of the first differences (MAD / 0.6745)
    trend_change: float   # rise of the least-squares line from start to end
    p1: float             # 1st and 99th percentiles
    p99: float
    sd_signal: float      # standard deviations of the signal and of its steps
    sd_steps: float


def _stride(n: int) -> int:
    """Every how many samples the statistics take one. [samples]"""
    return max(1, n // _SAMPLE)


def _stats(x: np.ndarray) -> _Stats:
    """:class:`_Stats` of a record (from the one pass, :func:`_survey`)."""
    return _survey(x, False).stats


@dataclass(frozen=True)
class _Survey:
    """What one streaming pass over a record finds (:func:`survey`)."""

    largest_step: float   # the largest step in magnitude
    zero_steps: int       # steps of exactly zero
    stats: _Stats         # whole-record statistics
    anchors: np.ndarray | None  # anchors of the repeated-block rule and their
    keys: np.ndarray | None     # keys, None when it cannot sample the signal


def _survey(x: np.ndarray, anchoring: bool) -> _Survey:
    """One pass over ``x`` (:func:`survey`): its largest and zero steps, its
    statistics and, with ``anchoring``, the anchors and keys of the
    repeated-block rule."""
    n = x.shape[0]
    stride = _stride(n)
    ys, ds = np.empty((n - 1) // stride + 1), np.empty((n - 1) // stride)
    cap = n // 8 if anchoring else 0
    anchors, keys = np.empty(cap, np.int64), np.empty(cap, np.uint64)
    k = ys.shape[0]
    largest, zeros, found, stats = survey(
        x, x.view(np.uint64), stride, anchoring, ys, ds, int(round(0.01 * (k - 1))),
        int(round(0.99 * (k - 1))), anchors, keys)
    return _Survey(float(largest), int(zeros), _Stats(*stats),
                   anchors[:found] if found >= 0 else None,
                   keys[:found] if found >= 0 else None)


def _repeats(x: np.ndarray, min_samples: int, anchors, keys) -> np.ndarray:
    """Stretches of at least ``min_samples`` samples that repeat an earlier
    stretch bit for bit: rows ``(first, last, source_first)`` of each copy,
    in order. Anchors (:func:`survey`) with equal keys are candidate pairs,
    each anchor against the one before it with its key (the later is the
    copy); each pair is checked and grown sample by sample (:func:`copies`),
    so equal keys by chance never make a finding."""
    none = np.empty((0, 3), np.int64)
    if anchors is None or anchors.shape[0] < 2:
        return none
    srt = np.sort(keys)
    if not np.any(srt[1:] == srt[:-1]):
        return none  # no two anchors alike: the common case, no pairing needed
    order = np.argsort(keys, kind="stable")  # equal keys in sample order
    key, pos = keys[order], anchors[order]
    same = np.flatnonzero(key[1:] == key[:-1])
    later, earlier = pos[same + 1], pos[same]
    by_later = np.lexsort((earlier, later))
    out = np.empty((same.shape[0], 3), np.int64)
    m = copies(x.view(np.uint64), later[by_later], earlier[by_later], int(min_samples), out)
    return out[:m]


def _samples_per_reversal(st: _Stats) -> float:
    r"""Samples between reversals of the sine that has this signal's ratio
    of step spread to spread, :math:`r = \sigma_{\Delta x}/\sigma_x`.

    For :math:`x = A\sin(2\pi f n / f_s)` the steps have the spread
    :math:`2\sin(\pi f/f_s)\,\sigma_x`, so :math:`f_s/(2f) =
    \pi / (2\arcsin(r/2))` (closed form); white noise gives 2. [samples]
    """
    if st.sd_signal == 0.0 or st.sd_steps == 0.0:
        return math.inf
    return math.pi / (2.0 * math.asin(min(st.sd_steps / st.sd_signal / 2.0, 1.0)))


def _trend(x: np.ndarray) -> tuple[float, float, float]:
    """``(change, p1, p99)``: the rise from start to end of the least-squares
    line through the record, and its 1st and 99th percentiles. A stationary
    load of many cycles fits a line of almost no slope; a drifting zero
    does not."""
    st = _stats(x)
    return st.trend_change, st.p1, st.p99


def screen(samples, sample_rate_hz: float | None = None,
           thresholds: Thresholds | None = None) -> list[Finding]:
    """
    Faults found in one channel's samples (module notes for the rules).

    Parameters
    ----------
    samples : array-like
        The channel, in time order (finite; checked by the reader). [any unit]
    sample_rate_hz : float, optional
        For descriptions in seconds. [Hz]
    thresholds : Thresholds, optional

    Returns
    -------
    list of Finding
        In the order of :data:`FINDING_KINDS`; empty for a clean signal.
    """
    th = thresholds or _DEFAULT
    x = np.ascontiguousarray(samples, dtype=np.float64)
    n = x.shape[0]
    out: list[Finding] = []
    if n < 3:
        return out
    min_repeat = int(th.repeat_samples)
    sv = _survey(x, n >= 2 * min_repeat)
    st = sv.stats
    spikes, top, bottom, held, hi, lo = _scan(
        x, sv, _spike_limit(x, st, th), int(th.spike_samples), int(th.held_samples))
    if hi is not None and hi == lo:
        return [Finding("dead", 0, n - 1, 1, 0.0, f"every sample is {hi:g}: the channel is "
                        "dead or not connected")]

    def when(i):
        return f" (at {i / sample_rate_hz:.4g} s)" if sample_rate_hz else ""

    if spikes.shape[0]:
        first = int(spikes[0, 0])
        k = int(np.argmax(spikes[:, 2]))
        out.append(Finding(
            "spike", first, int(spikes[-1, 1]), int(spikes.shape[0]), float(spikes[k, 2]),
            f"{spikes.shape[0]} spike(s) of at most {int(th.spike_samples)} samples whose "
            f"steps exceed {th.spike_sigma:g} robust standard deviations of the signal's "
            f"steps; the largest {spikes[k, 2]:.4g} high at sample {int(spikes[k, 0])}"
            f"{when(int(spikes[k, 0]))}",
            [[int(a), int(b)] for a, b in spikes[:_MAX_LISTED, :2]]))
    for runs, value, where in ((top, hi, "largest"), (bottom, lo, "smallest")):
        if runs.shape[0] >= th.clip_runs:
            out.append(Finding(
                "clipping", int(runs[0, 0]), int(runs[-1, 1]), int(runs.shape[0]), value,
                f"{runs.shape[0]} runs of samples held exactly at the {where} value {value:.6g}"
                f" ({int((runs[:, 1] - runs[:, 0] + 1).sum())} samples): the amplifier or "
                "converter was at full scale; the peaks there are cut off",
                [[int(a), int(b)] for a, b in runs[:_MAX_LISTED]]))
    if held.shape[0]:
        lengths = held[:, 1] - held[:, 0] + 1
        zero = held[:, 2] == 0.0
        longest = int(np.argmax(lengths))
        if lengths[longest] >= th.flat_fraction * n:
            a, b = int(held[longest, 0]), int(held[longest, 1])
            out.append(Finding(
                "flat", a, b, 1, float(held[longest, 2]),
                f"the signal holds {held[longest, 2]:.6g} for {int(lengths[longest])} samples "
                f"({lengths[longest] / n:.0%} of the record){when(a)}: a gauge that came off or "
                "a dead channel", [[a, b]]))
        for kind, mask in (("zeros", zero), ("held", ~zero)):
            if mask.any():
                rows = held[mask]
                out.append(Finding(
                    kind, int(rows[0, 0]), int(rows[-1, 1]), int(rows.shape[0]),
                    float(rows[0, 2]),
                    f"{rows.shape[0]} run(s) of at least {int(th.held_samples)} identical samples"
                    + (" of exactly 0" if kind == "zeros" else "")
                    + ": a drop-out or a logger holding its last value",
                    [[int(a), int(b)] for a, b, _ in rows[:_MAX_LISTED]]))
    rep = _repeats(x, min_repeat, sv.anchors, sv.keys)
    if rep.shape[0]:
        length = rep[:, 1] - rep[:, 0] + 1
        k = int(np.argmax(length))
        out.append(Finding(
            "repeated", int(rep[0, 0]), int(rep[-1, 1]), int(rep.shape[0]), float(length[k]),
            f"{rep.shape[0]} stretch(es) of at least {int(th.repeat_samples)} samples equal, "
            f"bit for bit, to an earlier stretch; the longest, {int(length[k])} samples from "
            f"sample {int(rep[k, 0])}{when(int(rep[k, 0]))}, repeats samples from "
            f"{int(rep[k, 2])}: a logger that wrote a buffer twice (a measured signal never "
            "repeats itself exactly); its cycles are counted twice",
            [[int(a), int(b)] for a, b, _ in rep[:_MAX_LISTED]]))
    if n >= 100:
        change, spread = st.trend_change, st.p99 - st.p1
        if spread > 0 and abs(change) > th.drift_fraction * spread:
            out.append(Finding(
                "drift", 0, n - 1, 1, change,
                f"the straight line fitted through the record rises {change:.4g} from start to "
                f"end ({abs(change) / spread:.0%} of the 1-99 % range): the zero moved "
                "(temperature, an unbalanced bridge) or the load's mean changed"))
    per = _samples_per_reversal(st)
    if per < th.min_samples_per_reversal:
        out.append(Finding(
            "undersampled", 0, n - 1, 1, per,
            f"about {per:.2g} samples between reversals (fewer than "
            f"{th.min_samples_per_reversal:g}): peaks between samples are missed and ranges "
            "read too small; sample faster or filter before sampling"))
    order = {k: i for i, k in enumerate(FINDING_KINDS)}
    return sorted(out, key=lambda f: order[f.kind])


def damage_shares(findings: list[Finding], start_index, end_index, damage_per_cycle) -> None:
    """Set each finding's ``damage_share``: the share of the damage in
    cycles with a turning point inside one of its events (spikes, clipping,
    held runs); None for whole-record findings (drift, undersampled, dead).
    """
    d = np.asarray(damage_per_cycle)
    total = float(np.sum(d[np.isfinite(d)]))
    s = np.asarray(start_index)
    e = np.asarray(end_index)
    for f in findings:
        if f.kind in ("drift", "undersampled", "dead") or not total > 0:
            continue
        events = f.events or [[f.first_sample, f.last_sample]]
        hit = np.zeros(s.shape[0], bool)
        for a, b in events:
            hit |= ((s >= a) & (s <= b)) | ((e >= a) & (e <= b))
        if len(events) < f.count:
            # Only the first events are listed: count the rest by their span.
            hit |= ((s >= events[-1][1]) & (s <= f.last_sample)) | (
                (e >= events[-1][1]) & (e <= f.last_sample))
        f.damage_share = float(np.sum(np.where(np.isfinite(d[hit]), d[hit], 0.0))) / total


def clean(samples, findings: list[Finding],
          thresholds: Thresholds | None = None) -> tuple[np.ndarray, list[str]]:
    """The signal with what can be cleaned cleaned, and what was done.

    Spikes are replaced by a straight line between the samples either side
    (linear interpolation); a drift is removed by subtracting the straight
    line through the start and end medians. Clipping, held runs and
    undersampling cannot be cleaned (the lost peaks are not in the data):
    they stay, and the findings still say so.
    """
    x = np.array(samples, dtype=np.float64)
    done = []
    n = x.shape[0]
    for f in findings:
        if f.kind == "spike":
            events = f.events if len(f.events) == f.count else None
            if events is None:
                # More spikes than listed: find them all again on this signal.
                th = thresholds or _DEFAULT
                sv = _survey(x, False)
                spikes = _scan(x, sv, _spike_limit(x, sv.stats, th), int(th.spike_samples),
                               int(th.held_samples))[0]
                events = [[int(a), int(b)] for a, b in spikes[:, :2]]
            for a, b in events:
                left, right = max(a - 1, 0), min(b + 1, n - 1)
                x[a:b + 1] = np.interp(np.arange(a, b + 1), [left, right],
                                       [x[left], x[right]])
            done.append(f"{len(events)} spike(s) replaced by linear interpolation")
        elif f.kind == "drift":
            change = _trend(x)[0]
            x -= change / (n - 1) * (np.arange(n) - (n - 1) / 2.0)
            done.append(f"drift of {change:.4g} removed (the fitted straight line, its mean "
                        "kept)")
    return x, done


def warm_up() -> None:
    """Compile (or load from cache) every screening kernel: a signal with a
    spike, a clipped top, a held run and a repeated block, so each rule
    runs its compiled pass."""
    rng = np.random.default_rng(0)
    x = np.sin(np.arange(4000) / 7.0) + 0.01 * rng.standard_normal(4000)
    x[500] = 40.0
    x[900:960] = 0.5
    x = np.minimum(x, 0.95)
    x[3000:3700] = x[1200:1900]
    screen(x, 100.0)
