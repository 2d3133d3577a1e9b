"""Miner damage, life, reserve factor and equivalent range."""

import math
from dataclasses import replace

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from service.engine import CycleTable, InvalidParameter, astm_e1049
from service.engine.damage import (AssessmentOptions, assess, assess_history, assess_many,
                                   equivalent_range, palmgren_miner)
from service.engine.mean_stress import MEAN_STRESS_METHODS, equivalent_amplitude
from service.engine.sn_catalogue import catalogue_curve
from service.engine.sn_curve import basquin_range

EN71 = catalogue_curve("EN1993-1-9:71")


def constant_amplitude(rng, n, mean=0.0):
    """n full cycles of range ``rng`` about ``mean`` (plus the closing half)."""
    x = np.tile([mean - rng / 2, mean + rng / 2], n + 1)
    return x


#: A Haigh diagram of invented test points (mean, amplitude) [MPa]: a benefit
#: in compression, a fall in tension to zero amplitude at 430 MPa.
HAIGH = ((-300.0, 190.0), (0.0, 160.0), (150.0, 120.0), (300.0, 60.0), (430.0, 0.0))


def numpy_damage(table, curve, opts):
    """The reference path: the documented numpy functions, step by step."""
    amp, over = equivalent_amplitude(
        table.stress_amplitude * opts.load_factor, table.stress_mean * opts.load_factor,
        opts.mean_stress_method, ultimate_strength=opts.ultimate_strength,
        yield_strength=opts.yield_strength,
        fatigue_strength_coefficient=opts.fatigue_strength_coefficient,
        walker_exponent=opts.walker_exponent, compressive_mean=opts.compressive_mean,
        haigh_diagram=opts.haigh_diagram, haigh_stress_ratio=opts.haigh_stress_ratio)
    rng = 2 * amp * opts.thickness_factor * opts.strength_factor
    return palmgren_miner(table.count, curve.cycles_to_failure(rng)), over


def test_constant_amplitude_on_en1993_71():
    # Source: EN 1993-1-9 eq. (7.1): 1e5 cycles of 100 MPa on category 71
    # use 1e5 / (2e6 (71/100)^3) of the life.
    x = constant_amplitude(100.0, 100_000)
    r = assess_history(x, EN71)
    n_f = 2e6 * (71 / 100) ** 3
    # rel 1e-9: a sum of 1e5 equal terms carries ~1e-11 of rounding.
    assert r.damage == pytest.approx(100_000.5 / n_f, rel=1e-9)
    # Repeated, the recording's 1e5 + 1 rises and falls close into 1e5 + 1
    # full cycles (the last peak falls to the first valley of the next
    # repeat): ASTM E1049-85 sec. 5.4.4.1, repeating history.
    assert r.damage_per_repeat == pytest.approx(100_001 / n_f, rel=1e-9)
    assert r.life_repeats == pytest.approx(n_f / 100_001, rel=1e-9)
    assert r.life_cycles == pytest.approx(n_f, rel=1e-9)


def test_life_in_hours_and_allowable_damage():
    x = constant_amplitude(100.0, 1000)
    r = assess_history(x, EN71, AssessmentOptions(allowable_damage=0.5), duration_s=3600.0)
    assert r.life_hours == pytest.approx(r.life_repeats)
    assert r.life_repeats == pytest.approx(0.5 / r.damage_per_repeat)


def test_partial_factors():
    # EN 1993-1-9 sec. 8: gamma_Ff on the load range, gamma_Mf on the strength;
    # gamma_Mf = 1.35 equals the curve lowered by 1.35.
    x = constant_amplitude(100.0, 1000)
    a = assess_history(x, EN71, AssessmentOptions(strength_factor=1.35, load_factor=1.1))
    b = assess_history(x * 1.1, EN71.scaled(1 / 1.35))
    assert a.damage == pytest.approx(b.damage, rel=1e-12)


def test_equivalent_range_of_constant_amplitude():
    # Definition (EN 1993-1-9 Annex A): n cycles of S equal N_ref cycles of
    # S (n / N_ref)^(1/m).
    x = constant_amplitude(80.0, 20_000)
    r = assess_history(x, EN71)
    assert r.equivalent_range == pytest.approx(80.0 * (20_000.5 / 2e6) ** (1 / 3), rel=1e-9)
    assert equivalent_range([80.0], [20_000.5]) == pytest.approx(r.equivalent_range)


