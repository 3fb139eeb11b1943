"""Distance matrices and condensed distances (``gk.distance_matrix``,
``gk.condensed_distances``) for the four models and several curvatures.

Outside checks, each named where it is used:

* the element-wise ``gk.<model>.distance`` functions evaluated point by point
  over all pairs (brute force, common practice; they use a different exact
  transcendental, so matrix entries agree to 1e-14 relative, not bitwise);
* the textbook closed-form distance of each model evaluated in mpmath at 50
  significant digits on the exact float64 inputs (checked against 100 digits);
* ``scipy.spatial.distance.squareform`` for the condensed (pdist) layout.
"""

from __future__ import annotations

from scipy.spatial.distance import squareform
import mpmath
import numpy as np
import pytest

import gyrokit as gk
from conftest import CURVATURES, MODELS, mp_distance, radius, width
from neighbors_support import assert_bitwise, assert_rel_close, elementwise_matrix, model_points


# ------------------------------------------- matrix vs element-wise distances


@pytest.mark.parametrize("d", [1, 2, 5, 16, 33])
@pytest.mark.parametrize("curvature", CURVATURES)
@pytest.mark.parametrize("model", MODELS)
def test_matrix_matches_elementwise(model, curvature, d):
    rng = np.random.default_rng([7, MODELS.index(model), CURVATURES.index(curvature), d])
    x = model_points(rng, 37, d, model, curvature)
    y = model_points(rng, 29, d, model, curvature, rmax=14.0)
    D = gk.distance_matrix(x, y, model=model, curvature=curvature)
    assert D.shape == (37, 29) and D.dtype == np.float64
    assert_rel_close(D, elementwise_matrix(x, y, model, curvature), 1e-14, "x vs y")
    S = gk.distance_matrix(x, model=model, curvature=curvature)
    assert S.shape == (37, 37)
    E = elementwise_matrix(x, x, model, curvature)
    assert_rel_close(S, E, 1e-14, "x vs itself")
    # the duplicate and the 1e-12 pair are really there
    assert S[0, 2] == 0.0 and S[2, 0] == 0.0
    assert 0.0 < S[3, 4] < 1e-6


# ------------------------------------------------ mpmath 50-digit reference


def mp_reference(model, a, b, curvature):
    """mpmath 50-digit reference, checked against 100 digits."""
    r50 = mp_distance(model, a, b, curvature, 50)
    r100 = mp_distance(model, a, b, curvature, 100)
    with mpmath.workdps(100):
        assert abs(r50 - r100) <= mpmath.mpf("1e-20") * abs(r100) + mpmath.mpf("1e-60")
    return float(r100)


def hard_pairs(model, curvature, d, rng):
    """Pairs (x_i, y_i): about 1e-12 R apart (at the origin, inside, and at
    the boundary), points with 1 - |x|/R = 1e-15 (ball models; converted for
    the other two), and pairs up to hyperbolic distance 30 apart.

    Returns the pairs and a mask of the 'interior close pairs' on which the
    NumPy arccosh formula underflows to 0."""
    R = radius(curvature)
    gap = 1e-15
    xs, ys, interior_close = [], [], []

    def unit(n):
        v = rng.standard_normal((n, d))
        return v / np.linalg.norm(v, axis=1, keepdims=True)

    def tangential(u):
        w = rng.standard_normal(d)
        if d > 1:
            w -= (w @ u) * u
        return w / np.linalg.norm(w)

    ball = model in ("poincare", "klein")
    base = "klein" if model == "klein" else "poincare"
    # 1) close pairs in the interior (including the origin)
    for rad in (0.0, 0.1, 0.3, 0.5):
        for u in unit(3):
            p = rad * R * u
            w = unit(1)[0]
            xs.append(p)
            ys.append(p + 1e-12 * R * w)
            interior_close.append(True)
    # 2) near-boundary points: with each other, close to each other, with inner points
    nb = (1.0 - gap) * R * unit(8)
    for i in range(8):
        other = nb[(i + 1) % 8]
        xs.append(nb[i])
        ys.append(other if not np.array_equal(other, nb[i]) else -nb[i])
        interior_close.append(False)
        # close pair at the boundary (tangential offset keeps it inside)
        xs.append(nb[i])
        off = 1e-12 * R * tangential(nb[i] / np.linalg.norm(nb[i])) if d > 1 else 0.0 * nb[i]
        ys.append(nb[i] + off if d > 1 else nb[i] * (1.0 - 1e-13))
        interior_close.append(False)
        xs.append(nb[i])
        ys.append(0.4 * R * unit(1)[0])
        interior_close.append(False)
    # 3) far pairs: hyperbolic distance up to 30
    for dist in (10.0, 20.0, 30.0):
        u = unit(1)[0]
        xs.append(R * np.tanh(dist / 4.0) * u)
        ys.append(-R * np.tanh(dist / 4.0) * u)
        interior_close.append(False)
    X = np.array(xs)
    Y = np.array(ys)
    # the 1e-15 gap is really there (up to float rounding)
    g = 1.0 - np.linalg.norm(nb, axis=1) / R
    assert np.all((g > 0.3e-15) & (g < 3e-15))
    if not ball:
        X = gk.convert(X, base, model, curvature=curvature)
        Y = gk.convert(Y, base, model, curvature=curvature)
    return X, Y, np.array(interior_close)


