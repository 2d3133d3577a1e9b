"""Unit conversion at the engine's edge: everything inside is MPa.

Stress units convert by a factor; strain units need Young's modulus and the
uniaxial relation sigma = E * epsilon, valid for a single gauge along the
principal direction of a uniaxial stress state (a rosette needs
``multiaxial`` reduction instead).
"""

from __future__ import annotations

import numpy as np

from .errors import InvalidParameter, unknown
from .plausibility import check_modulus

#: MPa per unit, for every stress unit accepted. 1 ksi = 6.894757 MPa
#: (1 lbf/in^2 = 6894.757 Pa, NIST SP 811, Appendix B.8).
STRESS_UNITS = {
    "MPa": 1.0,
    "N/mm2": 1.0,
    "kPa": 1e-3,
    "Pa": 1e-6,
    "GPa": 1e3,
    "ksi": 6.894757293168361,
    "psi": 6.894757293168361e-3,
}

#: Strain (m/m) per unit, for every strain unit accepted.
STRAIN_UNITS = {
    "strain": 1.0,
    "microstrain": 1e-6,
    "mm/m": 1e-3,
}

UNITS = tuple(STRESS_UNITS) + tuple(STRAIN_UNITS)


def is_strain(unit: str) -> bool:
    """True if ``unit`` is a strain unit (needs Young's modulus)."""
    return unit in STRAIN_UNITS


def to_mpa(values, unit: str, youngs_modulus: float | None = None) -> np.ndarray:
    r"""
    Convert stress or strain readings to stress in MPa.

    Parameters
    ----------
    values : array-like
        Readings in ``unit``.
    unit : str
        One of :data:`UNITS`: ``MPa``, ``N/mm2``, ``kPa``, ``Pa``, ``GPa``,
        ``ksi``, ``psi`` (stress) or ``strain``, ``microstrain``, ``mm/m``.
    youngs_modulus : float, optional
        Young's modulus :math:`E`, required for strain units. [MPa]

    Returns
    -------
    ndarray of float64
        Stress. [MPa]

    Raises
    ------
    UnknownMethod
        If ``unit`` is not known (the message lists the valid units).
    InvalidParameter
        If a strain unit comes without a positive, finite ``youngs_modulus``.

    Notes
    -----
    Strain: :math:`\sigma = E\,\varepsilon` (uniaxial Hooke's law).

    References
    ----------
    .. [1] B. N. Taylor and A. Thompson, *Guide for the Use of the
       International System of Units (SI)*, NIST SP 811, 2008, App. B.8.
    """
    x = np.asarray(values, dtype=np.float64)
    if unit in STRESS_UNITS:
        factor = STRESS_UNITS[unit]
        return x if factor == 1.0 else x * factor
    if unit in STRAIN_UNITS:
        if youngs_modulus is None:
            raise InvalidParameter(
                f"unit {unit!r} is a strain: youngs_modulus (MPa) is required",
                field="youngs_modulus")
        e = float(youngs_modulus)
        if not np.isfinite(e) or e <= 0:
            raise InvalidParameter(f"youngs_modulus {e} MPa must be positive",
                                   field="youngs_modulus", value=e, limit=0.0)
        check_modulus(e)
        return x * (STRAIN_UNITS[unit] * e)
    raise unknown("unit", unit, UNITS)


def from_mpa(values, unit: str) -> np.ndarray:
    """Convert stress in MPa to a stress ``unit`` (inverse of :func:`to_mpa`)."""
    if unit not in STRESS_UNITS:
        raise unknown("unit", unit, STRESS_UNITS)
    return np.asarray(values, dtype=np.float64) / STRESS_UNITS[unit]


#: How acquisition systems spell units (after :func:`_plain`: case ignored,
#: since no export writes millipascals; micro signs, Greek mu and epsilon and
#: superscripts folded) -> the engine's unit. Spellings seen in
#: data-acquisition exports (common practice).
_SPELLINGS = {
    "mpa": "MPa", "n/mm2": "N/mm2", "n/mm^2": "N/mm2", "n mm-2": "N/mm2", "kpa": "kPa",
    "pa": "Pa", "gpa": "GPa", "ksi": "ksi", "psi": "psi",
    "strain": "strain", "m/m": "strain", "mm/mm": "strain", "in/in": "strain",
    "microstrain": "microstrain", "um/m": "microstrain", "ue": "microstrain",
    "ustrain": "microstrain", "u-strain": "microstrain", "micro-strain": "microstrain",
    "um/m (strain)": "microstrain", "uin/in": "microstrain", "mm/m": "mm/m",
}


def _plain(spelling: str) -> str:
    s = spelling.strip().replace("\u00b5", "u").replace("\u03bc", "u")  # micro sign, Greek mu
    s = s.replace("\u03b5", "e").replace("\u00b2", "2").replace(" ", "")
    return s.lower()


def unit_from_spelling(spelling: str) -> str:
    """The engine's unit for a unit as an acquisition system spells it.

    ``µm/m``, ``um/m``, ``µε``, ``ue`` -> ``microstrain``; ``N/mm²`` ->
    ``N/mm2``; ``MPa`` in any case; the engine's own names pass unchanged.

    Raises
    ------
    UnknownMethod
        For a spelling it does not know (the message lists the engine's units).
    """
    if spelling in UNITS:
        return spelling
    plain = _plain(str(spelling))
    if plain in _SPELLINGS:
        return _SPELLINGS[plain]
    # Strain written with a Greek epsilon: "µε" folds to "ue" above.
    raise unknown("unit", str(spelling), UNITS)


def corrected_strain(values, gauge_factor_set: float, gauge_factor: float) -> np.ndarray:
    r"""
    Strain read with the amplifier set to one gauge factor, corrected to the
    gauge's own.

    :math:`\varepsilon = \varepsilon_{read}\,k_{set} / k_{gauge}`: the bridge
    output is :math:`k_{gauge}\,\varepsilon/4` and the amplifier divides it
    by :math:`k_{set}/4`. [same unit as ``values``]

    References
    ----------
    .. [1] K. Hoffmann, *An Introduction to Measurements using Strain
       Gages*. Darmstadt, Germany: Hottinger Baldwin Messtechnik, 1989
       (the gauge factor and the amplifier's setting).
    """
    for name, k in (("gauge_factor_set", gauge_factor_set), ("gauge_factor", gauge_factor)):
        if not np.isfinite(k) or not 0.5 <= k <= 10.0:
            raise InvalidParameter(f"{name} {k} is not a strain gauge's (0.5 to 10)",
                                   field=name, value=float(k), limit=[0.5, 10.0])
    return np.asarray(values, dtype=np.float64) * (gauge_factor_set / gauge_factor)
