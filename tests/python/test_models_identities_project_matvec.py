"""Identities of the hyperbolic models: projection onto the ball and the
hyperboloid, the Möbius matrix-vector product and the Minkowski inner
product.

Conventions, tolerances and helpers: identities_support.py (K is the
curvature, R = 1/sqrt(-K); tolerances hold C times the float64 roundings
an identity passes through plus REL = 1e-10 relative). Hypothesis draws
(curvature, dimension, seed) and checks a batch of points per example;
example count: env var GYROKIT_HYPOTHESIS_EXAMPLES (default 100).
"""

from __future__ import annotations

from hypothesis import given
from hypothesis import strategies as st
import mpmath
import numpy as np
import pytest

import gyrokit as gk
from conftest import BALLS, CURVATURES, EPS, MODULES, MP50, radius, unit_vectors
from identities_support import (
    _mpv,
    assert_close_points,
    assert_close_values,
    C,
    CASES,
    coord_rounding,
    N,
    norm,
    random_points,
    REL,
    RHO_MAX,
)


# ====================================================== project


@pytest.mark.parametrize("margin", (1e-12, 1e-6, 0.25))
@pytest.mark.parametrize("model", BALLS)
@given(case=CASES)
def test_project_ball(model, margin, case):
    K, d, seed = case
    rng = np.random.default_rng(seed)
    R = radius(K)
    f = MODULES[model].project
    # well inside: returned bit for bit
    inside = random_points(rng, model, N, d, K, rho_max=(3.0 if margin == 0.25 else RHO_MAX))
    keep = norm(inside) < (1 - margin) * R * (1 - 1e-6)
    inside = inside[keep]
    same = f(inside, margin, curvature=K)
    assert same.dtype == np.float64
    np.testing.assert_array_equal(same, inside)
    # outside, barely outside, and on the sphere (exactly R along an axis)
    u = unit_vectors(rng, 3, d)
    axis = np.zeros((1, d)); axis[0, int(rng.integers(d))] = 1.0
    dirs = np.concatenate([u, axis, -axis])
    scales = np.array([1.5, 1.0000001, 1.0])
    pts = (scales[:, None, None] * R * dirs[None]).reshape(-1, d)
    if d == 1:
        assert np.any(np.abs(pts[:, 0]) == R)  # exactly on the sphere
    before = pts.copy()
    out = f(pts, margin, curvature=K)
    np.testing.assert_array_equal(pts, before)  # the input is not modified
    r_out = norm(out)
    assert_close_values(r_out / R, np.full(len(pts), 1 - margin), 8 * EPS, f"{model}.project radius / R vs 1 - margin")
    assert_close_values(out / r_out[:, None], pts / norm(pts)[:, None], 4 * EPS, f"{model}.project keeps the direction")
    # strictly inside: the library's own (double-double) ball check accepts them
    dist = MODULES[model].distance(out, np.zeros(d), curvature=K)
    assert np.all(np.isfinite(dist))


@pytest.mark.parametrize("model", BALLS)
def test_project_tiny_margin_still_inside(model):
    for K in CURVATURES:
        R = radius(K)
        x = np.array([[1.5 * R, 0.0], [R, 0.0], [0.0, -R * 1.0000001]])
        out = MODULES[model].project(x, 2.3e-16, curvature=K)
        assert np.all(norm(out) < R * (1 + 4 * EPS))
        MODULES[model].distance(out, np.zeros(2), curvature=K)  # accepted: strictly inside


@pytest.mark.parametrize("model", BALLS)
def test_project_float32_lands_inside(model):
    """float32 in, float32 out (dtype policy), and the repaired points must be
    accepted by every other function: strictly inside in float32 too."""
    K = -1.0
    x = np.array([[1.5, 0.0], [1.0, 0.0], [0.6, 0.8000001]], dtype=np.float32)
    out = MODULES[model].project(x, curvature=K)
    assert out.dtype == np.float32
    r2 = np.sum(out.astype(np.float64) ** 2, axis=-1)
    assert np.all(r2 < 1.0), f"{model}.project(float32) returned |x|^2 = {r2.tolist()} (not inside the unit ball): {out.tolist()}"
    MODULES[model].distance(out, np.zeros(2, dtype=np.float32), curvature=K)


@pytest.mark.parametrize("margin", (0.0, 1.0, -1.0, float("nan"), 1e-17, 1.5, float("inf")))
@pytest.mark.parametrize("model", BALLS)
def test_project_margin_out_of_range(model, margin):
    with pytest.raises(ValueError, match="margin"):
        MODULES[model].project(np.array([[1.5, 0.0]]), margin)


