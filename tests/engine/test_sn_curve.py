"""S-N curves: published catalogues, Basquin forms, user points, treatments."""

import math

import numpy as np
import pytest

from service.engine import InvalidParameter, UnknownMethod
from service.engine.sn_catalogue import (EN1993_NORMAL, catalogue_curve, designations,
                                         thickness_factor)
from service.engine.sn_curve import SNCurve, basquin_amplitude, basquin_range, from_points


def test_en1993_category_71_limits():
    # Source: EN 1993-1-9:2005, Fig. 7.1: detail category 71 has a
    # constant-amplitude limit of 52 MPa and a cut-off of 29 MPa (rounded).
    c = catalogue_curve("EN1993-1-9:71")
    assert round(c.fatigue_limit_range) == 52
    assert round(c.cutoff_range) == 29


@pytest.mark.parametrize("category", EN1993_NORMAL)
def test_en1993_limit_ratios(category):
    # Source: EN 1993-1-9:2005, eq. (7.2) and Fig. 7.1 (from memory):
    # Delta sigma_D = 0.737 Delta sigma_C, Delta sigma_L = 0.549 Delta sigma_D.
    c = catalogue_curve(f"EN1993-1-9:{category}")
    assert c.fatigue_limit_range == pytest.approx((2 / 5) ** (1 / 3) * category, rel=1e-12)
    assert c.fatigue_limit_range / category == pytest.approx(0.737, abs=5e-4)
    assert c.cutoff_range / c.fatigue_limit_range == pytest.approx(0.549, abs=5e-4)


def test_en1993_cycles_on_each_segment():
    # Source: EN 1993-1-9:2005, eq. (7.1): N = 2e6 (C/S)^3 above the limit,
    # N = 5e6 (D/S)^5 between limit and cut-off, no damage below.
    c = catalogue_curve("EN1993-1-9:71")
    d = (2 / 5) ** (1 / 3) * 71
    n = c.cycles_to_failure([71.0, 100.0, 40.0, 28.0, 0.0])
    assert n[0] == pytest.approx(2e6)
    assert n[1] == pytest.approx(2e6 * (71 / 100) ** 3)
    assert n[2] == pytest.approx(5e6 * (d / 40) ** 5)
    assert math.isinf(n[3]) and math.isinf(n[4])


def test_en1993_shear_curve():
    # Source: EN 1993-1-9:2005, Fig. 7.2: m = 5, cut-off at 1e8 cycles.
    c = catalogue_curve("EN1993-1-9:shear-100")
    assert c.cycles_to_failure([100.0])[0] == pytest.approx(2e6)
    assert c.cutoff_range == pytest.approx(100 * (2e6 / 1e8) ** (1 / 5))


def test_dnv_curve_d_in_air():
    # Source: DNV-RP-C203 (2016), Table 2-1, curve D in air (from memory):
    # m1 = 3, log a1 = 12.164; m2 = 5, log a2 = 15.606; 52.63 MPa at 1e7.
    c = catalogue_curve("DNV-RP-C203:D")
    assert c.fatigue_limit_range == pytest.approx(52.63, abs=0.02)
    assert math.log10(c.cycles_to_failure([100.0])[0]) == pytest.approx(12.164 - 3 * 2.0)
    # Second slope: the table's log a2 is rounded to three decimals.
    logn = math.log10(c.cycles_to_failure([30.0])[0])
    assert logn == pytest.approx(15.606 - 5 * math.log10(30.0), abs=2e-3)


def test_dnv_table_is_self_consistent():
    # Each curve's log a2 must meet its log a1 line at 1e7 cycles (to the
    # table's rounding): checks the transcription of every row.
    from service.engine.sn_catalogue import DNV_AIR
    for name, (m1, a1, m2, a2, _) in DNV_AIR.items():
        s7 = 10 ** ((a1 - 7) / m1)
        assert a2 == pytest.approx(7 + m2 * math.log10(s7), abs=3e-3), name


