"""Multiaxial points: rosettes, plane and 3-D stress states, reductions,
critical planes, proportionality. Each expected value names its source."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from service.engine.damage import AssessmentOptions, assess_history
from service.engine.errors import InvalidLoadHistory, InvalidParameter, UnknownMethod
from service.engine.multiaxial import (REDUCTION_NAMES, ROSETTE_LAYOUTS, ROTATION_WARNING_DEG,
                                       abs_max_principal, assess_multiaxial, governing_history,
                                       normal_stress_on_planes, plane_normals,
                                       plane_stress_from_strains, principal_in_plane,
                                       principal_rotation, principal_stresses, reduce,
                                       rosette_strains, shear_stress_on_planes,
                                       signed_tresca, signed_von_mises, von_mises)
from service.engine.sn_catalogue import catalogue_curve

EN71 = catalogue_curve("EN1993-1-9:71")
E, NU = 206_000.0, 0.3


def gauge_readings(sx, sy, txy, layout, kt=0.0, nu0=0.285, e=E, nu=NU):
    """Readings of a rosette on a known plane stress state, built the other
    way round: Hooke's law, strain transformation at the gauge angles, and
    the gauge's transverse response (independent path)."""
    ex = (sx - nu * sy) / e
    ey = (sy - nu * sx) / e
    g = 2.0 * (1.0 + nu) / e * txy
    out = []
    for a in ROSETTE_LAYOUTS[layout]:
        t = math.radians(a)

        def eps(th):
            return ex * math.cos(th) ** 2 + ey * math.sin(th) ** 2 + g * math.sin(th) * math.cos(th)
        out.append((eps(t) + kt * eps(t + math.pi / 2)) / (1.0 - nu0 * kt))
    return out


# ---------------------------------------------------------------- rosettes


def test_rectangular_rosette_closed_forms():
    # Dally & Riley, Experimental Stress Analysis, ch. 9 (from memory):
    # ex = ea, ey = ec, gxy = 2 eb - ea - ec; e1,2 = (ea + ec)/2 +-
    # (1/sqrt 2) sqrt((ea - eb)^2 + (eb - ec)^2); tan 2t = gxy / (ex - ey).
    ea, eb, ec = 500e-6, 300e-6, -200e-6
    ex, ey, g = rosette_strains([ea, ea], [eb, eb], [ec, ec], "rectangular")
    assert ex[0] == pytest.approx(ea, rel=1e-12) and ey[0] == pytest.approx(ec, rel=1e-12)
    assert g[0] == pytest.approx(2 * eb - ea - ec, rel=1e-12)
    e1, e2, ang = principal_in_plane(ex, ey, g / 2)
    r = math.sqrt((ea - eb) ** 2 + (eb - ec) ** 2) / math.sqrt(2)
    assert e1[0] == pytest.approx((ea + ec) / 2 + r, rel=1e-12)
    assert e2[0] == pytest.approx((ea + ec) / 2 - r, rel=1e-12)
    assert ang[0] == pytest.approx(0.5 * math.degrees(math.atan2(2 * eb - ea - ec, ea - ec)))
    # Numbers: 150 +- 380.79 microstrain.
    assert e1[0] * 1e6 == pytest.approx(530.79, abs=0.01)


def test_delta_rosette_closed_forms():
    # Dally & Riley (from memory): e1,2 = (ea + eb + ec)/3 +- (sqrt 2 / 3)
    # sqrt((ea - eb)^2 + (eb - ec)^2 + (ec - ea)^2); ex = ea,
    # ey = (2(eb + ec) - ea)/3, gxy = 2 (eb - ec) / sqrt 3.
    ea, eb, ec = 400e-6, -100e-6, 250e-6
    ex, ey, g = rosette_strains([ea] * 2, [eb] * 2, [ec] * 2, "delta")
    assert ex[0] == pytest.approx(ea, rel=1e-12)
    assert ey[0] == pytest.approx((2 * (eb + ec) - ea) / 3, rel=1e-12)
    assert g[0] == pytest.approx(2 * (eb - ec) / math.sqrt(3), rel=1e-12)
    e1, e2, _ = principal_in_plane(ex, ey, g / 2)
    r = math.sqrt(2) / 3 * math.sqrt((ea - eb) ** 2 + (eb - ec) ** 2 + (ec - ea) ** 2)
    assert e1[0] == pytest.approx((ea + eb + ec) / 3 + r, rel=1e-12)
    assert e2[0] == pytest.approx((ea + eb + ec) / 3 - r, rel=1e-12)


