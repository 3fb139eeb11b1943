"""Gyrovector algebra against closed forms (A. A. Ungar, Analytic Hyperbolic
Geometry, 2005; handbook identities): the complex disc form of Möbius
addition, collinear addition as relativistic velocity addition, integer
scaling as repeated addition, the scalar law and the Poincaré-Klein
isomorphism. Each check names its source beside it."""

from __future__ import annotations

import numpy as np
import pytest

import gyrokit as gk
import mp_reference as ref
from conftest import CURVATURES, radius, unit_vectors
from algebra_support import _interior, _rng, DIMS


# --------------------------------------------------------- 2. closed forms


@pytest.mark.parametrize("curvature", [-1.0, -0.3, -4.0, -2.5])
def test_mobius_addition_is_the_complex_disc_form(curvature):
    # A. A. Ungar, Analytic Hyperbolic Geometry (2005): in the complex disc of
    # radius s, a ⊕ z = (a + z)/(1 + conj(a) z / s^2); with kappa = 1/s^2 = -K
    # this is (a + z)/(1 + kappa conj(a) z) (K = -1: the disc automorphism
    # (a + z)/(1 + conj(a) z)).
    kappa = -curvature
    R = radius(curvature)
    rng = _rng("complex", curvature)
    x = _interior(rng, 200, 2, R, rmax=0.95)
    y = _interior(rng, 200, 2, R, rmax=0.95)
    got = gk.poincare.add(x, y, curvature=curvature)
    for j in range(len(x)):
        a = complex(x[j, 0], x[j, 1])
        z = complex(y[j, 0], y[j, 1])
        w = (a + z) / (1 + kappa * a.conjugate() * z)
        err = abs(complex(got[j, 0], got[j, 1]) - w) / max(abs(w), 1e-15 * R)
        assert err < 1e-12, (j, x[j], y[j], got[j], w)


@pytest.mark.parametrize("space", ["klein", "poincare"])
@pytest.mark.parametrize("curvature", CURVATURES)
@pytest.mark.parametrize("d", [1, 3, 16])
def test_collinear_addition_is_velocity_addition(space, curvature, d):
    # handbook: relativistic velocity addition of parallel velocities,
    # w = (u + v)/(1 + u v / c^2), with c = R; opposite directions = signed
    # speeds. Einstein addition reduces to it (Ungar 2005); so does Möbius
    # addition in one dimension (from memory: (u+v)/(1+kappa u v) is the
    # Möbius sum of collinear vectors too).
    R = radius(curvature)
    rng = _rng("collinear", space, curvature, d)
    add = getattr(gk, space).add
    n = 60
    u = R * rng.uniform(-0.999, 0.999, n)
    v = R * rng.uniform(-0.999, 0.999, n)
    v[:20] = -u[:20] * (1.0 + rng.uniform(-1e-6, 1e-6, 20))  # nearly opposite
    axis = rng.integers(0, d, n)
    x = np.zeros((n, d))
    y = np.zeros((n, d))
    x[np.arange(n), axis] = u
    y[np.arange(n), axis] = v
    got = add(x, y, curvature=curvature)
    with ref.mp.workdps(50):
        for j in range(n):
            uu, vv, c2 = ref.mpf(u[j]), ref.mpf(v[j]), 1 / -ref.mpf(curvature)
            w = (uu + vv) / (1 + uu * vv / c2)
            exact = [ref.mpf(0)] * d
            exact[axis[j]] = w
            err = ref.rel_error(got[j], exact, 1e-15 * R)
            assert err < 1e-13, (j, u[j], v[j], got[j], float(w))

    # Along a random direction (inputs are then rounded): absolute error in R.
    e = unit_vectors(rng, 1, d)[0]
    x, y = u[:, None] * e, v[:, None] * e
    got = add(x, y, curvature=curvature)
    w = (u + v) / (1 + u * v / R**2)
    assert np.max(np.abs(got - w[:, None] * e)) < 1e-13 * R


