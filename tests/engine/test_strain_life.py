"""The local strain approach (issue 20) against its defining equations.

Sources: Ramberg-Osgood eps = s/E + (s/K')^(1/n'); Masing branches
d_eps = d_s/E + 2 (d_s/2K')^(1/n'); Neuber s eps = e^2/E; Glinka (Molski and
Glinka 1981) s^2/2E + s/(1+n') (s/K')^(1/n') = e^2/2E; Coffin-Manson-Basquin
eps_a = sf/E (2N)^b + ef (2N)^c, Morrow's sf - sm, SWT smax eps_a = sf^2/E
(2N)^2b + sf ef (2N)^(b+c); the transition life 2N_t = (ef E / sf)^(1/(b-c))
(N. E. Dowling, Mechanical Behavior of Materials, 4th ed., ch. 14, from
memory). Each case is solved by hand here (inverted: a local state chosen,
the elastic value it answers computed from the closed form, and the solver
asked to find the state again).
"""

import math

import numpy as np
import pytest

from service.engine import strain_life as sl
from service.engine.assessment import AssessmentOptions
from service.engine.damage import assess_history
from service.engine.sn_curve import basquin_amplitude
from service.engine.errors import InvalidParameter

# A steel of the kind the uniform material law describes (invented values).
STEEL = sl.StrainLifeMaterial(206_000.0, 1150.0, 0.16, 1050.0, -0.085, 0.45, -0.6)


def ro(s, m=STEEL):
    return s / m.youngs_modulus + (s / m.cyclic_strength_coefficient) ** (
        1 / m.cyclic_hardening_exponent)


@pytest.mark.parametrize("stress", [50.0, 250.0, 420.0, 600.0])
def test_neuber_and_glinka_first_loading_by_hand(stress):
    m, E, n = STEEL, STEEL.youngs_modulus, STEEL.cyclic_hardening_exponent
    eps = ro(stress)
    e_neuber = math.sqrt(E * stress * eps)                      # s eps = e^2 / E
    w = stress ** 2 / (2 * E) + stress / (1 + n) * (stress / m.cyclic_strength_coefficient) ** (
        1 / n)
    e_glinka = math.sqrt(2 * E * w)                             # W = e^2 / 2E
    for rule, e in (("neuber", e_neuber), ("glinka", e_glinka)):
        sig, got_eps = sl.local_states(np.array([e]), m, rule)
        assert sig[0] == pytest.approx(stress, rel=1e-10)
        assert got_eps[0] == pytest.approx(eps, rel=1e-10)
    # Glinka's energy is below Neuber's rectangle: less local strain for one e.
    assert e_glinka > e_neuber
    # A gauge at the notch root: the strain itself.
    sig, _ = sl.local_states(np.array([eps]), m, "strain")
    assert sig[0] == pytest.approx(stress, rel=1e-10)


def test_masing_branches_and_memory_by_hand():
    # Pseudo stress 0 -> 500 -> -100 -> 250 -> -500: the small loop -100/250
    # closes and is forgotten; the branch from +500 goes on to -500 as if
    # never interrupted, reaching the mirror of the first-loading point.
    x = np.array([500.0, -100.0, 250.0, -500.0, 700.0])
    sig, eps = sl.local_states(x, STEEL, "neuber")
    s1 = sl.local_states(np.array([500.0]), STEEL, "neuber")[0][0]
    assert sig[0] == pytest.approx(s1, rel=1e-12)
    # Branch 500 -> -100: Masing, range 600 is twice the first loading at 300.
    half = sl.local_states(np.array([300.0]), STEEL, "neuber")[0][0]
    assert sig[1] == pytest.approx(s1 - 2 * half, rel=1e-12)
    assert eps[0] - eps[1] == pytest.approx(2 * ro(half), rel=1e-12)
    # The closed loop's tips satisfy the Masing relation of its own range.
    loop = sl.local_states(np.array([175.0]), STEEL, "neuber")[0][0]
    assert sig[2] - sig[1] == pytest.approx(2 * loop, rel=1e-12)
    # Memory: at -500 the stress is the mirror of the first loading.
    assert sig[3] == pytest.approx(-s1, rel=1e-12)
    assert eps[3] == pytest.approx(-eps[0], rel=1e-12)
    # Beyond +500 again: back on the first-loading curve at 700.
    s7 = sl.local_states(np.array([700.0]), STEEL, "neuber")[0][0]
    assert sig[4] == pytest.approx(s7, rel=1e-12)


