"""Gyrogroup and gyrovector-space axioms (A. A. Ungar, Analytic Hyperbolic
Geometry, 2005) as hypothesis properties over whole arrays, for the
Poincaré and Klein balls: identity and inverse, gyroassociative laws,
gyration automorphisms and isometries, loop properties, gyrocommutativity,
coaddition, the gyromidpoint and the scalar laws. Example count: env var
GYROKIT_HYPOTHESIS_EXAMPLES (default 100), via the profile in conftest.py."""

from __future__ import annotations

from hypothesis import given
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp
import numpy as np
import pytest

import gyrokit as gk
from conftest import radius


# ---------------------------------------------------- 3. gyrogroup axioms

SPACES = ["poincare", "klein"]
PROPERTY_CURVATURES = [-1.0, -0.3, -4.0, -0.05, -20.0]
TOL = 1e-9  # in units of R (|x| <= 0.9 R keeps every identity well conditioned)


@st.composite
def ball_batches(draw, count: int, extra_vectors: int = 0):
    """``count`` arrays of n ball points (|x| <= 0.9 R) plus ``extra_vectors``
    arrays of arbitrary vectors (|v| <= 3 R), all of shape (n, d)."""
    curvature = draw(st.sampled_from(PROPERTY_CURVATURES))
    d = draw(st.sampled_from([1, 2, 3, 5, 16]))
    n = draw(st.integers(1, 6))
    R = radius(curvature)
    raw = draw(
        hnp.arrays(
            np.float64,
            (count + extra_vectors, n, d),
            elements=st.floats(-1.0, 1.0, allow_subnormal=False),
        )
    )
    norms = np.linalg.norm(raw, axis=-1, keepdims=True)
    pts = 0.9 * R * raw / np.maximum(norms, 1.0)
    pts[count:] *= 3.0 / 0.9
    return curvature, [pts[i] for i in range(count + extra_vectors)]


def _safe_norm(x: np.ndarray) -> np.ndarray:
    """Row norms that neither underflow nor overflow."""
    m = np.max(np.abs(x), axis=-1)
    safe = np.where(m > 0, m, 1.0)
    return m * np.linalg.norm(x / safe[..., None], axis=-1)


def _assert_close(a, b, R, what):
    err = np.max(np.linalg.norm(np.asarray(a) - np.asarray(b), axis=-1)) if np.size(a) else 0.0
    assert err <= TOL * R, f"{what}: |difference| = {err / R:.3e} R"


@pytest.mark.parametrize("space", SPACES)
@given(ball_batches(1))
def test_identity_and_inverse(space, batch):
    # Ungar (2005), gyrogroup axioms (G1), (G2): 0 ⊕ a = a, (⊖a) ⊕ a = 0, with
    # ⊖a = -a in both spaces; common practice: also the right-hand versions.
    curvature, (a,) = batch
    mod, R, c = getattr(gk, space), radius(curvature), {"curvature": curvature}
    zero = np.zeros_like(a)
    _assert_close(mod.add(zero, a, **c), a, R, "0 ⊕ a = a")
    _assert_close(mod.add(a, zero, **c), a, R, "a ⊕ 0 = a")
    _assert_close(mod.add(-a, a, **c), zero, R, "(⊖a) ⊕ a = 0")
    _assert_close(mod.sub(a, a, **c), zero, R, "a ⊖ a = 0")


@pytest.mark.parametrize("space", SPACES)
@given(ball_batches(3))
def test_left_and_right_gyroassociative_laws(space, batch):
    # Ungar (2005), (G3) left gyroassociative law a ⊕ (b ⊕ c) = (a ⊕ b) ⊕ gyr[a,b]c
    # and the right gyroassociative law (a ⊕ b) ⊕ c = a ⊕ (b ⊕ gyr[b,a]c).
    curvature, (a, b, cc) = batch
    mod, R, c = getattr(gk, space), radius(curvature), {"curvature": curvature}
    lhs = mod.add(a, mod.add(b, cc, **c), **c)
    rhs = mod.add(mod.add(a, b, **c), mod.gyration(a, b, cc, **c), **c)
    _assert_close(lhs, rhs, R, "left gyroassociative law")
    lhs = mod.add(mod.add(a, b, **c), cc, **c)
    rhs = mod.add(a, mod.add(b, mod.gyration(b, a, cc, **c), **c), **c)
    _assert_close(lhs, rhs, R, "right gyroassociative law")


@pytest.mark.parametrize("space", SPACES)
@given(ball_batches(4))
def test_gyration_is_an_automorphism(space, batch):
    # Ungar (2005), (G4): gyr[a,b](c ⊕ d) = gyr[a,b]c ⊕ gyr[a,b]d, and it
    # commutes with scalar multiplication (gyrovector space axiom (V6)).
    curvature, (a, b, cc, dd) = batch
    mod, R, c = getattr(gk, space), radius(curvature), {"curvature": curvature}
    lhs = mod.gyration(a, b, mod.add(cc, dd, **c), **c)
    rhs = mod.add(mod.gyration(a, b, cc, **c), mod.gyration(a, b, dd, **c), **c)
    _assert_close(lhs, rhs, R, "gyr[a,b](c ⊕ d)")
    r = np.linspace(-3.0, 3.0, len(a))
    lhs = mod.gyration(a, b, mod.scale(r, cc, **c), **c)
    rhs = mod.scale(r, mod.gyration(a, b, cc, **c), **c)
    _assert_close(lhs, rhs, R, "gyr[a,b](r ⊗ c)")


