"""Fatigue editing: windows kept, joins, the protected ranges, peak-valley.

References: rainflow counts by ASTM E1049-85 (this engine's counter, held to
the `rainflow` package in test_rainflow.py); Miner's sum on a Basquin curve
N = C / S^m. The "no cycle above the protected range is lost" property is
checked over seeded random walks cut hard (5-50 % of the windows kept).
"""

from __future__ import annotations

from collections import Counter

import numpy as np
import pytest

from service.engine.assessment import AssessmentOptions
from service.engine.editing import (damage_per_sample, damage_windows, edit_recording, joins,
                                    peak_valley, window_sums)
from service.engine.errors import InvalidParameter
from service.engine.rainflow import astm_e1049
from service.engine.sn_curve import basquin_range

M3 = (basquin_range(3.0, 1e12), AssessmentOptions())


def _big(table, limit) -> Counter:
    out = Counter()
    for r, k in zip(table.stress_range, table.count):
        if r >= limit:
            out[round(float(r), 9)] += float(k)
    return out


@pytest.mark.parametrize("seed", range(60))
def test_no_cycle_at_or_above_the_protected_range_is_removed(seed):
    rng = np.random.default_rng(seed)
    channels, n = int(rng.integers(1, 4)), int(rng.integers(50, 3000))
    x = np.cumsum(rng.normal(size=(channels, n)), axis=1) * rng.uniform(1, 10)
    limits = [float(np.quantile(astm_e1049(row).stress_range, rng.uniform(0.8, 1.0)))
              for row in x]
    e = edit_recording(x, [M3] * channels, keep=None, length=float(rng.uniform(0.05, 0.5)),
                       window=int(rng.integers(2, 50)), protect_range=limits)
    for row, cut, limit in zip(x, e.samples, limits):
        before, after = _big(astm_e1049(row), limit), _big(astm_e1049(cut), limit)
        for r, k in before.items():
            assert after[r] >= k, (r, k, after[r])


def test_the_damage_share_asked_is_kept_and_reported_from_a_recount():
    rng = np.random.default_rng(2)
    n = 40_000
    gain = np.repeat(rng.choice([0.0, 0.0, 0.0, 1.0], size=n // 500), 500)
    x = np.vstack([gain * np.cumsum(rng.normal(size=n)) % 50 * 3 + 0.1 * rng.normal(size=n)
                   for _ in range(2)])
    e = edit_recording(x, [M3, M3], keep=0.9, window=100)
    for row, cut, before, after in zip(x, e.samples, e.damage_before, e.damage_after):
        m3 = lambda t: float(np.sum(t.count * t.stress_range ** 3)) / 1e12  # noqa: E731
        assert before == pytest.approx(m3(astm_e1049(row)), rel=1e-12)
        assert after == pytest.approx(m3(astm_e1049(cut)), rel=1e-12)
    assert (e.damage_kept >= 0.9).all() and e.length_kept < 0.8
    assert np.array_equal(e.samples, x[:, e.kept_index])


def test_damage_windows_takes_the_fewest_windows_in_rank_order():
    wd = np.array([[5.0, 0.0, 3.0, 2.0],
                   [0.0, 1.0, 0.0, 9.0]])
    none = np.zeros(4, bool)
    # Shares: ch0 .5 0 .3 .2, ch1 0 .1 0 .9; ranked by the larger: 3, 0, 2, 1.
    assert damage_windows(wd, none, keep=0.8).tolist() == [True, False, True, True]
    assert damage_windows(wd, none, keep=None, length=0.25).tolist() == [False, False, False,
                                                                          True]
    protected = np.array([False, True, False, False])
    assert damage_windows(wd, protected, keep=0.5).tolist() == [True, True, False, True]
    with pytest.raises(InvalidParameter):
        damage_windows(wd, none, keep=0.9, length=0.5)
    with pytest.raises(InvalidParameter):
        damage_windows(wd, none, keep=1.5)


def test_joins_meet_where_every_channel_is_closest():
    n = 300
    x = np.vstack([np.sin(np.arange(n) / 7.0), np.cos(np.arange(n) / 11.0)])
    kept = np.array([True, False, False, True, True, False])  # windows of 50
    ranges = joins(x, kept, 50)
    assert len(ranges) == 2 and ranges[0][0] == 0 and ranges[1][1] == 250
    (a0, a1), (b0, b1) = ranges
    assert 50 <= a1 < b0 <= 150  # cuts moved only into the removed stretch
    # No pair of instants in the searched ranges meets better.
    scale = np.ptp(x, axis=1)
    best = np.max(np.abs(x[:, a1 - 1] - x[:, b0]) / scale)
    ends, begins = np.arange(49, 49 + 25), np.arange(150 - 25 + 1, 151)
    grid = np.max(np.abs(x[:, ends][:, :, None] - x[:, begins][:, None, :])
                  / scale[:, None, None], axis=0)
    assert best == pytest.approx(grid.min())


def test_damage_per_sample_and_window_sums():
    d = damage_per_sample(6, [0, 2], [3, 5], np.array([2.0, 4.0]))
    assert d.tolist() == [1.0, 0.0, 2.0, 1.0, 0.0, 2.0]
    assert window_sums(d, 4).tolist() == [4.0, 2.0]


def test_peak_valley_keeps_each_channels_cycles():
    rng = np.random.default_rng(4)
    x = np.vstack([np.cumsum(rng.normal(size=5000)) for _ in range(3)])
    idx = peak_valley(x, [0.0, 0.0, 0.0])
    assert idx.shape[0] < 5000
    for row in x:
        a, b = astm_e1049(row), astm_e1049(row[idx])
        assert sorted(zip(a.stress_range, a.count)) == sorted(zip(b.stress_range, b.count))