def test_coffin_manson_basquin_morrow_and_swt_by_hand():
    m = STEEL
    E, sf, b, ef, c = 206_000.0, 1050.0, -0.085, 0.45, -0.6
    for two_n in (1e2, 1e4, 1e6, 1e8):
        ea = sf / E * two_n ** b + ef * two_n ** c
        assert sl.reversals_to_failure([ea], m, mean_stress_method="none")[0] == \
            pytest.approx(two_n, rel=1e-9)
        sm = 120.0
        ea_m = (sf - sm) / E * two_n ** b + ef * two_n ** c
        assert sl.reversals_to_failure([ea_m], m, mean_stress=[sm])[0] == \
            pytest.approx(two_n, rel=1e-9)
        smax = 400.0
        product = sf * sf / E * two_n ** (2 * b) + sf * ef * two_n ** (b + c)
        assert sl.reversals_to_failure([product / smax], m, max_stress=[smax],
                                       mean_stress_method="smith_watson_topper")[0] == \
            pytest.approx(two_n, rel=1e-9)
    # SWT: no damage without a tensile peak; Morrow: none left past sf.
    assert math.isinf(sl.reversals_to_failure([0.002], m, max_stress=[-10.0],
                                              mean_stress_method="smith_watson_topper")[0])
    assert sl.reversals_to_failure([0.002], m, mean_stress=[1100.0])[0] == 0.0
    # A form's own input left out is refused, not read as 0 (an SWT peak of
    # 0 would mean no damage at all).
    for form, given in (("smith_watson_topper", {"mean_stress": [50.0]}),
                        ("morrow", {"max_stress": [300.0]}), ("walker", {"mean_stress": [0.0]})):
        with pytest.raises(InvalidParameter, match="needs"):
            sl.reversals_to_failure([0.002], m, mean_stress_method=form, **given)


def test_walker_by_hand():
    # Walker's sigma_ar = sigma_max^(1 - g) sigma_a^g carried into both terms
    # (N. E. Dowling, FFEMS 32, 2009, from memory): eps_a = sf/E (2N)^b
    # ((1-R)/2)^(1-g) + ef (2N)^c ((1-R)/2)^((1-g) c/b), (1-R)/2 = sa/smax.
    E, sf, b, ef, c, g = 206_000.0, 1050.0, -0.085, 0.45, -0.6, 0.6
    m = sl.StrainLifeMaterial(E, 1150.0, 0.16, sf, b, ef, c, walker_exponent=g)
    for two_n in (1e3, 1e5, 1e7):
        for sa, smax in ((200.0, 300.0), (150.0, 150.0), (250.0, 500.0)):
            r = sa / smax
            ea = sf / E * two_n ** b * r ** (1 - g) + ef * two_n ** c * r ** ((1 - g) * c / b)
            got = sl.reversals_to_failure([ea], m, mean_stress=[smax - sa], max_stress=[smax],
                                          mean_stress_method="walker")[0]
            assert got == pytest.approx(two_n, rel=1e-9)
    # Fully reversed (R = -1): no shift; gamma = 1: no mean effect at all.
    none = sl.reversals_to_failure([0.003], m, mean_stress_method="none")[0]
    assert sl.reversals_to_failure([0.003], m, mean_stress=[0.0], max_stress=[400.0],
                                   mean_stress_method="walker")[0] == pytest.approx(none)
    one = sl.StrainLifeMaterial(E, 1150.0, 0.16, sf, b, ef, c, walker_exponent=1.0)
    assert sl.reversals_to_failure([0.003], one, mean_stress=[200.0], max_stress=[600.0],
                                   mean_stress_method="walker")[0] == pytest.approx(none)
    # No tensile peak: no damage (as SWT); no exponent: refused.
    assert math.isinf(sl.reversals_to_failure([0.002], m, mean_stress=[-300.0],
                                              max_stress=[-100.0],
                                              mean_stress_method="walker")[0])
    with pytest.raises(InvalidParameter):
        sl.reversals_to_failure([0.002], STEEL, mean_stress=[0.0], max_stress=[100.0],
                                mean_stress_method="walker")


