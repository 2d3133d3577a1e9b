"""Rainflow counting: published example, reference library, invariants, bad input."""

import contextlib
import math

import numpy as np
import pytest
import rainflow as reference
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from service.engine import (IncompatibleState, InvalidLoadHistory, InvalidParameter,
                            UnknownMethod, astm_e1049, close_residue, count_block,
                            turning_points)
from service.engine.rainflow import CountingState

ASTM_HISTORY = [-2, 1, -3, 5, -1, 3, -4, 4, -2]

# Histories of small integers: exact arithmetic, many ties and plateaus.
int_histories = st.lists(st.integers(-20, 20), min_size=2, max_size=80)
# Real-valued histories of moderate magnitude (the reference multiplies two
# differences, which underflows for subnormal steps: keep away from that).
float_histories = st.lists(
    st.floats(-1e4, 1e4, allow_nan=False, allow_infinity=False).map(lambda v: round(v, 3)),
    min_size=2, max_size=120)


def rows(table):
    return sorted(zip(table.stress_range.tolist(), table.stress_mean.tolist(),
                      table.count.tolist(), table.start_index.tolist(),
                      table.end_index.tolist()))


def reference_rows(x):
    # The reference reports a constant history as one half cycle of zero
    # range; this engine reports no cycle (documented). Drop those rows.
    # It also drops the last point of a two-sample history, so those are
    # compared against the standard directly (test_two_samples_...).
    assert len(x) >= 3
    return sorted((r, m, c, i, j) for r, m, c, i, j in reference.extract_cycles(list(x))
                  if r > 0)


# ---------------------------------------------------------------- published


def test_astm_e1049_rainflow_example():
    # Source: ASTM E1049-85 (Reapproved 2017), sec. 5.4.4, rainflow counting
    # example (Fig. 6 and its table): ranges 3 (0.5), 4 (1.5), 6 (0.5),
    # 8 (1.0), 9 (0.5).
    table = astm_e1049(ASTM_HISTORY)
    assert table.range_counts() == {3: 0.5, 4: 1.5, 6: 0.5, 8: 1.0, 9: 0.5}
    assert table.total_count == 4.0  # (9 points - 1) / 2


def test_astm_e1049_rainflow_example_cycle_positions():
    # Regression pin, worked by hand from the same history: the full cycle
    # -1 -> 3 runs from sample 4 to sample 5; the 8-unit cycles are -3 -> 5
    # (samples 2, 3) and -4 -> 4 (samples 6, 7).
    df = astm_e1049(ASTM_HISTORY).to_frame()
    full = df[df["count"] == 1.0]
    assert full[["start_index", "end_index", "stress_range", "stress_mean"]].values.tolist() == [
        [4, 5, 4.0, 1.0]]
    eights = df[df["stress_range"] == 8.0][["start_index", "end_index"]].values.tolist()
    assert sorted(eights) == [[2, 3], [6, 7]]


def test_astm_e1049_simplified_repeating_history():
    # Source: ASTM E1049-85, sec. 5.4.4.1, simplified rainflow counting for a
    # repeating history, same example history: ranges 3, 4, 7 and 9, one full
    # cycle each (from memory; also worked by hand: the history restarted at
    # its largest point, 5, is 5 -1 3 -4 4 -2 1 -3 5).
    table = astm_e1049(ASTM_HISTORY, residue="repeating_block")
    assert table.range_counts() == {3: 1.0, 4: 1.0, 7: 1.0, 9: 1.0}
    assert set(table.count.tolist()) == {1.0}


# ---------------------------------------------------------------- reference library


@given(int_histories.filter(lambda x: len(x) >= 3))
def test_matches_rainflow_package_on_integer_histories(x):
    # Reference: the `rainflow` package (ASTM E1049-85 sec. 5.4.4), including
    # the sample indices of each cycle: both report a plateau at its last sample.
    assert rows(astm_e1049(x)) == reference_rows(x)


@given(float_histories.filter(lambda x: len(x) >= 3))
def test_matches_rainflow_package_on_real_histories(x):
    assert rows(astm_e1049(x)) == reference_rows(x)


