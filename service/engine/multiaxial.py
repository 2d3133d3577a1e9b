r"""Multiaxial points: rosettes and stress tensors reduced to what is counted.

A free surface carries two normal stresses and a shear stress at once; one
gauge sees one direction. A rosette's three gauges give the in-plane strain
state; Hooke's law gives the plane stress state; a finite-element model gives
stress tensors directly. Rainflow counting needs one signal, so the state is
reduced: a signed equivalent stress (von Mises, Tresca), the principal stress
of largest magnitude, or the normal stress on each of a set of planes, every
plane counted and assessed and the worst governing (critical plane).

Components are columns of an array with one row per sample:
plane stress ``(n, 3)`` as ``[sxx, syy, sxy]``, or 3-D ``(n, 6)`` as
``[sxx, syy, szz, sxy, syz, szx]`` (tensor shear components, not
engineering strains). Stresses in MPa; strains in any one unit.

Conventions (stated because the literature differs): angles in degrees,
counter-clockwise from the x axis (the axis of gauge *a* of a rosette);
tension positive; "signed" equivalents take the sign of the principal stress
of largest magnitude (``principal``) or of the hydrostatic stress
(``hydrostatic``), so that a reversal of the load is a reversal of the
counted signal. Scalar equivalents assume proportional loading; when the
principal directions rotate they may be unconservative, and
:func:`principal_rotation` measures by how much they rotate.

References
----------
.. [1] J. W. Dally and W. F. Riley, *Experimental Stress Analysis*, 3rd ed.
   New York, NY, USA: McGraw-Hill, 1991, ch. 9 (strain-gauge rosettes; from
   memory).
.. [2] D. F. Socie and G. B. Marquis, *Multiaxial Fatigue*. Warrendale, PA,
   USA: SAE International, 2000 (critical-plane approach; from memory).
.. [3] Micro-Measurements, "Errors due to transverse sensitivity in strain
   gages," Tech Note TN-509 (gauge response model; from memory).
"""

from __future__ import annotations

import math
import threading
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field, replace

import numpy as np

from . import _multiaxial_kernels as _k
from ._buffers import FLOATS, POOL
from ._threads import in_one_thread
from .errors import InvalidLoadHistory, InvalidParameter, unknown

#: Gauge directions of the rosette layouts, from gauge a. [deg]
ROSETTE_LAYOUTS = {"rectangular": (0.0, 45.0, 90.0), "delta": (0.0, 60.0, 120.0)}

#: Poisson's ratio of the beam on which gauge factors are calibrated (0.285
#: is the usual calibration value; common practice).
CALIBRATION_POISSON = 0.285

#: Principal directions that turn more than this through a history mark the
#: loading non-proportional (a project choice, stated in every result). [deg]
ROTATION_WARNING_DEG = 15.0


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


def principal_in_plane(sxx, syy, sxy):
    r"""
    In-plane principal values and the angle of the first from x.

    Returns ``(p1, p2, angle_deg)`` with p1 >= p2 and
    :math:`\theta_1 = \tfrac12\operatorname{atan2}(2\tau_{xy}, \sigma_x -
    \sigma_y)` in (-90, 90] deg (Mohr's circle). Works for strains too, with
    half the engineering shear strain as ``sxy``.
    """
    sxx, syy, sxy = (np.asarray(v, dtype=np.float64) for v in (sxx, syy, sxy))
    centre = 0.5 * (sxx + syy)
    radius = np.hypot(0.5 * (sxx - syy), sxy)
    return centre + radius, centre - radius, np.degrees(0.5 * np.arctan2(2.0 * sxy, sxx - syy))


# ---------------------------------------------------------------------------- tensors


def as_components(components) -> np.ndarray:
    """Check a component array: ``(n, 3)`` plane stress or ``(n, 6)`` 3-D, finite."""
    arr = _shaped(components)
    _check_finite(arr)
    return arr


def _check_finite(arr: np.ndarray) -> None:
    bad = np.flatnonzero(~np.isfinite(arr).all(axis=1))
    if bad.size:
        raise InvalidLoadHistory(f"sample {int(bad[0])} has a non-finite component",
                                 field="components", sample_index=int(bad[0]))