def test_the_transition_life():
    # At 2N_t the elastic and plastic amplitudes are equal.
    m = STEEL
    nt = m.transition_reversals()
    assert nt == pytest.approx((0.45 * 206_000 / 1050) ** (1 / (-0.085 + 0.6)), rel=1e-12)
    elastic = 1050 / 206_000 * nt ** -0.085
    plastic = 0.45 * nt ** -0.6
    assert elastic == pytest.approx(plastic, rel=1e-12)
    assert sl.reversals_to_failure([elastic + plastic], m, mean_stress_method="none")[0] == \
        pytest.approx(nt, rel=1e-9)


@pytest.mark.parametrize("ms_strain, ms_stress", [("morrow", "morrow"),
                                                  ("smith_watson_topper", "smith_watson_topper"),
                                                  ("walker", "walker"),
                                                  ("none", "none")])
def test_without_plasticity_strain_life_is_stress_life_on_the_basquin_curve(ms_strain,
                                                                           ms_stress):
    # Consistency: a very large K' (no cyclic plasticity) and a negligible
    # ductility term leave sigma = e and eps_a = sigma_a / E; strain-life
    # then equals stress-life on sigma_a = sf (2N)^b with the matching
    # mean-stress form (Morrow's elastic term is stress-life Morrow with sf).
    elastic = sl.StrainLifeMaterial(206_000.0, 1e12, 0.15, 1050.0, -0.085, 1e-15, -0.6,
                                    walker_exponent=0.65)
    rng = np.random.default_rng(5)
    x = 60.0 + np.cumsum(rng.normal(0, 25.0, 5000))
    x = 40.0 + 300.0 * (x - x.mean()) / np.abs(x - x.mean()).max()
    got = sl.assess_strain_life(x, elastic, input_kind="local_elastic",
                                mean_stress_method=ms_strain, reserve_factor=False)
    curve = basquin_amplitude(1050.0, -0.085)
    ref = assess_history(x, curve, AssessmentOptions(
        mean_stress_method=ms_stress, fatigue_strength_coefficient=1050.0,
        walker_exponent=0.65 if ms_stress == "walker" else None,
        compressive_mean="formula", reserve_factor=False))
    assert got.damage == pytest.approx(ref.damage, rel=1e-9)
    assert got.cycles_counted == ref.cycles_counted


def test_a_notch_that_yields_lives_shorter_than_elastic_stress_life_says():
    # Kt = 3 on a nominal 200 MPa amplitude: the pseudo stress 600 MPa is
    # beyond the cyclic yield, the local strain larger than e/E, so the life
    # is shorter than the elastic (Basquin) reading of the same pseudo stress.
    x = np.tile([-200.0, 200.0], 50)
    notch = sl.assess_strain_life(x, STEEL, kt=3.0, mean_stress_method="none",
                                  reserve_factor=False)
    elastic = sl.StrainLifeMaterial(206_000.0, 1e12, 0.16, 1050.0, -0.085, 0.45, -0.6)
    no_yield = sl.assess_strain_life(x, elastic, kt=3.0, mean_stress_method="none",
                                     reserve_factor=False)
    assert notch.damage > no_yield.damage
    assert notch.max_strain_amplitude > 600.0 / 206_000.0


def test_the_reserve_factor_brings_the_damage_to_the_allowable_sum():
    x = np.tile([-150.0, 220.0, -60.0, 260.0], 40)
    r = sl.assess_strain_life(x, STEEL, kt=2.2)
    again = sl.assess_strain_life(x * r.reserve_factor, STEEL, kt=2.2, reserve_factor=False)
    assert again.damage == pytest.approx(1.0, rel=1e-6)


def test_estimates_are_labelled_and_follow_their_papers():
    # Baumel-Seeger uniform material law for steels (from memory): sf = 1.5
    # Su, b = -0.087, ef = 0.59 psi, c = -0.58, K' = 1.65 Su, n' = 0.15.
    m = sl.estimate("uniform_material_law", ultimate_strength=600.0)
    assert (m.fatigue_strength_coefficient, m.fatigue_strength_exponent) == (900.0, -0.087)
    assert m.fatigue_ductility_coefficient == pytest.approx(0.59)   # Su/E < 0.003: psi 1
    assert m.cyclic_strength_coefficient == pytest.approx(990.0)
    assert "estimate" in m.source
    hi = sl.estimate("uniform_material_law", ultimate_strength=1200.0)
    assert hi.fatigue_ductility_coefficient == pytest.approx(
        0.59 * (1.375 - 125 * 1200 / 206_000))
    # Medians (Meggiolaro and Castro 2004): the cyclic curve from compatibility.
    med = sl.estimate("medians", ultimate_strength=600.0)
    assert med.cyclic_hardening_exponent == pytest.approx(-0.09 / -0.59)
    hb = sl.estimate("hardness", brinell_hardness=250.0)
    assert hb.fatigue_strength_coefficient == pytest.approx(4.25 * 250 + 225)