def test_dnv_seawater_and_free_corrosion_curves_against_the_air_table():
    # DNV-RP-C203 (2016) Tables 2-2 and 2-4 (from memory): with cathodic
    # protection the first segment is the air line lowered by 0.4 in log a
    # (0.2 for m1 = 4), the knee at 1e6, then the air curve's m = 5 line;
    # the two must meet at 1e6 to the tables' rounding (checks every row).
    # Free corrosion: m = 3 throughout, a third of the air life.
    from service.engine.sn_catalogue import DNV_AIR

    for name, (m1, a1, m2, a2, _) in DNV_AIR.items():
        cp = catalogue_curve(f"DNV-RP-C203:{name}-CP")
        s6 = 10 ** ((cp.segment_log_a[0] - 6) / m1)
        assert a2 == pytest.approx(6 + m2 * math.log10(s6), abs=3e-3), name
        assert cp.cycles_to_failure([s6 * 0.5])[0] == pytest.approx(10 ** a2 * (s6 * 0.5) ** -m2,
                                                                  rel=1e-9)
        if m1 == 3.0:
            fc = catalogue_curve(f"DNV-RP-C203:{name}-FC")
            s = 120.0
            air = 10 ** a1 * s ** -m1
            assert fc.cycles_to_failure([s])[0] == pytest.approx(air / 3, rel=3e-3)
            assert fc.cycles_to_failure([5.0])[0] == pytest.approx(10 ** a1 * 5.0 ** -3 / 3,
                                                                 rel=3e-3)   # no limit


def test_design_fatigue_factor_sets_the_allowable_damage():
    # DNV-RP-C203 sec. 1.3 (from memory): the damage is checked against 1/DFF.
    from service.engine.errors import EngineError
    from service.engine.settings import point_from_dict

    _, opts, _ = point_from_dict({"curve": "DNV-RP-C203:D-CP", "design_fatigue_factor": 3})
    assert opts.allowable_damage == pytest.approx(1 / 3)
    with pytest.raises(EngineError):
        point_from_dict({"curve": "DNV-RP-C203:D", "design_fatigue_factor": 2,
                         "allowable_damage": 0.5})


def test_dnv_thickness_correction():
    # Source: DNV-RP-C203 (2016), eq. (2.4.3): factor (t/25)^k above 25 mm;
    # curve D has k = 0.20 (from memory).
    assert thickness_factor("DNV-RP-C203:D", 50.0) == pytest.approx(2 ** 0.2)
    assert thickness_factor("DNV-RP-C203:D", 20.0) == 1.0
    with pytest.raises(InvalidParameter):
        thickness_factor("EN1993-1-9:71", 50.0)   # the old DNV-only helper