def test_narrow_band_damage_matches_closed_form():
    # Source: J. S. Bendat (1964), narrow-band damage for N = C S^-m:
    # D = nu0 T / C (2 sqrt(2) sigma)^m Gamma(1 + m/2). Rainflow damage of a
    # Gaussian process of small bandwidth is a little lower, by the factor
    # of P. H. Wirsching and M. C. Light, "Fatigue under wide band random
    # stresses," J. Struct. Div. ASCE 106 (1980) 1593-1607:
    # lambda = a + (1 - a)(1 - eps)^b, a = 0.926 - 0.033 m, b = 1.587 m - 2.323.
    # Tolerance: the damage of ~20,000 counted cycles of one seeded record
    # scatters around its expectation by about 1-2 % for m = 3 and, resting
    # on the few largest cycles, about 3-5 % for m = 5; the empirical factor
    # itself fits simulations to a few per cent.
    fs, duration, sigma = 100.0, 2000.0, 50.0
    f_lo, f_hi = 4.75, 5.25
    n = int(fs * duration)
    rng = np.random.default_rng(5)
    freqs = np.fft.rfftfreq(n, 1 / fs)
    band = (freqs >= f_lo) & (freqs <= f_hi)
    spec = np.zeros(freqs.size, complex)
    spec[band] = np.exp(1j * rng.uniform(0, 2 * np.pi, band.sum()))
    x = np.fft.irfft(spec, n)
    x *= sigma / x.std()
    moment = lambda k: (f_hi ** (k + 1) - f_lo ** (k + 1)) / (k + 1)  # noqa: E731
    nu0 = math.sqrt(moment(2) / moment(0))
    eps = math.sqrt(1 - moment(2) ** 2 / (moment(0) * moment(4)))
    table = astm_e1049(x)
    for m in (3.0, 5.0):
        c = 1e12
        closed = nu0 * duration / c * (2 * math.sqrt(2) * sigma) ** m * math.gamma(1 + m / 2)
        lam = (0.926 - 0.033 * m) + (1 - (0.926 - 0.033 * m)) * (1 - eps) ** (1.587 * m - 2.323)
        r = assess(table, basquin_range(m, c), AssessmentOptions(reserve_factor=False))
        assert r.damage / closed == pytest.approx(lam, abs=0.03 if m == 3 else 0.05)
        assert r.damage <= closed


@pytest.mark.parametrize("curve", ["EN1993-1-9:71", "IIW:FAT80", "DNV-RP-C203:D"])
@pytest.mark.parametrize("method", ["none", "goodman", "smith_watson_topper"])
def test_reserve_factor_round_trip(curve, method):
    # Scaling the history by the reported factor gives the allowable damage.
    x = np.random.default_rng(11).standard_normal(20_000)
    x = 60 * x + 20
    opts = AssessmentOptions(mean_stress_method=method, ultimate_strength=2000.0,
                             allowable_damage=0.5)
    c = catalogue_curve(curve)
    r = assess_history(x, c, opts)
    assert 0.2 < r.reserve_factor < 5.0 and "static_overload" not in r.flags
    again = assess_history(x * r.reserve_factor, c, opts)
    assert again.damage == pytest.approx(0.5, rel=1e-6)


def test_reserve_factor_stops_at_static_overload():
    # When the peak reaches Su before the damage reaches the allowable sum,
    # the reserve is the factor that brings the peak to Su.
    x = constant_amplitude(100.0, 10, mean=50.0)  # peak 100 MPa, little damage
    r = assess_history(x, EN71, AssessmentOptions(ultimate_strength=400.0))
    assert r.reserve_factor == pytest.approx(4.0, rel=1e-8)


def test_reserve_factor_single_slope_closed_form():
    # On one slope with no cut-off D scales as s^m: s = (D_allow / D)^(1/m).
    x = np.random.default_rng(2).standard_normal(5000) * 30
    r = assess_history(x, basquin_range(3.0, 1e12))
    assert r.reserve_factor == pytest.approx((1.0 / r.damage) ** (1 / 3), rel=1e-8)