def test_plane_stress_from_principal_strains():
    # Hooke's law, plane stress (DOMAIN primer; any mechanics text):
    # s1 = E/(1 - nu^2) (e1 + nu e2).
    e1, e2 = 530.79e-6, -230.79e-6
    s1, s2, t = plane_stress_from_strains(e1, e2, 0.0, E, NU)
    assert s1 == pytest.approx(E / (1 - NU ** 2) * (e1 + NU * e2), rel=1e-12)
    assert s2 == pytest.approx(E / (1 - NU ** 2) * (e2 + NU * e1), rel=1e-12)
    assert t == 0.0


@settings(max_examples=200, deadline=None)
@given(sx=st.floats(-400, 400), sy=st.floats(-400, 400), txy=st.floats(-200, 200),
       layout=st.sampled_from(sorted(ROSETTE_LAYOUTS)), kt=st.floats(-0.05, 0.05))
def test_rosette_recovers_the_stress_state_it_was_made_from(sx, sy, txy, layout, kt):
    # Independent path: stresses -> strains (Hooke) -> gauge readings (strain
    # transformation + transverse response) -> rosette_strains -> stresses.
    a, b, c = gauge_readings(sx, sy, txy, layout, kt=kt)
    ex, ey, g = rosette_strains([a, a], [b, b], [c, c], layout, transverse_sensitivity=kt)
    got = plane_stress_from_strains(ex, ey, g, E, NU)
    for v, ref in zip(got, (sx, sy, txy)):
        assert v[0] == pytest.approx(ref, rel=1e-9, abs=1e-9)


def test_transverse_sensitivity_correction_matters_and_is_removed():
    # A 3 % transverse sensitivity on a biaxial state reads a few percent off
    # (Micro-Measurements TN-509, from memory: errors of several percent);
    # the correction removes it.
    a, b, c = gauge_readings(200.0, 150.0, 0.0, "rectangular", kt=0.03)
    raw = plane_stress_from_strains(*rosette_strains([a] * 2, [b] * 2, [c] * 2), E, NU)
    fixed = plane_stress_from_strains(*rosette_strains([a] * 2, [b] * 2, [c] * 2,
                                                       transverse_sensitivity=0.03), E, NU)
    assert abs(raw[0][0] / 200.0 - 1) > 0.02
    assert fixed[0][0] == pytest.approx(200.0, rel=1e-12)


def test_rosette_bad_input():
    with pytest.raises(UnknownMethod):
        rosette_strains([0, 1], [0, 1], [0, 1], "tee")
    with pytest.raises(InvalidLoadHistory):
        rosette_strains([0, 1], [0, 1, 2], [0, 1])
    with pytest.raises(InvalidLoadHistory) as e:
        rosette_strains([0, 1], [0, float("nan")], [0, 1])
    assert e.value.details["sample_index"] == 1
    with pytest.raises(InvalidParameter):
        rosette_strains([0, 1], [0, 1], [0, 1], transverse_sensitivity=0.9)
    with pytest.raises(InvalidParameter):
        plane_stress_from_strains(1, 1, 1, E, 0.5)
    with pytest.raises(InvalidLoadHistory):
        rosette_strains(["a", "b"], [0, 1], [0, 1])


# ---------------------------------------------------------------- equivalents


