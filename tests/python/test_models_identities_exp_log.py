"""Identities of the hyperbolic models: exp and log maps (inverse of each
other, base=None is the origin) and their accuracy against the handbook
hyperboloid formulas in mpmath.

Conventions, tolerances and helpers: identities_support.py (K is the
curvature, R = 1/sqrt(-K); tolerances hold C times the float64 roundings
an identity passes through plus REL = 1e-10 relative). Hypothesis draws
(curvature, dimension, seed) and checks a batch of points per example;
example count: env var GYROKIT_HYPOTHESIS_EXAMPLES (default 100).
"""

from __future__ import annotations

from hypothesis import given
import numpy as np
import pytest

from conftest import EPS, MANIFOLD_MODELS, MODULES, origin, radius
from identities_support import (
    _pair,
    anisotropy,
    assert_close_points,
    assert_close_values,
    assert_tangent,
    assert_valid_points,
    C,
    CASES,
    coord_rounding,
    dot,
    mp_exp_errors,
    mp_log_errors,
    N,
    N_MP,
    random_points,
    random_tangent,
    REL,
    tangent_norm,
)


# ====================================================== exp and log


def _base(rng, model, d, K, explicit):
    if explicit:
        x = random_points(rng, model, N, d, K)
        return x, x
    return None, np.broadcast_to(origin(model, d, K), (N, d + (model == "hyperboloid")))


@pytest.mark.parametrize("explicit", (False, True), ids=("base=None", "base=x"))
@pytest.mark.parametrize("model", MANIFOLD_MODELS)
@given(case=CASES)
def test_exp_of_log_is_identity(model, explicit, case):
    K, d, seed = case
    rng = np.random.default_rng(seed)
    R = radius(K)
    base, x = _base(rng, model, d, K, explicit)
    y = random_points(rng, model, N, d, K)
    v = MODULES[model].log_map(y, base, curvature=K)
    assert v.shape == y.shape
    if model == "hyperboloid":
        assert_tangent(x, v, K, "log_map")
    dist = MODULES[model].distance(x, y, curvature=K)
    aniso = anisotropy(model, x, K)
    # the Riemannian norm of log_x(y) is d(x, y) (definition of the log map)
    vn = tangent_norm(model, x, v, K)
    assert_close_values(vn, dist, REL * dist + C * EPS * (dist * aniso + R), f"{model}: |log_x(y)|_x vs d(x, y)")
    z = MODULES[model].exp_map(v, base, curvature=K)
    assert_valid_points(model, z, K, "exp_map")
    # The float64 tangent vector v carries a rounding of relative size
    # eps * aniso in direction; exp spreads a direction error alpha into
    # R sinh(d/R) alpha at distance d (handbook: Jacobi fields in curvature -1/R^2).
    tol = REL * dist + C * EPS * (aniso * R * np.sinh(dist / R) + coord_rounding(model, z, K) + R)
    assert_close_points(model, z, y, K, tol, "exp_x(log_x(y)) vs y")


@pytest.mark.parametrize("explicit", (False, True), ids=("base=None", "base=x"))
@pytest.mark.parametrize("model", MANIFOLD_MODELS)
@given(case=CASES)
def test_log_of_exp_is_identity(model, explicit, case):
    K, d, seed = case
    rng = np.random.default_rng(seed)
    R = radius(K)
    base, x = _base(rng, model, d, K, explicit)
    v = random_tangent(rng, model, np.array(x), K, vmax=5.0)
    vn = tangent_norm(model, x, v, K)
    z = MODULES[model].exp_map(v, base, curvature=K)
    assert z.shape == v.shape
    assert_valid_points(model, z, K, "exp_map")
    slack = coord_rounding(model, z, K) + R  # z is the one rounded intermediate
    # exp_x(v) lies at distance |v|_x from x (definition of the exponential map)
    dz = MODULES[model].distance(x, z, curvature=K)
    assert_close_values(dz, vn, REL * vn + C * EPS * slack, f"{model}: d(x, exp_x(v)) vs |v|_x")
    w = MODULES[model].log_map(z, base, curvature=K)
    if model == "hyperboloid":
        assert_tangent(x, w, K, "log_map")
    err = tangent_norm(model, x, w - v, K)
    tol = REL * vn + C * EPS * (vn * anisotropy(model, x, K) + slack)
    assert_close_values(err, np.zeros(N), tol, f"{model}: |log_x(exp_x(v)) - v|_x")
    if model == "klein":
        # handbook: Klein geodesics are straight chords, so exp_x(v) = x + s v, s >= 0
        vv = np.where(dot(v, v) == 0, 1.0, dot(v, v))
        s = dot(z - x, v) / vv
        assert np.all(s >= -1e-12), f"Klein exp_x(v) moves against v: s = {s.tolist()}"
        assert_close_points("klein", z, x + s[:, None] * v, K, REL * vn + C * EPS * slack, "Klein exp_x(v) on the chord x + s v")


@pytest.mark.parametrize("model", MANIFOLD_MODELS)
@given(case=CASES)
def test_exp_log_base_none_is_origin(model, case):
    K, d, seed = case
    rng = np.random.default_rng(seed)
    R = radius(K)
    o = np.broadcast_to(origin(model, d, K), (N, d + (model == "hyperboloid")))
    v = random_tangent(rng, model, np.array(o), K, vmax=8.0)
    z_none = MODULES[model].exp_map(v, curvature=K)
    z_o = MODULES[model].exp_map(v, o, curvature=K)
    vn = tangent_norm(model, o, v, K)
    assert_close_points(model, z_none, z_o, K, REL * vn + C * EPS * (coord_rounding(model, z_o, K) + R), "exp_map base=None vs origin")
    y = random_points(rng, model, N, d, K)
    w_none = MODULES[model].log_map(y, curvature=K)
    w_o = MODULES[model].log_map(y, o, curvature=K)
    dist = MODULES[model].distance(o, y, curvature=K)
    err = tangent_norm(model, o, w_none - w_o, K)
    assert_close_values(err, np.zeros(N), REL * dist + C * EPS * (dist + R), "log_map base=None vs origin")


@pytest.mark.parametrize("model", MANIFOLD_MODELS)
@given(case=CASES)
def test_exp_map_matches_mpmath(model, case):
    """Forward accuracy on exact float64 inputs (SPEC: the reference is the
    formula evaluated in mpmath on the same inputs), far points included:
    v = log_x(y) is up to ~20 R long."""
    K, d, rng, x, y = _pair(case, model, n=N_MP)
    R = radius(K)
    f = MODULES[model]
    v = f.log_map(y, x, curvature=K)
    z = f.exp_map(v, x, curvature=K)
    err = mp_exp_errors(model, x, v, z, K)
    vn = tangent_norm(model, x, v, K)
    tol = REL * vn + C * EPS * (coord_rounding(model, z, K) + R)
    assert_close_values(err, np.zeros(N_MP), tol, f"{model}: hyperbolic error of exp_map vs mpmath")


@pytest.mark.parametrize("model", MANIFOLD_MODELS)
@given(case=CASES)
def test_log_map_matches_mpmath(model, case):
    K, d, rng, x, y = _pair(case, model, n=N_MP)
    R = radius(K)
    f = MODULES[model]
    w = f.log_map(y, x, curvature=K)
    err = mp_log_errors(model, x, y, w, K)
    dist = f.distance(x, y, curvature=K)
    tol = REL * dist + C * EPS * (dist * anisotropy(model, x, K) + R)
    assert_close_values(err, np.zeros(N_MP), tol, f"{model}: Riemannian error of log_map vs mpmath")
