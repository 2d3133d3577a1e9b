"""S-N curve estimated from tensile data (machine-design textbook method)."""

import pytest

from service.engine import InvalidParameter, UnknownMethod
from service.engine.sn_estimate import (reliability_factor, shigley, size_factor,
                                        surface_factor, temperature_factor)


def test_surface_factor_textbook_example():
    # Source: Budynas & Nisbett, Shigley's MED, 10th ed., Example 6-3 (from
    # memory): machined surface, Sut = 520 MPa gives k_a = 0.860.
    assert surface_factor(520.0, "machined") == pytest.approx(0.860, abs=5e-4)


@pytest.mark.parametrize("reliability, expected", [
    # Source: Shigley's MED, 10th ed., Table 6-5 (from memory).
    (0.5, 1.000), (0.9, 0.897), (0.95, 0.868), (0.99, 0.814), (0.999, 0.753),
    (0.9999, 0.702)])
def test_reliability_factor_table(reliability, expected):
    assert reliability_factor(reliability) == pytest.approx(expected, abs=1e-3)


def test_size_temperature_factors():
    # Source: Shigley's MED, 10th ed., eq. (6-20) and Table 6-4 (from memory):
    # the exact form (d / 7.62)^-0.107; the printed 1.24 d^-0.107 is its rounding.
    assert size_factor(30.0, "bending") == pytest.approx((30 / 7.62) ** -0.107, rel=1e-12)
    assert size_factor(30.0, "bending") == pytest.approx(1.24 * 30 ** -0.107, rel=3e-3)
    assert size_factor(100.0, "torsion") == pytest.approx(1.51 * 100 ** -0.157)
    assert size_factor(30.0, "axial") == 1.0
    assert temperature_factor(300.0) == pytest.approx(0.975)
    assert temperature_factor(325.0) == pytest.approx((0.975 + 0.943) / 2)


def test_estimated_curve_passes_its_two_points():
    # Source: Shigley's MED, 10th ed., eqs. (6-8), (6-14), (6-15): Se' = 0.5 Su,
    # the line runs from f Su at 1e3 to Se at 1e6 (amplitudes).
    est = shigley(690.0, surface_finish="ground", load_type="bending")
    ka = 1.58 * 690 ** -0.085
    assert est.unmodified_endurance_limit == 345.0
    assert est.endurance_limit == pytest.approx(345.0 * ka)
    f = est.strength_at_1e3 / 690.0
    n = est.curve.cycles_to_failure([2 * f * 690.0, 2 * est.endurance_limit * 1.000001])
    assert n[0] == pytest.approx(1e3, rel=1e-9)
    assert n[1] == pytest.approx(1e6, rel=1e-4)
    # Below S_e a steel's curve goes on with Haibach's slope 2m - 1 (a
    # spectrum's small cycles are not free), not an infinite life.
    m = est.curve.slopes[0]
    assert est.curve.slopes == pytest.approx((m, 2 * m - 1))
    below = est.curve.cycles_to_failure([2 * est.endurance_limit * 0.9])[0]
    assert below == pytest.approx(1e6 * 0.9 ** -(2 * m - 1), rel=1e-9)
    assert [f.symbol for f in est.factors] == ["k_a", "k_b", "k_c", "k_d", "k_e"]
    assert all(f.source for f in est.factors)


def test_high_strength_endurance_cap():
    # Source: Shigley's MED, eq. (6-8): Se' = 700 MPa above Su = 1400 MPa.
    assert shigley(1600.0, surface_finish="ground").unmodified_endurance_limit == 700.0


@pytest.mark.parametrize("kwargs, field", [
    ({"ultimate_strength": -1.0}, "ultimate_strength"),
    ({"ultimate_strength": 500.0, "yield_strength": 600.0}, "yield_strength"),
    ({"ultimate_strength": 500.0, "reliability": 1.0}, "reliability"),
    ({"ultimate_strength": 500.0, "temperature_c": 900.0}, "temperature_c"),
    ({"ultimate_strength": 500.0, "diameter_mm": 400.0}, "diameter_mm"),
])
def test_bad_inputs_name_the_field(kwargs, field):
    with pytest.raises(InvalidParameter) as err:
        shigley(**kwargs)
    assert err.value.field == field


def test_unknown_finish_lists_valid_ones():
    with pytest.raises(UnknownMethod) as err:
        shigley(500.0, surface_finish="polished")
    assert "machined" in err.value.valid
