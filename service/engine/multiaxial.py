r"""Multiaxial points: a stress state assessed by several reductions, the
worst governing.

A free surface carries two normal stresses and a shear stress at once; one
gauge sees one direction. Rainflow counting needs one signal, so the state is
reduced: a signed equivalent stress (``equivalents.py``: von Mises, Tresca,
the principal of largest magnitude, with a sign rule that keeps the
reversals of shear), or the normal (or shear) stress on each of a set of
planes, every plane counted and assessed (``planes.py``: critical plane).
Scalar equivalents assume proportional loading; when the principal
directions rotate they may be unconservative, and the result says so.

The pieces live by concept: ``rosette.py`` (gauges to stress),
``stress_state.py`` (components, principal and von Mises stresses),
``equivalents.py``, ``planes.py`` and ``superposition.py`` (FE nodes under
measured loads); this module assesses a point and re-exports them all, so
``service.engine.multiaxial`` remains the one import path.
"""

from __future__ import annotations

import math
import threading
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field, replace

import numpy as np

from . import _multiaxial_kernels as _k
from ._threads import in_one_thread
from .cautions import caution
from .equivalents import (AMBIGUOUS_FRACTION, PLANE_REDUCTIONS, REDUCTION_NAMES,
                          SCALAR_REDUCTIONS, _reduce_parts, abs_max_principal,
                          ambiguous_damage_share, reduce, reference_direction,
                          sign_ambiguity, signed_tresca, signed_von_mises)
from .errors import InvalidParameter, unknown
from .planes import (ROTATION_WARNING_DEG, _normal_stress, _plane_normal, _plane_weights,
                     _shear_weights, normal_stress_on_planes, plane_normals,
                     principal_rotation, shear_stress_on_planes)
from .rosette import (CALIBRATION_POISSON, ROSETTE_LAYOUTS, plane_stress_from_strains,
                      rosette_plane_stress, rosette_strains)
from .stress_state import (_columns, _parts, as_components,
                           principal_in_plane, principal_stresses, von_mises)
from .superposition import NodeDamage, assess_superposition, superpose

#: Share of the governing damage in cycles with an ambiguous sign from which
#: the result carries a caution (common practice: within a fatigue
#: estimate's scatter below it).
AMBIGUOUS_NOTICEABLE = 0.05


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
    sign_ambiguous_share: float | None = None

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
            "sign_ambiguous_share": self.sign_ambiguous_share,
        }


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
    from .damage import AssessmentOptions, assess, damage_of_history
    from .rainflow import astm_e1049

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
    direction = reference_direction(cols) if scalar else None
    damages = {r: damage_of(_reduce_parts(parts, r, len(cols) == 3, direction))
               for r in scalar}
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
               else _reduce_parts(parts, worst, len(cols) == 3, direction))
    shear = worst == "critical_plane_shear"
    # Counted here (not through assess_history) to keep the cycles' sample
    # indices for the sign check below; the figures are the same.
    table = astm_e1049(history, gate=gate, residue=residue)
    full = assess(table, shear_curve if shear else curve, shear_opts if shear else opts,
                  duration_s=duration_s)
    plane_damage = scans.get("critical_plane")
    cautions = []
    if rotation > ROTATION_WARNING_DEG:
        cautions.append(caution("non_proportional", rotation=rotation,
                                limit=ROTATION_WARNING_DEG))
    share = None
    if worst in SCALAR_REDUCTIONS:
        share = ambiguous_damage_share(sign_ambiguity(cols, worst), table.start_index,
                                       table.end_index, full.damage_per_cycle)
        if share > AMBIGUOUS_NOTICEABLE:
            cautions.append(caution("sign_ambiguous", share=share, reduction=worst))
    return MultiaxialAssessment(
        reduction=worst, governing=full, damages=damages,
        plane_angle=best.get(worst), plane_angles=angles, plane_damage=plane_damage,
        shear_plane_damage=scans.get("critical_plane_shear"), rotation_deg=rotation,
        non_proportional=rotation > ROTATION_WARNING_DEG, cautions=tuple(cautions),
        sign_ambiguous_share=share)



def warm_up() -> None:
    """Compile (or load from cache) the multiaxial kernels."""
    _k.warm_up()


__all__ = [
    "ROSETTE_LAYOUTS", "CALIBRATION_POISSON", "ROTATION_WARNING_DEG", "SCALAR_REDUCTIONS",
    "PLANE_REDUCTIONS", "REDUCTION_NAMES", "AMBIGUOUS_FRACTION", "rosette_strains",
    "rosette_plane_stress", "plane_stress_from_strains", "principal_in_plane",
    "as_components", "principal_stresses", "von_mises", "reduce", "signed_von_mises",
    "abs_max_principal", "signed_tresca", "reference_direction", "sign_ambiguity",
    "plane_normals", "normal_stress_on_planes", "shear_stress_on_planes",
    "principal_rotation", "MultiaxialAssessment", "assess_multiaxial", "governing_history",
    "superpose", "NodeDamage", "assess_superposition", "warm_up",
]