@MP50
def mp_sheet(x, K):
    """(exact sqrt(R^2 + |x_s|^2), exact -x0^2 + |x_s|^2) of float64 rows."""
    kap = mpmath.mpf(-K)
    exact_x0, lorentz = [], []
    for row in x:
        a = _mpv(row)
        s = sum(c * c for c in a[1:])
        exact_x0.append(float(mpmath.sqrt(1 / kap + s)))
        lorentz.append(float(-a[0] ** 2 + s))
    return np.array(exact_x0), np.array(lorentz)


@given(case=CASES, drift=st.sampled_from((1e-9, -1e-9, 1e-3, -1e-3, 0.5, 3.0)))
def test_hyperboloid_project_repairs_drift(case, drift):
    K, d, seed = case
    rng = np.random.default_rng(seed)
    R = radius(K)
    x = random_points(rng, "hyperboloid", N, d, K)
    drifted = x.copy()
    drifted[:, 0] *= 1 + drift * rng.uniform(0.5, 1.0, N)
    out = gk.hyperboloid.project(drifted, curvature=K)
    assert out.shape == x.shape and out.dtype == np.float64
    np.testing.assert_array_equal(out[:, 1:], drifted[:, 1:])  # spatial part kept exactly
    exact_x0, lorentz = mp_sheet(out, K)
    # x0 is the correctly rounded sqrt(R^2 + |x_s|^2) within a few ulps
    assert_close_values(out[:, 0], exact_x0, 4 * EPS * exact_x0, "hyperboloid.project x0")
    # <x,x>_L = -R^2, up to the unavoidable rounding of x0 (relative to x0^2)
    assert_close_values(lorentz, np.full(N, -(R**2)), 4 * EPS * out[:, 0] ** 2, "hyperboloid.project <x,x>_L")
    # idempotent and accepted by the other functions
    np.testing.assert_array_equal(gk.hyperboloid.project(out, curvature=K), out)
    gk.hyperboloid.distance(out, out, curvature=K)


# ====================================================== matvec


@MP50
def mp_matvec(m, x, K):
    """Möbius matrix-vector product (Ungar, from memory of the published definition):
    M ⊗ x = R tanh(|Mx|/|x| artanh(|x|/R)) Mx/|Mx|, 0 when Mx = 0."""
    kap = mpmath.mpf(-K)
    R = 1 / mpmath.sqrt(kap)
    M = mpmath.matrix([[mpmath.mpf(float(c)) for c in row] for row in m])
    out = []
    for row in x:
        a = mpmath.matrix(_mpv(row))
        ma = M * a
        na, nma = mpmath.norm(a), mpmath.norm(ma)
        if nma == 0:
            out.append([0.0] * m.shape[0])
            continue
        f = R * mpmath.tanh(nma / na * mpmath.atanh(na / R)) / nma
        out.append([float(f * c) for c in ma])
    return np.array(out)


def random_matrix(rng, d_out, d_in):
    """Singular values in [0.5, 2]: results stay within ~4x the input's radius."""
    q1, _ = np.linalg.qr(rng.normal(size=(d_out, d_out)))
    q2, _ = np.linalg.qr(rng.normal(size=(d_in, d_in)))
    s = np.zeros((d_out, d_in))
    k = min(d_out, d_in)
    s[range(k), range(k)] = rng.uniform(0.5, 2.0, k)
    return q1 @ s @ q2


@given(case=CASES, d_out=st.sampled_from((1, 2, 5)))
def test_matvec_identities(case, d_out):
    K, d, seed = case
    rng = np.random.default_rng(seed)
    R = radius(K)
    x = random_points(rng, "poincare", N, d, K, rho_max=4.0)
    x[0] = 0.0
    cr = lambda p: coord_rounding("poincare", p, K)  # noqa: E731
    # identity matrix
    eye = gk.poincare.matvec(np.eye(d), x, curvature=K)
    assert_close_points("poincare", eye, x, K, C * EPS * (cr(eye) + R), "I ⊗ x vs x")
    # (r I) ⊗ x = r ⊗ x (Ungar: the matrix product generalises scalar multiplication)
    r = rng.uniform(-2.5, 2.5)
    rho_x = 2 * np.arctanh(norm(x) / R)
    ri = gk.poincare.matvec(r * np.eye(d), x, curvature=K)
    sc = gk.poincare.scale(r, x, curvature=K)
    assert_close_points("poincare", ri, sc, K, REL * abs(r) * rho_x * R + C * EPS * (cr(ri) + cr(sc) + R), "(r I) ⊗ x vs r ⊗ x")
    # against the definition (mpmath), d_out != d_in included
    m = random_matrix(rng, d_out, d)
    got = gk.poincare.matvec(m, x, curvature=K)
    assert got.shape == (N, d_out)
    want = mp_matvec(m, x, K)
    assert_close_points("poincare", got, want, K, REL * 2 * rho_x * R + C * EPS * (cr(want) + R), "M ⊗ x vs definition")
    np.testing.assert_array_equal(got[0], np.zeros(d_out))  # M ⊗ 0 = 0
    # (M N) ⊗ x = M ⊗ (N ⊗ x) (Ungar; published property of the Möbius matrix product)
    n_mat = random_matrix(rng, d, d)
    inner = gk.poincare.matvec(n_mat, x, curvature=K)
    two = gk.poincare.matvec(m, inner, curvature=K)
    one = gk.poincare.matvec(m @ n_mat, x, curvature=K)
    # N ⊗ x is rounded once; M ⊗ stretches hyperbolic lengths by at most
    # ~|M| |M^-1| <= 16 here. The product M N is rounded too (relative eps).
    tol = REL * 4 * rho_x * R + C * EPS * (16 * cr(inner) + cr(one) + 4 * rho_x * R + R)
    assert_close_points("poincare", two, one, K, tol, "(M N) ⊗ x vs M ⊗ (N ⊗ x)")


