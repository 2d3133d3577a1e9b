r"""Strain-gauge rosettes: three readings to the in-plane strain and stress state.

Angles in degrees, counter-clockwise from the x axis (the axis of gauge *a*).
Readings in any one strain unit; stresses in MPa.

References
----------
.. [1] J. W. Dally and W. F. Riley, *Experimental Stress Analysis*, 3rd ed.
   New York, NY, USA: McGraw-Hill, 1991, ch. 9 (strain-gauge rosettes).
.. [2] Micro-Measurements, "Errors due to transverse sensitivity in strain
   gages," Tech Note TN-509 (gauge response model).
"""

from __future__ import annotations

import numpy as np

from . import _multiaxial_kernels as _k
from .errors import InvalidLoadHistory, InvalidParameter, unknown
from .stress_state import _finite, _signal

#: Gauge directions of the rosette layouts, from gauge a. [deg]
ROSETTE_LAYOUTS = {"rectangular": (0.0, 45.0, 90.0), "delta": (0.0, 60.0, 120.0)}

#: Poisson's ratio of the beam on which gauge factors are calibrated (0.285
#: is the usual calibration value; common practice).
CALIBRATION_POISSON = 0.285


# ---------------------------------------------------------------------------- rosettes


def _direction_rows(angles_deg, transverse_sensitivity: float) -> np.ndarray:
    """Rows mapping (ex, ey, gxy) to what each gauge reads times (1 - nu0 Kt)."""
    t = np.radians(np.asarray(angles_deg, dtype=np.float64))
    c2, s2, cs = np.cos(t) ** 2, np.sin(t) ** 2, np.sin(t) * np.cos(t)
    k = transverse_sensitivity
    # A gauge at t reads (eps(t) + Kt eps(t + 90 deg)) / (1 - nu0 Kt) [3]; and
    # eps(t) = ex cos^2 t + ey sin^2 t + gxy sin t cos t.
    return np.stack([c2 + k * s2, s2 + k * c2, (1.0 - k) * cs], axis=1)


def rosette_strains(gauge_a, gauge_b, gauge_c, layout: str = "rectangular", *,
                    transverse_sensitivity: float = 0.0,
                    calibration_poisson: float = CALIBRATION_POISSON):
    r"""
    In-plane strain components from the three readings of a rosette.

    Parameters
    ----------
    gauge_a, gauge_b, gauge_c : array-like
        Readings of the gauges at the layout's angles (``rectangular``: 0, 45,
        90 deg; ``delta``: 0, 60, 120 deg). [strain, any unit]
    layout : str
        A key of ``ROSETTE_LAYOUTS``.
    transverse_sensitivity : float
        The gauges' transverse sensitivity coefficient :math:`K_t` (from the
        gauge's data sheet; 0 = no correction). [-]
    calibration_poisson : float
        Poisson's ratio :math:`\nu_0` of the gauge-factor calibration. [-]

    Returns
    -------
    tuple of ndarray
        :math:`\varepsilon_x, \varepsilon_y, \gamma_{xy}` (x along gauge a;
        engineering shear strain). [same unit as the readings]

    Notes
    -----
    Each reading is :math:`\hat\varepsilon(\theta) (1 - \nu_0 K_t) =
    \varepsilon(\theta) + K_t\,\varepsilon(\theta + 90^\circ)` with
    :math:`\varepsilon(\theta) = \varepsilon_x\cos^2\theta + \varepsilon_y
    \sin^2\theta + \gamma_{xy}\sin\theta\cos\theta`; the three equations are
    solved at once for every sample. With :math:`K_t = 0` this is the strain
    transformation of [1]; the rectangular rosette then gives
    :math:`\varepsilon_x = \varepsilon_a`, :math:`\varepsilon_y =
    \varepsilon_c`, :math:`\gamma_{xy} = 2\varepsilon_b - \varepsilon_a -
    \varepsilon_c`.
    """
    if layout not in ROSETTE_LAYOUTS:
        raise unknown("layout", layout, ROSETTE_LAYOUTS)
    kt = _finite(transverse_sensitivity, "transverse_sensitivity")
    nu0 = _finite(calibration_poisson, "calibration_poisson")
    if not -0.5 < kt < 0.5:
        raise InvalidParameter(f"transverse_sensitivity {kt} is not a gauge's (|Kt| < 0.5)",
                               field="transverse_sensitivity", value=kt)
    gauges = [_signal(g, n) for g, n in ((gauge_a, "gauge_a"), (gauge_b, "gauge_b"),
                                         (gauge_c, "gauge_c"))]
    if len({g.shape for g in gauges}) != 1:
        raise InvalidLoadHistory("the three gauges differ in length: "
                                 f"{[g.shape[0] for g in gauges]}", field="gauge_b")
    # The same 3 x 3 system for every sample: invert it once and combine.
    inv = np.linalg.inv(_direction_rows(ROSETTE_LAYOUTS[layout], kt)) * (1.0 - nu0 * kt)
    a, b, c = gauges
    return tuple(inv[i, 0] * a + inv[i, 1] * b + inv[i, 2] * c for i in range(3))