@given(st.lists(st.integers(-200, 200), min_size=3, max_size=60),
       st.sampled_from(sorted(MEAN_STRESS_METHODS)),
       st.sampled_from(["EN1993-1-9:71", "IIW:FAT50", "DNV-RP-C203:B1"]),
       st.sampled_from(["no_benefit", "zero", "formula"]))
def test_compiled_path_equals_numpy_definitions(x, method, curve, policy):
    opts = AssessmentOptions(mean_stress_method=method, ultimate_strength=450.0,
                             yield_strength=300.0, fatigue_strength_coefficient=900.0,
                             walker_exponent=0.6, compressive_mean=policy, load_factor=1.2,
                             thickness_factor=1.05, reserve_factor=False,
                             haigh_diagram=HAIGH, haigh_stress_ratio=-1.0)
    table = astm_e1049(x)
    c = catalogue_curve(curve)
    r = assess(table, c, opts)
    d, over = numpy_damage(table, c, opts)
    if over.any():
        assert math.isinf(r.damage) and r.overload_cycles == over.sum()
        assert "static_overload" in r.flags and r.life_repeats == 0.0
    else:
        np.testing.assert_allclose(r.damage_per_cycle, d, rtol=1e-12, atol=0)
        assert r.damage == pytest.approx(d.sum(), rel=1e-12)


def test_overload_is_infinite_damage_zero_life_never_nan():
    x = constant_amplitude(300.0, 10, mean=200.0)  # peaks at 350 MPa
    r = assess_history(x, EN71, AssessmentOptions(mean_stress_method="goodman",
                                                  ultimate_strength=340.0))
    assert math.isinf(r.damage) and r.life_repeats == 0.0 and r.life_cycles == 0.0
    assert "static_overload" in r.flags
    assert r.reserve_factor is not None and r.reserve_factor < 1.0


def test_everything_below_the_cut_off():
    x = constant_amplitude(20.0, 1000)
    r = assess_history(x, EN71)
    assert r.damage == 0.0 and math.isinf(r.life_repeats)
    assert r.flags == ("below_fatigue_limit",)
    # The factor that lifts 20 MPa to the cut-off (28.73 MPa) reaches damage.
    assert r.reserve_factor > EN71.cutoff_range / 20.0


def test_top_cycles_are_the_most_damaging():
    x = np.concatenate([constant_amplitude(60.0, 50), [0.0, 150.0, 0.0]])
    r = assess_history(x, EN71, AssessmentOptions(top_cycles=3))
    # The largest cycle joins the base load's valley (-30) to the 150 MPa peak.
    assert r.top_cycles[0]["stress_range"] == 180.0
    damages = [c["damage"] for c in r.top_cycles]
    assert damages == sorted(damages, reverse=True)
    assert sum(c["damage_share"] for c in r.top_cycles) <= 1.0 + 1e-12


def test_no_cycles():
    r = assess(CycleTable.empty(), EN71)
    assert r.flags == ("no_cycles",) and r.damage == 0.0 and r.reserve_factor is None
    # Never NaN (issue rule): an infinite life with no cycles is still infinite.
    assert math.isinf(r.life_repeats) and math.isinf(r.life_cycles)


def test_cautions_always_present():
    r = assess_history(constant_amplitude(100.0, 10), EN71)
    assert any("qualified engineer" in c.text for c in r.cautions)
    codes = [c.code for c in r.cautions]
    assert codes[:3] == ["estimate_scatter", "method_choice", "engineer_sign_off"]
    assert len(codes) == len(set((c.code, c.text) for c in r.cautions))  # no repeats


def test_assess_many_equals_one_by_one():
    rng = np.random.default_rng(4)
    data = rng.standard_normal((3000, 6)).cumsum(axis=0)
    many = assess_many(data, EN71, workers=2)
    for i in range(6):
        one = assess_history(data[:, i], EN71)
        assert many[str(i)].damage == one.damage
        assert many[str(i)].reserve_factor == one.reserve_factor