def test_matches_rainflow_package_on_long_random_signal():
    x = np.random.default_rng(7).standard_normal(20_000).cumsum()
    assert rows(astm_e1049(x)) == reference_rows(x)


def test_two_samples_are_one_half_cycle():
    # Source: ASTM E1049-85 sec. 5.4.4: the first and last points bound the
    # residue, which is counted as half cycles.
    table = astm_e1049([0.0, 1.0])
    assert rows(table) == [(1.0, 0.5, 0.5, 0, 1)]


def test_turning_points_match_reference_reversals():
    x = [0, 1, 1, 1, 3, 2, 2, -1, -1, 4, 4]
    idx, vals = turning_points(x)
    # Source: `rainflow.reversals`, the reference package's peak-valley filter.
    ref = list(reference.reversals(x))
    assert list(zip(idx.tolist(), vals.tolist())) == [(i, float(v)) for i, v in ref]


# ---------------------------------------------------------------- invariants


@given(int_histories)
def test_counts_sum_to_half_the_reversals(x):
    # Common practice (ASTM E1049 counting): every point but the last is
    # consumed by half a cycle, so counts sum to (points - 1) / 2.
    idx, _ = turning_points(x)
    table = astm_e1049(x)
    expected = (len(idx) - 1) / 2 if np.ptp(x) > 0 else 0.0
    assert table.total_count == expected


@given(int_histories)
def test_largest_range_is_max_minus_min(x):
    assume(max(x) > min(x))
    assert astm_e1049(x).stress_range.max() == max(x) - min(x)


@given(int_histories, st.integers(-1000, 1000))
def test_offset_changes_means_not_ranges(x, c):
    a, b = astm_e1049(x), astm_e1049(np.asarray(x) + c)
    np.testing.assert_array_equal(a.stress_range, b.stress_range)
    np.testing.assert_array_equal(a.stress_mean + c, b.stress_mean)


@given(int_histories)
def test_residue_ranges_shrink_and_start_half_cycles_grow(x):
    # Common practice: what stays open after the three-point method is a
    # converging sequence (each range smaller than the one before), and the
    # half cycles dropped at the start never shrink.
    table, state = count_block(x)
    r = np.abs(np.diff(state.residue_values))
    assert np.all(r[1:] < r[:-1])
    halves = table.stress_range[table.count == 0.5]
    assert np.all(np.diff(halves) >= 0)
    assert np.all(table.count[table.count != 0.5] == 1.0)


@given(int_histories, st.integers(0, 15), st.integers(0, 15))
def test_larger_gate_never_adds_cycles(x, g1, g2):
    lo, hi = sorted((g1, g2))
    assert astm_e1049(x, gate=hi).total_count <= astm_e1049(x, gate=lo).total_count


@given(float_histories)
def test_zero_gate_is_no_gate(x):
    # The gated kernel at gate 0 must reproduce the ungated extraction; a
    # tiny positive gate below every nonzero step gives the same too.
    x = np.asarray(x)
    a = astm_e1049(x)
    b = astm_e1049(x, gate=1e-9)
    assert rows(a) == rows(b)


@given(int_histories, st.integers(1, 10))
def test_gate_removes_every_small_reversal(x, g):
    idx, vals = turning_points(x, gate=g)
    interior = np.abs(np.diff(vals))[1:-1] if len(vals) > 3 else np.empty(0)
    assert np.all(interior >= g)


def test_gate_example():
    # Regression pin: a 0.4 MPa ripple on a 10 MPa cycle disappears behind
    # a 1 MPa gate; the big cycle stays.
    x = [0, 10, 9.6, 10, 9.7, 10.2, 0, 0.3, 0, 10]
    assert astm_e1049(x, gate=1.0).range_counts() == {10.0: 0.5, 10.2: 1.0}
    assert astm_e1049(x, gate_fraction=0.1).range_counts() == {10.0: 0.5, 10.2: 1.0}


# ---------------------------------------------------------------- continuation