@pytest.mark.parametrize("space", ["poincare", "klein"])
@pytest.mark.parametrize("curvature", CURVATURES)
@pytest.mark.parametrize("d", DIMS)
def test_integer_scaling_is_repeated_addition(space, curvature, d):
    # Ungar (2005), scalar multiplication axiom: n ⊗ x = x ⊕ ... ⊕ x (n terms);
    # and (-n) ⊗ x = ⊖(n ⊗ x).
    mod = getattr(gk, space)
    R = radius(curvature)
    x = _interior(_rng("repeat", space, curvature, d), 40, d, R, rmax=0.7)
    acc = x.copy()
    for n in range(1, 7):
        if n > 1:
            acc = mod.add(acc, x, curvature=curvature)
        got = mod.scale(float(n), x, curvature=curvature)
        err = np.linalg.norm(got - acc, axis=1) / np.maximum(np.linalg.norm(acc, axis=1), 1e-15 * R)
        assert np.max(err) < 1e-12, (n, np.max(err))
        neg = mod.scale(-float(n), x, curvature=curvature)
        assert np.max(np.abs(neg + acc)) < 1e-12 * R, n


@pytest.mark.parametrize("space", ["poincare", "klein"])
@pytest.mark.parametrize("curvature", CURVATURES)
@pytest.mark.parametrize("d", DIMS)
def test_scalar_law(space, curvature, d):
    # Ungar (2005): r ⊗ x = R tanh(r artanh(|x|/R)) x/|x|, here in float64
    # NumPy at interior points (|x| <= 0.9 R) where it is well conditioned.
    mod = getattr(gk, space)
    R = radius(curvature)
    rng = _rng("scalar-law", space, curvature, d)
    x = _interior(rng, 200, d, R, rmax=0.9)
    r = rng.uniform(-5.0, 5.0, 200)
    nx = np.linalg.norm(x, axis=1)
    want = (R * np.tanh(r * np.arctanh(nx / R)) / nx)[:, None] * x
    got = mod.scale(r, x, curvature=curvature)
    err = np.linalg.norm(got - want, axis=1) / np.linalg.norm(want, axis=1)
    assert np.max(err) < 1e-12
    # common practice: a scalar r and an array of equal r give identical rows.
    assert np.allclose(mod.scale(0.5, x, curvature=curvature)[:5],
                       mod.scale(np.full(5, 0.5), x[:5], curvature=curvature), rtol=0, atol=0)
    # 0 ⊗ x = 0, 1 ⊗ x = x.
    assert np.max(np.abs(mod.scale(0.0, x, curvature=curvature))) == 0.0
    assert np.max(np.abs(mod.scale(1.0, x, curvature=curvature) - x)) < 1e-15 * R


def _to_klein(p: np.ndarray, curvature: float) -> np.ndarray:
    # Ungar (2005): the isomorphism Möbius -> Einstein is p -> 2 ⊗ p = 2p/(1 + kappa |p|^2).
    kappa = -curvature
    return 2.0 * p / (1.0 + kappa * np.sum(p * p, axis=-1, keepdims=True))


@pytest.mark.parametrize("curvature", CURVATURES)
@pytest.mark.parametrize("d", DIMS)
def test_poincare_to_klein_isomorphism(curvature, d):
    # A. A. Ungar, Analytic Hyperbolic Geometry (2005): p -> 2 ⊗ p is a
    # gyrovector-space isomorphism from Möbius to Einstein; the Möbius
    # gyromidpoint goes to the Einstein midpoint, gyrations coincide.
    R = radius(curvature)
    rng = _rng("iso", curvature, d)
    p = _interior(rng, 100, d, R, rmax=0.8)
    q = _interior(rng, 100, d, R, rmax=0.8)
    w = rng.standard_normal((100, d)) * R
    r = rng.uniform(-3, 3, 100)
    kp, kq = _to_klein(p, curvature), _to_klein(q, curvature)
    P, Kl = gk.poincare, gk.klein
    c = {"curvature": curvature}

    def close(a, b, what):
        err = np.linalg.norm(a - b, axis=1) / np.maximum(np.linalg.norm(b, axis=1), 1e-15 * R)
        assert np.max(err) < 1e-12, (what, np.max(err))

    close(Kl.add(kp, kq, **c), _to_klein(P.add(p, q, **c), curvature), "add")
    close(Kl.sub(kp, kq, **c), _to_klein(P.sub(p, q, **c), curvature), "sub")
    close(Kl.midpoint(kp, kq, **c), _to_klein(P.midpoint(p, q, **c), curvature), "midpoint")
    close(Kl.scale(r, kp, **c), _to_klein(P.scale(r, p, **c), curvature), "scale")
    close(Kl.gyration(kp, kq, w, **c), P.gyration(p, q, w, **c), "gyration")