def _shaped(components) -> np.ndarray:
    """A component array of the right shape (finiteness not checked)."""
    try:
        arr = np.asarray(components, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise InvalidLoadHistory(f"stress components must be numbers: {exc}",
                                 field="components") from None
    if arr.ndim != 2 or arr.shape[1] not in (3, 6):
        raise InvalidLoadHistory("stress components must be an (n, 3) array [sxx, syy, sxy] "
                                 "or an (n, 6) array [sxx, syy, szz, sxy, syz, szx], got shape "
                                 f"{arr.shape}", field="components")
    if arr.shape[0] < 2:
        raise InvalidLoadHistory("a history needs at least two samples", field="components")
    return arr


def _columns(components) -> tuple:
    """Contiguous component columns (3 or 6) from an ``(n, 3 | 6)`` array or
    a tuple of 3 or 6 one-dimensional arrays (the column form, no copy when
    they are float64 and contiguous already)."""
    if isinstance(components, tuple):
        if len(components) not in (3, 6):
            raise InvalidLoadHistory("give 3 (plane stress) or 6 component columns",
                                     field="components")
        cols = tuple(np.ascontiguousarray(_signal(c, "components")) for c in components)
        if len({c.shape for c in cols}) != 1:
            raise InvalidLoadHistory("component columns differ in length",
                                     field="components")
        return cols
    arr = _shaped(components)
    # One compiled pass splits and checks; the columns come from the engine's
    # pool (fresh pages for three 1e6-sample columns cost ~12 ms here).
    n = arr.shape[0]
    cols = tuple(c[:n] for c in POOL.columns(n, FLOATS * arr.shape[1]))
    if _k.split_columns(arr, arr.view(np.int64), cols):
        _check_finite(arr)
    return cols


def _full(arr: np.ndarray) -> np.ndarray:
    """(n, 6) from plane (n, 3) or 3-D (n, 6) components."""
    if arr.shape[1] == 6:
        return arr
    out = np.zeros((arr.shape[0], 6))
    out[:, 0], out[:, 1], out[:, 3] = arr[:, 0], arr[:, 1], arr[:, 2]
    return out


def _parts(cols: tuple) -> tuple:
    """The six component columns (zeros where plane stress has none)."""
    if len(cols) == 6:
        return cols
    z = np.zeros(cols[0].shape[0])
    return cols[0], cols[1], z, cols[2], z, z


def _principal3(sxx, syy, szz, sxy, syz, szx):
    r"""Principal stresses of symmetric tensors given by components of any
    shape, largest first, in closed form (trigonometric solution of the
    characteristic cubic): :math:`\sigma_k = I_1/3 + 2\sqrt{J_2/3}
    \cos(	heta - 2\pi k/3)` with :math:`\cos 3	heta = 	frac{3\sqrt3}{2}
    J_3 / J_2^{3/2}`. Elementwise numpy, no per-sample eigen solver."""
    mean = (sxx + syy + szz) / 3.0
    dx, dy, dz = sxx - mean, syy - mean, szz - mean
    j2 = (dx * dx + dy * dy + dz * dz) / 2.0 + sxy * sxy + syz * syz + szx * szx
    j3 = (dx * (dy * dz - syz * syz) - sxy * (sxy * dz - syz * szx)
          + szx * (sxy * syz - dy * szx))
    with np.errstate(invalid="ignore", divide="ignore"):
        c = np.where(j2 > 0.0, 1.5 * math.sqrt(3.0) * j3 / np.maximum(j2, 1e-300) ** 1.5, 0.0)
    theta = np.arccos(np.clip(c, -1.0, 1.0)) / 3.0
    r = 2.0 * np.sqrt(j2 / 3.0)
    return (mean + r * np.cos(theta), mean + r * np.cos(theta - 2.0 * math.pi / 3.0),
            mean + r * np.cos(theta + 2.0 * math.pi / 3.0))


def _von_mises6(sxx, syy, szz, sxy, syz, szx):
    return np.sqrt(0.5 * ((sxx - syy) ** 2 + (syy - szz) ** 2 + (szz - sxx) ** 2)
                   + 3.0 * (sxy * sxy + syz * syz + szx * szx))


def _largest_magnitude(p1, p3):
    """The principal stress of largest magnitude, with its sign (ties: tensile)."""
    return np.where(np.abs(p1) >= np.abs(p3), p1, p3)


def principal_stresses(components) -> np.ndarray:
    """Principal stresses of each sample, largest first: ``(n, 3)``; plane
    stress includes the free surface's zero. [MPa]"""
    cols = _columns(components)
    if len(cols) == 3:
        p1, p2, _ = principal_in_plane(*cols)
        return -np.sort(-np.stack([p1, p2, np.zeros_like(p1)], axis=1), axis=1)
    p1, p2, p3 = _principal3(*cols)
    # theta in [0, pi/3] orders them: cos(t) >= cos(t - 2pi/3) >= cos(t + 2pi/3).
    return np.stack([p1, p2, p3], axis=1)


def _matrices(full: np.ndarray) -> np.ndarray:
    sxx, syy, szz, sxy, syz, szx = full.T
    return np.stack([np.stack([sxx, sxy, szx], -1), np.stack([sxy, syy, syz], -1),
                     np.stack([szx, syz, szz], -1)], -2)


def von_mises(components) -> np.ndarray:
    r"""Von Mises equivalent stress (unsigned). [MPa]

    :math:`\sqrt{\tfrac12[(\sigma_x-\sigma_y)^2 + (\sigma_y-\sigma_z)^2 +
    (\sigma_z-\sigma_x)^2] + 3(\tau_{xy}^2+\tau_{yz}^2+\tau_{zx}^2)}`; for
    plane stress :math:`\sqrt{\sigma_x^2 - \sigma_x\sigma_y + \sigma_y^2 +
    3\tau_{xy}^2}`.
    """
    return _von_mises6(*_parts(_columns(components)))


def _reduce_parts(parts, reduction: str, plane: bool):
    """A named scalar reduction of component arrays of any shape."""
    if plane:
        sxx, syy, _, sxy, _, _ = parts
        a, b, _ = principal_in_plane(sxx, syy, sxy)
        p1, p3 = np.maximum(a, 0.0), np.minimum(b, 0.0)  # the surface's zero included
        big = np.where(np.abs(a) >= np.abs(b), a, b)
    else:
        p1, _, p3 = _principal3(*parts)
        big = _largest_magnitude(p1, p3)
    if reduction == "abs_max_principal":
        return big
    if reduction == "signed_tresca":
        t = p1 - p3
        return np.where(big < 0.0, -t, t)
    vm = _von_mises6(*parts)
    if reduction == "signed_von_mises":
        return np.where(big < 0.0, -vm, vm)
    if reduction == "signed_von_mises_hydrostatic":
        return np.where(parts[0] + parts[1] + parts[2] < 0.0, -vm, vm)
    raise unknown("reduction", reduction, REDUCTION_NAMES)


def signed_von_mises(components, sign: str = "principal") -> np.ndarray:
    """Von Mises with the sign of the largest-magnitude principal stress
    (``principal``) or of the hydrostatic stress (``hydrostatic``). [MPa]"""
    if sign not in ("principal", "hydrostatic"):
        raise unknown("sign", sign, ("principal", "hydrostatic"))
    return reduce(components, "signed_von_mises" if sign == "principal"
                  else "signed_von_mises_hydrostatic")


def abs_max_principal(components) -> np.ndarray:
    """The principal stress of largest magnitude, with its sign. [MPa]"""
    return reduce(components, "abs_max_principal")


def signed_tresca(components) -> np.ndarray:
    """Tresca (largest principal difference, the free surface's zero included
    for plane stress) with the sign of the largest-magnitude principal. [MPa]"""
    return reduce(components, "signed_tresca")


#: Scalar reductions (one signal from the state).
SCALAR_REDUCTIONS = ("signed_von_mises", "signed_von_mises_hydrostatic", "abs_max_principal",
                     "signed_tresca")
#: Plane scans, done by :func:`assess_multiaxial` (they need the curve):
#: normal stress on each plane, and (plane stress) the in-plane shear stress
#: on each plane, assessed with a shear curve.
PLANE_REDUCTIONS = ("critical_plane", "critical_plane_shear")
REDUCTION_NAMES = SCALAR_REDUCTIONS + PLANE_REDUCTIONS


def reduce(components, reduction: str) -> np.ndarray:
    """One scalar history from the components by a named reduction. [MPa]"""
    if reduction not in SCALAR_REDUCTIONS:
        raise unknown("reduction", reduction, REDUCTION_NAMES)
    cols = _columns(components)
    return _reduce_parts(_parts(cols), reduction, len(cols) == 3)


# ---------------------------------------------------------------------------- planes


def plane_normals(components, step_deg: float) -> tuple[np.ndarray, np.ndarray]:
    """Unit normals of the planes scanned, and their angles.

    Plane stress: planes normal to the surface, at angles 0, step, ... < 180
    deg from x (``angles`` is ``(k,)``). 3-D: normals over a hemisphere, polar
    angle 0..90 and azimuth 0.. < 180 deg at ``step`` (``angles`` is ``(k, 2)``
    [polar, azimuth]; the pole once).
    """
    step = _finite(step_deg, "plane_step_deg")
    if not 0.5 <= step <= 90.0:
        raise InvalidParameter(f"plane_step_deg {step} must be between 0.5 and 90",
                               field="plane_step_deg", value=step)
    az = np.arange(0.0, 180.0 - 1e-9, step)
    n_comp = len(components) if isinstance(components, tuple) else np.shape(components)[1]
    if n_comp == 3:
        a = np.radians(az)
        return np.stack([np.cos(a), np.sin(a), np.zeros_like(a)], 1), az
    polar = np.arange(step, 90.0 + 1e-9, step)
    pp, aa = np.meshgrid(np.radians(polar), np.radians(az), indexing="ij")
    normals = np.stack([np.sin(pp) * np.cos(aa), np.sin(pp) * np.sin(aa), np.cos(pp)], -1)
    normals = np.concatenate([[[0.0, 0.0, 1.0]], normals.reshape(-1, 3)])
    angles = np.concatenate([[[0.0, 0.0]], np.degrees(np.stack([pp, aa], -1)).reshape(-1, 2)])
    return normals, angles


def normal_stress_on_planes(components, normals) -> np.ndarray:
    r"""Normal stress :math:`\sigma_n = n^T S n` on each plane: ``(k, n)``. [MPa]

    For plane stress and a normal at :math:`\theta` this is Mohr's
    :math:`\tfrac{\sigma_x+\sigma_y}2 + \tfrac{\sigma_x-\sigma_y}2\cos2\theta
    + \tau_{xy}\sin2\theta`.
    """
    cols = _columns(components)
    return _plane_weights(normals, len(cols)) @ np.stack(cols)


def _plane_weights(normals, n_components: int) -> np.ndarray:
    """sigma_n = sum_ij n_i n_j S_ij: the weights of the components, per plane."""
    n = np.asarray(normals, dtype=np.float64)
    w = np.stack([n[:, 0] ** 2, n[:, 1] ** 2, n[:, 2] ** 2, 2 * n[:, 0] * n[:, 1],
                  2 * n[:, 1] * n[:, 2], 2 * n[:, 2] * n[:, 0]], axis=1)
    return np.ascontiguousarray(w[:, [0, 1, 3]] if n_components == 3 else w)


def shear_stress_on_planes(components, normals) -> np.ndarray:
    r"""Magnitude of the shear stress on each plane, :math:`|S n - \sigma_n n|`:
    ``(k, n)``. For plane stress and an in-plane normal at :math:`\theta`, its
    in-plane part is :math:`-\tfrac{\sigma_x-\sigma_y}2\sin2\theta +
    \tau_{xy}\cos2\theta`. [MPa]"""
    f = _full(as_components(components))
    n = np.asarray(normals, dtype=np.float64)
    traction = np.einsum("tij,kj->kti", _matrices(f), n)
    sn = np.einsum("kti,ki->kt", traction, n)
    return np.linalg.norm(traction - sn[..., None] * n[:, None, :], axis=-1)


# ---------------------------------------------------------------------------- proportionality


def principal_rotation(components, significance: float = 0.1) -> float:
    r"""
    How far the principal direction turns through the history. [deg]

    The direction followed is that of the principal stress of largest
    magnitude (invariant when the whole state scales, sign included). Only
    samples where it is well defined count: von Mises at least
    ``significance`` times its largest value, and the two largest principal
    magnitudes at least 10 % apart. The result is the largest angle between
    such a sample's direction and the direction at the sample of largest
    von Mises (0 for proportional loading, up to 90).
    """
    cols = _columns(components)
    if len(cols) == 3:
        return float(_k.plane_rotation(*cols, float(significance)))
    vm = _von_mises6(*cols)
    if vm.max() == 0.0:
        return 0.0
    vals, vecs = np.linalg.eigh(_matrices(np.stack(cols, axis=1)))
    mag = np.abs(vals)
    order = np.argsort(-mag, axis=1)
    first = np.take_along_axis(mag, order[:, :1], 1)[:, 0]
    second = np.take_along_axis(mag, order[:, 1:2], 1)[:, 0]
    ok = (vm >= significance * vm.max()) & (first - second >= 0.1 * first)
    if not ok.any():
        return 0.0
    d = np.take_along_axis(vecs, order[:, None, :1], 2)[:, :, 0]  # (n, dim)
    ref = d[np.flatnonzero(ok)[np.argmax(vm[ok])]]
    cosang = np.clip(np.abs(d[ok] @ ref), 0.0, 1.0)
    return float(np.degrees(np.arccos(cosang.min())))


# ---------------------------------------------------------------------------- assessment


@dataclass(frozen=True)
class MultiaxialAssessment:
    """The governing result of a multiaxial point and how it was found.

    ``governing`` is the :class:`~service.engine.damage.PointAssessment` of
    the reduction (and, for ``critical_plane``, the plane) with the largest
    damage; ``damages`` [-] gives each reduction's damage; ``plane_angle``
    [deg] the governing plane (None unless a plane governs);
    ``plane_damage`` [-] the damage of every plane scanned;
    ``rotation_deg`` [deg] the principal rotation; ``non_proportional``
    whether it exceeds ``ROTATION_WARNING_DEG``.
    """

    reduction: str
    governing: object
    damages: dict
    plane_angle: object = None
    plane_angles: np.ndarray = field(default=None, repr=False)
    plane_damage: np.ndarray = field(default=None, repr=False)
    shear_plane_damage: np.ndarray = field(default=None, repr=False)
    rotation_deg: float = 0.0
    non_proportional: bool = False
    cautions: tuple = ()

    def summary(self) -> dict:
        worst = self.damages[self.reduction]
        return {
            "reduction": self.reduction,
            "damages": dict(self.damages),
            "ratio_to_governing": {k: (v / worst if worst and math.isfinite(worst) else None)
                                   for k, v in self.damages.items()},
            "plane_angle_deg": self.plane_angle,
            "principal_rotation_deg": self.rotation_deg,
            "non_proportional": self.non_proportional,
            "rotation_warning_deg": ROTATION_WARNING_DEG,
        }


def _plane_normal(cols: tuple, plane_angle) -> np.ndarray:
    """The unit normal of a plane given by its angle(s) as stored. [-]"""
    # The same numpy expressions as plane_normals, so the weights are the
    # scan's to the last bit.
    if len(cols) == 3:
        a = np.radians(np.array([float(plane_angle)]))
        return np.stack([np.cos(a), np.sin(a), np.zeros_like(a)], 1)
    p, z = (np.radians(np.array([float(v)])) for v in plane_angle)
    return np.stack([np.sin(p) * np.cos(z), np.sin(p) * np.sin(z), np.cos(p)], -1)


def _shear_weights(angles_deg) -> np.ndarray:
    """Weights of (sxx, syy, sxy) giving the in-plane shear stress on planes at
    these angles: -(sx - sy)/2 sin 2t + txy cos 2t (Mohr's circle, signed)."""
    t2 = np.radians(2.0 * np.asarray(angles_deg, dtype=np.float64))
    return np.ascontiguousarray(np.stack([-0.5 * np.sin(t2), 0.5 * np.sin(t2), np.cos(t2)], 1))


def governing_history(components, reduction: str, plane_angle=None) -> np.ndarray:
    """The scalar history a stored result was counted from (for recounts),
    computed the way :func:`assess_multiaxial` computed it. [MPa]"""
    if reduction not in PLANE_REDUCTIONS:
        return reduce(components, reduction)
    cols = _columns(components)
    if reduction == "critical_plane_shear":
        w = _shear_weights([float(plane_angle)])[0]
    else:
        w = _plane_weights(_plane_normal(cols, plane_angle), len(cols))[0]
    out = np.empty(cols[0].shape[0])
    _normal_stress(cols, w, out)
    return out


def _normal_stress(cols: tuple, w: np.ndarray, out: np.ndarray) -> None:
    """Write the normal stress on the plane of weights ``w`` into ``out``."""
    if len(cols) == 3:
        _k.normal_stress3(*cols, w, out)
    else:
        _k.normal_stress6(*cols, w, out)


def _scan_planes(cols, names, plane_step_deg, damage_of, pool) -> dict:
    """``{reduction: (damage per plane, plane angles, index of the worst)}``
    for the plane reductions in ``names``; planes on ``pool``'s threads (each
    keeping to its own thread, with its own buffer) or in turn without one."""
    out = {}
    local = threading.local()
    for r in PLANE_REDUCTIONS:
        if r not in names:
            continue
        normals, angles = plane_normals(cols, plane_step_deg)
        shear = r == "critical_plane_shear"
        weights = _shear_weights(angles) if shear else _plane_weights(normals, len(cols))

        def plane(k, weights=weights, shear=shear):
            buf = getattr(local, "buf", None)
            if buf is None:
                buf = local.buf = np.empty(cols[0].shape[0])
            _normal_stress(cols, weights[k], buf)
            return damage_of(buf, shear)

        if pool is not None and len(weights) > 1:
            values = np.array(list(pool.map(in_one_thread(plane), range(len(weights)))))
        else:
            values = np.array([plane(k) for k in range(len(weights))])
        out[r] = (values, angles, int(np.argmax(values)))
    return out


def assess_multiaxial(components, curve, options=None, *,
                      reductions=("signed_von_mises", "critical_plane"),
                      plane_step_deg: float = 10.0, gate: float = 0.0,
                      residue: str = "half_cycles", duration_s: float | None = None,
                      workers: int = 2, shear_curve=None,
                      shear_options=None) -> MultiaxialAssessment:
    """
    Assess a multiaxial point by each of ``reductions``; the worst governs.

    ``critical_plane_shear`` (plane stress only) counts the in-plane shear
    stress on each plane and assesses it with ``shear_curve`` and
    ``shear_options`` (a shear S-N curve, e.g. EN 1993-1-9 shear with m = 5);
    the others use ``curve`` and ``options``.

    ``components``: an ``(n, 3 | 6)`` array or a tuple of 3 or 6 columns.
    Every scalar reduction and every plane of the critical-plane scan is
    counted (ASTM E1049-85) and assessed with the same curve and options;
    planes are first assessed without reserve factor or top cycles (each
    plane's stress written into a reused buffer, ``workers`` planes at a
    time), then the governing history once in full. ``gate`` [MPa] applies
    to each counted history. Returns a :class:`MultiaxialAssessment`.
    """
    from .damage import AssessmentOptions, assess_history, damage_of_history

    cols = _columns(components)
    opts = options or AssessmentOptions()
    names = list(dict.fromkeys(reductions))
    if not names:
        raise InvalidParameter("give at least one reduction", field="reductions")
    for r in names:
        if r not in REDUCTION_NAMES:
            raise unknown("reduction", r, REDUCTION_NAMES)
    if "critical_plane_shear" in names:
        if len(cols) != 3:
            raise InvalidParameter("critical_plane_shear is for plane stress (a free surface); "
                                   "use critical_plane for 3-D states", field="reductions")
        if shear_curve is None:
            raise InvalidParameter("critical_plane_shear needs a shear S-N curve "
                                   "(shear_settings)", field="shear_settings")
    shear_opts = shear_options or AssessmentOptions()
    light = replace(opts, reserve_factor=False, top_cycles=0)
    shear_light = replace(shear_opts, reserve_factor=False, top_cycles=0)

    def damage_of(history, shear=False):
        return damage_of_history(history, shear_curve if shear else curve,
                                 shear_light if shear else light, gate=gate, residue=residue)

    parts = _parts(cols)
    scalar = [r for r in names if r not in PLANE_REDUCTIONS]
    damages = {r: damage_of(_reduce_parts(parts, r, len(cols) == 3)) for r in scalar}
    angles = None
    scans, best = {}, {}
    scanning = any(r in names for r in PLANE_REDUCTIONS)
    pool = ThreadPoolExecutor(max_workers=workers) if workers > 1 and scanning else None
    try:
        # The rotation (one long pass) goes first on the scan's threads, so
        # the planes fill in around it instead of waiting behind it.
        rotation_job = pool.submit(in_one_thread(principal_rotation), cols) if pool else None
        scanned = _scan_planes(cols, names, plane_step_deg, damage_of, pool)
        rotation = rotation_job.result() if rotation_job else principal_rotation(cols)
    finally:
        if pool:
            pool.shutdown(cancel_futures=True)
    for r, (values, angles, k) in scanned.items():
        scans[r] = values
        best[r] = angles[k].tolist() if angles.ndim == 2 else float(angles[k])
        damages[r] = float(values[k])
    # The worst reduction governs (ties: the order given).
    worst = max(names, key=lambda r: (damages[r], -names.index(r)))
    history = (governing_history(cols, worst, best[worst]) if worst in PLANE_REDUCTIONS
               else _reduce_parts(parts, worst, len(cols) == 3))
    shear = worst == "critical_plane_shear"
    full = assess_history(history, shear_curve if shear else curve,
                          shear_opts if shear else opts, gate=gate, residue=residue,
                          duration_s=duration_s)
    plane_damage = scans.get("critical_plane")
    cautions = []
    if rotation > ROTATION_WARNING_DEG:
        cautions.append(
            f"Non-proportional loading: the principal direction turns {rotation:.0f} deg "
            f"(more than {ROTATION_WARNING_DEG:.0f}); scalar equivalents may be unconservative "
            f"here. Prefer the critical-plane result and confirm by test.")
    return MultiaxialAssessment(
        reduction=worst, governing=full, damages=damages,
        plane_angle=best.get(worst), plane_angles=angles, plane_damage=plane_damage,
        shear_plane_damage=scans.get("critical_plane_shear"), rotation_deg=rotation,
        non_proportional=rotation > ROTATION_WARNING_DEG, cautions=tuple(cautions))


# ---------------------------------------------------------------------------- helpers


def _finite(value, name: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise InvalidParameter(f"{name} must be a finite number", field=name, value=value)
    return float(value)


def _signal(values, name: str) -> np.ndarray:
    try:
        arr = np.asarray(values, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise InvalidLoadHistory(f"{name} must be numbers: {exc}", field=name) from None
    if arr.ndim != 1 or arr.shape[0] < 2:
        raise InvalidLoadHistory(f"{name} must be a 1-D history of at least two samples",
                                 field=name)
    bad = np.flatnonzero(~np.isfinite(arr))
    if bad.size:
        raise InvalidLoadHistory(f"{name} sample {int(bad[0])} is not finite", field=name,
                                 sample_index=int(bad[0]))
    return arr


# ---------------------------------------------------------------------------- FE superposition


def _unit_array(unit_stresses) -> np.ndarray:
    u = np.asarray(unit_stresses, dtype=np.float64)
    if u.ndim != 3 or u.shape[2] not in (3, 6) or u.shape[0] < 1 or u.shape[1] < 1:
        raise InvalidParameter("unit stresses must be an array (nodes, load cases, 3 or 6 "
                               f"components), got shape {u.shape}", field="unit_stresses")
    if not np.isfinite(u).all():
        bad = int(np.flatnonzero(~np.isfinite(u).all(axis=(1, 2)))[0])
        raise InvalidParameter(f"unit stresses of node index {bad} are not finite",
                               field="unit_stresses", value=bad)
    if u.shape[2] == 3:
        full = np.zeros(u.shape[:2] + (6,))
        full[..., 0], full[..., 1], full[..., 3] = u[..., 0], u[..., 1], u[..., 2]
        return full
    return u


def _load_array(load_histories, cases: int) -> np.ndarray:
    x = np.asarray(load_histories, dtype=np.float64)
    if x.ndim != 2 or x.shape[0] != cases or x.shape[1] < 2:
        raise InvalidLoadHistory(f"load histories must be an array (load cases = {cases}, "
                                 f"samples >= 2), got shape {x.shape}", field="loads")
    bad = np.flatnonzero(~np.isfinite(x).all(axis=0))
    if bad.size:
        raise InvalidLoadHistory(f"load sample {int(bad[0])} is not finite", field="loads",
                                 sample_index=int(bad[0]))
    return x


def superpose(unit_stresses, load_histories) -> np.ndarray:
    r"""
    Stress-tensor histories of nodes by linear superposition of load cases.

    Parameters
    ----------
    unit_stresses : array-like, (nodes, cases, 3 or 6)
        Each node's stress components under a unit value of each load case
        (from a linear finite-element model). [MPa per load unit]
    load_histories : array-like, (cases, samples)
        The measured (or designed) history of each load case. [load unit]

    Returns
    -------
    ndarray, (nodes, samples, 6)
        :math:`\sigma_{ij}(t) = \sum_c u_{ij,c}\,L_c(t)` for every node. [MPa]

    Notes
    -----
    Valid while the structure responds linearly (small strains, no contact
    or plasticity), as in any superposition of unit-load cases.
    """
    u = _unit_array(unit_stresses)
    x = _load_array(load_histories, u.shape[1])
    return np.matmul(u.transpose(0, 2, 1), x).transpose(0, 2, 1)


@dataclass(frozen=True)
class NodeDamage:
    """Damage of every node of a superposition, and the worst nodes in full.

    ``damage`` [-] and ``max_abs_equivalent`` [MPa] are per node in input
    order; ``top`` lists ``(node id, PointAssessment)`` of the ``top`` nodes
    by damage, worst first (assessed with reserve factor and top cycles).
    """

    node_ids: np.ndarray
    damage: np.ndarray
    max_abs_equivalent: np.ndarray
    reduction: str
    top: list


def assess_superposition(unit_stresses, load_histories, curve, options=None, *,
                         reduction: str = "signed_von_mises", node_ids=None, top: int = 10,
                         chunk_bytes: int = 64 * 2**20, gate: float = 0.0,
                         duration_s: float | None = None, workers: int = 2,
                         progress=None) -> NodeDamage:
    """
    Damage at every node of a finite-element model under measured loads.

    Node chunks are superposed and reduced to a scalar history by
    ``reduction`` in one compiled pass (the formulas of :func:`superpose` and
    :func:`reduce`; a critical-plane scan of every node is left to a chosen
    few), then counted and assessed, so memory is bounded by ``chunk_bytes``
    of reduced histories whatever the node count. The ``top`` nodes by damage are then assessed in full.
    ``progress(nodes_done, nodes_total)`` is called after each chunk.
    """
    from .damage import AssessmentOptions, assess_history, assess_many

    if reduction not in SCALAR_REDUCTIONS:
        raise unknown("reduction", reduction, SCALAR_REDUCTIONS)
    u = _unit_array(unit_stresses)
    x = _load_array(load_histories, u.shape[1])
    nodes, n = u.shape[0], x.shape[1]
    ids = np.arange(nodes) if node_ids is None else np.asarray(node_ids)
    if ids.shape != (nodes,):
        raise InvalidParameter(f"node_ids must name the {nodes} nodes", field="node_ids")
    if isinstance(top, bool) or not isinstance(top, int) or top < 0:
        raise InvalidParameter("top must be a whole number >= 0", field="top")
    opts = options or AssessmentOptions()
    light = replace(opts, reserve_factor=False, top_cycles=0)
    chunk = max(1, int(chunk_bytes // (2 * 8 * n)))  # reduced stresses and their transpose
    damage = np.empty(nodes)
    peak = np.empty(nodes)
    for lo in range(0, nodes, chunk):
        hi = min(lo + chunk, nodes)
        reduced = np.empty((hi - lo, n))
        _k.superposed_reduction(u[lo:hi], x, _k.REDUCTION_CODES[reduction], reduced)
        res = assess_many(np.ascontiguousarray(reduced.T), curve, light, gate=gate,
                          duration_s=duration_s, workers=workers)
        damage[lo:hi] = [r.damage for r in res.values()]
        peak[lo:hi] = np.abs(reduced).max(axis=1)
        if progress is not None:
            progress(hi, nodes)
    order = np.argsort(-damage, kind="stable")[:top]
    worst = []
    for i in order:
        h = np.empty((1, n))
        _k.superposed_reduction(u[i:i + 1], x, _k.REDUCTION_CODES[reduction], h)
        h = h[0]
        worst.append((ids[i].item() if hasattr(ids[i], "item") else ids[i],
                      assess_history(h, curve, opts, gate=gate, duration_s=duration_s)))
    return NodeDamage(node_ids=ids, damage=damage, max_abs_equivalent=peak,
                      reduction=reduction, top=worst)


def warm_up() -> None:
    """Compile (or load from cache) the multiaxial kernels."""
    _k.warm_up()
