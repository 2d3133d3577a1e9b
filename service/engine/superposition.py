r"""Finite-element nodes under measured loads: superposition of unit load cases.

A linear model gives each node's stress under a unit value of each load case;
the measured load histories scale and add them. Nodes are reduced to the
counted signal in compiled passes over node chunks, so memory is bounded
whatever the node count.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from . import _multiaxial_kernels as _k
from .errors import InvalidLoadHistory, InvalidParameter, unknown

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
    For a critical-plane scan, ``planes`` describes every plane (and, for
    shear, direction) scanned and ``plane_index`` [-] gives each node's
    governing one; ``sign_ambiguous_share`` [-] gives, for the top nodes of
    a signed scalar reduction, the share of their damage whose sign is
    ambiguous (see ``equivalents.sign_ambiguity``).
    """

    node_ids: np.ndarray
    damage: np.ndarray
    max_abs_equivalent: np.ndarray
    reduction: str
    top: list
    planes: list | None = None
    plane_index: np.ndarray | None = None
    sign_ambiguous_share: dict = field(default_factory=dict)


def _in_plane_directions(normal: np.ndarray, step_deg: float) -> np.ndarray:
    """Unit directions in the plane of ``normal`` at angles 0, step, ... < 180
    deg from a fixed in-plane axis. (k, 3)"""
    helper = np.array([1.0, 0.0, 0.0]) if abs(normal[0]) < 0.9 else np.array([0.0, 1.0, 0.0])
    e1 = np.cross(normal, helper)
    e1 /= np.linalg.norm(e1)
    e2 = np.cross(normal, e1)
    phi = np.radians(np.arange(0.0, 180.0 - 1e-9, step_deg))
    return np.cos(phi)[:, None] * e1 + np.sin(phi)[:, None] * e2


def plane_scan_weights(plane_stress: bool, step_deg: float, shear: bool):
    """``(weights (k, 6), planes)`` of a superposition's plane scan.

    Normal stress on plane n: :math:`n^T S n`; shear stress along direction t
    in plane n: :math:`t^T S n` (resolved shear, signed, so that it reverses
    with the load). Plane stress: planes normal to the surface every
    ``step_deg`` (shear: the in-plane shear on them, Mohr's circle).
    3-D: normals over a hemisphere; shear along in-plane directions every
    ``step_deg`` on each plane. ``planes`` lists each row as a dict.
    """
    from .planes import _plane_weights, _shear_weights, plane_normals

    shape = np.zeros((1, 3 if plane_stress else 6))
    normals, angles = plane_normals(shape, step_deg)
    if plane_stress:
        w3 = _shear_weights(angles) if shear else _plane_weights(normals, 3)
        w = np.zeros((w3.shape[0], 6))
        w[:, 0], w[:, 1], w[:, 3] = w3[:, 0], w3[:, 1], w3[:, 2]
        kind = "shear" if shear else "normal"
        return w, [{"kind": kind, "plane_angle_deg": float(a)} for a in angles]
    if not shear:
        return _plane_weights(normals, 6), [
            {"kind": "normal", "plane_angle_deg": [float(v) for v in a]} for a in angles]
    rows, planes = [], []
    for n, a in zip(normals, angles):
        for k, t in enumerate(_in_plane_directions(n, step_deg)):
            rows.append([t[0] * n[0], t[1] * n[1], t[2] * n[2], t[0] * n[1] + t[1] * n[0],
                         t[1] * n[2] + t[2] * n[1], t[2] * n[0] + t[0] * n[2]])
            planes.append({"kind": "shear", "plane_angle_deg": [float(v) for v in a],
                           "direction_deg": float(k * step_deg)})
    return np.asarray(rows), planes


