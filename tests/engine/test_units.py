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
