"""Mean-stress corrections against their defining equations."""

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from service.engine import InvalidParameter, UnknownMethod
from service.engine import mean_stress as ms

A, M, SU, SY, SF = 100.0, 50.0, 400.0, 250.0, 900.0


@pytest.mark.parametrize("method, kwargs, expected", [
    # Sources: the defining equations as compiled in N. E. Dowling, Mechanical
    # Behavior of Materials, 4th ed., sec. 9.7 (from memory), each cited in
    # the function's References.
    ("none", {}, 100.0),
    ("goodman", {"ultimate_strength": SU}, 100.0 / (1 - 50 / 400)),      # 114.2857
    ("gerber", {"ultimate_strength": SU}, 100.0 / (1 - (50 / 400) ** 2)),  # 101.5873
    ("soderberg", {"yield_strength": SY}, 100.0 / (1 - 50 / 250)),         # 125.0
    ("morrow", {"fatigue_strength_coefficient": SF}, 100.0 / (1 - 50 / 900)),
    ("smith_watson_topper", {}, math.sqrt(150.0 * 100.0)),                 # 122.474
    ("walker", {"walker_exponent": 0.5}, math.sqrt(150.0 * 100.0)),
    ("walker", {"walker_exponent": 0.7}, 150.0 ** 0.3 * 100.0 ** 0.7),
])
def test_each_method_against_its_equation(method, kwargs, expected):
    out, over = ms.equivalent_amplitude([A], [M], method, **kwargs)
    assert out[0] == pytest.approx(expected, rel=1e-14)
    assert not over[0]


def test_goodman_worked_numbers():
    # Regression pin worked by hand: sigma_a 100, sigma_m 50, Su 400 gives
    # 100 / 0.875 = 114.2857 MPa.
    assert ms.goodman(100.0, 50.0, 400.0) == pytest.approx(114.285714, rel=1e-6)


amps = st.floats(0.0, 500.0)
means = st.floats(-300.0, 300.0)


@given(st.floats(0.0, 390.0))
def test_zero_mean_returns_the_amplitude(a):
    # Common practice: every correction is the identity at zero mean (peaks
    # kept below Su: above it the cycle is a static overload by design).
    for method, kw in [("goodman", {"ultimate_strength": SU}), ("gerber", {"ultimate_strength": SU}),
                       ("soderberg", {"yield_strength": SY}),
                       ("morrow", {"fatigue_strength_coefficient": SF}), ("none", {})]:
        out, _ = ms.equivalent_amplitude([a], [0.0], method, **kw)
        assert out[0] == pytest.approx(a, rel=1e-12, abs=1e-12)
    # SWT and Walker at zero mean: sqrt(a * a) = a.
    out, _ = ms.equivalent_amplitude([a], [0.0], "smith_watson_topper")
    assert out[0] == pytest.approx(a, rel=1e-12, abs=1e-12)


@given(amps, st.floats(0.0, 399.0))
def test_goodman_at_least_gerber_for_tensile_means(a, m):
    # Common practice: the Goodman line lies inside the Gerber parabola.
    assert ms.goodman(a, m, SU) >= ms.gerber(a, m, SU) - 1e-9


@given(amps, means, st.sampled_from(sorted(ms.MEAN_STRESS_METHODS)),
       st.sampled_from(ms.COMPRESSIVE_MEAN_POLICIES))
def test_never_nan_never_negative(a, m, method, policy):
    kw = {"ultimate_strength": SU, "yield_strength": SY, "fatigue_strength_coefficient": SF,
          "walker_exponent": 0.6, "haigh_diagram": [[-200, 150], [0, 120], [350, 0]]}
    out, over = ms.equivalent_amplitude([a], [m], method, compressive_mean=policy, **kw)
    assert not np.isnan(out[0]) and out[0] >= 0
    assert over[0] == (math.isinf(out[0]))


def test_breakdown_is_a_static_overload_not_a_number():
    out, over = ms.equivalent_amplitude([10.0, 10.0], [400.0, 250.0], "goodman",
                                        ultimate_strength=SU)
    assert math.isinf(out[0]) and over[0]
    # sigma_max 260 below Su: a finite, large correction.
    assert out[1] == pytest.approx(10.0 / (1 - 250 / 400)) and not over[1]
    out, over = ms.equivalent_amplitude([10.0], [250.0], "soderberg", yield_strength=SY,
                                        ultimate_strength=SU)
    assert math.isinf(out[0]) and over[0]


def test_peak_above_ultimate_is_an_overload_for_every_method():
    out, over = ms.equivalent_amplitude([300.0], [150.0], "smith_watson_topper",
                                        ultimate_strength=SU)
    assert over[0] and math.isinf(out[0])