@given(int_histories, st.lists(st.integers(0, 80), max_size=6), st.integers(0, 4))
def test_blocks_count_exactly_like_the_whole(x, cuts, gate):
    cuts = sorted({c for c in cuts if 0 < c < len(x)})
    blocks = np.split(np.asarray(x, dtype=float), cuts)
    state, parts = None, []
    for block in blocks:
        table, state = count_block(block, state, gate=gate)
        parts.append(table)
    parts.append(close_residue(state))
    whole = astm_e1049(x, gate=gate)
    got = [np.concatenate([getattr(t, f) for t in parts]) for f in
           ("stress_from", "stress_to", "count", "start_index", "end_index")]
    want = [whole.stress_from, whole.stress_to, whole.count, whole.start_index, whole.end_index]
    for g, w in zip(got, want):
        np.testing.assert_array_equal(g, w)
    assert state.samples_seen == len(x)


def test_single_sample_blocks_and_state_round_trip():
    x = np.random.default_rng(3).integers(-9, 9, 200).astype(float)
    state, parts = None, []
    table, state = count_block(x[:2])
    parts.append(table)
    for v in x[2:]:
        state = CountingState.from_dict(state.to_dict())
        table, state = count_block([v], state)
        parts.append(table)
    parts.append(close_residue(state))
    assert rows(type(table).concat(parts)) == rows(astm_e1049(x))


def test_state_gate_must_not_change():
    _, state = count_block([0, 3, 1], gate=1.0)
    with pytest.raises(IncompatibleState) as err:
        count_block([2, 0], state, gate=0.5)
    assert "0.5" in str(err.value) and "1.0" in str(err.value)


def test_malformed_state_is_rejected():
    with pytest.raises(IncompatibleState):
        CountingState.from_dict({"gate": 0})


# ---------------------------------------------------------------- repeating block


@given(int_histories)
def test_repeating_block_closes_every_cycle(x):
    assume(max(x) > min(x))
    table = astm_e1049(x, residue="repeating_block")
    assert np.all(table.count == 1.0)
    assert table.stress_range.max() == max(x) - min(x)


@given(int_histories)
def test_repeating_block_is_the_steady_state_of_repeats(x):
    # Common practice (ASTM E1049 sec. 5.4.4.1): counting the block repeated
    # many times, each added repeat adds exactly the repeating-block cycles.
    assume(max(x) > min(x))
    once = astm_e1049(x, residue="repeating_block").range_counts()
    four = astm_e1049(np.tile(x, 4)).range_counts()
    five = astm_e1049(np.tile(x, 5)).range_counts()
    added = {r: five.get(r, 0.0) - four.get(r, 0.0) for r in set(five) | set(four)}
    assert {r: c for r, c in added.items() if c != 0.0} == once


# ---------------------------------------------------------------- bad input


@pytest.mark.parametrize("bad, index", [(math.nan, 3), (math.inf, 3), (-math.inf, 0)])
def test_non_finite_sample_is_named(bad, index):
    x = [1.0, 2.0, 0.5, 4.0, 1.0]
    x[index] = bad
    with pytest.raises(InvalidLoadHistory) as err:
        astm_e1049(x)
    assert err.value.sample_index == index
    assert f"sample {index} is {bad}" in str(err.value)


def test_non_finite_sample_in_a_later_block_gets_its_global_index():
    _, state = count_block([0.0, 1.0, 0.0])
    with pytest.raises(InvalidLoadHistory) as err:
        count_block([2.0, math.nan], state)
    assert err.value.sample_index == 4


def test_non_numeric_sample_is_named():
    with pytest.raises(InvalidLoadHistory) as err:
        astm_e1049([1.0, 2.0, "x", 3.0])
    assert err.value.sample_index == 2
    assert "sample 2 is 'x'" in str(err.value)


@pytest.mark.parametrize("x", [[], [1.0], np.zeros((3, 2))])
def test_too_short_or_wrong_shape(x):
    with pytest.raises(InvalidLoadHistory):
        astm_e1049(x)