def test_von_mises_and_tresca_against_their_definitions():
    # Plane stress von Mises sqrt(sx^2 - sx sy + sy^2 + 3 txy^2) (DOMAIN primer):
    # 100, -50, 30 -> sqrt(20200) = 142.13; principal: 25 +- sqrt(75^2 + 30^2).
    c = np.array([[100.0, -50.0, 30.0], [0.0, 0.0, 0.0]])
    assert von_mises(c)[0] == pytest.approx(math.sqrt(20200.0), rel=1e-14)
    p = principal_stresses(c)[0]
    r = math.hypot(75.0, 30.0)
    assert p == pytest.approx([25 + r, 0.0, 25 - r], rel=1e-14)
    # Tresca: the largest principal difference, the surface's zero included.
    assert signed_tresca(c)[0] == pytest.approx(2 * r, rel=1e-14)
    same_sign = np.array([[120.0, 40.0, 0.0], [0.0, 0.0, 0.0]])
    assert signed_tresca(same_sign)[0] == pytest.approx(120.0)
    assert signed_tresca(-same_sign)[0] == pytest.approx(-120.0)
    # 3-D: von Mises from the six components equals sqrt(3 J2) from the
    # principal stresses (definition of J2).
    rng = np.random.default_rng(3)
    s6 = rng.normal(0, 100, size=(50, 6))
    p3 = principal_stresses(s6)
    j2 = ((p3[:, 0] - p3[:, 1]) ** 2 + (p3[:, 1] - p3[:, 2]) ** 2
          + (p3[:, 2] - p3[:, 0]) ** 2) / 6
    assert von_mises(s6) == pytest.approx(np.sqrt(3 * j2), rel=1e-12)
    # A plane state given as 3-D (szz = syz = szx = 0) is the same state.
    s3 = rng.normal(0, 100, size=(50, 3))
    s6p = np.zeros((50, 6))
    s6p[:, [0, 1, 3]] = s3
    assert von_mises(s6p) == pytest.approx(von_mises(s3), rel=1e-12)
    assert principal_stresses(s6p) == pytest.approx(principal_stresses(s3), abs=1e-9)


def test_signs_follow_the_load_in_proportional_loading():
    # sigma(t) = lambda(t) S: every signed reduction is lambda(t) times its
    # value for S (the sign convention of the module docstring).
    S = np.array([[90.0, 30.0, 20.0]])
    lam = np.array([1.0, -0.5, 0.8, -1.0, 0.2])
    c = lam[:, None] * S
    for name in ("signed_von_mises", "signed_von_mises_hydrostatic", "abs_max_principal",
                 "signed_tresca"):
        ref = reduce(np.repeat(S, 2, 0), name)[0]
        assert reduce(c, name) == pytest.approx(lam * ref, rel=1e-12), name
    # Hydrostatic sign differs from principal sign when the mean is compressive
    # but the largest principal is tensile.
    mixed = np.array([[100.0, -180.0, 0.0], [0.0, 0.0, 0.0]])
    assert signed_von_mises(mixed, "principal")[0] < 0  # |-180| > 100
    assert signed_von_mises(np.array([[150.0, -100.0, 0.0]] * 2), "hydrostatic")[0] > 0
    assert abs_max_principal(mixed)[0] == pytest.approx(-180.0)


def test_uniaxial_state_reduces_to_itself_and_assesses_as_uniaxial():
    # Common practice: with only sxx every reduction is sxx, so every result
    # equals the uniaxial assessment of sxx exactly.
    rng = np.random.default_rng(7)
    x = np.cumsum(rng.normal(0, 15, 4000))
    c = np.stack([x, np.zeros_like(x), np.zeros_like(x)], 1)
    for name in REDUCTION_NAMES[:4]:  # the scalar ones
        if name != "signed_von_mises_hydrostatic":
            assert reduce(c, name) == pytest.approx(x, abs=1e-12), name
    ref = assess_history(x, EN71).damage
    m = assess_multiaxial(c, EN71, reductions=REDUCTION_NAMES[:5], plane_step_deg=10)
    assert m.damages["signed_von_mises"] == pytest.approx(ref, rel=1e-12)
    assert m.damages["critical_plane"] == pytest.approx(ref, rel=1e-12)
    assert m.plane_damage[0] == pytest.approx(ref, rel=1e-12)  # the 0 deg plane
    assert m.governing.damage == pytest.approx(ref, rel=1e-12)
    assert m.rotation_deg == pytest.approx(0.0, abs=1e-5) and not m.non_proportional


# ---------------------------------------------------------------- planes