@pytest.mark.parametrize("gate", [0.0, 15.0])
def test_block_by_block_equals_the_whole_history(gate):
    # Issue 20: the memory and the residue's local states carried across
    # blocks give the very loops of the whole history counted at once
    # (common practice: a running assessment must not depend on where the
    # recording was cut).
    from service.engine.strain_life_blocks import LocalState, close_local, count_block_local

    rng = np.random.default_rng(21)
    s = 40 + np.cumsum(rng.normal(0, 30, 6000))
    s = 60 + 180 * (s - s.mean()) / np.abs(s - s.mean()).max()
    x = 2.4 * s                                        # pseudo stress at the notch
    whole = sl.assess_strain_life(x, STEEL, input_kind="local_elastic", gate=gate,
                                  mean_stress_method="smith_watson_topper",
                                  reserve_factor=False)
    state, damage, cycles = None, 0.0, 0.0
    for lo, hi in ((0, 1), (1, 900), (900, 901), (901, 3333), (3333, 6000)):
        loops, state = count_block_local(x[lo:hi], state, STEEL, rule="neuber",
                                         mean_stress_method="smith_watson_topper", gate=gate)
        damage += loops["damage"].sum()
        cycles += loops["count"].sum()
        state = LocalState.from_dict(state.to_dict())  # through JSON, as the ledger keeps it
    tail = close_local(state, STEEL, rule="neuber", mean_stress_method="smith_watson_topper")
    assert damage + tail["damage"].sum() == pytest.approx(whole.damage, rel=1e-12)
    assert cycles + tail["count"].sum() == whole.cycles_counted


@pytest.mark.parametrize("material", [
    (206_000.0, 1150.0, 0.16), (206_000.0, 1910.0, 0.123), (70_000.0, 600.0, 0.30),
    (200_000.0, 900.0, 0.05)])
def test_the_interpolated_first_loading_equals_the_solved_one(material):
    # The follow reads each rule's first-loading solution from a table over
    # ln x (cubic Hermite with exact slopes); it must give the solver's
    # stress and plastic strain, and go back to the solver outside the span.
    from service.engine import strain_life_local as local
    from service.engine._hermite import table_values

    e_mod, k, n = material
    for code in (0, 1, 2):
        tab = local.inverse_table(code, e_mod, k, n)
        u0, u1 = tab[0, 0], tab[0, 0] + (tab.shape[0] - 2) / tab[0, 1]
        xs = np.exp(np.random.default_rng(code).uniform(u0 - 2.0, u1 + 2.0, 4000))
        for x in xs:
            s, plast = local._stress_of(x, code, e_mod, k, 1.0 / n, n, tab)
            solved = local._first_loading(x, code, e_mod, k, 1.0 / n, n)
            assert s == pytest.approx(solved, rel=1e-9)
            assert plast == pytest.approx((solved / k) ** (1.0 / n), rel=1e-9)
        # The forward relation holds at the interpolated stress.
        x = math.exp(0.5 * (u0 + u1))
        s, _ = local._stress_of(x, code, e_mod, k, 1.0 / n, n, tab)
        assert local._forward(s, code, e_mod, k, 1.0 / n, n)[0] == pytest.approx(x, rel=1e-9)
        # The follow's table over x itself (read without a log) at its
        # widest: the same stress and strain; outside it the caller solves.
        lin = local.state_table_for(code, e_mod, k, n, math.inf)
        x0 = lin[0, 0]
        top = x0 + (lin.shape[0] - 2) / lin[0, 1]
        assert top >= 16.0 * local.knee_input(code, e_mod, k, n) and x0 == top / 256
        for x in np.random.default_rng(code + 10).uniform(x0, top, 4000):
            inside, s, plast = table_values(lin, x)
            solved = local._first_loading(x, code, e_mod, k, 1.0 / n, n)
            assert inside
            assert s == pytest.approx(solved, rel=1e-9)
            assert s / e_mod + plast == pytest.approx(
                solved / e_mod + (solved / k) ** (1.0 / n), rel=1e-9)
        assert not table_values(lin, top * 1.001)[0] and not table_values(lin, 0.99 * x0)[0]


