"""Duty cycles: events combined into one counting of the design life.

The reference is the design life built sample by sample and counted at once:
by this engine's ASTM E1049-85 counter and by the `rainflow` package (an
independent implementation of the same standard), and Miner's sum on the
result. EN 1993-1-9:2005 curve 71 (knee at 5e6, cut-off at 1e8) is the curve
with a cut-off.
"""

from __future__ import annotations

import numpy as np
import pytest
import rainflow as reference

from service.engine.assessment import AssessmentOptions
from service.engine.damage import assess
from service.engine.duty_cycle import combine, event_shares, pass_weights
from service.engine.errors import InvalidParameter
from service.engine.rainflow import astm_e1049
from service.engine.sn_catalogue import catalogue_curve

EN71 = catalogue_curve("EN1993-1-9:71")
PLAIN = AssessmentOptions(reserve_factor=False, top_cycles=0)


def _events(rng, k):
    return [np.cumsum(rng.normal(size=int(rng.integers(1, 40)))) * rng.uniform(5, 40)
            + rng.normal() * 60 for _ in range(k)]


def _stream(events, repeats, n):
    one = np.concatenate([np.tile(e, r) for e, r in zip(events, repeats)])
    return one, np.tile(one, n)


def _m3(table) -> float:
    return float(np.sum(table.count * table.stress_range ** 3))


@pytest.mark.parametrize("seed", range(40))
def test_the_design_life_is_the_concatenated_history_counted_at_once(seed):
    # ASTM E1049-85 sec. 5.4.4 on the stream built sample by sample: the same
    # cycles (as Miner's sums on two curves and as total counts), gated or not.
    rng = np.random.default_rng(seed)
    events = _events(rng, int(rng.integers(1, 4)))
    repeats = [int(rng.integers(1, 7)) for _ in events]
    n = int(rng.integers(1, 5))
    gate = float(rng.choice([0.0, 3.0]))
    one, whole = _stream(events, repeats, n)
    if whole.size < 2:
        return
    c = combine(list(zip(events, repeats)), n, gate=gate)
    ref = astm_e1049(whole, gate=gate)
    assert c.design.total_count == pytest.approx(ref.total_count, rel=1e-12)
    assert _m3(c.design) == pytest.approx(_m3(ref), rel=1e-12)
    assert assess(c.design, EN71, PLAIN).damage == pytest.approx(
        assess(ref, EN71, PLAIN).damage, rel=1e-12, abs=1e-300)
    # A duty cycle in service: the settled repetition, as a repeating block.
    rep = astm_e1049(one, gate=gate, residue="repeating_block") if one.size > 1 else None
    if rep is not None:
        assert _m3(c.per_duty_cycle) == pytest.approx(_m3(rep), rel=1e-12, abs=1e-9)


@pytest.mark.parametrize("seed", range(10))
def test_against_the_rainflow_package(seed):
    # The `rainflow` package (ASTM E1049-85, residue as half cycles) on the
    # literal stream, ungated: the same (range, count) sums.
    rng = np.random.default_rng(100 + seed)
    events = _events(rng, 3)
    repeats = [int(rng.integers(1, 5)) for _ in events]
    _, whole = _stream(events, repeats, 2)
    c = combine(list(zip(events, repeats)), 2)
    ref = reference.count_cycles(list(whole))
    assert sum(n for _, n in ref) == pytest.approx(c.design.total_count, rel=1e-12)
    assert sum(n * r ** 3 for r, n in ref) == pytest.approx(_m3(c.design), rel=1e-12)


def test_cycles_between_events_are_not_lost_under_a_cut_off():
    # Two events whose own cycles are all below the cut-off of curve 71
    # (28.7 MPa): alone, no damage; one after another, their different means
    # form a 170 MPa cycle per duty cycle that counting each event apart loses.
    up = np.tile([90.0, 110.0], 50)      # 20 MPa ranges about +100
    down = np.tile([-70.0, -50.0], 50)   # 20 MPa ranges about -60
    alone = [assess(astm_e1049(e, residue="repeating_block"), EN71, PLAIN).damage
             for e in (up, down)]
    assert alone == [0.0, 0.0]
    c = combine([(up, 10), (down, 10)], 1000)
    # One cycle of 180 MPa (110 to -70) a duty cycle in service, on the m = 3
    # line: 1 / (2e6 (71/180)^3) (EN 1993-1-9:2005 eq. (7.1)); over the design
    # life 999 such cycles plus the half cycles of the first rise and the end.
    one = 1 / (2e6 * (71.0 / 180.0) ** 3)
    assert assess(c.per_duty_cycle, EN71, PLAIN).damage == pytest.approx(one, rel=1e-12)
    d = assess(c.design, EN71, PLAIN).damage
    assert 999 * one < d < 1000 * one


def test_pass_weights_are_exact_at_whole_numbers_and_continuous():
    assert pass_weights(1) == (1.0, 0.0, 0.0)
    assert pass_weights(2) == (1.0, 1.0, 0.0)
    assert pass_weights(7) == (1.0, 1.0, 5.0)
    assert sum(pass_weights(0.25)) == pytest.approx(0.25)
    assert sum(pass_weights(2.5)) == pytest.approx(2.5)
    for bad in (0, -1, float("nan"), float("inf")):
        with pytest.raises(InvalidParameter):
            pass_weights(bad)


def test_fractional_repeats_scale_the_event_between_whole_numbers():
    rng = np.random.default_rng(7)
    a, b = _events(rng, 2)
    d = [assess(combine([(a, r), (b, 3)], 1).design, EN71, PLAIN).damage
         for r in (2, 2.5, 3)]
    assert d[0] <= d[1] <= d[2]
    assert d[1] == pytest.approx(0.5 * (d[0] + d[2]), rel=1e-9)


def test_event_shares_split_a_cycle_between_its_two_events():
    per_cycle = np.array([1.0, 2.0, 1.0])
    start = np.array([0, 0, 1])
    end = np.array([0, 1, 1])
    s = event_shares(per_cycle, start, end, 2)
    assert s.tolist() == pytest.approx([2.0 / 4, 2.0 / 4])
    assert event_shares(np.zeros(3), start, end, 2).tolist() == [0.0, 0.0]


def test_event_shares_of_a_combined_design_add_up():
    rng = np.random.default_rng(3)
    events = _events(rng, 3)
    c = combine([(e, 4) for e in events], 10)
    r = assess(c.design, EN71, PLAIN)
    s = event_shares(r.damage_per_cycle, c.design_start_event, c.design_end_event, 3)
    assert s.sum() == pytest.approx(1.0) and (s >= 0).all()
    assert c.design_start_event.max() < 3 and c.design_end_event.max() < 3


def test_a_duty_cycle_needs_events():
    with pytest.raises(InvalidParameter):
        combine([], 1)
    with pytest.raises(InvalidParameter):
        combine([(np.array([0.0, 1.0]), 1)], 0)