def test_normal_and_shear_stress_on_planes_match_mohrs_circle():
    # Mohr's circle (any mechanics text): sn = (sx + sy)/2 + (sx - sy)/2 cos 2t
    # + txy sin 2t; |tn| = |-(sx - sy)/2 sin 2t + txy cos 2t|.
    sx, sy, txy = 120.0, -40.0, 55.0
    c = np.array([[sx, sy, txy], [0.0, 0.0, 0.0]])
    normals, ang = plane_normals(c, 15.0)
    assert ang.tolist() == list(np.arange(0.0, 180.0, 15.0))
    sn = normal_stress_on_planes(c, normals)[:, 0]
    tn = shear_stress_on_planes(c, normals)[:, 0]
    t2 = np.radians(2 * ang)
    assert sn == pytest.approx((sx + sy) / 2 + (sx - sy) / 2 * np.cos(t2) + txy * np.sin(t2),
                               abs=1e-10)
    assert tn == pytest.approx(np.abs(-(sx - sy) / 2 * np.sin(t2) + txy * np.cos(t2)),
                               abs=1e-10)
    # The largest normal stress over all planes is the first principal stress.
    fine, _ = plane_normals(c, 0.5)
    p1, _, _ = principal_in_plane(sx, sy, txy)
    assert normal_stress_on_planes(c, fine)[:, 0].max() == pytest.approx(p1, rel=1e-4)


def test_3d_planes_cover_the_hemisphere():
    c = np.zeros((2, 6))
    c[0] = [10.0, 20.0, 300.0, 0.0, 0.0, 0.0]
    normals, ang = plane_normals(c, 30.0)
    assert np.allclose(np.linalg.norm(normals, axis=1), 1.0)
    assert len(normals) == 1 + 3 * 6 and ang.shape == (19, 2)
    sn = normal_stress_on_planes(c, normals)[:, 0]
    assert sn.max() == pytest.approx(300.0) and sn.argmax() == 0  # the pole: szz


def test_critical_plane_governs_where_the_principal_direction_rotates():
    # Out-of-phase tension and shear (sx = A sin wt, txy = A/2 cos wt): the
    # principal direction turns through the cycle (non-proportional); the
    # scan finds a plane and the rotation is reported with a caution.
    t = np.linspace(0, 40 * np.pi, 8001)
    c = np.stack([200 * np.sin(t), np.zeros_like(t), 100 * np.cos(t)], 1)
    assert principal_rotation(c) > 40.0
    m = assess_multiaxial(c, EN71, reductions=("signed_von_mises", "critical_plane"),
                          plane_step_deg=5)
    assert m.non_proportional and m.cautions and m.cautions[0].code == "non_proportional"
    assert set(m.damages) == {"signed_von_mises", "critical_plane"}
    assert m.plane_damage.shape == (36,)
    worst = max(m.damages.values())
    assert m.governing.damage == pytest.approx(worst, rel=1e-12)
    s = m.summary()
    assert s["ratio_to_governing"][m.reduction] == 1.0
    assert s["rotation_warning_deg"] == ROTATION_WARNING_DEG
    # The stored recount rebuilds the governing history.
    h = governing_history(c, m.reduction, m.plane_angle)
    assert assess_history(h, EN71).damage == pytest.approx(m.governing.damage, rel=1e-12)


def test_proportional_loading_has_no_rotation():
    lam = np.sin(np.linspace(0, 20, 500))
    for S in ([100.0, 50.0, 30.0], [0.0, 0.0, 80.0], [60.0, 60.0, 0.0]):
        c = lam[:, None] * np.array([S])
        assert principal_rotation(c) == pytest.approx(0.0, abs=1e-6), S
    s6 = lam[:, None] * np.array([[50.0, -20.0, 10.0, 30.0, 5.0, -15.0]])
    assert principal_rotation(s6) == pytest.approx(0.0, abs=1e-5)


def test_equibiaxial_state_loads_every_plane_alike():
    # sx = sy = s, txy = 0: sn = s on every plane (Mohr's circle is a point).
    x = np.cumsum(np.random.default_rng(1).normal(0, 10, 2000))
    c = np.stack([x, x, np.zeros_like(x)], 1)
    m = assess_multiaxial(c, EN71, reductions=("critical_plane",), plane_step_deg=30)
    ref = assess_history(x, EN71).damage
    assert m.plane_damage == pytest.approx(np.full(6, ref), rel=1e-9)