def test_constant_history_has_no_cycles():
    table = astm_e1049([2.5, 2.5, 2.5, 2.5])
    assert len(table) == 0 and table.total_count == 0.0
    assert len(astm_e1049([2.5, 2.5], residue="repeating_block")) == 0


@pytest.mark.parametrize("kwargs, field", [
    ({"gate": -1.0}, "gate"), ({"gate": math.nan}, "gate"),
    ({"gate_fraction": 1.5}, "gate_fraction"),
    ({"gate": 1.0, "gate_fraction": 0.1}, "gate_fraction")])
def test_bad_gate(kwargs, field):
    with pytest.raises(InvalidParameter) as err:
        astm_e1049([0, 1, 0], **kwargs)
    assert err.value.field == field


def test_unknown_residue_treatment_lists_valid_ones():
    with pytest.raises(UnknownMethod) as err:
        astm_e1049([0, 1, 0], residue="closed")
    assert err.value.valid == ["half_cycles", "repeating_block"]
    assert "half_cycles, repeating_block" in str(err.value)


def test_output_is_finite_and_typed():
    table = astm_e1049(np.random.default_rng(0).standard_normal(1000) * 1e300)
    assert np.all(np.isfinite(table.stress_mean))
    assert table.start_index.dtype == np.int64 and table.count.dtype == np.float64


def _continued(values, cut: int, carry: bool):
    """``(samples, state)``: the history, or with ``carry`` its part after
    sample ``cut`` and the state of counting the part before (None)."""
    x = np.asarray(values, dtype=float)
    if carry and cut < len(x) - 1:
        _, state = count_block(x[:cut + 1])
        return x[cut + 1:], state
    return x, None


@settings(max_examples=300, deadline=None)
@given(values=st.lists(st.integers(-3, 3), min_size=2, max_size=60),
       cut=st.integers(0, 60), carry=st.booleans())
def test_two_thread_turning_point_pass_equals_one_thread(values, cut, carry):
    # The ungated pass splits long blocks in two halves on two threads. Force
    # the split on short integer signals (plateaus and equal values at the
    # seam are the hard cases) and compare with the one-thread pass, for a
    # whole history and for a continued block (regression pin of the split).
    from service.engine import turning

    x, state = _continued(values, cut, carry)
    if len(x) < 2:
        return
    saved = turning._SPLIT_SAMPLES
    try:
        turning._SPLIT_SAMPLES = 10**9
        one, s1 = count_block(x, state, final=True)
        turning._SPLIT_SAMPLES = 2
        two, s2 = count_block(x, state, final=True)
    finally:
        turning._SPLIT_SAMPLES = saved
    for f in ("stress_from", "stress_to", "count", "start_index", "end_index"):
        assert np.array_equal(getattr(one, f), getattr(two, f)), f
    assert s1.to_dict() == s2.to_dict()


def _tables_equal(one, two):
    for f in ("stress_from", "stress_to", "count", "start_index", "end_index"):
        assert np.array_equal(getattr(one, f), getattr(two, f)), f


@contextlib.contextmanager
def _pipelined(on=True):
    """Run ungated counts as the two-thread pipeline in chunks of a few
    samples (seams everywhere), or never as the pipeline."""
    from service.engine import rainflow as rf

    saved = rf._PIPELINE_SAMPLES, rf._FIRST_CHUNK, rf._LAST_CHUNK
    rf._PIPELINE_SAMPLES, rf._FIRST_CHUNK, rf._LAST_CHUNK = (2, 3, 7) if on else (10**9, 3, 7)
    try:
        yield
    finally:
        rf._PIPELINE_SAMPLES, rf._FIRST_CHUNK, rf._LAST_CHUNK = saved


@pytest.fixture
def tiny_pipeline():
    with _pipelined():
        yield


@settings(max_examples=300, deadline=None)
@given(values=st.lists(st.integers(-3, 3), min_size=2, max_size=90),
       cut=st.integers(0, 90), carry=st.booleans(), final=st.booleans())
