"""Compiled loops behind :mod:`service.engine.multiaxial` (plane stress).

One pass each, no temporaries: on long histories numpy's chain of whole-array
operations spent most of its time writing fresh pages for intermediates. The
formulas are those of ``multiaxial.py`` (tests hold the two equal).
"""

from __future__ import annotations

import math

import numpy as np

from ._numba import kernel, njit

#: Exponent mask of an IEEE-754 double; all ones means inf or NaN.
_EXP = np.int64(0x7FF0000000000000)


@kernel
def rosette_plane_stress(a, b, c, inv, poisson, sxx, syy, sxy):
    """Gauge readings (E x strain) -> plane stress, sample by sample.

    ``inv`` is the 3 x 3 map from readings to (ex, ey, gxy), transverse
    correction included; Hooke's law with E = 1.
    """
    f = 1.0 / (1.0 - poisson * poisson)
    g = 1.0 / (2.0 * (1.0 + poisson))
    for i in range(a.shape[0]):
        ex = inv[0, 0] * a[i] + inv[0, 1] * b[i] + inv[0, 2] * c[i]
        ey = inv[1, 0] * a[i] + inv[1, 1] * b[i] + inv[1, 2] * c[i]
        gam = inv[2, 0] * a[i] + inv[2, 1] * b[i] + inv[2, 2] * c[i]
        sxx[i] = f * (ex + poisson * ey)
        syy[i] = f * (ey + poisson * ex)
        sxy[i] = g * gam


@kernel
def normal_stress3(sxx, syy, sxy, w, out):
    """Normal stress on one plane of a plane stress state: out = w . (sxx, syy, sxy)."""
    w0, w1, w2 = w[0], w[1], w[2]
    for i in range(sxx.shape[0]):
        out[i] = w0 * sxx[i] + w1 * syy[i] + w2 * sxy[i]


@kernel
def normal_stress6(sxx, syy, szz, sxy, syz, szx, w, out):
    """Normal stress on one plane of a 3-D state: out = w . (the six components)."""
    w0, w1, w2, w3, w4, w5 = w[0], w[1], w[2], w[3], w[4], w[5]
    for i in range(sxx.shape[0]):
        out[i] = (w0 * sxx[i] + w1 * syy[i] + w2 * szz[i] + w3 * sxy[i] + w4 * syz[i]
                  + w5 * szx[i])


@njit(cache=True, nogil=True, inline="always")
def _direction(sxx, syy, sxy):
    """``(ok, dx, dy)``: the direction of the larger-magnitude principal
    stress as a unit vector on Mohr's circle (negated when the second
    principal is the larger), ``ok`` false where it is not well defined (the
    two magnitudes within 10 %, or no shear circle at all)."""
    centre = 0.5 * (sxx + syy)
    hx = 0.5 * (sxx - syy)
    radius = math.sqrt(hx * hx + sxy * sxy)
    a1 = abs(centre + radius)
    a2 = abs(centre - radius)
    hi = max(a1, a2)
    if hi - min(a1, a2) < 0.1 * hi or radius == 0.0:
        return False, 0.0, 0.0
    sgn = -1.0 / radius if a2 > a1 else 1.0 / radius
    return True, hx * sgn, sxy * sgn


