"""Results an engineer can sign off (issue 15): each defect of the review,
checked against the source that fixes the right number.

Each test names its source beside the number; values recalled without the
text at hand say "from memory".
"""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from service.engine import CycleTable
from service.engine.damage import AssessmentOptions, assess, assess_history
from service.engine.sn_catalogue import catalogue_curve
from service.engine.sn_estimate import fatigue_strength_fraction, shigley

EN71 = catalogue_curve("EN1993-1-9:71")


def spectrum(ranges, counts, means=None):
    """A cycle table of blocks: ``counts[i]`` cycles of ``ranges[i]`` about ``means[i]``."""
    r = np.asarray(ranges, float)
    m = np.zeros_like(r) if means is None else np.asarray(means, float)
    n = np.asarray(counts, float)
    idx = np.arange(r.size, dtype=np.int64)
    return CycleTable(m - r / 2, m + r / 2, n, idx, idx + 1)


def codes(result):
    return [c.code for c in result.cautions]


# ---------------------------------------------------------------- defect 2


def test_equivalent_range_of_a_spectrum_mostly_below_the_cut_off():
    # EN 1993-1-9:2005 Annex A / sec. 8: Delta sigma_E,2 is the constant range
    # that at 2e6 cycles gives the spectrum's damage on the same curve, so
    # (Delta sigma_E,2 / Delta sigma_C)^3 = D on the m = 3 segment. 1e3 cycles
    # of 100 MPa plus 1e7 cycles of 20 MPa (below the cut-off Delta sigma_L =
    # 28.7 MPa of category 71: no damage, eq. (7.2)).
    table = spectrum([100.0, 20.0], [1e3, 1e7])
    r = assess(table, EN71)
    d = 1e3 / (2e6 * (71 / 100) ** 3)
    assert r.damage == pytest.approx(d, rel=1e-12)
    assert r.equivalent_range == pytest.approx(71 * d ** (1 / 3), rel=1e-12)
    assert (r.equivalent_slope, r.equivalent_cycles) == (3.0, 2e6)
    # The one-slope power sum over every cycle (what was reported before)
    # is 4.3 times too high here: the small cycles entered with m = 3.
    power_sum = ((1e3 * 100 ** 3 + 1e7 * 20 ** 3) / 2e6) ** (1 / 3)
    assert power_sum > 4 * r.equivalent_range


def test_equivalent_range_verification_with_partial_factors():
    # EN 1993-1-9:2005 sec. 8, eq. (8.2): gamma_Ff Delta sigma_E,2 /
    # (Delta sigma_C / gamma_Mf) <= 1 exactly when D <= 1 (closed form on the
    # m = 3 segment); the range is reported at the measured level.
    table = spectrum([180.0, 120.0, 60.0], [2e4, 1e5, 1e6])
    opts = AssessmentOptions(load_factor=1.1, strength_factor=1.35)
    r = assess(table, EN71, opts)
    ratio = 1.1 * r.equivalent_range / (71 / 1.35)
    assert ratio ** 3 == pytest.approx(r.damage, rel=1e-12)


def test_equivalent_range_uses_the_slope_of_a_shear_curve():
    # EN 1993-1-9:2005 Fig. 7.2: shear curves have m = 5 through Delta tau_C
    # at 2e6, so Delta tau_E,2 = Delta tau_C D^(1/5) (closed form).
    curve = catalogue_curve("EN1993-1-9:shear-80")
    r = assess(spectrum([150.0, 90.0], [1e4, 2e5]), curve)
    assert r.equivalent_slope == 5.0
    assert r.equivalent_range == pytest.approx(80 * r.damage ** 0.2, rel=1e-12)
    # DNV-RP-C203 B1 has m1 = 4 at 2e6 cycles (Table 2-1, from memory).
    b1 = catalogue_curve("DNV-RP-C203:B1")
    rb = assess(spectrum([200.0], [1e5]), b1)
    assert rb.equivalent_slope == 4.0
    assert rb.equivalent_range == pytest.approx(
        float(b1.range_at(2e6)) * rb.damage ** 0.25, rel=1e-12)


# ---------------------------------------------------------------- defect 3