def test_bad_multiaxial_requests():
    c = np.zeros((10, 3))
    with pytest.raises(UnknownMethod):
        assess_multiaxial(c, EN71, reductions=("octahedral_guess",))
    with pytest.raises(InvalidParameter):
        assess_multiaxial(c, EN71, reductions=())
    with pytest.raises(InvalidParameter):
        plane_normals(c, 0.0)
    with pytest.raises(InvalidLoadHistory):
        von_mises(np.zeros((10, 4)))
    bad = np.zeros((10, 3))
    bad[4, 2] = np.inf
    with pytest.raises(InvalidLoadHistory) as e:
        von_mises(bad)
    assert e.value.details["sample_index"] == 4
    # A history with no stress at all: no damage, no rotation, no NaN.
    m = assess_multiaxial(c, EN71, reductions=REDUCTION_NAMES[:5])
    assert all(v == 0.0 for v in m.damages.values()) and m.rotation_deg == 0.0  # no stress
    assert AssessmentOptions().allowable_damage == 1.0


def test_closed_form_principal_stresses_match_an_eigen_solver():
    # The trigonometric solution of the characteristic cubic against numpy's
    # symmetric eigen solver (general-purpose reference), on random tensors and
    # on the degenerate ones where the cubic has double or triple roots.
    rng = np.random.default_rng(11)
    s6 = rng.normal(0, 150, size=(2000, 6))
    degenerate = np.array([[100.0, 0, 0, 0, 0, 0], [50.0, 50, 50, 0, 0, 0],
                           [80.0, 80, -20, 0, 0, 0], [0.0, 0, 0, 60, 0, 0],
                           [0.0] * 6, [1e-3, 2e-3, 0, 1e-3, 0, 0], [1e6, -1e6, 3, 0, 0, 0]])
    s6 = np.concatenate([s6, degenerate])
    mats = np.stack([np.stack([s6[:, 0], s6[:, 3], s6[:, 5]], -1),
                     np.stack([s6[:, 3], s6[:, 1], s6[:, 4]], -1),
                     np.stack([s6[:, 5], s6[:, 4], s6[:, 2]], -1)], -2)
    ref = np.linalg.eigvalsh(mats)[:, ::-1]
    got = principal_stresses(s6)
    scale = np.abs(s6).max(axis=1, keepdims=True) + 1e-300
    assert np.all(np.abs(got - ref) <= 1e-7 * scale)
    assert np.all(np.diff(got, axis=1) <= 1e-9 * scale)  # largest first


# ---------------------------------------------------------------- FE superposition


def test_a_single_unit_load_case_reproduces_the_unit_stresses():
    # Superposition (linear FE, common practice): one load case with the
    # history [0, 1, -1, 2] gives the node's unit stresses times that history.
    from service.engine.multiaxial import superpose

    u = np.random.default_rng(2).normal(0, 50, size=(7, 1, 6))
    h = np.array([[0.0, 1.0, -1.0, 2.0]])
    s = superpose(u, h)
    assert s.shape == (7, 4, 6)
    assert s[:, 1, :] == pytest.approx(u[:, 0, :], rel=1e-15)
    assert s == pytest.approx(u[:, 0, None, :] * h[0][None, :, None], rel=1e-15)


@settings(max_examples=50, deadline=None)
@given(a=st.floats(-5, 5), b=st.floats(-5, 5), seed=st.integers(0, 1000))
def test_superposition_is_linear(a, b, seed):
    from service.engine.multiaxial import superpose

    rng = np.random.default_rng(seed)
    u = rng.normal(0, 30, size=(5, 3, 6))
    l1, l2 = rng.normal(0, 1, size=(3, 40)), rng.normal(0, 1, size=(3, 40))
    lhs = superpose(u, a * l1 + b * l2)
    rhs = a * superpose(u, l1) + b * superpose(u, l2)
    assert np.allclose(lhs, rhs, rtol=1e-10, atol=1e-10)
    # Plane-stress unit stresses (3 components) are the 6-component state with
    # zeros out of the plane.
    u3 = u[:, :, :3]
    u6 = np.zeros_like(u)
    u6[:, :, [0, 1, 3]] = u3
    assert np.array_equal(superpose(u3, l1), superpose(u6, l1))