@pytest.mark.parametrize("designation, kwargs, t, expected", [
    # IIW recommendations (Hobbacher 2016) sec. 3.5.3, from memory:
    # f(t) = (25/t_eff)^n on the resistance; n = 0.3 cruciform as welded,
    # 0.2 toe ground or transverse butt as welded, 0.1 ground flush; t_eff =
    # 0.5 L when L <= 2t (L toe to toe), else t.
    ("IIW:FAT90", {"joint": "cruciform_as_welded"}, 40.0, (40 / 25) ** 0.3),
    ("IIW:FAT90", {"joint": "cruciform_toe_ground"}, 40.0, (40 / 25) ** 0.2),
    ("IIW:FAT90", {"joint": "butt_ground_flush"}, 60.0, (60 / 25) ** 0.1),
    ("IIW:FAT90", {"joint": "cruciform_as_welded", "attachment_length_mm": 70.0}, 40.0,
     (35 / 25) ** 0.3),                          # L = 70 <= 80: t_eff = 35
    ("IIW:FAT90", {"joint": "cruciform_as_welded", "attachment_length_mm": 40.0}, 40.0,
     1.0),                                       # t_eff = 20 <= 25: no correction
    ("IIW:FAT90", {"joint": "cruciform_as_welded", "attachment_length_mm": 100.0}, 40.0,
     (40 / 25) ** 0.3),                          # L > 2t: t_eff = t
    ("IIW:FAT90", {"thickness_exponent": 0.25}, 20.0, 1.0),    # thinner than 25 mm
    # EN 1993-1-9:2005 Table 8.3: k_s = (25/t)^0.2 on the category (t > 25).
    ("EN1993-1-9:90", {"thickness_exponent": 0.2}, 40.0, (40 / 25) ** 0.2),
    # DNV-RP-C203 (2016) sec. 2.4.3, from memory: t_eff = min(14 + 0.66 L_t, t).
    ("DNV-RP-C203:D", {"attachment_length_mm": 20.0}, 50.0, ((14 + 13.2) / 25) ** 0.2),
    ("DNV-RP-C203:D", {}, 50.0, 2 ** 0.2),
])
def test_thickness_corrections_by_hand(designation, kwargs, t, expected):
    from service.engine.sn_catalogue import thickness_correction

    got = thickness_correction(designation, t,
                               exponent=kwargs.get("thickness_exponent"),
                               joint=kwargs.get("joint"),
                               attachment_length_mm=kwargs.get("attachment_length_mm"))
    assert got.factor == pytest.approx(expected, rel=1e-12)


def test_a_thick_plate_is_the_curve_lowered_by_the_factor():
    # A worked case: a spectrum on IIW FAT 90 at t = 50 mm, cruciform as
    # welded, equals the same spectrum on FAT 90 (25/50)^0.3 = 73.1 (the
    # curve lowered by the factor; ranges here stay above every knee).
    from service.engine.damage import assess_history
    from service.engine.settings import point_from_dict

    x = np.tile([-70.0, 90.0, -40.0, 120.0], 500)
    curve, opts, _ = point_from_dict({"curve": "IIW:FAT90", "thickness_mm": 50.0,
                                      "joint": "cruciform_as_welded"})
    lowered = catalogue_curve("IIW:FAT90").scaled((25 / 50) ** 0.3)
    a = assess_history(x, curve, opts)
    b = assess_history(x, lowered)
    assert a.damage == pytest.approx(b.damage, rel=1e-12)
    assert 90 * (25 / 50) ** 0.3 == pytest.approx(73.1, abs=0.05)


@pytest.mark.parametrize("settings, field", [
    ({"curve": "IIW:FAT90", "thickness_mm": 40.0}, "joint"),
    ({"curve": "EN1993-1-9:90", "thickness_mm": 40.0}, "thickness_exponent"),
    ({"curve": "IIW:FAT90", "thickness_mm": 40.0, "joint": "lap"}, "joint"),
    ({"curve": "IIW:FAT90", "joint": "cruciform_as_welded"}, "joint"),
    ({"curve": "DNV-RP-C203:D", "thickness_mm": 40.0, "joint": "cruciform_as_welded"}, "joint"),
])
def test_thickness_settings_that_do_not_fit_are_refused(settings, field):
    from service.engine.errors import EngineError
    from service.engine.settings import point_from_dict

    with pytest.raises(EngineError) as err:
        point_from_dict(settings)
    assert err.value.field == field


def test_iiw_fat_class():
    # Source: IIW recommendations (Hobbacher 2016), FAT = range at 2e6 with
    # m = 3 (from memory); knee at 1e7.
    c = catalogue_curve("IIW:FAT90")
    assert c.cycles_to_failure([90.0])[0] == pytest.approx(2e6)
    assert c.knee_cycles == (1e7,)
    assert c.cycles_to_failure([c.knee_ranges[0] / 2])[0] == pytest.approx(1e7 * 2 ** 5)


def test_unknown_designation_lists_valid_ones():
    with pytest.raises(UnknownMethod) as err:
        catalogue_curve("EN1993-1-9:72")
    assert "EN1993-1-9:71" in err.value.valid
    assert len(designations()) == len(set(designations()))