def test_iiw_shear_continues_with_haibach_slope_nine_below_the_knee():
    # IIW recommendations (Hobbacher 2016) sec. 3.2 and 4.3, from memory:
    # shear m = 5 to the knee at 1e8; for spectra continued with 2m - 1 = 9
    # (Haibach); the constant-amplitude variant has m = 22.
    va = catalogue_curve("IIW:shear-FAT100")
    ca = catalogue_curve("IIW:shear-FAT100-CA")
    knee = 100 * (2e6 / 1e8) ** (1 / 5)
    assert float(va.range_at(1e8)) == pytest.approx(knee, rel=1e-12)
    s = 0.7 * knee
    assert va.cycles_to_failure([s])[0] == pytest.approx(1e8 * (knee / s) ** 9, rel=1e-10)
    assert ca.cycles_to_failure([s])[0] == pytest.approx(1e8 * (knee / s) ** 22, rel=1e-10)
    # Normal stress: 5 below the knee at 1e7 for spectra, 22 for constant amplitude.
    k = 90 * (2e6 / 1e7) ** (1 / 3)
    assert catalogue_curve("IIW:FAT90").cycles_to_failure([0.8 * k])[0] == pytest.approx(
        1e7 * 0.8 ** -5, rel=1e-10)
    assert catalogue_curve("IIW:FAT90-CA").cycles_to_failure([0.8 * k])[0] == pytest.approx(
        1e7 * 0.8 ** -22, rel=1e-10)


# ---------------------------------------------------------------- defect 10


@pytest.mark.parametrize("designation", ["D", "F", "B1", "W3"])
def test_dnv_second_segment_uses_the_tabulated_log_a2(designation):
    # DNV-RP-C203 (2016) Table 2-1, from memory: log N = log a1 - m1 log S to
    # 1e7 cycles, log a2 - m2 log S beyond, each with its tabulated intercept.
    from service.engine.sn_catalogue import DNV_AIR

    m1, loga1, m2, loga2, _ = DNV_AIR[designation]
    curve = catalogue_curve(f"DNV-RP-C203:{designation}")
    s_knee = 10 ** ((loga1 - 7) / m1)
    above, below = 1.5 * s_knee, 0.6 * s_knee
    n = curve.cycles_to_failure([above, below])
    assert n[0] == pytest.approx(10 ** (loga1 - m1 * math.log10(above)), rel=1e-10)
    assert n[1] == pytest.approx(10 ** (loga2 - m2 * math.log10(below)), rel=1e-10)


def test_dnv_curve_d_fatigue_limit():
    # DNV-RP-C203 (2016) Table 2-1, from memory: curve D in air, 52.63 MPa at 1e7.
    assert float(catalogue_curve("DNV-RP-C203:D").range_at(1e7)) == pytest.approx(52.63,
                                                                                  abs=0.01)


# ---------------------------------------------------------------- defect 4


@pytest.mark.parametrize("su, f", [(400.0, 0.9), (620.5, 0.86), (1379.0, 0.77)])
def test_fraction_at_1e3_cycles_falls_with_strength(su, f):
    # Shigley's MED, 10th ed., eq. (6-10) and Fig. 6-18 (from memory): f = 0.9
    # below 70 kpsi, about 0.86 at 90 kpsi, 0.77 at 200 kpsi.
    assert fatigue_strength_fraction(su) == pytest.approx(f, abs=0.006)


def test_torsion_estimate_starts_at_the_shear_ultimate_strength():
    # Shigley's MED, 10th ed., eq. (6-54), from memory: S_su = 0.67 S_ut is
    # the shear amplitude at 1e3 cycles; S_se = k_c S_e' with k_c = 0.59.
    est = shigley(600.0, surface_finish="ground", load_type="torsion")
    assert est.strength_at_1e3 == pytest.approx(0.67 * 600.0)
    assert est.curve.cycles_to_failure([2 * 0.67 * 600.0])[0] == pytest.approx(1e3, rel=1e-9)
    # Against what the bending fraction gave: at a shear amplitude of 300 MPa
    # the old line (0.9 S_ut at 1e3) lived 3.2 times longer (regression pin).
    b = -math.log10(0.9 * 600 / est.endurance_limit) / 3
    old_life = 1e3 * (300 / (0.9 * 600)) ** (1 / b)
    new_life = est.curve.cycles_to_failure([600.0])[0]
    assert old_life > 3 * new_life