def test_node_damage_equals_each_node_assessed_alone_whatever_the_chunking():
    from service.engine.multiaxial import assess_superposition, superpose

    rng = np.random.default_rng(5)
    u = rng.normal(0, 40, size=(40, 3, 6))
    t = np.arange(3000)
    loads = np.stack([np.sin(t / 7.0) * 2, np.cos(t / 11.0), rng.normal(0, 0.5, t.size)])
    ids = np.arange(100, 140)
    r = assess_superposition(u, loads, EN71, node_ids=ids, top=3, chunk_bytes=6 * 8 * 3000 * 7)
    comps = superpose(u, loads)
    for k in (0, 13, 39):
        h = reduce(comps[k], "signed_von_mises")
        assert r.damage[k] == pytest.approx(assess_history(h, EN71).damage, rel=1e-12)
        assert r.max_abs_equivalent[k] == pytest.approx(np.abs(h).max(), rel=1e-12)
    one_chunk = assess_superposition(u, loads, EN71, node_ids=ids, top=3)
    assert np.array_equal(one_chunk.damage, r.damage)
    assert [i for i, _ in r.top] == [int(ids[i]) for i in np.argsort(-r.damage)[:3]]
    assert r.top[0][1].damage == pytest.approx(r.damage.max(), rel=1e-12)
    assert r.top[0][1].reserve_factor is not None
    with pytest.raises(UnknownMethod):
        assess_superposition(u, loads, EN71, reduction="octahedral_guess")
    with pytest.raises(InvalidLoadHistory):
        assess_superposition(u, loads[:2], EN71)
    with pytest.raises(InvalidParameter):
        assess_superposition(np.zeros((3, 3)), loads, EN71)


def test_compiled_paths_equal_the_numpy_definitions():
    # The one-pass kernels (rosette to plane stress, plane normal stress,
    # principal rotation) against the numpy formulas they replace.
    from service.engine.multiaxial import rosette_plane_stress

    rng = np.random.default_rng(21)
    a, b, c = (rng.normal(0, 300, 5000) for _ in range(3))
    for layout in ROSETTE_LAYOUTS:
        fused = rosette_plane_stress(a, b, c, layout, poisson_ratio=0.29,
                                     transverse_sensitivity=0.02)
        ref = plane_stress_from_strains(*rosette_strains(a, b, c, layout,
                                                         transverse_sensitivity=0.02), 1.0, 0.29)
        for f, r in zip(fused, ref):
            assert np.allclose(f, r, rtol=1e-12, atol=1e-9)
    comps = np.stack([a, b, c], 1)
    normals, _ = plane_normals(comps, 10)
    assert np.allclose(normal_stress_on_planes(tuple(comps.T), normals),
                       normal_stress_on_planes(comps, normals), rtol=1e-12, atol=1e-9)
    t = np.linspace(0, 10, 3000)
    for state in (np.stack([100 * np.sin(t), 30 * np.sin(t), 50 * np.cos(t)], 1),
                  np.stack([80 * np.sin(t), -20 * np.sin(t), 10 * np.sin(t)], 1)):
        as_3d = np.concatenate([state, np.zeros((3000, 3))], 1)[:, [0, 1, 3, 2, 4, 5]]
        eig = principal_rotation(as_3d)  # eigen-solver path
        assert principal_rotation(state) == pytest.approx(eig, abs=1e-4)


