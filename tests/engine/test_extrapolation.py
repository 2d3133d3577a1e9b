"""Rainflow matrices extrapolated to longer usage (kernel density after
Dressler et al., SAE 960569, 1996; Abramson's square-root law for the local
widths).

The reference is the longer history itself: a seeded stationary Gaussian
process (narrow and wide band), its first tenth extrapolated tenfold against
counting all of it (ASTM E1049-85), compared by Miner's sum on Basquin
curves of slope 3 and 5. The count beyond the recorded maximum is held to
order statistics: for independent cycles the expected number of 10 n new
cycles above the largest of n is 10 n / (n + 1), about 9 (common practice;
rainflow cycles of a correlated process are not independent, so only the
order of magnitude is asserted).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.signal import lfilter

from service.engine.assessment import AssessmentOptions
from service.engine.damage import assess
from service.engine.errors import InvalidParameter
from service.engine.extrapolation import extrapolate_matrix
from service.engine.rainflow import astm_e1049
from service.engine.sn_curve import basquin_range

PLAIN = AssessmentOptions(reserve_factor=False, top_cycles=0)
M3, M5 = basquin_range(3.0, 1e12), basquin_range(5.0, 1e15)


@pytest.fixture(scope="module")
def processes():
    out = []
    for seed, a in ((20, [1, -1.2, 0.5]), (21, [1, -0.3, 0.1]), (22, [1, -1.5, 0.8]),
                    (23, [1, -0.6, 0.2])):
        x = lfilter([1.0], a, np.random.default_rng(seed).normal(size=1_000_000)) * 20 + 30
        out.append((astm_e1049(x[:100_000]), astm_e1049(x)))
    return out


def test_tenfold_extrapolation_against_counting_the_longer_history(processes):
    predicted_above, counted_above = [], []
    for short, full in processes:
        e = extrapolate_matrix(short, 10.0)
        # Total cycles: the factor times the recorded count (the mass beyond
        # the upper range edge is nil for a Gaussian process).
        assert e.counts.sum() == pytest.approx(10 * short.total_count, rel=1e-6)
        assert e.counts.sum() == pytest.approx(full.total_count, rel=0.01)
        for curve, high in ((M3, 1.05), (M5, 1.10)):
            ratio = assess(e.table(), curve, PLAIN).damage / assess(full, curve, PLAIN).damage
            assert 0.98 <= ratio <= high, (curve.slopes, ratio)
        # Beyond the recorded maximum: cycles are expected (plain scaling
        # has none), and the longer history has them too.
        beyond = e.range_edges[:-1] > e.observed_max_range
        assert e.scaled[beyond].sum() == 0 and e.counts[beyond].sum() > 0
        counted = float(full.count[full.stress_range > e.observed_max_range].sum())
        assert counted > 0  # the longer history does exceed the short one's maximum
        predicted_above.append(e.expected_above_observed)
        counted_above.append(counted)
    # A few cycles each (1 to 7 counted, 2.6 to 4.2 expected) are too few
    # to compare one by one; over the four processes together the expected
    # count beyond the recorded maxima matches the longer histories' within
    # half (measured: 13.9 expected, 13 counted; independent cycles would
    # give about 4 x 9).
    assert sum(predicted_above) == pytest.approx(sum(counted_above), rel=0.5)


def test_the_scaled_matrix_is_the_recorded_one_times_the_factor(processes):
    short, _ = processes[0]
    e = extrapolate_matrix(short, 4.0, range_bins=32, mean_bins=16)
    assert e.counts.shape == e.scaled.shape == (32, 16)
    assert e.scaled.sum() == pytest.approx(4.0 * short.total_count)
    # Binning moves each cycle to its bin centre: within the bins' width.
    d_scaled = assess(e.table("scaled"), M3, PLAIN).damage
    d_exact = 4.0 * assess(short, M3, PLAIN).damage
    assert d_scaled == pytest.approx(d_exact, rel=0.05)


def test_factor_one_smooths_but_keeps_the_count(processes):
    short, _ = processes[1]
    e = extrapolate_matrix(short, 1.0)
    assert e.counts.sum() == pytest.approx(short.total_count, rel=1e-6)


def test_bad_input():
    t = astm_e1049(np.array([0.0, 1.0, -1.0, 2.0]))
    with pytest.raises(InvalidParameter):
        extrapolate_matrix(t, 0.5)
    with pytest.raises(InvalidParameter):
        extrapolate_matrix(astm_e1049(np.zeros(5)), 10.0)