def test_pipelined_count_equals_one_pass(values, cut, carry, final):
    # Long ungated blocks are counted as a pipeline: turning points chunk by
    # chunk on the helper thread, the stack pass over finished chunks on the
    # caller's. Plateaus and equal values across chunk seams are the hard
    # cases; continued blocks start from a carried state (regression pin:
    # the pipeline must give the one-pass rows and state exactly).
    x, state = _continued(values, cut, carry)
    if len(x) < 2:
        return
    with _pipelined():
        two, s2 = count_block(x, state, final=final)
    with _pipelined(False):
        one, s1 = count_block(x, state, final=final)
    _tables_equal(one, two)
    assert s1.to_dict() == s2.to_dict()


def test_pipeline_agrees_with_reference_on_a_long_history():
    # At the real chunk sizes (>= 2**18 samples, several chunks), against the
    # `rainflow` package as multisets of (range, mean, count).
    x = np.cumsum(np.random.default_rng(7).standard_normal(300_000))
    table = astm_e1049(x)
    ours = sorted(zip(table.stress_range.round(9).tolist(),
                      table.stress_mean.round(9).tolist(), table.count.tolist()))
    ref = sorted((round(r, 9), round(m, 9), c) for r, m, c, _, _ in
                 reference.extract_cycles(x) if r > 0)
    assert ours == ref


def test_pipeline_names_the_first_bad_sample_in_a_later_chunk(tiny_pipeline):
    x = np.sin(np.arange(100) * 0.7)
    x[61] = np.nan
    x[80] = np.inf
    with pytest.raises(InvalidLoadHistory) as err:
        astm_e1049(x)
    assert err.value.sample_index == 61
    # The thread's scratch is intact for the next count.
    y = np.sin(np.arange(100) * 0.3)
    with _pipelined(False):
        one = astm_e1049(y)
    _tables_equal(one, astm_e1049(y))


def test_pipeline_completes_while_the_helper_thread_is_busy(tiny_pipeline):
    # The helper is shared; when it is busy the caller takes every chunk
    # itself (from the back) and must not wait for it.
    import threading

    from service.engine._threads import helper

    release = threading.Event()
    blocker = helper().submit(release.wait, 30)
    try:
        x = np.cumsum(np.random.default_rng(3).standard_normal(500))
        two = astm_e1049(x)
    finally:
        release.set()
        assert blocker.result() is True  # released by the test, not by the timeout
    with _pipelined(False):
        _tables_equal(astm_e1049(x), two)


def test_one_thread_keeps_long_work_off_the_helper(monkeypatch):
    # Threads that already run side by side (planes of a scan, points of a
    # request) keep the engine's work on their own thread; the figures are
    # the same as with the helper (counts exactly; damage to the last bit).
    from service.engine import _threads, rainflow as rf, turning
    from service.engine._threads import helper_allowed, in_one_thread, one_thread
    from service.engine.damage import AssessmentOptions, assess_history
    from service.engine.sn_catalogue import catalogue_curve

    x = np.random.default_rng(12).standard_normal(300_000) * 50
    curve = catalogue_curve("EN1993-1-9:71")
    opts = AssessmentOptions(mean_stress_method="goodman", ultimate_strength=700.0)
    with_helper = astm_e1049(x), assess_history(x, curve, opts)

    def no_helper():
        raise AssertionError("the helper thread was asked for")

    monkeypatch.setattr(_threads, "helper", no_helper)
    monkeypatch.setattr(rf, "helper", no_helper)
    monkeypatch.setattr(turning, "helper", no_helper)
    with one_thread():
        assert not helper_allowed()
        alone = astm_e1049(x), assess_history(x, curve, opts)
    assert helper_allowed()
    _tables_equal(with_helper[0], alone[0])
    a, b = with_helper[1], alone[1]
    assert a.damage == b.damage and a.reserve_factor == b.reserve_factor
    assert a.equivalent_range == b.equivalent_range and a.top_cycles == b.top_cycles
    assert in_one_thread(helper_allowed)() is False and helper_allowed()