@pytest.mark.parametrize("method", ["none", "goodman", "walker"])
@pytest.mark.parametrize("workers", [1, 2])
def test_batch_path_gives_the_one_point_results(method, workers):
    # assess_many on a 2-D array of short points runs the compiled batch
    # path; every figure must equal the one-point path (regression pin on
    # the engine's own definitions), including a point with a static
    # overload, one below the cut-off and one with no cycles.
    rng = np.random.default_rng(12)
    data = rng.standard_normal((4000, 150)) * 70 + 20
    data[:, 3] = 5.0 * np.sign(np.sin(np.arange(4000)))   # below the cut-off
    data[:, 4] = 1.0                                       # no cycles
    data[::97, 5] = 500.0                                  # static overloads
    opts = AssessmentOptions(mean_stress_method=method, ultimate_strength=450.0,
                             walker_exponent=0.5)
    many = assess_many(data, EN71, opts, workers=workers, duration_s=60.0)
    assert list(many) == [str(i) for i in range(150)]
    for i in range(150):
        one = assess_history(data[:, i].copy(), EN71, opts, duration_s=60.0)
        b = many[str(i)]
        assert (b.damage, b.reserve_factor, b.equivalent_range, b.flags, b.life_hours,
                b.cycles_counted, b.max_range, b.overload_cycles) == (
            one.damage, one.reserve_factor, one.equivalent_range, one.flags, one.life_hours,
            one.cycles_counted, one.max_range, one.overload_cycles), i
        assert b.top_cycles == one.top_cycles and b.cautions == one.cautions
        assert np.array_equal(b.damage_per_cycle, one.damage_per_cycle)


def test_batch_path_names_the_bad_point():
    data = np.random.default_rng(1).standard_normal((100, 5))
    data[17, 3] = np.inf
    with pytest.raises(ValueError) as err:
        assess_many(data, EN71, workers=1)
    assert err.value.channel == "3" and err.value.sample_index == 17


def test_assess_many_names_the_bad_point():
    with pytest.raises(ValueError) as err:
        assess_many({"a": [0.0, 1.0, 0.0], "b": [0.0, math.nan, 1.0]}, EN71, workers=1)
    assert err.value.channel == "b" and err.value.sample_index == 1


@pytest.mark.parametrize("kwargs, field", [
    ({"allowable_damage": 0.0}, "allowable_damage"),
    ({"load_factor": -1.0}, "load_factor"),
    ({"mean_stress_method": "goodman"}, "ultimate_strength"),
    ({"top_cycles": -1}, "top_cycles"),
])
def test_bad_options(kwargs, field):
    with pytest.raises(InvalidParameter) as err:
        AssessmentOptions(**kwargs)
    assert err.value.field == field


def _moved(a: np.ndarray, shift: int, readonly: bool) -> np.ndarray:
    """A copy of ``a`` starting ``shift`` items into a fresh buffer."""
    if shift == 0:
        out = a.copy()
    else:
        buf = np.empty(a.size + 8, a.dtype)
        out = buf[shift:shift + a.size]
        out[:] = a
    out.setflags(write=not readonly)
    return out


@pytest.mark.parametrize("method", ["none", "goodman"])
def test_same_cycles_give_bitwise_the_same_result_in_any_memory(method):
    # Common practice for a service: the same request gives the same numbers.
    # Arrays read from Parquet are read-only, which makes numba compile a
    # second variant of each kernel; a vectorised sum left to the compiler
    # then grouped terms differently (seen: the last bit of the damage
    # differed between a job and a direct request). The engine's sums have
    # one fixed order instead.
    x = np.random.default_rng(9).standard_normal(8000) * 60
    t = astm_e1049(x)
    opts = AssessmentOptions(mean_stress_method=method,
                             ultimate_strength=700.0 if method != "none" else None)
    ref = assess(t, EN71, opts)
    for shift in range(0, 8):
        for readonly in (False, True):
            moved = CycleTable(*(_moved(getattr(t, c), shift, readonly) for c in (
                "stress_from", "stress_to", "count", "start_index", "end_index")))
            r = assess(moved, EN71, opts)
            assert (r.damage, r.reserve_factor, r.equivalent_range) == (
                ref.damage, ref.reserve_factor, ref.equivalent_range), (shift, readonly)