def test_compressive_mean_policies():
    a, m = [100.0], [-200.0]
    g = lambda policy, method="goodman": ms.equivalent_amplitude(  # noqa: E731
        a, m, method, ultimate_strength=SU, compressive_mean=policy)[0][0]
    assert g("no_benefit") == 100.0                       # no credit taken
    assert g("formula") == pytest.approx(100.0 / 1.5)     # credit as written
    assert g("zero") == 100.0
    # Gerber is even in the mean: "no benefit" must not turn into a penalty
    # (issue 15, defect 7): a compressive mean counts as zero; only the
    # formula as written penalises it (Dowling, 4th ed., sec. 9.7: Gerber
    # is not meant for compressive means).
    assert g("no_benefit", "gerber") == 100.0
    assert g("zero", "gerber") == 100.0
    assert g("formula", "gerber") == pytest.approx(100.0 / (1 - 0.25))


def test_swt_no_damage_when_peak_is_compressive():
    assert ms.smith_watson_topper(50.0, -60.0) == 0.0
    assert ms.walker(50.0, -60.0, 0.6) == 0.0


@pytest.mark.parametrize("kwargs, field", [
    ({"method": "goodman"}, "ultimate_strength"),
    ({"method": "soderberg"}, "yield_strength"),
    ({"method": "goodman", "ultimate_strength": -5.0}, "ultimate_strength"),
    ({"method": "goodman", "ultimate_strength": 300.0, "yield_strength": 350.0}, "yield_strength"),
    ({"method": "walker", "walker_exponent": 1.5}, "walker_exponent"),
])
def test_bad_strengths_name_the_field(kwargs, field):
    with pytest.raises(InvalidParameter) as err:
        ms.equivalent_amplitude([1.0], [1.0], **kwargs)
    assert err.value.field == field


def test_yield_above_ultimate_message_has_both_values():
    with pytest.raises(InvalidParameter) as err:
        ms.check_strengths(ultimate_strength=300.0, yield_strength=350.0)
    assert "350.0" in str(err.value) and "300.0" in str(err.value)


def test_unknown_method_lists_valid_ones():
    with pytest.raises(UnknownMethod) as err:
        ms.equivalent_amplitude([1.0], [1.0], "goodmann")
    assert "goodman" in err.value.valid and "'goodmann'" in str(err.value)


# ---------------------------------------------------------------- the codes' own rules


@pytest.mark.parametrize("method, smin, smax, expected_range", [
    # EN 1993-1-9:2005 sec. 7.2.1(2): in non-welded or stress-relieved
    # details, the tensile part plus 60 % of the compressive part.
    ("en1993_reduced_compression", -60.0, 40.0, 40.0 + 0.6 * 60.0),
    ("en1993_reduced_compression", 20.0, 120.0, 100.0),          # all tension: as is
    ("en1993_reduced_compression", -150.0, -50.0, 0.6 * 100.0),  # all compression
    # DNV-RP-C203 (2016) sec. 2.5 (from memory): f_m = (st + 0.6 sc)/(st + sc)
    # for base material, 0.8 for post-weld heat-treated welds.
    ("dnv_base_material", -60.0, 40.0, 100.0 * (40.0 + 0.6 * 60.0) / 100.0),
    ("dnv_stress_relieved", -60.0, 40.0, 100.0 * (40.0 + 0.8 * 60.0) / 100.0),
])
def test_reduced_compressive_part_by_hand(method, smin, smax, expected_range):
    a, m = (smax - smin) / 2.0, (smax + smin) / 2.0
    out, over = ms.equivalent_amplitude([a], [m], method)
    assert 2.0 * out[0] == pytest.approx(expected_range, rel=1e-12) and not over[0]


@pytest.mark.parametrize("case, r, f", [
    # IIW recommendations (Hobbacher 2016) sec. 3.5.2, from memory: case 1
    # 1.6 (R < -1), 1.2 - 0.4 R (-1..0.5), 1 above; case 2 1.3, 0.9 - 0.4 R
    # (-1..-0.25), 1 above. The pieces meet at the breakpoints (checked).
    (1, -3.0, 1.6), (1, -1.0, 1.6), (1, 0.0, 1.2), (1, 0.25, 1.1), (1, 0.5, 1.0), (1, 0.8, 1.0),
    (2, -3.0, 1.3), (2, -1.0, 1.3), (2, -0.5, 1.1), (2, -0.25, 1.0), (2, 0.0, 1.0),
])
def test_iiw_enhancement_factor_by_hand(case, r, f):
    smax = 100.0
    smin = r * smax
    a, m = (smax - smin) / 2.0, (smax + smin) / 2.0
    assert ms.iiw_enhancement_factor([a], [m], case)[0] == pytest.approx(f, rel=1e-12)
    out, _ = ms.equivalent_amplitude([a], [m], f"iiw_enhancement_case{case}")
    assert out[0] == pytest.approx(a / f, rel=1e-12)


def test_iiw_enhancement_of_a_cycle_entirely_in_compression_is_the_largest():
    # No tensile peak: taken as R < -1 (common practice).
    assert ms.iiw_enhancement_factor([40.0], [-60.0], 1)[0] == 1.6
    assert ms.iiw_enhancement_factor([40.0], [-60.0], 2)[0] == 1.3