def test_estimate_for_aluminium_has_no_cut_off_and_says_so():
    # Shigley's MED, 10th ed., sec. 6-7 (from memory): aluminium alloys have
    # no endurance limit; the estimate is made for steels.
    est = shigley(300.0, surface_finish="machined", material_class="aluminium")
    assert est.curve.cutoff_cycles is None and est.curve.fatigue_limit_cycles is None
    assert len(est.curve.slopes) == 1
    r = assess(spectrum([2 * est.endurance_limit * 0.5], [1e6]), est.curve)
    assert r.damage > 0
    assert "estimate_not_steel" in codes(r)


def test_default_reliability_is_said_to_give_a_median_curve():
    est = shigley(600.0)
    assert est.reliability == 0.5
    assert any("median" in n for n in est.curve.notes)


# ---------------------------------------------------------------- defect 5


def test_share_of_cycles_and_damage_below_the_limit():
    # EN 1993-1-9 category 71: Delta sigma_D = 52.3 MPa at 5e6 (eq. 7.1); the
    # shares are counted on the curve continued by Haibach's 2m - 1 = 5
    # below it (closed form: N = 5e6 (Delta sigma_D / S)^5).
    table = spectrum([100.0, 40.0, 20.0], [1e3, 1e5, 1e7])
    r = assess(table, EN71)
    sd = 71 * 0.4 ** (1 / 3)
    n = [2e6 * (71 / 100) ** 3, 5e6 * (sd / 40) ** 5, 5e6 * (sd / 20) ** 5]
    d = [1e3 / n[0], 1e5 / n[1], 1e7 / n[2]]
    b = r.below_limit
    assert b["limit_range"] == pytest.approx(sd, rel=1e-12)
    assert b["cycles_share"] == pytest.approx((1e5 + 1e7) / (1e3 + 1e5 + 1e7), rel=1e-12)
    assert b["damage_share"] == pytest.approx((d[1] + d[2]) / sum(d), rel=1e-9)
    # EN's own curve stops at the cut-off (28.7 MPa): the 20 MPa cycles do
    # nothing there, and that is most of the damage by Haibach: cautioned.
    assert r.damage == pytest.approx(d[0] + d[1], rel=1e-9)
    assert "below_limit_damage" in codes(r)


def test_no_below_limit_caution_when_the_curve_keeps_that_damage():
    # IIW FAT 71 for spectra continues with m = 5 without a cut-off, which is
    # Haibach's rule itself: the shares are reported, no caution.
    r = assess(spectrum([100.0, 20.0], [1e3, 1e8]), catalogue_curve("IIW:FAT71"))
    assert r.below_limit["damage_share"] > 0.5
    assert "below_limit_damage" not in codes(r)


# ---------------------------------------------------------------- defect 6


def test_peak_above_yield_and_en_range_limit():
    # EN 1993-1-9:2005 sec. 8(1), from memory: Delta sigma <= 1.5 f_y.
    table = spectrum([560.0], [10], [20.0])
    r = assess(table, EN71, AssessmentOptions(yield_strength=355.0))
    assert "above_yield" not in r.flags             # peak 20 + 280 = 300 < 355
    assert "range_above_static_limit" in r.flags    # 560 > 1.5 * 355 = 532.5
    r2 = assess(spectrum([560.0], [10], [100.0]), EN71,
                AssessmentOptions(yield_strength=355.0))
    assert "range_above_static_limit" in r2.flags   # 560 > 1.5 * 355 = 532.5
    assert "above_yield" in r2.flags                # peak 380 > 355
    shear = assess(spectrum([320.0], [10]), catalogue_curve("EN1993-1-9:shear-80"),
                   AssessmentOptions(yield_strength=355.0))
    assert "range_above_static_limit" in shear.flags  # 320 > 1.5 * 355 / sqrt(3) = 307


def test_missing_yield_strength_is_said_not_skipped():
    r = assess(spectrum([100.0], [1e3]), EN71)
    assert "yield_not_checked" in codes(r)
    r = assess(spectrum([100.0], [1e3]), EN71, AssessmentOptions(yield_strength=355.0))
    assert "yield_not_checked" not in codes(r) and "above_yield" not in r.flags


def test_reserve_factor_says_when_static_strength_limits_it():
    # Small cycles about a high mean: the peak reaches S_u = 700 MPa long
    # before the fatigue damage reaches 1 (the reserve is S_u / peak).
    x = np.tile([590.0, 610.0], 50)
    opts = AssessmentOptions(ultimate_strength=700.0)
    r = assess_history(x, EN71, opts)
    assert r.reserve_limited_by == "static_strength"
    assert r.reserve_factor == pytest.approx(700 / 610, rel=1e-9)
    assert "reserve_limited_by_static_strength" in codes(r)
    r = assess_history(np.tile([-150.0, 150.0], 5000), EN71, opts)
    assert r.reserve_limited_by == "fatigue"