def test_long_tables_split_the_first_pass_without_changing_the_numbers():
    # Above 2^17 cycles the first pass runs on two threads, one half each;
    # per-cycle damage is the same bitwise and the sums agree with the
    # one-thread pass to rounding (regression pin of the split, common practice).
    from service.engine import _damage_kernels as dk
    from service.engine._passes import _SPLIT_CYCLES, _Evaluator

    x = np.random.default_rng(5).standard_normal(600_000) * 60 + 15
    table = astm_e1049(x)
    assert len(table) >= _SPLIT_CYCLES
    opts = AssessmentOptions(mean_stress_method="goodman", ultimate_strength=700.0)
    r = assess(table, EN71, opts)
    ev = _Evaluator(table, EN71, opts)
    rows = np.empty(len(table))
    whole = dk.damage_pass(*ev.cols, 1.0, *ev.args, rows, True)
    assert np.array_equal(rows, r.damage_per_cycle)
    assert r.damage == pytest.approx(whole[0], rel=1e-13)
    assert r.damage == pytest.approx(math.fsum(rows), rel=1e-12)
    assert r.equivalent_range == pytest.approx(
        assess(table, EN71, replace(opts, reserve_factor=False)).equivalent_range, rel=0)


@pytest.mark.parametrize("method,mean,sd,allowable,onset", [
    ("goodman", 15.0, 60.0, 1.0, False), ("none", 0.0, 60.0, 0.5, False),
    ("none", 600.0, 5.0, 1.0, True)])
def test_long_tables_search_the_reserve_on_two_threads(method, mean, sd, allowable, onset):
    # From 2^16 cycles each scale of the reserve search is evaluated in two
    # halves on two threads; the factor must be the one-thread compiled
    # search's (the same steps, sums grouped differently) and round-trip:
    # the history scaled by it reaches the allowable damage (issue's check),
    # or, when the static overload comes first (small cycles about a high
    # mean), is the overload onset.
    from service.engine import _batch_kernels as bk
    from service.engine._passes import _SPLIT_CYCLES, _Evaluator

    x = np.random.default_rng(9).standard_normal(400_000) * sd + mean
    table = astm_e1049(x)
    assert len(table) >= _SPLIT_CYCLES
    opts = AssessmentOptions(mean_stress_method=method, ultimate_strength=700.0,
                             allowable_damage=allowable)
    r = assess(table, EN71, opts)
    ev = _Evaluator(table, EN71, opts)
    first = ev(1.0, np.empty(len(table)), extras=True)
    one = bk.reserve_search(*ev.cols, ev.load_factor, *ev.args, allowable, first[0],
                            first[2] if first[2] is not None else math.nan, ev.overload_scale)
    assert r.reserve_factor == pytest.approx(one, rel=1e-9)

    def at(f):
        return assess(table, EN71, replace(opts, load_factor=f, reserve_factor=False))

    if onset:
        assert r.reserve_factor == pytest.approx(700.0 / x.max(), rel=1e-9)
        assert at(r.reserve_factor).damage < allowable
        assert "static_overload" in at(r.reserve_factor * (1 + 1e-9)).flags
    else:
        assert at(r.reserve_factor).damage == pytest.approx(allowable, rel=1e-6)


def test_top_cycles_of_a_long_table_equal_one_search():
    # Long tables search the most damaging cycles in two halves; ties must
    # still go to the earliest row (equal ranges repeat in a block history).
    from service.engine import _damage_kernels as dk
    from service.engine._passes import _SPLIT_CYCLES, _top_rows

    rng = np.random.default_rng(3)
    values = np.round(rng.exponential(1.0, 3 * _SPLIT_CYCLES), 1)  # many ties
    values[[10, _SPLIT_CYCLES * 2 + 5]] = np.inf  # overloads rank first
    for k in (1, 10, 50):
        assert list(_top_rows(values, k)) == dk.top_k(values, k).tolist()