def assess_superposition(unit_stresses, load_histories, curve, options=None, *,
                         reduction: str = "signed_von_mises", node_ids=None, top: int = 10,
                         chunk_bytes: int = 64 * 2**20, gate: float = 0.0,
                         duration_s: float | None = None, workers: int = 2,
                         progress=None, plane_step_deg: float = 15.0, shear_curve=None,
                         shear_options=None) -> NodeDamage:
    """
    Damage at every node of a finite-element model under measured loads.

    ``reduction`` is a scalar reduction (``equivalents.py``), or a plane
    scan: ``critical_plane`` counts the normal stress on planes every
    ``plane_step_deg`` (and, when ``shear_curve`` is given, also the shear
    stress on them, assessed with ``shear_curve`` and ``shear_options``);
    ``critical_plane_shear`` the shear stress alone. The worst plane
    governs each node.

    Scalar reductions: node chunks are superposed and reduced in one
    compiled pass (the formulas of :func:`superpose` and ``reduce``), then
    counted and assessed, so memory is bounded by ``chunk_bytes`` of reduced
    histories whatever the node count. Plane scans: each plane's history is
    a fixed combination of the load histories (superposition is linear), so
    a node's planes are formed by one matrix product and assessed as a batch;
    a scan costs about as much as assessing that many points per node
    (plane stress at 15 deg: 12 planes; 3-D: 73 planes, with shear 876).
    The ``top`` nodes by damage are then assessed in full.
    ``progress(nodes_done, nodes_total)`` is called after each chunk.
    """
    from .damage import AssessmentOptions, assess, assess_many
    from .equivalents import (PLANE_REDUCTIONS, REDUCTION_NAMES, ambiguous_damage_share,
                              sign_ambiguity)
    from .rainflow import astm_e1049

    if reduction not in REDUCTION_NAMES:
        raise unknown("reduction", reduction, REDUCTION_NAMES)
    raw = np.asarray(unit_stresses, dtype=np.float64) if not isinstance(
        unit_stresses, np.ndarray) else unit_stresses
    plane_stress = raw.ndim == 3 and raw.shape[2] == 3
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
    if reduction in PLANE_REDUCTIONS:
        return _plane_scan(u, x, ids, curve, opts, light, reduction, plane_stress,
                           plane_step_deg, shear_curve, shear_options, top, gate,
                           duration_s, workers, progress)
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
    worst, shares = [], {}
    for i in order:
        h = np.empty((1, n))
        _k.superposed_reduction(u[i:i + 1], x, _k.REDUCTION_CODES[reduction], h)
        table = astm_e1049(h[0], gate=gate)
        r = assess(table, curve, opts, duration_s=duration_s)
        node = ids[i].item() if hasattr(ids[i], "item") else ids[i]
        comps = np.ascontiguousarray(np.matmul(u[i].T, x).T)
        shares[node] = ambiguous_damage_share(sign_ambiguity(comps, reduction),
                                              table.start_index, table.end_index,
                                              r.damage_per_cycle)
        worst.append((node, r))
    return NodeDamage(node_ids=ids, damage=damage, max_abs_equivalent=peak,
                      reduction=reduction, top=worst, sign_ambiguous_share=shares)


def _plane_scan(u, x, ids, curve, opts, light, reduction, plane_stress, step, shear_curve,
                shear_options, top, gate, duration_s, workers, progress):
    """:func:`assess_superposition` by a plane scan of every node."""
    from .damage import AssessmentOptions, assess_history, assess_many

    groups = []  # (weights, planes, curve, light options, full options)
    if reduction == "critical_plane":
        w, planes = plane_scan_weights(plane_stress, step, False)
        groups.append((w, planes, curve, light, opts))
    if reduction == "critical_plane_shear" or shear_curve is not None:
        if shear_curve is None:
            raise InvalidParameter("critical_plane_shear needs a shear S-N curve "
                                   "(shear_settings)", field="shear_settings")
        s_opts = shear_options or AssessmentOptions()
        w, planes = plane_scan_weights(plane_stress, step, True)
        groups.append((w, planes, shear_curve,
                       replace(s_opts, reserve_factor=False, top_cycles=0), s_opts))
    all_planes = [p for g in groups for p in g[1]]
    nodes = u.shape[0]
    damage = np.empty(nodes)
    peak = np.empty(nodes)
    index = np.empty(nodes, np.int64)
    for j in range(nodes):
        values, peaks = [], []
        for w, _, c, lo_opts, _ in groups:
            hist = (w @ u[j].T) @ x          # (planes, samples): linear in the loads
            res = assess_many(np.ascontiguousarray(hist.T), c, lo_opts, gate=gate,
                              duration_s=duration_s, workers=workers)
            values.extend(r.damage for r in res.values())
            peaks.append(np.abs(hist).max())
        values = np.asarray(values)
        k = int(np.argmax(values))
        damage[j], index[j], peak[j] = values[k], k, max(peaks)
        if progress is not None and (j + 1 == nodes or (j + 1) % 256 == 0):
            progress(j + 1, nodes)
    order = np.argsort(-damage, kind="stable")[:top]
    worst = []
    for i in order:
        k = int(index[i])
        base = 0
        for w, planes, c, _, full_opts in groups:
            if k < base + len(planes):
                h = (w[k - base] @ u[i].T) @ x
                worst.append((ids[i].item() if hasattr(ids[i], "item") else ids[i],
                              assess_history(h, c, full_opts, gate=gate,
                                             duration_s=duration_s)))
                break
            base += len(planes)
    return NodeDamage(node_ids=ids, damage=damage, max_abs_equivalent=peak,
                      reduction=reduction, top=worst, planes=all_planes, plane_index=index)


def warm_up() -> None:
    """Compile (or load from cache) the multiaxial kernels."""
    _k.warm_up()
