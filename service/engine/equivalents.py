r"""Signed equivalent stresses: one countable signal from a stress state.

Von Mises, Tresca and the principal stress of largest magnitude have no sign
of their own; rainflow counting needs one, or a load that reverses would be
counted as a load that pulses. The sign rule matters most where the usual
rule fails: the usual rule takes the sign of the principal stress of larger
magnitude, and under shear (torsion of a shaft, a web in shear) the two
principal stresses are equal and opposite, so the tie always falls one way
and a fully reversed shear history becomes a one-sided one at twice the
frequency: twice the cycles at half the range, damage too low by 2^(m-1)
(fourfold at m = 3, sixteenfold at m = 5).

The rule used here: **the sign of the normal stress along a fixed reference
direction**, the principal direction of the largest-magnitude principal
stress at the sample of largest von Mises stress. For proportional loading
:math:`\sigma(t) = \lambda(t)\,S` the normal stress along that direction is
:math:`\lambda(t)` times a constant, so the counted signal reverses exactly
when the load does: uniaxial loading gives the uniaxial history, pure shear
gives :math:`\pm\sqrt3\,|\tau|` with the sign of :math:`\tau` (the von Mises
range :math:`\sqrt3\,\Delta\tau` per cycle), and a dominant shear with a small
normal stress keeps its reversals too. Where the normal stress along the
reference is exactly zero the larger-magnitude principal decides (tensile on
a tie). Under non-proportional loading no scalar sign is right:
:func:`sign_ambiguity` marks the samples whose sign rests on little (the
reference direction carries under a fifth of the largest principal stress),
and the critical-plane scan is the better guide.

The hydrostatic variant keeps the sign of the first invariant; it has no
sign at all under pure shear (the invariant is zero), which
:func:`sign_ambiguity` reports.

References
----------
.. [1] N. W. M. Bishop and F. Sherratt, *Finite Element Based Fatigue
   Calculations*. Glasgow, U.K.: NAFEMS, 2000 (signed von Mises and the
   absolute maximum principal stress as counted signals, and their sign
   problem).
.. [2] D. F. Socie and G. B. Marquis, *Multiaxial Fatigue*. Warrendale, PA,
   USA: SAE International, 2000, ch. 2 (proportional loading: a fixed
   principal direction and stresses scaling with one load factor).
"""

from __future__ import annotations

import numpy as np

from .errors import unknown
from .stress_state import (_columns, _parts, _principal3, _von_mises6, principal_in_plane)

#: Scalar reductions (one signal from the state).
SCALAR_REDUCTIONS = ("signed_von_mises", "signed_von_mises_hydrostatic", "abs_max_principal",
                     "signed_tresca")
#: Plane scans, done by :func:`~service.engine.multiaxial.assess_multiaxial`
#: (they need the curve): normal stress on each plane, and the shear stress
#: on each plane, assessed with a shear curve.
PLANE_REDUCTIONS = ("critical_plane", "critical_plane_shear")
REDUCTION_NAMES = SCALAR_REDUCTIONS + PLANE_REDUCTIONS

#: A sample's sign is ambiguous when the normal stress along the reference
#: direction (or, hydrostatic variant, the first invariant against von
#: Mises) is below this fraction of the largest principal magnitude: a
#: judgment, stated in every caution that uses it.
AMBIGUOUS_FRACTION = 0.2


def reference_direction(components) -> np.ndarray | None:
    """Unit vector (3,) of the sign reference, or None for a zero history.

    The principal direction of the principal stress of largest magnitude
    (ties: the tensile one) at the sample of largest von Mises stress (the
    first such sample).
    """
    cols = _columns(components)
    parts = _parts(cols)
    vm = _von_mises6(*parts)
    k = int(np.argmax(vm))
    if not vm[k] > 0.0:
        return None
    if len(cols) == 3:
        p1, p2, angle = principal_in_plane(cols[0][k], cols[1][k], cols[2][k])
        t = np.radians(float(angle) + (90.0 if abs(float(p2)) > abs(float(p1)) else 0.0))
        return np.array([np.cos(t), np.sin(t), 0.0])
    sxx, syy, szz, sxy, syz, szx = (float(c[k]) for c in cols)
    vals, vecs = np.linalg.eigh(np.array([[sxx, sxy, szx], [sxy, syy, syz],
                                          [szx, syz, szz]]))
    # eigh sorts ascending: the last is the most tensile, the first the most
    # compressive; the tensile one wins a tie.
    j = 2 if abs(vals[2]) >= abs(vals[0]) else 0
    return vecs[:, j]


def _normal_along(parts, direction) -> np.ndarray:
    """Normal stress along ``direction`` at every sample: n^T S n. [MPa]"""
    n = direction
    sxx, syy, szz, sxy, syz, szx = parts
    return (n[0] * n[0] * sxx + n[1] * n[1] * syy + n[2] * n[2] * szz
            + 2.0 * (n[0] * n[1] * sxy + n[1] * n[2] * syz + n[2] * n[0] * szx))