def test_batch_leaves_the_garbage_collector_as_it_found_it():
    # The batch pauses Python's collector while it builds results; it must
    # be back on afterwards, also after a bad point, and stay off if the
    # caller had turned it off.
    import gc

    data = np.random.default_rng(1).standard_normal((200, 6))
    assert gc.isenabled()
    assess_many(data, EN71)
    assert gc.isenabled()
    data[17, 3] = np.inf
    with pytest.raises(ValueError):
        assess_many(data, EN71)
    assert gc.isenabled()
    gc.disable()
    try:
        assess_many(data[:, :3], EN71)
        assert not gc.isenabled()
    finally:
        gc.enable()


@pytest.mark.parametrize("n", [3_000, 400_000])
@pytest.mark.parametrize("method", ["none", "goodman", "smith_watson_topper"])
def test_damage_alone_is_the_assessments_damage_to_the_last_bit(n, method):
    # What a critical-plane scan compares (damage_of_history) must be the
    # very number the full assessment of the chosen plane reports, for short
    # tables and for long ones (first pass in halves), also when the halves
    # run on the calling thread (one_thread, as on a scan's worker threads).
    from service.engine._threads import one_thread
    from service.engine.damage import damage_of_history

    x = np.random.default_rng(n).standard_normal(n) * 60 + 20
    opts = AssessmentOptions(mean_stress_method=method, ultimate_strength=700.0)
    full = assess_history(x, EN71, opts).damage
    assert damage_of_history(x, EN71, opts) == full
    with one_thread():
        assert damage_of_history(x, EN71, opts) == full
        assert assess_history(x, EN71, opts).damage == full


def _identical(a, b):
    """The same result to the last bit (per cycle and every figure)."""
    assert np.array_equal(a.damage_per_cycle, b.damage_per_cycle)
    for f in ("damage", "life_repeats", "life_hours", "life_cycles", "reserve_factor",
              "equivalent_range", "cycles_counted", "max_range", "overload_cycles", "flags",
              "top_cycles"):
        assert getattr(a, f) == getattr(b, f), f


@pytest.fixture
def small_stretches(monkeypatch):
    """Long-count paths on short histories: the pipeline in chunks of a few
    samples, stretches of a few rows, two-thread passes from 16 rows."""
    from service.engine import _passes as dm
    from service.engine import rainflow as rf

    monkeypatch.setattr(rf, "_PIPELINE_SAMPLES", 2)
    monkeypatch.setattr(rf, "_FIRST_CHUNK", 16)
    monkeypatch.setattr(rf, "_LAST_CHUNK", 64)
    monkeypatch.setattr(dm, "_STRETCH", 8)
    monkeypatch.setattr(dm, "_SPLIT_CYCLES", 16)


@pytest.mark.parametrize("method,scale", [("goodman", 1.0), ("none", 1.0), ("gerber", 1.0),
                                          ("goodman", 20.0), ("none", 0.05)])
@pytest.mark.parametrize("n", [20, 3000])
def test_first_pass_along_the_count_is_the_assessment_of_the_table(
        small_stretches, method, scale, n):
    # assess_history of a long ungated history takes the first damage pass
    # along with the count (stretches of closed rows on the helper thread);
    # it must give assess(astm_e1049(x)) to the last bit, for a table of one
    # stretch and of many. Scales cover damage, a static overload (x20) and
    # everything below the cut-off (regression pin).
    x = np.cumsum(np.random.default_rng(11).standard_normal(n)) * 4 * scale + 10
    opts = AssessmentOptions(mean_stress_method=method, ultimate_strength=700.0)
    along = assess_history(x, EN71, opts, duration_s=60.0)
    _identical(along, assess(astm_e1049(x), EN71, opts, duration_s=60.0))


def test_first_pass_along_survives_a_table_that_grows(small_stretches, monkeypatch):
    # A quiet start makes the table's size estimate too small; the busy rest
    # grows it while stretches are under way (they write the old per-cycle
    # array, so they must finish before it is copied).
    from service.engine import rainflow as rf

    grown = []
    columns = rf._columns

    def spy(rows, keep=None, m=0):
        if keep is not None:
            grown.append(rows)
        return columns(rows, keep, m)

    monkeypatch.setattr(rf, "_columns", spy)
    rng = np.random.default_rng(4)
    x = np.concatenate([np.sin(np.arange(400) / 60.0), rng.standard_normal(40_000) * 80])
    opts = AssessmentOptions(mean_stress_method="goodman", ultimate_strength=700.0)
    along = assess_history(x, EN71, opts)
    assert grown, "the table did not grow: the test lost its point"
    _identical(along, assess(astm_e1049(x), EN71, opts))


