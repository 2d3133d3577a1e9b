"""Unit conversion at the engine's edge."""

import numpy as np
import pytest

from service.engine import InvalidParameter, UnknownMethod
from service.engine.units import from_mpa, to_mpa


@pytest.mark.parametrize("value, unit, expected", [
    (1.0, "ksi", 6.894757),        # NIST SP 811 App. B.8: 1 ksi = 6.894757 MPa
    (1000.0, "psi", 6.894757),     # same source
    (250_000.0, "kPa", 250.0),
    (3.5e8, "Pa", 350.0),
    (0.21, "GPa", 210.0),
    (120.0, "N/mm2", 120.0),
])
def test_stress_units(value, unit, expected):
    assert to_mpa([value], unit)[0] == pytest.approx(expected, rel=1e-7)


@pytest.mark.parametrize("value, unit", [(1000.0, "microstrain"), (1.0, "mm/m"), (1e-3, "strain")])
def test_strain_units_use_hooke(value, unit):
    # Uniaxial Hooke's law: 1000 microstrain on steel of E = 206 GPa is 206 MPa.
    assert to_mpa([value], unit, youngs_modulus=206_000.0)[0] == pytest.approx(206.0)


def test_round_trip():
    x = np.array([-12.5, 0.0, 300.0])
    np.testing.assert_allclose(to_mpa(from_mpa(x, "ksi"), "ksi"), x)


def test_strain_without_modulus_names_the_field():
    with pytest.raises(InvalidParameter) as err:
        to_mpa([1.0], "microstrain")
    assert err.value.field == "youngs_modulus"
    with pytest.raises(InvalidParameter):
        to_mpa([1.0], "microstrain", youngs_modulus=-1.0)


def test_unknown_unit_lists_valid_ones():
    with pytest.raises(UnknownMethod) as err:
        to_mpa([1.0], "bar")
    assert "MPa" in err.value.valid and "microstrain" in err.value.valid


@pytest.mark.parametrize("spelling, unit", [
    ("µm/m", "microstrain"), ("\u03bcm/m", "microstrain"), ("um/m", "microstrain"),
    ("µε", "microstrain"), ("\u03bc\u03b5", "microstrain"), ("ue", "microstrain"),
    ("N/mm²", "N/mm2"), ("N/mm^2", "N/mm2"), ("mpa", "MPa"), ("MPa", "MPa"), ("m/m", "strain"),
    ("mm/m", "mm/m"), ("ksi", "ksi")])
def test_unit_spellings_of_acquisition_systems(spelling, unit):
    # Common practice of DAQ exports: the micro sign (U+00B5) or Greek mu
    # (U+03BC), "u" for micro, superscript two.
    from service.engine.units import unit_from_spelling

    assert unit_from_spelling(spelling) == unit


def test_gauge_factor_correction_closed_form():
    # K. Hoffmann, An Introduction to Measurements using Strain Gages (HBM,
    # 1989), from memory: eps = eps_read * k_set / k_gauge.
    from service.engine.units import corrected_strain

    assert corrected_strain([1000.0], 2.0, 2.1)[0] == pytest.approx(1000.0 * 2.0 / 2.1)
    with pytest.raises(ValueError):
        corrected_strain([1.0], 2.0, 0.0)