def test_matvec_zero_cases_and_shapes():
    x = np.array([[0.3, 0.3], [0.0, 0.0], [-0.2, -0.2]])
    m = np.array([[1.0, -1.0]])  # Mx = 0 exactly for every row
    out = gk.poincare.matvec(m, x)
    assert out.shape == (3, 1)
    np.testing.assert_array_equal(out, np.zeros((3, 1)))
    out = gk.poincare.matvec(np.zeros((4, 2)), x)
    np.testing.assert_array_equal(out, np.zeros((3, 4)))
    out = gk.poincare.matvec(np.ones((3, 2)), x[:, None, :])
    assert out.shape == (3, 1, 3)
    assert gk.poincare.matvec(np.eye(2), np.zeros((0, 2))).shape == (0, 2)
    assert gk.poincare.matvec(np.ones((5, 2)), np.zeros((0, 2))).shape == (0, 5)


@pytest.mark.parametrize(
    "m",
    [np.eye(3), np.ones(2), np.ones((1, 2, 2)), np.ones((2, 0)), np.ones((0, 2)), np.float64(1.0)],
    ids=["d_in mismatch", "1-d", "3-d", "d_in 0", "d_out 0", "0-d"],
)
def test_matvec_bad_matrix_shapes(m):
    with pytest.raises(ValueError):
        gk.poincare.matvec(m, np.array([[0.1, 0.2], [0.3, 0.1]]))


# ====================================================== Minkowski inner product


@MP50
def mp_minkowski(u, v):
    out = []
    for a, b in zip(np.asarray(u).reshape(-1, np.shape(u)[-1]), np.asarray(v).reshape(-1, np.shape(v)[-1])):
        a, b = _mpv(a), _mpv(b)
        out.append(float(-a[0] * b[0] + sum(p * q for p, q in zip(a[1:], b[1:]))))
    return np.array(out)


@given(case=CASES)
def test_hyperboloid_inner(case):
    K, d, seed = case
    rng = np.random.default_rng(seed)
    R = radius(K)
    x = random_points(rng, "hyperboloid", N, d, K)
    xx = gk.hyperboloid.inner(x, x)
    # handbook: <x,x>_L = -x0^2 + |x_s|^2 = -R^2 on the sheet; the float64
    # points carry the rounding of x0 (relative to x0^2)
    assert_close_values(xx, np.full(N, -(R**2)), 8 * EPS * x[:, 0] ** 2, "inner(x, x) vs -R^2")
    # compensated: as accurate as the exact value of the float64 inputs
    # (common practice: a compensated dot product ~ twice the working precision)
    assert_close_values(xx, mp_minkowski(x, x), 4 * EPS * R**2, "inner(x, x) vs exact")
    u = rng.normal(size=(N, d + 1)) * 10.0 ** rng.uniform(-3, 3, (N, 1))
    v = rng.normal(size=(N, d + 1)) * 10.0 ** rng.uniform(-3, 3, (N, 1))
    w = rng.normal(size=(N, d + 1))
    a, b = rng.normal(size=2)
    uv = gk.hyperboloid.inner(u, v)
    scale_uv = norm(u) * norm(v)
    assert_close_values(uv, mp_minkowski(u, v), 4 * EPS * scale_uv, "inner(u, v) vs exact")
    assert_close_values(gk.hyperboloid.inner(v, u), uv, 4 * EPS * scale_uv, "inner symmetric")
    lhs = gk.hyperboloid.inner(a * u + b * w, v)
    rhs = a * uv + b * gk.hyperboloid.inner(w, v)
    tol = 16 * EPS * (abs(a) * norm(u) + abs(b) * norm(w)) * norm(v)
    assert_close_values(lhs, rhs, tol, "inner bilinear")
    # handbook definition -u0 v0 + u_s.v_s on exact small integers
    assert gk.hyperboloid.inner([1.0, 2.0, 3.0], [4.0, 5.0, 6.0]) == 24.0
    assert gk.hyperboloid.inner([3.0, 0.0], [3.0, 0.0]) == -9.0