# ---------------------------------------------------------------- defect 7


def test_mean_stress_correction_on_a_welded_curve_is_cautioned():
    # EN 1993-1-9 and IIW assess as-welded joints on range (common practice
    # of the codes; their curves contain high residual stress).
    opts = AssessmentOptions(mean_stress_method="goodman", ultimate_strength=510.0)
    r = assess(spectrum([100.0], [1e4], [50.0]), EN71, opts)
    assert "mean_stress_on_welded_curve" in codes(r)
    assert "mean_stress_on_welded_curve" not in codes(assess(spectrum([100.0], [1e4]), EN71))


def test_fully_reversed_curve_without_correction_under_tensile_means():
    est = shigley(600.0)
    tensile = assess(spectrum([300.0], [1e4], [150.0]), est.curve)
    assert "tensile_mean_uncorrected" in codes(tensile)
    reversed_ = assess(spectrum([300.0], [1e4], [0.0]), est.curve)
    assert "tensile_mean_uncorrected" not in codes(reversed_)
    corrected = assess(spectrum([300.0], [1e4], [150.0]), est.curve, AssessmentOptions(
        mean_stress_method="goodman", ultimate_strength=600.0))
    assert "tensile_mean_uncorrected" not in codes(corrected)


def test_gerber_no_benefit_does_not_penalise_compressive_means():
    # Defect 7: with the policy "no_benefit" a compressive mean neither helps
    # nor hurts: the damage equals that at zero mean (closed form).
    opts = AssessmentOptions(mean_stress_method="gerber", ultimate_strength=500.0)
    comp = assess(spectrum([200.0], [1e4], [-200.0]), EN71, opts).damage
    zero = assess(spectrum([200.0], [1e4], [0.0]), EN71, opts).damage
    assert comp == zero


# ---------------------------------------------------------------- defect 8


@settings(max_examples=60, deadline=None)
@given(st.lists(st.floats(-400, 400, allow_nan=False, width=32), min_size=3, max_size=60))
def test_life_in_repeats_is_that_of_the_repeating_block(values):
    # ASTM E1049-85 sec. 5.4.4.1: a history that repeats is counted as a
    # repeating block; the life in repeats of the one-pass count (residue as
    # half cycles) must be the same (the residue closes with the repetition).
    x = np.asarray(values, float)
    one = assess_history(x, EN71)
    block = assess_history(x, EN71, residue="repeating_block")
    assert one.damage_per_repeat == pytest.approx(block.damage, rel=1e-9, abs=1e-300)
    assert one.damage_per_repeat == pytest.approx(block.damage_per_repeat, rel=1e-9,
                                                  abs=1e-300)
    if math.isfinite(block.life_repeats):
        assert one.life_repeats == pytest.approx(block.life_repeats, rel=1e-9)
    else:
        assert math.isinf(one.life_repeats)


def test_short_history_life_no_longer_exceeds_repetition():
    # A short recording whose largest cycle stays open: with the residue as
    # half cycles one pass did half the damage of a repeat, and the life in
    # repeats came out longer than repetition gives (regression pin).
    x = np.array([0.0, 250.0, 40.0, 120.0, -200.0, 30.0])
    one = assess_history(x, EN71)
    block = assess_history(x, EN71, residue="repeating_block")
    assert one.damage < block.damage                  # one pass: half cycles
    assert one.life_repeats == pytest.approx(block.life_repeats, rel=1e-12)
    assert one.residue_damage_share > 0.95   # all but the small 40-120 cycle is residue
    assert "residue_share" in codes(one)


# ---------------------------------------------------------------- defect 1


def _reversed_shear(n_cycles=200, tau=80.0, samples=40):
    t = np.linspace(0.0, 2 * np.pi * n_cycles, n_cycles * samples + 1)
    return tau * np.sin(t)


