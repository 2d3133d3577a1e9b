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


@kernel
def _reduce_one(sxx, syy, szz, sxy, syz, szx, code):
    """One sample's scalar by reduction ``code`` (closed-form principals)."""
    mean = (sxx + syy + szz) / 3.0
    dx = sxx - mean
    dy = syy - mean
    dz = szz - mean
    j2 = (dx * dx + dy * dy + dz * dz) / 2.0 + sxy * sxy + syz * syz + szx * szx
    vm = math.sqrt(3.0 * j2)
    i1 = sxx + syy + szz
    if code == 1:
        return -vm if i1 < 0.0 else vm
    if code == 0:
        # Only the sign of the larger-magnitude principal is needed:
        # |p1| >= |p3| iff p1 + p3 >= 0 iff p2 <= I1. The roots of h' bracket
        # p2 (p3 <= l- <= p2 <= l+ <= p1), and h is decreasing between them,
        # where h(I1) = I1 I2 - I3 = (p1 + p2)(p2 + p3)(p1 + p3). No trig.
        i2 = sxx * syy + syy * szz + szz * sxx - sxy * sxy - syz * syz - szx * szx
        i3 = (sxx * (syy * szz - syz * syz) - sxy * (sxy * szz - syz * szx)
              + szx * (sxy * syz - syy * szx))
        disc = i1 * i1 - 3.0 * i2
        if disc <= 0.0:
            tensile = i1 >= 0.0  # all three equal
        else:
            root = math.sqrt(disc)
            if i1 >= (i1 + root) / 3.0:
                tensile = True
            elif i1 < (i1 - root) / 3.0:
                tensile = False
            else:
                tensile = i1 * i2 - i3 <= 0.0
        return vm if tensile else -vm
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
    if code == 0:
        return -vm if big < 0.0 else vm
    if code == 2:
        return big
    t = p1 - p3
    return -t if big < 0.0 else t


@kernel
def superposed_reduction(unit, loads, code, out):
    """out[j, i]: node j's reduced stress at sample i, from its unit stresses
    ``unit[j, case, component]`` times ``loads[case, i]`` (6 components)."""
    cases = loads.shape[0]
    s = np.empty(6)
    for j in range(unit.shape[0]):
        for i in range(loads.shape[1]):
            for m in range(6):
                s[m] = 0.0
            for c in range(cases):
                x = loads[c, i]
                for m in range(6):
                    s[m] += unit[j, c, m] * x
            out[j, i] = _reduce_one(s[0], s[1], s[2], s[3], s[4], s[5], code)


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