def rosette_plane_stress(gauge_a, gauge_b, gauge_c, layout: str = "rectangular", *,
                         poisson_ratio: float, transverse_sensitivity: float = 0.0,
                         calibration_poisson: float = CALIBRATION_POISSON):
    """
    Plane stress from rosette readings given as E times strain, in one pass.

    The composition of :func:`rosette_strains` and
    :func:`plane_stress_from_strains` with ``youngs_modulus=1`` (readings
    that a uniaxial conversion already multiplied by E), compiled: returns
    contiguous ``(sxx, syy, sxy)``. [MPa]
    """
    if layout not in ROSETTE_LAYOUTS:
        raise unknown("layout", layout, ROSETTE_LAYOUTS)
    kt = _finite(transverse_sensitivity, "transverse_sensitivity")
    nu0 = _finite(calibration_poisson, "calibration_poisson")
    nu = _finite(poisson_ratio, "poisson_ratio")
    if not -0.5 < kt < 0.5:
        raise InvalidParameter(f"transverse_sensitivity {kt} is not a gauge's (|Kt| < 0.5)",
                               field="transverse_sensitivity", value=kt)
    if not 0.0 <= nu < 0.5:
        raise InvalidParameter(f"poisson_ratio {nu} must be in [0, 0.5)",
                               field="poisson_ratio", value=nu)
    gauges = [np.ascontiguousarray(_signal(g, n)) for g, n in (
        (gauge_a, "gauge_a"), (gauge_b, "gauge_b"), (gauge_c, "gauge_c"))]
    if len({g.shape for g in gauges}) != 1:
        raise InvalidLoadHistory("the three gauges differ in length: "
                                 f"{[g.shape[0] for g in gauges]}", field="gauge_b")
    inv = np.linalg.inv(_direction_rows(ROSETTE_LAYOUTS[layout], kt)) * (1.0 - nu0 * kt)
    out = tuple(np.empty_like(gauges[0]) for _ in range(3))
    _k.rosette_plane_stress(*gauges, np.ascontiguousarray(inv), nu, *out)
    return out


def plane_stress_from_strains(strain_x, strain_y, shear_strain_xy, youngs_modulus: float,
                              poisson_ratio: float):
    r"""
    Plane stress by Hooke's law from in-plane strains.

    Returns ``(sxx, syy, sxy)``:
    :math:`\sigma_x = E/(1-\nu^2)(\varepsilon_x + \nu\varepsilon_y)`,
    :math:`\sigma_y = E/(1-\nu^2)(\varepsilon_y + \nu\varepsilon_x)`,
    :math:`\tau_{xy} = E/(2(1+\nu))\,\gamma_{xy}`. [MPa, with E in MPa and
    strain as a fraction; give ``youngs_modulus=1`` for strains already
    multiplied by E]
    """
    e = _finite(youngs_modulus, "youngs_modulus")
    nu = _finite(poisson_ratio, "poisson_ratio")
    if e <= 0:
        raise InvalidParameter("youngs_modulus must be positive", field="youngs_modulus")
    if not 0.0 <= nu < 0.5:
        raise InvalidParameter(f"poisson_ratio {nu} must be in [0, 0.5)",
                               field="poisson_ratio", value=nu)
    ex, ey, g = (np.asarray(v, dtype=np.float64) for v in (strain_x, strain_y, shear_strain_xy))
    f = e / (1.0 - nu * nu)
    return f * (ex + nu * ey), f * (ey + nu * ex), e / (2.0 * (1.0 + nu)) * g
