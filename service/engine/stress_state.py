r"""Stress states as component columns: checks, principal and von Mises stresses.

Components are columns of an array with one row per sample: plane stress
``(n, 3)`` as ``[sxx, syy, sxy]``, or 3-D ``(n, 6)`` as ``[sxx, syy, szz,
sxy, syz, szx]`` (tensor shear components). Stresses in MPa, tension positive.
"""

from __future__ import annotations

import math

import numpy as np

from . import _multiaxial_kernels as _k
from ._buffers import FLOATS, POOL
from .errors import InvalidLoadHistory, InvalidParameter


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