@kernel
def plane_rotation(sxx, syy, sxy, significance):
    """Largest turn of the larger-magnitude principal direction from its
    direction at the largest von Mises stress, over well-defined samples. [deg]

    A direction (a line) at angle t is the unit vector (cos 2t, sin 2t) =
    ((sxx - syy)/2, sxy) / R on Mohr's circle, negated when the second
    principal is the larger in magnitude (t + 90 deg); the angle between two
    lines is half the angle between their vectors, so one arccos at the end.
    """
    n = sxx.shape[0]
    # Pass 1: the largest von Mises, and the well-defined sample of largest
    # von Mises with its direction (it is the reference if it clears the
    # floor, which depends on the first; if it does not, none does).
    vmax = 0.0
    best = 0.0  # a sample of zero stress has no direction
    rx = 0.0
    ry = 0.0
    for i in range(n):
        vm = math.sqrt(sxx[i] * sxx[i] - sxx[i] * syy[i] + syy[i] * syy[i]
                       + 3.0 * sxy[i] * sxy[i])
        if vm > vmax:
            vmax = vm
        if vm <= best:
            continue
        ok, dx, dy = _direction(sxx[i], syy[i], sxy[i])
        if ok:
            best = vm
            rx = dx
            ry = dy
    if vmax == 0.0:
        return 0.0
    floor = significance * vmax
    if best < floor:
        return 0.0
    # Pass 2: the largest turn from the reference among the samples that
    # clear the floor and have a direction.
    lowest = 1.0
    for i in range(n):
        vm = math.sqrt(sxx[i] * sxx[i] - sxx[i] * syy[i] + syy[i] * syy[i]
                       + 3.0 * sxy[i] * sxy[i])
        if vm < floor:
            continue
        ok, dx, dy = _direction(sxx[i], syy[i], sxy[i])
        d = dx * rx + dy * ry
        if ok and d < lowest:
            lowest = d
    return 0.5 * math.degrees(math.acos(max(-1.0, min(1.0, lowest))))


#: Codes of the scalar reductions the compiled superposition knows.
REDUCTION_CODES = {"signed_von_mises": 0, "signed_von_mises_hydrostatic": 1,
                   "abs_max_principal": 2, "signed_tresca": 3}


@njit(cache=True, nogil=True, inline="always")
def _tensile_by_invariants(sxx, syy, szz, sxy, syz, szx):
    """Whether the principal of larger magnitude is tensile (ties: yes).

    |p1| >= |p3| iff p1 + p3 >= 0 iff p2 <= I1. The roots of h' bracket p2
    (p3 <= l- <= p2 <= l+ <= p1), and h is decreasing between them, where
    h(I1) = I1 I2 - I3 = (p1 + p2)(p2 + p3)(p1 + p3). No trigonometry.
    """
    i1 = sxx + syy + szz
    i2 = sxx * syy + syy * szz + szz * sxx - sxy * sxy - syz * syz - szx * szx
    i3 = (sxx * (syy * szz - syz * syz) - sxy * (sxy * szz - syz * szx)
          + szx * (sxy * syz - syy * szx))
    disc = i1 * i1 - 3.0 * i2
    if disc <= 0.0:
        return i1 >= 0.0  # all three equal
    root = math.sqrt(disc)
    if i1 >= (i1 + root) / 3.0:
        return True
    if i1 < (i1 - root) / 3.0:
        return False
    return i1 * i2 - i3 <= 0.0


@njit(cache=True, nogil=True, inline="always")
def _reduce_one(sxx, syy, szz, sxy, syz, szx, code, n0, n1, n2):
    """One sample's scalar by reduction ``code``, signed by the normal stress
    along the reference direction (n0, n1, n2) (``equivalents.py``; the
    larger-magnitude principal decides where that stress is exactly zero,
    and for a zero reference)."""
    mean = (sxx + syy + szz) / 3.0
    dx = sxx - mean
    dy = syy - mean
    dz = szz - mean
    j2 = (dx * dx + dy * dy + dz * dz) / 2.0 + sxy * sxy + syz * syz + szx * szx
    vm = math.sqrt(3.0 * j2)
    if code == 1:
        return -vm if sxx + syy + szz < 0.0 else vm
    along = (n0 * n0 * sxx + n1 * n1 * syy + n2 * n2 * szz
             + 2.0 * (n0 * n1 * sxy + n1 * n2 * syz + n2 * n0 * szx))
    if code == 0:
        if along > 0.0:
            return vm
        if along < 0.0:
            return -vm
        return vm if _tensile_by_invariants(sxx, syy, szz, sxy, syz, szx) else -vm
    if j2 <= 0.0:
        p1 = mean
        p3 = mean
    else:
        j3 = (dx * (dy * dz - syz * syz) - sxy * (sxy * dz - syz * szx)
              + szx * (sxy * syz - dy * szx))
        c = 1.5 * math.sqrt(3.0) * j3 / j2 ** 1.5
        c = max(-1.0, min(1.0, c))
        theta = math.acos(c) / 3.0
        r = 2.0 * math.sqrt(j2 / 3.0)
        p1 = mean + r * math.cos(theta)
        p3 = mean + r * math.cos(theta + 2.0 * math.pi / 3.0)
    big = p1 if abs(p1) >= abs(p3) else p3
    negative = along < 0.0 if along != 0.0 else big < 0.0
    value = abs(big) if code == 2 else p1 - p3
    return -value if negative else value