@pytest.mark.parametrize("m_curve", ["EN1993-1-9:71", "EN1993-1-9:shear-80"])
def test_reversed_pure_shear_keeps_its_reversals(m_curve):
    # Closed form (von Mises): a fully reversed pure-shear sine of amplitude
    # tau has the signed von Mises history sqrt(3) tau(t), i.e. the range
    # sqrt(3) * 2 tau per cycle; losing the reversals would give twice the
    # cycles at half the range, damage 2^(m-1) times too low.
    from service.engine.multiaxial import assess_multiaxial, reduce

    curve = catalogue_curve(m_curve)
    tau = _reversed_shear()
    plane = np.stack([np.zeros_like(tau), np.zeros_like(tau), tau], 1)
    space = np.zeros((tau.size, 6))
    space[:, 4] = tau                      # torsion about x in 3-D: syz
    for comps in (plane, space):
        for name in ("signed_von_mises", "signed_tresca", "abs_max_principal"):
            factor = {"signed_von_mises": math.sqrt(3), "signed_tresca": 2.0,
                      "abs_max_principal": 1.0}[name]
            assert reduce(comps, name) == pytest.approx(factor * tau, abs=1e-9), name
        r = assess_multiaxial(comps, curve, reductions=("signed_von_mises",))
        ref = assess_history(math.sqrt(3) * tau, curve)
        assert r.governing.damage == pytest.approx(ref.damage, rel=1e-12)
        one_sided = assess_history(np.abs(math.sqrt(3) * tau), curve).damage
        assert ref.damage > 3.9 * one_sided
        assert r.sign_ambiguous_share == 0.0 and not any(
            c.code == "sign_ambiguous" for c in r.cautions)


def test_dominant_shear_with_a_small_normal_stress_keeps_its_reversals():
    # A shaft in reversed torsion with a small steady axial stress: the
    # counted range must stay near the reversed one (2 sqrt(sigma^2/4 ...)),
    # not collapse to the small swing of a one-sided signal (regression pin
    # against the closed form of the largest von Mises: sqrt(s^2 + 3 tau^2)).
    from service.engine.multiaxial import reduce

    tau = _reversed_shear(n_cycles=10)
    comps = np.stack([np.full_like(tau, 20.0), np.zeros_like(tau), tau], 1)
    h = reduce(comps, "signed_von_mises")
    peak = math.sqrt(20.0 ** 2 + 3 * 80.0 ** 2)
    assert h.max() == pytest.approx(peak, rel=1e-6)
    assert h.min() == pytest.approx(-peak, rel=1e-6)


def test_proportional_loading_of_any_direction_equals_its_uniaxial_history():
    # sigma(t) = lambda(t) S for a fixed S: every signed reduction is
    # lambda(t) times its value for S (closed form), whatever S's direction.
    from service.engine.multiaxial import reduce

    lam = np.cumsum(np.random.default_rng(3).normal(0, 1, 500))
    for s in ([60.0, -20.0, 45.0], [0.0, 0.0, 50.0], [-80.0, 10.0, 5.0]):
        comps = lam[:, None] * np.array(s)
        for name in ("signed_von_mises", "signed_tresca", "abs_max_principal"):
            h = reduce(comps, name)
            k = int(np.argmax(np.abs(lam)))
            assert h / h[k] == pytest.approx(lam / lam[k], rel=1e-9, abs=1e-12), (s, name)


def test_hydrostatic_sign_under_shear_is_cautioned():
    # The first invariant of pure shear is zero: its sign says nothing, and
    # the result says so (issue 15, defect 1).
    from service.engine.multiaxial import assess_multiaxial

    tau = _reversed_shear(n_cycles=20)
    comps = np.stack([np.zeros_like(tau), np.zeros_like(tau), tau], 1)
    r = assess_multiaxial(comps, EN71, reductions=("signed_von_mises_hydrostatic",))
    assert r.sign_ambiguous_share == pytest.approx(1.0)
    assert any(c.code == "sign_ambiguous" for c in r.cautions)