def test_compiled_superposed_reduction_equals_superpose_then_reduce():
    # The fused kernel (superposition + reduction, signed along the node's
    # reference direction) against superpose()
    # and reduce() in numpy, on random tensors and on hand-made sign cases.
    from service.engine._multiaxial_kernels import REDUCTION_CODES, superposed_reduction
    from service.engine.multiaxial import superpose

    rng = np.random.default_rng(8)
    unit = rng.normal(0, 40, size=(30, 2, 6))
    loads = rng.normal(0, 1, size=(2, 400))
    comps = superpose(unit, loads)
    for name, code in REDUCTION_CODES.items():
        out = np.empty((30, 400))
        superposed_reduction(unit, loads, code, out)
        ref = np.stack([reduce(comps[j], name) for j in range(30)])
        assert np.allclose(out, ref, rtol=1e-9, atol=1e-9), name
    # Uniaxial tension and compression, pure shear (a tie: tensile), equal
    # triaxial compression, a compressive-dominated plane state.
    states = np.array([[100, 0, 0, 0, 0, 0], [-100, 0, 0, 0, 0, 0], [0, 0, 0, 50, 0, 0],
                       [-30, -30, -30, 0, 0, 0], [40, -120, 0, 10, 0, 0]], dtype=float)
    out = np.empty((5, 1))
    superposed_reduction(states[:, None, :], np.ones((1, 1)), 0, out)
    vm = von_mises(states)
    assert out[:, 0] == pytest.approx([vm[0], -vm[1], vm[2], -vm[3], -vm[4]], rel=1e-12)


def test_shear_planes_are_assessed_with_a_shear_curve():
    # Pure shear txy(t) (Mohr's circle): the in-plane shear on the 0 deg plane
    # is txy itself, so critical_plane_shear assessed with the EN 1993-1-9
    # shear curve (m = 5) equals the uniaxial assessment of txy on that
    # curve; the normal stress on the 45 deg plane is txy too.
    from service.engine.sn_catalogue import catalogue_curve as cc

    shear = cc("EN1993-1-9:shear-100")
    tau = np.cumsum(np.random.default_rng(6).normal(0, 14, 3000))
    c = np.stack([np.zeros_like(tau), np.zeros_like(tau), tau], 1)
    m = assess_multiaxial(c, EN71, reductions=("critical_plane", "critical_plane_shear"),
                          plane_step_deg=15, shear_curve=shear)
    ref_shear = assess_history(tau, shear).damage
    ref_normal = assess_history(tau, EN71).damage
    assert m.shear_plane_damage[0] == pytest.approx(ref_shear, rel=1e-12)
    assert m.plane_damage[3] == pytest.approx(ref_normal, rel=1e-12)  # 45 deg
    assert m.damages["critical_plane_shear"] == pytest.approx(ref_shear, rel=1e-12)
    worst = max(ref_shear, ref_normal)
    assert m.governing.damage == pytest.approx(worst, rel=1e-12)
    if m.reduction == "critical_plane_shear":
        assert m.governing.curve["name"] == shear.name
        h = governing_history(c, m.reduction, m.plane_angle)
        assert assess_history(h, shear).damage == pytest.approx(m.governing.damage, rel=1e-12)
    with pytest.raises(InvalidParameter):
        assess_multiaxial(c, EN71, reductions=("critical_plane_shear",))  # no shear curve
    with pytest.raises(InvalidParameter):
        assess_multiaxial(np.zeros((5, 6)), EN71, reductions=("critical_plane_shear",),
                          shear_curve=shear)


def test_component_columns_from_reused_memory_have_the_history_length():
    # Component columns come from the engine's pool, whose sets may be a
    # little longer than asked; the columns must still be exactly the
    # history, and a held set must not be reused (regression pin).
    from service.engine.multiaxial import _columns

    rng = np.random.default_rng(5)
    big = rng.standard_normal((40_000, 3))
    held = _columns(big)
    saved = [c.copy() for c in held]
    small = rng.standard_normal((39_000, 3))
    cols = _columns(small)
    assert all(c.shape == (39_000,) for c in cols)
    assert all(np.array_equal(c, small[:, i]) for i, c in enumerate(cols))
    assert all(np.array_equal(a, b) for a, b in zip(held, saved))
    del held, cols
    # Only the 40,000-row set fits 39,500 rows now: it must come back cut.
    mid = rng.standard_normal((39_500, 3))
    again = _columns(mid)
    assert all(c.shape == (39_500,) for c in again)
    assert all(np.array_equal(c, mid[:, i]) for i, c in enumerate(again))
    bad = small.copy()
    bad[123, 2] = np.nan
    with pytest.raises(InvalidLoadHistory) as err:
        _columns(bad)
    assert err.value.sample_index == 123