def test_first_pass_along_completes_while_the_helper_is_busy(small_stretches):
    import threading

    from service.engine._threads import helper

    x = np.random.default_rng(2).standard_normal(5000) * 70
    opts = AssessmentOptions()
    release = threading.Event()
    blocker = helper().submit(release.wait, 30)
    try:
        along = assess_history(x, EN71, opts)
    finally:
        release.set()
        assert blocker.result() is True  # released by the test, not by the timeout
    _identical(along, assess(astm_e1049(x), EN71, opts))


def test_first_pass_along_at_real_sizes():
    # 400,000 samples: the real chunk and stretch sizes; the figures equal
    # counting first and assessing after, and the one-thread path, exactly.
    from service.engine._threads import one_thread

    x = np.random.default_rng(8).standard_normal(400_000) * 50 + 10
    opts = AssessmentOptions(mean_stress_method="goodman", ultimate_strength=700.0)
    along = assess_history(x, EN71, opts)
    _identical(along, assess(astm_e1049(x), EN71, opts))
    with one_thread():
        _identical(along, assess_history(x, EN71, opts))



def test_a_haigh_diagram_through_the_whole_assessment():
    # The reserve factor with a user's Haigh diagram (nonlinear in the
    # load, like Goodman) brings the damage to the allowable sum, and a
    # diagram referred to another R than the curve's is cautioned.
    rng = np.random.default_rng(8)
    x = 120 + np.cumsum(rng.normal(0, 20, 3000))
    x = 80 + 150 * (x - x.mean()) / np.abs(x - x.mean()).max()
    from dataclasses import replace

    curve = replace(basquin_range(4.0, 1e14), stress_ratio=-1.0)   # tested fully reversed
    opts = AssessmentOptions(mean_stress_method="haigh", haigh_diagram=HAIGH)
    r = assess_history(x, curve, opts)
    again = assess_history(x * r.reserve_factor, curve,
                           AssessmentOptions(mean_stress_method="haigh", haigh_diagram=HAIGH,
                                             reserve_factor=False))
    assert again.damage == pytest.approx(1.0, rel=1e-6)
    other = assess_history(x, curve, AssessmentOptions(
        mean_stress_method="haigh", haigh_diagram=HAIGH, haigh_stress_ratio=0.0))
    assert "haigh_ratio_mismatch" in {c.code for c in other.cautions}


def test_weighted_counts_are_not_read_as_an_open_residue():
    # A table of how often each row occurs (a design life, a spectrum's
    # expected cycles): a count of exactly 0.5 is half an occurrence, not a
    # half cycle of an open residue, so the life is the allowable sum over
    # the damage (Miner) and no residue caution is raised.
    from service.engine.rainflow import CycleTable

    t = CycleTable(np.array([-100.0, -50.0]), np.array([100.0, 50.0]), np.array([0.5, 3.0]),
                   np.zeros(2, np.int64), np.zeros(2, np.int64))
    curve = basquin_range(3.0, 1e12)
    r = assess(t, curve, AssessmentOptions(reserve_factor=False), weighted=True,
               duration_s=3600.0)
    d = (0.5 * 200.0 ** 3 + 3.0 * 100.0 ** 3) / 1e12
    assert r.damage == pytest.approx(d, rel=1e-12)
    assert r.damage_per_repeat == r.damage and r.life_repeats == pytest.approx(1.0 / d)
    assert r.life_hours == pytest.approx(1.0 / d) and r.residue_damage_share is None
    assert "residue_share" not in {c.code for c in r.cautions}
    plain = assess(t, curve, AssessmentOptions(reserve_factor=False))
    assert plain.damage_per_repeat != pytest.approx(plain.damage)  # read as a residue