def _lives_come_back(rng, n, log_lives, c_low):
    """Inverted by hand: ``n`` lives chosen for a random material, the strain
    amplitude each answers computed from Coffin-Manson-Basquin with Morrow's
    mean (30 % of them within 1e-9 to 1e-3 of sigma_f') or the SWT product,
    and the lives asked for again (rel 1e-9). Returns ``(material, mean,
    peak)`` for more checks."""
    m = sl.StrainLifeMaterial(rng.uniform(5e4, 2.2e5), 1000.0, 0.15,
                              rng.uniform(300, 2500), rng.uniform(-0.15, -0.04),
                              rng.uniform(0.05, 2.5), rng.uniform(c_low, -0.4))
    E, sf, b, ef, c = (m.youngs_modulus, m.fatigue_strength_coefficient,
                       m.fatigue_strength_exponent, m.fatigue_ductility_coefficient,
                       m.fatigue_ductility_exponent)
    two_n = 10 ** rng.uniform(*log_lives, n)
    sm = sf * np.where(rng.random(n) < 0.3, 1.0 - 10 ** rng.uniform(-9, -3, n),
                       rng.uniform(-1.0, 0.9, n))
    ea = (sf - sm) / E * two_n ** b + ef * two_n ** c
    got = sl.reversals_to_failure(ea, m, mean_stress=sm, mean_stress_method="morrow")
    np.testing.assert_allclose(got, two_n, rtol=1e-9)
    smax = rng.uniform(10.0, 2.0 * sf, n)
    ea = (sf * sf / E * two_n ** (2 * b) + sf * ef * two_n ** (b + c)) / smax
    got = sl.reversals_to_failure(ea, m, mean_stress=smax / 2, max_stress=smax,
                                  mean_stress_method="smith_watson_topper")
    np.testing.assert_allclose(got, two_n, rtol=1e-9)
    return m, sm, smax


def test_lives_solved_from_any_start_including_a_mean_near_the_strength():
    # Means close to sigma_f' leave a tiny elastic term whose own solution
    # lies hundreds of units of ln 2N left of the root; the earlier solver
    # started there and stopped after 100 Newton steps far from it (life
    # 6e-4 reversals for 17.4). Few loops a call: solved one by one.
    rng = np.random.default_rng(20)
    for _ in range(300):
        _lives_come_back(rng, 50, (0.5, 9.0), -0.9)


def test_lives_read_from_the_reduced_table_equal_the_chosen_ones():
    # Many loops read their lives from one table of z^e1 + z^e2 = e^u (every
    # loop's equation scaled to it): enough loops to take the table, lives
    # from 0.01 to 1e14 reversals (some outside the table's span, solved
    # there).
    from service.engine import strain_life_material as slm

    rng = np.random.default_rng(21)
    n = slm.TABLED_LOOPS + 500
    for _ in range(12):
        m, sm, smax = _lives_come_back(rng, n, (-2.0, 14.0), -1.3)
        sf = m.fatigue_strength_coefficient
        # No life where the mean has reached the strength, no damage where
        # the SWT peak is not tensile: as the solver says.
        sm[:3] = sf * np.array([1.0, 1.5, 3.0])
        got = sl.reversals_to_failure(np.full(n, 0.004), m, mean_stress=sm,
                                      mean_stress_method="morrow")
        assert np.all(got[:3] == 0.0) and np.all(got[3:] > 0.0)
        smax[:3] = [0.0, -5.0, -300.0]
        got = sl.reversals_to_failure(np.full(n, 0.004), m, mean_stress=smax / 2,
                                      max_stress=smax, mean_stress_method="smith_watson_topper")
        assert np.all(np.isinf(got[:3])) and np.all(np.isfinite(got[3:]))


