r"""Planes through a point: normal and shear stress on them, and how far the
principal directions turn (proportionality).

References
----------
.. [1] D. F. Socie and G. B. Marquis, *Multiaxial Fatigue*. Warrendale, PA,
   USA: SAE International, 2000, ch. 2 and 8 (stress on planes,
   critical-plane approach, non-proportional loading).
"""

from __future__ import annotations

import numpy as np

from . import _multiaxial_kernels as _k
from .errors import InvalidParameter
from .stress_state import (_columns, _finite, _full, _matrices, _von_mises6,
                           as_components)

#: Principal directions that turn more than this through a history mark the
#: loading non-proportional (a project choice, stated in every result). [deg]
ROTATION_WARNING_DEG = 15.0


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



def _normal_stress(cols: tuple, w: np.ndarray, out: np.ndarray) -> None:
    """Write the normal stress on the plane of weights ``w`` into ``out``."""
    if len(cols) == 3:
        _k.normal_stress3(*cols, w, out)
    else:
        _k.normal_stress6(*cols, w, out)

