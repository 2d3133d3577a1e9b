"""Hostile numbers at the engine's entry points: a clear error or a correct
result, never a crash, a hang or a silent NaN (issue rule)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from service.engine import EngineError, astm_e1049
from service.engine.damage import AssessmentOptions, assess_history, assess_many
from service.engine.mean_stress import MEAN_STRESS_METHODS
from service.engine.sn_catalogue import catalogue_curve

HOSTILE = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from([5e-324, -5e-324, 2.2e-308, 1e300, -1e300, 1.7976931348623157e308, 0.0,
                     -0.0]),
    st.floats(-1e6, 1e6))


def _no_nan(r):
    for v in (r.damage, r.life_repeats, r.life_cycles, r.equivalent_range, r.max_range,
              r.cycles_counted):
        assert not (isinstance(v, float) and math.isnan(v)), r
    assert r.reserve_factor is None or not math.isnan(r.reserve_factor)
    assert not np.isnan(r.damage_per_cycle).any()


@settings(max_examples=300)
@given(st.lists(HOSTILE, min_size=0, max_size=60),
       st.sampled_from(sorted(MEAN_STRESS_METHODS)))
def test_assessment_of_hostile_histories(values, method):
    opts = AssessmentOptions(mean_stress_method=method, ultimate_strength=500.0,
                             yield_strength=400.0, fatigue_strength_coefficient=900.0,
                             walker_exponent=0.5,
                             haigh_diagram=((-200.0, 220.0), (0.0, 200.0), (450.0, 0.0)))
    try:
        r = assess_history(values, catalogue_curve("EN1993-1-9:71"), opts)
    except EngineError as exc:
        assert exc.message  # a clear, typed error
        return
    _no_nan(r)
    x = np.asarray(values, dtype=float)
    with np.errstate(over="ignore"):
        span = float(x.max() - x.min())
    if math.isfinite(span):
        # The largest rainflow range is max - min (ASTM E1049-85 counting,
        # common practice as an invariant).
        assert r.max_range == pytest.approx(span, rel=1e-12)


@settings(max_examples=100)
@given(st.lists(HOSTILE, min_size=2, max_size=40))
def test_counting_hostile_values(values):
    try:
        t = astm_e1049(values)
    except EngineError:
        return
    assert np.isfinite(t.stress_from).all() and np.isfinite(t.stress_to).all()
    # Counted cycles total (reversals - 1) / 2 (common practice; ASTM E1049-85
    # counts every range between turning points once, halves included).
    assert t.total_count == (len(_turning(values)) - 1) / 2


def _turning(values):
    # Turning points by the signs of the differences (a product of two tiny
    # differences would underflow to zero and hide a reversal).
    x = [v for i, v in enumerate(values) if i == 0 or v != values[i - 1]]
    sign = [math.copysign(1.0, x[i + 1] - x[i]) for i in range(len(x) - 1)]
    return [v for i, v in enumerate(x) if i in (0, len(x) - 1) or sign[i - 1] != sign[i]]


def test_huge_magnitudes_are_overloads_or_finite_damage_not_nan():
    # 1e300 MPa cycles: far beyond any strength, but with no strength given
    # the power law overflows to inf damage: flagged or infinite, never NaN.
    x = np.array([0.0, 1e300, -1e300, 1e300, 0.0])
    r = assess_history(x, catalogue_curve("EN1993-1-9:71"))
    _no_nan(r)
    assert r.damage == math.inf or r.damage > 1e100


def test_many_points_with_subnormal_and_constant_columns():
    data = np.zeros((1000, 4))
    data[:, 1] = 5e-324 * np.sign(np.sin(np.arange(1000)))
    data[:, 2] = np.random.default_rng(0).standard_normal(1000) * 1e-300
    data[:, 3] = np.random.default_rng(1).standard_normal(1000) * 50
    out = assess_many(data, catalogue_curve("EN1993-1-9:71"))
    for r in out.values():
        _no_nan(r)
    assert out["0"].flags == ("no_cycles",) and out["1"].damage == 0.0