def test_the_reserve_search_lands_on_the_allowable_sum_over_seeded_cases():
    # The factor must bring the damage (each trial a full local analysis) to
    # the allowable sum, from far below or far above it, with Morrow, SWT
    # or no mean correction, whether or not a trial meets a static overload
    # (Morrow's mean reaching sigma_f') on the way.
    rng = np.random.default_rng(31)
    methods = ("morrow", "smith_watson_topper", "none")
    limited = []
    for case in range(24):
        x = np.cumsum(rng.normal(0, 1, 400))
        x = rng.uniform(20, 600) * x / np.ptp(x) + rng.uniform(-50, 150)
        allowable = float(10 ** rng.uniform(-3, 0.5))
        ms = methods[case % 3]
        r = sl.assess_strain_life(x, STEEL, kt=float(rng.uniform(1.0, 3.0)),
                                  mean_stress_method=ms, allowable_damage=allowable)
        if r.reserve_factor is None:
            continue
        again = sl.assess_strain_life(x * r.reserve_factor, STEEL, kt=r.method["kt"],
                                      mean_stress_method=ms, reserve_factor=False)
        if r.reserve_limited_by == "static_strength":
            # The damage jumps past the allowable sum where a loop's mean
            # reaches sigma_f' (Morrow: no life left): the factor is that
            # onset, said so (the service cautions it), not a fatigue root.
            limited.append(case)
            beyond = sl.assess_strain_life(x * r.reserve_factor * (1 + 1e-8), STEEL,
                                           kt=r.method["kt"], mean_stress_method=ms,
                                           reserve_factor=False)
            assert again.damage < allowable and "static_overload" in beyond.flags
        else:
            assert r.reserve_limited_by == "fatigue"
            assert again.damage == pytest.approx(allowable, rel=1e-8), (case, ms)
    assert limited  # the seeds include a reserve set by static overload


def test_lives_outside_the_usual_test_span_are_cautioned():
    # Strain-controlled tests usually span a few cycles to about 1e7 cycles
    # (common practice); loops outside are extrapolations. A gauge at the
    # notch root (strain input): a zero-mean loop of amplitude ea has the
    # life solving Coffin-Manson-Basquin, inverted here by hand.
    E, sf, b, ef, c = 206_000.0, 1050.0, -0.085, 0.45, -0.6

    def ea(two_n):
        return sf / E * two_n ** b + ef * two_n ** c

    def codes(two_n, repeats=20):
        x = np.tile([-ea(two_n), ea(two_n)], repeats)
        r = sl.assess_strain_life(x, STEEL, input_kind="local_strain",
                                  mean_stress_method="none", reserve_factor=False)
        return {k.code: k for k in sl.validity_cautions(r.loops)}, r

    short, r = codes(5.0)
    assert np.allclose(r.loops["reversals_to_failure"][1:-1], 5.0, rtol=1e-6)
    assert list(short) == ["strain_life_short_lives"]
    from service.engine.cautions import severity

    assert severity("strain_life_short_lives") == "critical"
    long, _ = codes(1e9)
    assert list(long) == ["strain_life_long_lives"] and "100%" in long[
        "strain_life_long_lives"].text
    assert codes(1e4)[0] == {}
    # A few long-life loops beside damaging ones carry no share worth a word.
    x = np.concatenate([np.tile([-ea(1e9), ea(1e9)], 50), np.tile([-ea(1e4), ea(1e4)], 5)])
    r = sl.assess_strain_life(x, STEEL, input_kind="local_strain", mean_stress_method="none",
                              reserve_factor=False)
    assert sl.validity_cautions(r.loops) == []


def test_constants_not_fitted_together_are_cautioned():
    # Morrow's compatibility (J. Morrow, ASTM STP 378, 1965, from memory):
    # eliminating life from the two Coffin-Manson-Basquin terms gives
    # sigma_a = sf (eps_p / ef)^(b/c); constants fitted together have
    # n' = b/c and K' = sf / ef^(b/c), and the gap is then zero at any strain.
    sf, b, ef, c = 1050.0, -0.085, 0.45, -0.6
    k_fit = sf / ef ** (b / c)
    fitted = sl.StrainLifeMaterial(206_000.0, k_fit, b / c, sf, b, ef, c)
    for ep in (1e-4, 1e-3, 2e-2):
        assert abs(fitted.compatibility_gap(ep)) < 1e-12
    off = sl.StrainLifeMaterial(206_000.0, 1.3 * k_fit, b / c, sf, b, ef, c)
    assert off.compatibility_gap(3e-3) == pytest.approx(0.3, rel=1e-12)
    x = np.tile([-600.0, 600.0], 20)
    for material, expect in ((fitted, []), (off, ["strain_life_incompatible"])):
        r = sl.assess_strain_life(x, material, kt=2.0, reserve_factor=False)
        assert [k.code for k in sl.validity_cautions(r.loops, material)] == expect