def test_superposition_of_reversed_torsion_and_its_plane_scans():
    # One node under one load case of unit shear (torsion), reversed: the
    # signed von Mises node history is sqrt(3) L(t) (closed form); the
    # critical plane scan finds the 45 deg plane, where the normal stress is
    # the shear stress (Mohr's circle), and the shear scan the 0 deg plane.
    from service.engine.multiaxial import assess_superposition

    load = _reversed_shear(n_cycles=100, tau=1.0)[None, :]
    for unit in (np.array([[[0.0, 0.0, 80.0]]]), np.array([[[0, 0, 0, 80.0, 0, 0]]])):
        r = assess_superposition(unit, load, EN71, top=1)
        ref = assess_history(math.sqrt(3) * 80.0 * load[0], EN71).damage
        assert r.damage[0] == pytest.approx(ref, rel=1e-9)
        assert r.sign_ambiguous_share[0] == 0.0
        cp = assess_superposition(unit, load, EN71, reduction="critical_plane",
                                  plane_step_deg=15, top=1)
        assert cp.damage[0] == pytest.approx(assess_history(80.0 * load[0], EN71).damage,
                                             rel=1e-9)
        shear = catalogue_curve("EN1993-1-9:shear-80")
        cs = assess_superposition(unit, load, EN71, reduction="critical_plane_shear",
                                  shear_curve=shear, plane_step_deg=15, top=1)
        assert cs.damage[0] == pytest.approx(assess_history(80.0 * load[0], shear).damage,
                                             rel=1e-9)
        assert cs.planes[int(cs.plane_index[0])]["kind"] == "shear"
        assert cs.top[0][1].damage == pytest.approx(cs.damage[0], rel=1e-12)


# ---------------------------------------------------------------- defect 9


@pytest.mark.parametrize("value, meant, unit", [
    (206.0, 206000.0, "GPa"), (2.06e11, 206000.0, "Pa"), (29.0e6, 29.0e6 * 6.894757e-3, "psi")])
def test_modulus_in_the_wrong_unit_is_refused_with_the_value_meant(value, meant, unit):
    # 1 psi = 6.894757e-3 MPa (NIST SP 811, appendix B); steel's E is about
    # 206 GPa = 29e6 psi (common practice).
    from service.engine import units
    from service.engine.plausibility import ImplausibleValue

    with pytest.raises(ImplausibleValue) as err:
        units.to_mpa([1.0, 2.0], "microstrain", value)
    assert err.value.field == "youngs_modulus"
    assert err.value.details["probable_value"] == pytest.approx(meant, rel=1e-9)
    assert err.value.details["probable_unit"] == unit
    assert f"{meant:.6g}" in str(err.value)
    assert units.to_mpa([100.0], "microstrain", 206000.0)[0] == pytest.approx(20.6)


def test_strength_in_psi_is_refused_and_a_low_one_cautioned():
    from service.engine.plausibility import ImplausibleValue

    with pytest.raises(ImplausibleValue) as err:
        AssessmentOptions(mean_stress_method="goodman", ultimate_strength=75000.0)
    assert err.value.details["probable_value"] == pytest.approx(75000 * 6.894757e-3)
    assert err.value.field == "ultimate_strength"
    r = assess(spectrum([20.0], [10]), EN71, AssessmentOptions(yield_strength=40.0))
    note = [c for c in r.cautions if c.code == "implausible_value"]
    assert note and "275.8 MPa" in note[0].text        # 40 ksi


def test_cautions_have_codes_severities_and_sentence_case():
    # Issue 17: each caution a stable code, a severity, a sentence starting
    # with a capital; lists ordered by severity.
    from service.engine.cautions import CAUTION_TEXTS, SEVERITIES, caution, merge, severity

    for code in CAUTION_TEXTS:
        assert severity(code) in SEVERITIES
    c = caution("curve_note", note="estimated from tensile data")
    assert c.text == "Estimated from tensile data"
    x = np.tile([590.0, 610.0], 50)
    r = assess_history(x, EN71, AssessmentOptions(ultimate_strength=700.0))
    merged = merge({"p": r.caution_dicts()})
    ranks = [SEVERITIES.index(m["severity"]) for m in merged]
    assert ranks == sorted(ranks) and merged[0]["severity"] == "critical"


def test_a_point_past_its_allowable_sum_is_flagged_as_the_ledger_flags_it():
    # Issue 17: the assessment and the ledger use one flag, allowable_reached.
    # EN 1993-1-9 cat. 71: 2e6 cycles of 71 MPa is damage 1.0 (the detail
    # category's definition, sec. 7.1); half of them is 0.5.
    from service.engine.damage import FLAGS

    full = assess(spectrum([71.0], [2e6]), EN71)
    assert full.damage == pytest.approx(1.0) and "allowable_reached" in full.flags
    half = assess(spectrum([71.0], [1e6]), EN71)
    assert "allowable_reached" not in half.flags
    stricter = assess(spectrum([71.0], [1e6]), EN71, AssessmentOptions(allowable_damage=0.5))
    assert "allowable_reached" in stricter.flags
    assert set(full.flags) <= set(FLAGS)