def _principal_extremes(parts, plane: bool):
    """``(p1, p3, big)``: largest and smallest principal (the free surface's
    zero included for plane stress) and the in-plane / 3-D principal of
    largest magnitude with its sign (ties: tensile)."""
    if plane:
        sxx, syy, _, sxy, _, _ = parts
        a, b, _ = principal_in_plane(sxx, syy, sxy)
        return np.maximum(a, 0.0), np.minimum(b, 0.0), np.where(np.abs(a) >= np.abs(b), a, b)
    p1, _, p3 = _principal3(*parts)
    return p1, p3, np.where(np.abs(p1) >= np.abs(p3), p1, p3)


def _signs(parts, plane: bool, big, direction) -> np.ndarray:
    """+1 / -1 per sample by the reference-direction rule (module notes)."""
    fallback = np.where(big < 0.0, -1.0, 1.0)
    if direction is None:
        return fallback
    along = _normal_along(parts, direction)
    return np.where(along > 0.0, 1.0, np.where(along < 0.0, -1.0, fallback))


def _reduce_parts(parts, reduction: str, plane: bool, direction=None):
    """A named scalar reduction of component arrays (columns of one history).

    ``direction``: the sign reference (:func:`reference_direction`) for the
    principal-signed reductions.
    """
    if reduction not in SCALAR_REDUCTIONS:
        raise unknown("reduction", reduction, REDUCTION_NAMES)
    if reduction == "signed_von_mises_hydrostatic":
        vm = _von_mises6(*parts)
        return np.where(parts[0] + parts[1] + parts[2] < 0.0, -vm, vm)
    p1, p3, big = _principal_extremes(parts, plane)
    sign = _signs(parts, plane, big, direction)
    if reduction == "abs_max_principal":
        return sign * np.abs(big)
    if reduction == "signed_tresca":
        return sign * (p1 - p3)
    return sign * _von_mises6(*parts)


def reduce(components, reduction: str) -> np.ndarray:
    """One scalar history from the components by a named reduction. [MPa]"""
    if reduction not in SCALAR_REDUCTIONS:
        raise unknown("reduction", reduction, REDUCTION_NAMES)
    cols = _columns(components)
    direction = (None if reduction == "signed_von_mises_hydrostatic"
                 else reference_direction(cols))
    return _reduce_parts(_parts(cols), reduction, len(cols) == 3, direction)


def sign_ambiguity(components, reduction: str) -> np.ndarray:
    """Per sample, whether the sign of ``reduction`` rests on little. [bool]

    Principal-signed reductions: the normal stress along the reference
    direction is below ``AMBIGUOUS_FRACTION`` of the largest principal
    magnitude. Hydrostatic variant: the first invariant is below that
    fraction of von Mises (always, under pure shear). Zero states are not
    ambiguous (there is nothing to sign).
    """
    if reduction not in SCALAR_REDUCTIONS:
        raise unknown("reduction", reduction, REDUCTION_NAMES)
    cols = _columns(components)
    parts = _parts(cols)
    if reduction == "signed_von_mises_hydrostatic":
        vm = _von_mises6(*parts)
        return (np.abs(parts[0] + parts[1] + parts[2]) < AMBIGUOUS_FRACTION * vm) & (vm > 0)
    _, _, big = _principal_extremes(parts, len(cols) == 3)
    direction = reference_direction(cols)
    if direction is None:
        return np.zeros(cols[0].shape[0], bool)
    along = np.abs(_normal_along(parts, direction))
    return (along < AMBIGUOUS_FRACTION * np.abs(big)) & (big != 0.0)


def signed_von_mises(components, sign: str = "principal") -> np.ndarray:
    """Von Mises signed by the reference-direction rule (``principal``, see
    the module notes) or by the hydrostatic stress (``hydrostatic``). [MPa]"""
    if sign not in ("principal", "hydrostatic"):
        raise unknown("sign", sign, ("principal", "hydrostatic"))
    return reduce(components, "signed_von_mises" if sign == "principal"
                  else "signed_von_mises_hydrostatic")


def abs_max_principal(components) -> np.ndarray:
    """The largest principal magnitude, signed by the reference-direction
    rule (the principal's own sign wherever one principal dominates along
    a fixed direction). [MPa]"""
    return reduce(components, "abs_max_principal")


def signed_tresca(components) -> np.ndarray:
    """Tresca (largest principal difference, the free surface's zero included
    for plane stress), signed by the reference-direction rule. [MPa]"""
    return reduce(components, "signed_tresca")


def ambiguous_damage_share(ambiguous: np.ndarray, start_index, end_index,
                           damage_per_cycle) -> float:
    """Share of the damage in cycles with a turning point at an ambiguous
    sample (0 when there is no damage). [-]"""
    d = np.asarray(damage_per_cycle)
    total = float(np.sum(d))
    if not total > 0.0 or not np.isfinite(total):
        return 0.0
    hit = ambiguous[np.asarray(start_index)] | ambiguous[np.asarray(end_index)]
    return float(np.sum(d[hit])) / total