@kernel
def _reference(s, vm_of):
    """The sign reference of one node's samples ``s`` (n x 6): the unit
    principal direction of the largest-magnitude principal stress (ties:
    tensile) at the first sample of largest von Mises; zeros if none."""
    n = s.shape[0]
    best = -1.0
    k = 0
    for i in range(n):
        v = vm_of[i]
        if v > best:
            best = v
            k = i
    out = np.zeros(3)
    if not best > 0.0:
        return out
    m = np.empty((3, 3))
    m[0, 0] = s[k, 0]
    m[1, 1] = s[k, 1]
    m[2, 2] = s[k, 2]
    m[0, 1] = m[1, 0] = s[k, 3]
    m[1, 2] = m[2, 1] = s[k, 4]
    m[0, 2] = m[2, 0] = s[k, 5]
    vals, vecs = np.linalg.eigh(m)
    j = 2 if abs(vals[2]) >= abs(vals[0]) else 0
    for r in range(3):
        out[r] = vecs[r, j]
    return out


@kernel
def superposed_reduction(unit, loads, code, out):
    """out[j, i]: node j's reduced stress at sample i, from its unit stresses
    ``unit[j, case, component]`` times ``loads[case, i]`` (6 components).

    Two passes a node: the superposed components (and von Mises, which
    picks the sign reference) into a scratch array, then the reduction.
    """
    cases = loads.shape[0]
    n = loads.shape[1]
    s = np.empty((n, 6))
    vm = np.empty(n)
    for j in range(unit.shape[0]):
        for i in range(n):
            for m in range(6):
                s[i, m] = 0.0
            for c in range(cases):
                x = loads[c, i]
                for m in range(6):
                    s[i, m] += unit[j, c, m] * x
            a, b, z, xy, yz, zx = s[i, 0], s[i, 1], s[i, 2], s[i, 3], s[i, 4], s[i, 5]
            vm[i] = math.sqrt(0.5 * ((a - b) ** 2 + (b - z) ** 2 + (z - a) ** 2)
                              + 3.0 * (xy * xy + yz * yz + zx * zx))
        ref = _reference(s, vm) if code != 1 else np.zeros(3)
        for i in range(n):
            out[j, i] = _reduce_one(s[i, 0], s[i, 1], s[i, 2], s[i, 3], s[i, 4], s[i, 5],
                                    code, ref[0], ref[1], ref[2])


def warm_up() -> None:
    x = np.array([1.0, -2.0, 3.0])
    out = np.empty(3)
    rosette_plane_stress(x, x, x, np.eye(3), 0.3, out, out.copy(), out.copy())
    normal_stress3(x, x, x, np.ones(3), out)
    normal_stress6(x, x, x, x, x, x, np.ones(6), out)
    for code in REDUCTION_CODES.values():
        superposed_reduction(np.ones((1, 2, 6)), np.ones((2, 3)), code, np.empty((1, 3)))
    plane_rotation(x, x * 0.5, x * 0.2, 0.1)
    for k in (3, 6):
        comps = np.ones((2, k))
        split_columns(comps, comps.view(np.int64), tuple(np.empty(2) for _ in range(k)))


@kernel
def split_columns(arr, bits, outs):
    """``outs[j][i] = arr[i, j]`` for an ``(n, k)`` component array and a
    tuple of k columns; returns 1 if any value is inf or NaN (``bits`` is
    ``arr`` viewed as int64), else 0. One read of the array does both."""
    n, k = arr.shape
    bad = 0
    for i in range(n):
        for j in range(k):
            outs[j][i] = arr[i, j]
            bad |= (bits[i, j] & _EXP) == _EXP
    return bad