@pytest.mark.parametrize("space", SPACES)
@given(ball_batches(2, extra_vectors=1))
def test_loop_properties(space, batch):
    # Ungar (2005), (G5) left loop property gyr[a,b] = gyr[a ⊕ b, b]; and the
    # right loop property gyr[a,b] = gyr[a, b ⊕ a]. Checked on arbitrary
    # vectors w (gyrations act on all of R^d).
    curvature, (a, b, w) = batch
    mod, R, c = getattr(gk, space), radius(curvature), {"curvature": curvature}
    g = mod.gyration(a, b, w, **c)
    _assert_close(g, mod.gyration(mod.add(a, b, **c), b, w, **c), R, "left loop property")
    _assert_close(g, mod.gyration(a, mod.add(b, a, **c), w, **c), R, "right loop property")


@pytest.mark.parametrize("space", SPACES)
@given(ball_batches(2))
def test_gyrocommutative_law(space, batch):
    # Ungar (2005): a ⊕ b = gyr[a,b](b ⊕ a).
    curvature, (a, b) = batch
    mod, R, c = getattr(gk, space), radius(curvature), {"curvature": curvature}
    _assert_close(mod.add(a, b, **c), mod.gyration(a, b, mod.add(b, a, **c), **c), R, "gyrocommutative law")


@pytest.mark.parametrize("space", SPACES)
@given(ball_batches(2, extra_vectors=2))
def test_gyrations_are_linear_isometries(space, batch):
    # Ungar (2005): gyrations preserve inner products, <gyr u, gyr v> = <u, v>,
    # and gyr[b,a] is the inverse of gyr[a,b] (gyroinversion law); common
    # practice: a rotation is linear on all of R^d.
    curvature, (a, b, u, v) = batch
    mod, R, c = getattr(gk, space), radius(curvature), {"curvature": curvature}
    gu = mod.gyration(a, b, u, **c)
    gv = mod.gyration(a, b, v, **c)
    lhs = np.sum(gu * gv, axis=-1)
    rhs = np.sum(u * v, axis=-1)
    # |u||v| without underflow (hypothesis likes 1e-290-sized coordinates);
    # 1e-320: products that land in the subnormal range are only accurate
    # to the absolute spacing of subnormals.
    scale = _safe_norm(u) * _safe_norm(v)
    assert np.all(np.abs(lhs - rhs) <= TOL * scale + 1e-320), "inner product not preserved"
    _assert_close(mod.gyration(b, a, gu, **c), u, R, "gyr[b,a] gyr[a,b] u = u")
    lin = mod.gyration(a, b, 2.5 * u - 0.75 * v, **c)
    _assert_close(lin, 2.5 * gu - 0.75 * gv, R, "linearity")


@given(ball_batches(2))
def test_coaddition(batch):
    # Ungar (2005): a ⊞ b = a ⊕ gyr[a, ⊖b] b; ⊞ is commutative; and the
    # gyromidpoint is ½ ⊗ (a ⊞ b).
    curvature, (a, b) = batch
    P, R, c = gk.poincare, radius(curvature), {"curvature": curvature}
    co = P.coadd(a, b, **c)
    _assert_close(co, P.add(a, P.gyration(a, -b, b, **c), **c), R, "a ⊞ b = a ⊕ gyr[a,⊖b]b")
    _assert_close(co, P.coadd(b, a, **c), R, "a ⊞ b = b ⊞ a")
    _assert_close(P.midpoint(a, b, **c), P.scale(0.5, co, **c), R, "midpoint = ½ ⊗ (a ⊞ b)")


@pytest.mark.parametrize("space", SPACES)
@given(ball_batches(2))
def test_midpoint_is_the_gyromidpoint(space, batch):
    # Ungar (2005): the gyromidpoint of a and b is a ⊕ ½ ⊗ (⊖a ⊕ b) in both
    # spaces (for Einstein it has the closed form (γa a + γb b)/(γa + γb)),
    # and it is gyro-equidistant: |⊖m ⊕ a| = |⊖m ⊕ b|.
    curvature, (a, b) = batch
    mod, R, c = getattr(gk, space), radius(curvature), {"curvature": curvature}
    m = mod.midpoint(a, b, **c)
    _assert_close(m, mod.add(a, mod.scale(0.5, mod.add(-a, b, **c), **c), **c), R, "a ⊕ ½⊗(⊖a ⊕ b)")
    da = np.linalg.norm(mod.add(-m, a, **c), axis=-1)
    db = np.linalg.norm(mod.add(-m, b, **c), axis=-1)
    assert np.all(np.abs(da - db) <= TOL * R), "midpoint not equidistant"


@pytest.mark.parametrize("space", SPACES)
@given(ball_batches(1), st.floats(-3, 3), st.floats(-3, 3))
def test_scalar_distributive_and_associative_laws(space, batch, r1, r2):
    # Ungar (2005), gyrovector space axioms: (r1 + r2) ⊗ a = r1 ⊗ a ⊕ r2 ⊗ a
    # (scalar distributive law), (r1 r2) ⊗ a = r1 ⊗ (r2 ⊗ a) (scalar
    # associative law).
    curvature, (a,) = batch
    mod, R, c = getattr(gk, space), radius(curvature), {"curvature": curvature}
    # |r1 + r2| <= 6 and |a| <= 0.9 R keep every r ⊗ a at least 4.5e-8 R
    # inside the sphere (tanh(6 artanh 0.9)), where the laws are well conditioned.
    _assert_close(
        mod.scale(r1 + r2, a, **c),
        mod.add(mod.scale(r1, a, **c), mod.scale(r2, a, **c), **c),
        R,
        "scalar distributive law",
    )
    r2 = r2 / 3.0
    _assert_close(mod.scale(r1 * r2, a, **c), mod.scale(r1, mod.scale(r2, a, **c), **c), R, "scalar associative law")