def test_basquin_forms_agree():
    # Dowling (2013) eq. 9.7: sigma_a = sigma_f' (2N)^b; the same material
    # written as N S^m = C on range has m = -1/b.
    amp = basquin_amplitude(1000.0, -0.1)
    for n in (1e3, 1e5, 1e7):
        sa = 1000.0 * (2 * n) ** -0.1
        assert amp.cycles_to_failure([2 * sa])[0] == pytest.approx(n, rel=1e-10)
    rng = basquin_range(3.0, 2e12)
    assert rng.cycles_to_failure([100.0])[0] == pytest.approx(2e12 / 100 ** 3)


def test_user_points_interpolate_in_log_log():
    c = from_points([1e4, 1e6, 1e7], [400.0, 200.0, 150.0])
    assert c.cycles_to_failure([300.0])[0] == pytest.approx(
        10 ** (4 + 2 * math.log10(400 / 300) / math.log10(2)), rel=1e-10)
    # Below the last point: Haibach's slope 2m - 1 of the last segment by
    # default (Haibach, Betriebsfestigkeit, 3rd ed., sec. 3.2), no damage
    # with below_last="ignore".
    m_last = math.log10(10) / math.log10(200 / 150)
    assert c.cycles_to_failure([140.0])[0] == pytest.approx(
        1e7 * (150 / 140) ** (2 * m_last - 1), rel=1e-10)
    ignore = from_points([1e4, 1e6, 1e7], [400.0, 200.0, 150.0], below_last="ignore")
    assert math.isinf(ignore.cycles_to_failure([149.0])[0])
    # First slope m = 2 / log10(2) extended above the first point.
    assert c.cycles_to_failure([800.0])[0] == pytest.approx(1e4 * 0.5 ** (2 / math.log10(2)))
    amp = from_points([1e4, 1e6], [200.0, 100.0], quantity="stress_amplitude")
    assert amp.cycles_to_failure([400.0])[0] == pytest.approx(1e4)


@pytest.mark.parametrize("cycles, stress, field", [
    ([1e4, 1e3], [200.0, 100.0], "cycles"),
    ([1e4, 1e5], [200.0, 250.0], "stress"),
    ([1e4, 1e5], [200.0, -1.0], "stress"),
    ([1e4], [200.0], "points"),
])
def test_bad_user_points(cycles, stress, field):
    with pytest.raises(InvalidParameter) as err:
        from_points(cycles, stress)
    assert err.value.field == field


def test_bad_slopes():
    with pytest.raises(InvalidParameter) as err:
        SNCurve((0.0,), (), 100.0, 2e6)
    assert err.value.field == "slopes"
    with pytest.raises(InvalidParameter):
        basquin_range(-3.0, 1e12)


def test_below_limit_treatments():
    c = catalogue_curve("IIW:FAT90")
    s = c.knee_ranges[0] / 2
    n_knee = 1e7
    assert math.isinf(c.below_limit("ignore").cycles_to_failure([s])[0])
    assert c.below_limit("first_slope").cycles_to_failure([s])[0] == pytest.approx(n_knee * 8)
    # Haibach: slope 2m - 1 = 5 below the limit (E. Haibach, Betriebsfestigkeit).
    assert c.below_limit("haibach").cycles_to_failure([s])[0] == pytest.approx(n_knee * 32)
    en = catalogue_curve("EN1993-1-9:71")
    assert en.below_limit("curve") is en
    with pytest.raises(UnknownMethod):
        en.below_limit("skip")


def test_scaled_curve_is_the_partial_factor():
    c = catalogue_curve("EN1993-1-9:71").scaled(1 / 1.35, "gamma_Mf 1.35")
    assert c.cycles_to_failure([71 / 1.35])[0] == pytest.approx(2e6)
    assert "gamma_Mf 1.35" in c.notes


def test_infinite_range_fails_at_once():
    assert catalogue_curve("EN1993-1-9:71").cycles_to_failure([np.inf])[0] == 0.0