@pytest.mark.parametrize("curvature", CURVATURES)
@pytest.mark.parametrize("model", MODELS)
@pytest.mark.parametrize("d", [1, 2, 5])
def test_matrix_matches_mpmath(model, curvature, d):
    rng = np.random.default_rng([11, MODELS.index(model), CURVATURES.index(curvature), d])
    X, Y, _ = hard_pairs(model, curvature, d, rng)
    D = gk.distance_matrix(X, Y, model=model, curvature=curvature)
    got = np.diagonal(D)
    ref = np.array([mp_reference(model, a, b, curvature) for a, b in zip(X, Y)])
    assert np.all(ref > 0)
    # spec: relative 1e-12 (absolute 1e-15 for results near zero)
    err = np.abs(got - ref)
    bad = err > np.maximum(1e-12 * ref, 1e-15 * (ref < 1e-3))
    assert not np.any(bad), (
        f"rows {np.nonzero(bad)[0].tolist()}: got {got[bad].tolist()}, mpmath {ref[bad].tolist()}"
    )
    # the same pairs through the other entry points (same kernel: bitwise)
    idx, kd = gk.knn(X[:1], 1, Y[:1], model=model, curvature=curvature)
    assert kd[0, 0] == D[0, 0]
    # and a y=None matrix on the stacked set: the (i, n+i) entries
    Z = np.concatenate([X, Y])
    S = gk.distance_matrix(Z, model=model, curvature=curvature)
    n = len(X)
    s = S[np.arange(n), n + np.arange(n)]
    assert np.all(np.abs(s - ref) <= np.maximum(1e-12 * ref, 1e-15 * (ref < 1e-3)))


@pytest.mark.parametrize("curvature", CURVATURES)
def test_numpy_arccosh_formula_fails_where_gyrokit_does_not(curvature):
    """The documented failure mode being avoided: the NumPy broadcasting
    formula R arccosh(1 + 2R^2|x-y|^2/((R^2-|x|^2)(R^2-|y|^2))) returns exactly
    0 for pairs 1e-12 R apart; gyrokit matches the mpmath 50-digit reference."""
    rng = np.random.default_rng(5)
    X, Y, interior = hard_pairs("poincare", curvature, 3, rng)
    X, Y = X[interior], Y[interior]
    R2 = -1.0 / curvature
    diff = np.sum((X - Y) ** 2, axis=1)
    naive = np.sqrt(R2) * np.arccosh(
        1.0 + 2.0 * R2 * diff / ((R2 - np.sum(X * X, axis=1)) * (R2 - np.sum(Y * Y, axis=1)))
    )
    assert np.all(naive == 0.0)
    ref = np.array([mp_reference("poincare", a, b, curvature) for a, b in zip(X, Y)])
    got = np.diagonal(gk.distance_matrix(X, Y, curvature=curvature))
    assert np.all(ref > 1e-13)
    assert np.all(np.abs(got - ref) <= 1e-12 * ref)


# ------------------------------------------------------ symmetry, condensed


@pytest.mark.parametrize("curvature", [-1.0, -4.0])
@pytest.mark.parametrize("model", MODELS)
@pytest.mark.parametrize("d", [2, 16])
def test_symmetric_self_matrix(model, curvature, d):
    rng = np.random.default_rng([13, MODELS.index(model), d])
    x = model_points(rng, 41, d, model, curvature)
    D = gk.distance_matrix(x, model=model, curvature=curvature)
    assert D.shape == (41, 41)
    assert np.all(np.diagonal(D) == 0.0)
    hi = np.maximum(D, D.T)
    assert np.all(np.abs(D - D.T) <= np.spacing(hi)), "D != D.T within 1 ulp"
    assert D[0, 2] == 0.0 and D[2, 0] == 0.0  # the duplicate
    off = ~np.eye(41, dtype=bool)
    off[0, 2] = off[2, 0] = False
    assert np.all(D[off] > 0.0)


@pytest.mark.parametrize("n", [0, 1, 2, 3, 37, 130])
@pytest.mark.parametrize("model", MODELS)
def test_condensed_is_pdist_layout_of_matrix(model, n):
    rng = np.random.default_rng([17, MODELS.index(model), n])
    K = -0.3
    x = model_points(rng, n, 5, model, K)
    x = x.reshape(n, width(model, 5))
    c = gk.condensed_distances(x, model=model, curvature=K)
    D = gk.distance_matrix(x, model=model, curvature=K)
    assert c.shape == (n * (n - 1) // 2,) and c.dtype == np.float64
    if n >= 2:
        # scipy.spatial.distance.squareform/pdist layout
        expected = squareform(D, checks=False)
    else:
        expected = np.empty(0)
    assert_bitwise(c, expected, "condensed vs squareform(matrix)")
    iu = np.triu_indices(n, 1)
    assert_bitwise(c, D[iu], "condensed vs upper triangle")


def test_condensed_float32():
    rng = np.random.default_rng(19)
    x = model_points(rng, 30, 4, "poincare", -1.0).astype(np.float32)
    c = gk.condensed_distances(x)
    D = gk.distance_matrix(x)
    assert c.dtype == np.float32 and D.dtype == np.float32
    assert_bitwise(c, squareform(D, checks=False))  # scipy.spatial.distance.squareform/pdist layout
