"""Gyrotrigonometry: gk.poincare.angle, gk.klein.angle, gk.triangle.

References: the hyperbolic law of cosines evaluated in mpmath (sides from
the textbook Poincaré distance arccosh(1 + 2 kappa |x - y|^2 / (g_x g_y)),
angles from the law of cosines, defect = π - sum of angles) at 100 digits
(enough for the law of cosines, which loses digits for tiny and thin
triangles), plus handbook identities.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from mpmath import mp, mpf

import gyrokit as gk
import mp_models

DPS = 120


def _mp_triangle(a, b, c, model="poincare", curvature=-1.0):
    """Sides (opposite a, b, c), angles (at a, b, c) and defect, at DPS digits
    (handbook: hyperbolic law of cosines, cos α = (cosh b cosh c - cosh a)/(sinh b sinh c)
    with sides in units of R; Gauss–Bonnet defect = π - sum)."""
    with mp.workdps(DPS):
        pts = [mp_models.convert(list(map(float, v)), model, "poincare", curvature=curvature, dps=DPS)
               if model != "poincare" else [mpf(float(t)) for t in v] for v in (a, b, c)]
        return mp_models.triangle(pts, curvature)


def _rel(got, ref):
    ref = float(ref)
    return abs(float(got) - ref) / abs(ref)


def _check(t, ref, tol_side=1e-14, tol_angle=1e-13, tol_defect=1e-12):
    sides, angles, defect = ref
    for i in range(3):
        assert _rel(t.sides[i], sides[i]) < tol_side, (i, t.sides, sides)
        # angles: relative, plus a few ulps of π absolute (the directions of
        # the rounded gyrovectors carry ~1e-16 rad)
        assert abs(float(t.angles[i]) - float(angles[i])) < tol_angle * float(angles[i]) + 4e-16, (i, t.angles, angles)
    assert _rel(t.defect, defect) < tol_defect, (t.defect, defect)


def _ball_triangles(rng, n, d, scale):
    x = rng.normal(size=(n, 3, d))
    x *= (scale * rng.uniform(0.05, 1, size=(n, 3, 1))) / np.linalg.norm(x, axis=-1, keepdims=True)
    return x[:, 0], x[:, 1], x[:, 2]


@pytest.mark.parametrize("model", ["poincare", "klein", "hyperboloid", "halfspace"])
def test_random_triangles_against_the_law_of_cosines(model):
    rng = np.random.default_rng(1)
    a, b, c = _ball_triangles(rng, 12, 3, 0.95 / math.sqrt(2.0))
    if model != "poincare":
        a, b, c = (gk.convert(v, "poincare", model, curvature=-2.0) for v in (a, b, c))
    t = gk.triangle(a, b, c, model=model, curvature=-2.0)
    assert t.sides.shape == (12, 3) and t.angles.shape == (12, 3) and t.defect.shape == (12,)
    for i in range(12):
        ref = _mp_triangle(a[i], b[i], c[i], model, -2.0)
        _check(gk._trig.Triangle(t.sides[i], t.angles[i], t.defect[i], t.area[i]), ref)
    # Gauss–Bonnet: area = defect R^2 (R^2 = 1/2 here)
    np.testing.assert_allclose(t.area, t.defect / 2.0, rtol=1e-15)


def _cluster(rng, where, angular, radial):
    """Three points at radius about `where` (ball coordinates, R = 1), spread
    by `angular` across and `radial` (a fraction of 1 - where) along the radius."""
    u = rng.normal(size=3)
    u /= np.linalg.norm(u)
    pts = []
    for _ in range(3):
        v = u + angular * rng.normal(size=3)
        v /= np.linalg.norm(v)
        pts.append((where - radial * (1 - where) * rng.uniform()) * v)
    return pts


@pytest.mark.parametrize("model", ["poincare", "klein"])
@pytest.mark.parametrize("where,size", [(0.0, 1e-4), (0.0, 1e-7), (0.0, 1e-10), (0.5, 1e-7), (0.5, 1e-10)])
def test_tiny_triangles(model, where, size):
    # hard case: tiny triangles (sides ~ size R); the defect ~ area is far
    # below the rounding of π - sum of angles
    rng = np.random.default_rng(int(-math.log10(size)) + int(where * 10))
    if where == 0.0:
        pts = [size * rng.normal(size=3) for _ in range(3)]
    else:
        pts = _cluster(rng, where, size, 0.0)
    t = gk.triangle(*pts, model=model)
    ref = _mp_triangle(*pts, model=model)
    # a few ulps: directions and defect are formed from the exact inputs
    _check(t, ref, tol_side=1e-14, tol_angle=1e-14, tol_defect=1e-14)
    assert 0 < float(ref[2]) < 1e-6


@pytest.mark.parametrize("model", ["poincare", "klein"])
@pytest.mark.parametrize("gap", [1e-9, 1e-12])
@pytest.mark.parametrize("angular", [1e-13, 1e-10, 1e-6])
def test_triangles_at_the_rim(model, gap, angular):
    # hard case: every vertex within 1e-9 or 1e-12 of the sphere (in the
    # model's own coordinates), close together
    rng = np.random.default_rng(int(-math.log10(gap)) * 10 + int(-math.log10(angular)))
    pts = _cluster(rng, 1 - gap, angular, 0.5)
    assert all(1 - np.linalg.norm(p) <= 1.6 * gap for p in pts)
    t = gk.triangle(*pts, model=model)
    ref = _mp_triangle(*pts, model=model)
    # thin and at the rim: still a few ulps (directions in double-double,
    # the defect from the sides and one sine)
    _check(t, ref, tol_side=1e-14, tol_angle=1e-14, tol_defect=1e-14)


@pytest.mark.parametrize("model", ["poincare", "klein"])
def test_thin_triangles(model):
    # a vertex 1e-9 (relative) off the geodesic through the other two: angles
    # near 0 and π, defect tiny (hard case of acos forms)
    a, c = np.array([-0.6, 0.3, 0.1]), np.array([0.5, 0.4, -0.2])
    m = gk.poincare.geodesic(a, c, 0.37)
    b = m + 1e-9 * np.array([0.3, -0.5, 0.8])
    pts = [a, b, c]
    if model == "klein":
        pts = [gk.convert(p, "poincare", "klein") for p in pts]
    t = gk.triangle(*pts, model=model)
    ref = _mp_triangle(*pts, model=model)
    _check(t, ref, tol_side=1e-14, tol_angle=1e-14, tol_defect=1e-14)
    assert abs(t.angles[1] - math.pi) < 1e-8


def test_collinear_triangles_have_zero_defect():
    # handbook: a degenerate (collinear) triangle has area 0, angle π at the
    # middle vertex and 0 at the ends
    for a, c in [([-0.9, 0.0], [0.7, 0.0]), ([-0.5, 0.2], [0.3, 0.6])]:
        b = gk.poincare.geodesic(np.array(a), np.array(c), 0.3)
        t = gk.triangle(a, b, c)
        assert abs(t.defect) < 1e-15
        assert abs(t.angles[1] - math.pi) < 1e-7 and t.angles[0] < 1e-7 and t.angles[2] < 1e-7
        np.testing.assert_allclose(t.sides[1], t.sides[0] + t.sides[2], rtol=1e-15)


def test_angle_sum_below_pi_and_law_of_sines():
    rng = np.random.default_rng(3)
    a, b, c = _ball_triangles(rng, 200, 4, 0.99 / math.sqrt(0.7))
    for model, pts in [("poincare", (a, b, c)), ("klein", [gk.convert(v, "poincare", "klein", curvature=-0.7) for v in (a, b, c)])]:
        t = gk.triangle(*pts, model=model, curvature=-0.7)
        R = 1 / math.sqrt(0.7)
        # handbook: angle sum < π in hyperbolic geometry
        assert np.all(t.angles.sum(-1) < math.pi) and np.all(t.defect > 0)
        np.testing.assert_allclose(math.pi - t.angles.sum(-1), t.defect, atol=2e-15)
        # handbook: law of sines, sinh(a/R)/sin α equal at every vertex
        q = np.sinh(t.sides / R) / np.sin(t.angles)
        np.testing.assert_allclose(q[:, 0], q[:, 1], rtol=1e-10)
        np.testing.assert_allclose(q[:, 0], q[:, 2], rtol=1e-10)
        # handbook: law of cosines for angles, cos α = -cos β cos γ + sin β sin γ cosh(a/R)
        al, be, ga = t.angles.T
        np.testing.assert_allclose(np.cos(al), -np.cos(be) * np.cos(ga) + np.sin(be) * np.sin(ga) * np.cosh(t.sides[:, 0] / R), atol=1e-11)


def test_right_and_equilateral_triangles_in_closed_form():
    # handbook: right angle at the origin, legs along the axes: cosh c = cosh a cosh b
    # (hyperbolic Pythagoras), tan α = tanh(a)/sinh(b) (α opposite leg a)
    x, y = 0.6, 0.3
    t = gk.triangle([0.0, 0.0], [x, 0.0], [0.0, y])
    la, lb = 2 * math.atanh(y), 2 * math.atanh(x)  # legs opposite b=(x,0) and c=(0,y)... see below
    # side opposite (x,0) is the leg to (0,y); opposite (0,y) the leg to (x,0)
    assert abs(t.angles[0] - math.pi / 2) < 1e-15
    np.testing.assert_allclose(t.sides[1], la, rtol=1e-15)
    np.testing.assert_allclose(t.sides[2], lb, rtol=1e-15)
    np.testing.assert_allclose(math.cosh(t.sides[0]), math.cosh(la) * math.cosh(lb), rtol=1e-14)
    np.testing.assert_allclose(math.tan(t.angles[1]), math.tanh(la) / math.sinh(lb), rtol=1e-14)
    # handbook: equilateral triangle of side s has cos α = cosh s/(1 + cosh s);
    # vertices at Poincaré radius r, 120° apart
    for r in [1e-6, 0.3, 0.9]:
        v = [[r * math.cos(2 * math.pi * j / 3), r * math.sin(2 * math.pi * j / 3)] for j in range(3)]
        t = gk.triangle(*v)
        s = t.sides[0]
        np.testing.assert_allclose(t.sides, s, rtol=1e-13)
        np.testing.assert_allclose(t.angles, math.acos(math.cosh(s) / (1 + math.cosh(s))), rtol=1e-12)
        ref = _mp_triangle(*v)
        assert _rel(t.defect, ref[2]) < 1e-12


def test_poincare_angle_is_the_euclidean_angle_of_the_geodesics():
    # conformality of the Poincaré ball: the gyroangle at b equals the
    # Euclidean angle between the initial velocities of the geodesics from b
    # (the log maps at b), computed by numpy
    rng = np.random.default_rng(5)
    a, b, c = _ball_triangles(rng, 100, 5, 0.9 / math.sqrt(3.0))
    u = gk.poincare.log_map(a, base=b, curvature=-3.0)
    w = gk.poincare.log_map(c, base=b, curvature=-3.0)
    cos = np.sum(u * w, -1) / (np.linalg.norm(u, axis=-1) * np.linalg.norm(w, axis=-1))
    np.testing.assert_allclose(gk.poincare.angle(a, b, c, curvature=-3.0), np.arccos(cos), atol=1e-12)
    # and equals the Euclidean angle between the gyrovectors ⊖b⊕a, ⊖b⊕c
    ga = gk.poincare.add(-b, a, curvature=-3.0)
    gc = gk.poincare.add(-b, c, curvature=-3.0)
    cos2 = np.sum(ga * gc, -1) / (np.linalg.norm(ga, axis=-1) * np.linalg.norm(gc, axis=-1))
    np.testing.assert_allclose(gk.poincare.angle(a, b, c, curvature=-3.0), np.arccos(cos2), atol=1e-12)
    # Einstein gyroangle = Möbius gyroangle of the isomorphic points (Ungar's
    # isomorphism), and it is the angle of gk.klein gyrovectors
    ka, kb, kc = (gk.convert(v, "poincare", "klein", curvature=-3.0) for v in (a, b, c))
    np.testing.assert_allclose(gk.klein.angle(ka, kb, kc, curvature=-3.0), gk.poincare.angle(a, b, c, curvature=-3.0), atol=1e-13)
    ea = gk.klein.add(-kb, ka, curvature=-3.0)
    ec = gk.klein.add(-kb, kc, curvature=-3.0)
    cos3 = np.sum(ea * ec, -1) / (np.linalg.norm(ea, axis=-1) * np.linalg.norm(ec, axis=-1))
    np.testing.assert_allclose(gk.klein.angle(ka, kb, kc, curvature=-3.0), np.arccos(cos3), atol=1e-12)


def test_broadcasting_dtype_and_errors():
    a = np.array([[0.1, 0.2], [0.3, -0.4], [0.0, 0.5]])
    b = np.array([0.2, 0.1])
    c = np.array([[[-0.3, 0.0]], [[0.0, -0.6]]])
    t = gk.triangle(a, b, c)
    assert t.sides.shape == (2, 3, 3) and t.defect.shape == (2, 3)
    one = gk.triangle(a[1], b, c[1, 0])
    np.testing.assert_array_equal(t.sides[1, 1], one.sides)
    assert gk.poincare.angle(a, b, c).shape == (2, 3)
    assert gk.poincare.angle(a.astype(np.float32), b.astype(np.float32), c.astype(np.float32)).dtype == np.float32
    assert np.asarray(gk.poincare.angle(a[0], b, c[0, 0])).ndim == 0
    with pytest.raises(ValueError, match="c: row 1 coincides with b"):
        gk.poincare.angle(a[:2], b, np.array([[0.0, 0.1], [0.2, 0.1]]))
    with pytest.raises(ValueError, match="coincides"):
        gk.triangle(a[0], a[0], b)
    with pytest.raises(ValueError, match=r"c: row 1 .*outside the ball"):
        gk.klein.angle(a[:2], b, np.array([[0.0, 0.1], [0.9, 0.9]]))
    with pytest.raises(ValueError, match="model"):
        gk.triangle(a, b, a, model="sphere")
    with pytest.raises(ValueError, match="curvature"):
        gk.triangle(a, b, c, curvature=1.0)
    with pytest.raises(ValueError, match="dimension"):
        gk.triangle(a, b, np.zeros(3))