def test_the_codes_rules_on_a_welded_curve_raise_no_mismatch_caution():
    # They are written for the codes' curves (unlike Goodman and the like).
    from service.engine.assessment import AssessmentOptions
    from service.engine.damage import assess_history
    from service.engine.sn_catalogue import catalogue_curve

    x = np.tile([-80.0, 40.0], 200)
    for method in ms.CODE_RULES:
        r = assess_history(x, catalogue_curve("IIW:FAT90"),
                           AssessmentOptions(mean_stress_method=method))
        assert "mean_stress_on_welded_curve" not in {c.code for c in r.cautions}
    r = assess_history(x, catalogue_curve("IIW:FAT90"),
                       AssessmentOptions(mean_stress_method="goodman", ultimate_strength=500.0))
    assert "mean_stress_on_welded_curve" in {c.code for c in r.cautions}



# ---------------------------------------------------------------- a user's Haigh diagram

# Invented test points (mean, amplitude) at one life [MPa]; the curve is for
# R = -1 unless said otherwise.
POINTS = [[-250.0, 180.0], [0.0, 150.0], [200.0, 100.0], [400.0, 0.0]]


@pytest.mark.parametrize("a, m, expected", [
    (100.0, 0.0, 100.0),                       # on the curve's own ratio: as is
    (100.0, 100.0, 100.0 * 150.0 / 125.0),     # A(100) = 125 by hand
    (50.0, 300.0, 50.0 * 150.0 / 50.0),        # A(300) = 50
    (80.0, -100.0, 80.0 * 150.0 / 162.0),      # A(-100) = 150 + 30 * 100/250 = 162
    (80.0, -400.0, 80.0 * 150.0 / 180.0),      # held beyond the first point
])
def test_haigh_diagram_by_hand(a, m, expected):
    out, over = ms.equivalent_amplitude([a], [m], "haigh", haigh_diagram=POINTS)
    assert out[0] == pytest.approx(expected, rel=1e-12) and not over[0]


def test_haigh_diagram_breakdown_and_the_curves_ratio():
    out, over = ms.equivalent_amplitude([10.0], [400.0], "haigh", haigh_diagram=POINTS)
    assert math.isinf(out[0]) and over[0]                # zero amplitude: static
    # A curve for R = 0: the reference is where sm = sa meets the diagram,
    # A(a) = a on the segment 0..200: 150 - 0.25 a = a, a = 120 (by hand).
    assert ms.haigh_reference(ms.check_haigh(POINTS), 0.0) == pytest.approx(120.0, rel=1e-12)
    out, _ = ms.equivalent_amplitude([120.0], [120.0], "haigh", haigh_diagram=POINTS,
                                     haigh_stress_ratio=0.0)
    assert out[0] == pytest.approx(120.0, rel=1e-9)       # R = 0 on an R = 0 curve
    with pytest.raises(InvalidParameter):
        ms.equivalent_amplitude([1.0], [1.0], "haigh", haigh_diagram=[[0, 100], [-5, 50]])
    with pytest.raises(InvalidParameter):
        ms.equivalent_amplitude([1.0], [1.0], "haigh")     # no diagram


def test_a_stress_relieved_detail_under_r_0_worked_by_hand():
    # IIW recommendations 2016 sec. 3.5.2 (from memory), case 1: at R = 0 the
    # FAT class is raised by f(0) = 1.2. 100 MPa ranges at R = 0 (0 -> 100)
    # on FAT 90: N = 2e6 (1.2 * 90 / 100)^3 = 2.519e6 cycles (m = 3 above the
    # knee at 1e7), so 1e5 cycles use 1e5 / 2.519e6 of the life.
    from service.engine.assessment import AssessmentOptions
    from service.engine.damage import assess_history
    from service.engine.sn_catalogue import catalogue_curve

    x = np.tile([0.0, 100.0], 100_001)[:-1]        # 1e5 full cycles and a closing half
    r = assess_history(x, catalogue_curve("IIW:FAT90"),
                       AssessmentOptions(mean_stress_method="iiw_enhancement_case1",
                                         reserve_factor=False))
    n_f = 2e6 * (1.2 * 90.0 / 100.0) ** 3
    assert n_f == pytest.approx(2.519e6, rel=1e-3)
    assert r.damage == pytest.approx(r.cycles_counted / n_f, rel=1e-9)
    # EN 1993-1-9 7.2.1(2): the same range fully in compression counts 60 %.
    y = np.tile([-100.0, 0.0], 100_001)[:-1]
    en = assess_history(y, catalogue_curve("EN1993-1-9:71"),
                        AssessmentOptions(mean_stress_method="en1993_reduced_compression",
                                          reserve_factor=False))
    assert en.damage == pytest.approx(en.cycles_counted / (2e6 * (71 / 60.0) ** 3), rel=1e-9)
