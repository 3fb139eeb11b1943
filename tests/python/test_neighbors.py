"""Distance matrices, condensed distances, k nearest neighbours and radius
queries (``gk.distance_matrix``, ``gk.condensed_distances``, ``gk.knn``,
``gk.radius_neighbors``), for the four models and several curvatures.

Outside checks, each named where it is used:

* the element-wise ``gk.<model>.distance`` functions evaluated point by point
  over all pairs (brute force, common practice; they use a different exact
  transcendental, so matrix entries agree to 1e-14 relative, not bitwise);
* the textbook closed-form distance of each model evaluated in mpmath at 50
  significant digits on the exact float64 inputs (checked against 100 digits);
* brute-force sorting / thresholding of the matrix itself for ``knn`` and
  ``radius_neighbors`` (same kernel, so bitwise equality is required);
* ``scipy.spatial.distance.squareform`` for the condensed (pdist) layout.
"""

from __future__ import annotations

import hashlib
import os
import subprocess
import sys
import textwrap

import mpmath
import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from scipy.spatial.distance import squareform

import gyrokit as gk

MODELS = ("poincare", "klein", "hyperboloid", "halfspace")
CURVATURES = (-1.0, -0.3, -4.0)
ELEMENTWISE = {
    "poincare": gk.poincare.distance,
    "klein": gk.klein.distance,
    "hyperboloid": gk.hyperboloid.distance,
    "halfspace": gk.halfspace.distance,
}
HYP_EXAMPLES = int(os.environ.get("GYROKIT_HYPOTHESIS_EXAMPLES", "100"))


# ---------------------------------------------------------------- data


def radius_of(curvature):
    return 1.0 / np.sqrt(-curvature)


def poincare_points(rng, n, d, curvature, rmax=10.0):
    """Points whose hyperbolic distance from the origin is uniform in
    [0, rmax R], in Poincaré-ball coordinates."""
    R = radius_of(curvature)
    v = rng.standard_normal((n, d))
    v /= np.linalg.norm(v, axis=1, keepdims=True)
    rho = rng.uniform(0.0, rmax, n)
    return R * np.tanh(rho / 2.0)[:, None] * v


def to_model(p, model, curvature):
    if model == "poincare":
        return np.array(p, dtype=np.float64)
    return gk.convert(p, "poincare", model, curvature=curvature)


def model_points(rng, n, d, model, curvature, rmax=10.0, extras=True):
    """Random points of ``model`` with, when ``extras``, an exact duplicate
    (row 2 == row 0), a pair about 1e-12 R apart (rows 3, 4) and the origin
    (row 5) mixed in."""
    p = poincare_points(rng, n, d, curvature, rmax)
    if extras and n >= 6:
        R = radius_of(curvature)
        p[2] = p[0]
        p[4] = p[3] + 1e-12 * R * rng.standard_normal(d) / np.sqrt(d)
        p[5] = 0.0
    return to_model(p, model, curvature)


def width(model, d):
    return d + 1 if model == "hyperboloid" else d


def elementwise_matrix(x, y, model, curvature):
    """Brute force point by point with gk.<model>.distance (common practice)."""
    f = ELEMENTWISE[model]
    return np.asarray(f(x[:, None, :], y[None, :, :], curvature=curvature))


def assert_rel_close(actual, expected, rtol, what=""):
    actual = np.asarray(actual, dtype=np.float64)
    expected = np.asarray(expected, dtype=np.float64)
    assert actual.shape == expected.shape
    assert np.all(np.isfinite(actual)), what
    err = np.abs(actual - expected)
    bad = err > rtol * np.abs(expected)
    if np.any(bad):
        i = tuple(np.argwhere(bad)[0])
        raise AssertionError(
            f"{what}: entry {i}: got {actual[i]!r}, expected {expected[i]!r}, "
            f"relative error {err[i] / abs(expected[i]) if expected[i] else np.inf:.3e} > {rtol}"
        )


def brute_order(D, exclude_self):
    """Brute force: per row, every column ordered by (distance, index) with a
    stable lexsort; the own column removed when ``exclude_self``."""
    n, m = D.shape
    rows = []
    for i in range(n):
        cols = np.arange(m)
        if exclude_self:
            cols = cols[cols != i]
        vals = D[i, cols]
        rows.append(cols[np.lexsort((cols, vals))])
    return rows


def brute_knn(D, k, exclude_self):
    order = brute_order(D, exclude_self)
    idx = np.array([o[:k] for o in order], dtype=np.int64).reshape(D.shape[0], k)
    dist = np.take_along_axis(D.astype(np.float64), idx, axis=1) if D.shape[0] else np.empty((0, k))
    return idx, dist


def brute_radius(D, r, exclude_self):
    """Brute-force thresholding of the matrix (inclusive), rows by (distance, index)."""
    order = brute_order(D, exclude_self)
    indptr = [0]
    indices, dists = [], []
    for i, o in enumerate(order):
        sel = o[D[i, o] <= r]
        indices.extend(sel.tolist())
        dists.extend(D[i, sel].tolist())
        indptr.append(len(indices))
    return (
        np.array(indptr, dtype=np.int64),
        np.array(indices, dtype=np.int64),
        np.array(dists, dtype=np.float64),
    )


def assert_bitwise(a, b, what=""):
    a = np.asarray(a)
    b = np.asarray(b)
    assert a.shape == b.shape, f"{what}: shapes {a.shape} vs {b.shape}"
    assert a.dtype == b.dtype, f"{what}: dtypes {a.dtype} vs {b.dtype}"
    assert a.tobytes() == b.tobytes(), f"{what}: not bit-identical"


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


def mp_distance(model, a, b, curvature, dps):
    """Textbook closed form of the model's distance, evaluated in mpmath at
    ``dps`` digits on the exact float64 inputs (mpmath reference)."""
    with mpmath.workdps(dps):
        K = mpmath.mpf(float(curvature))
        R2 = -1 / K
        R = mpmath.sqrt(R2)
        a = [mpmath.mpf(float(v)) for v in a]
        b = [mpmath.mpf(float(v)) for v in b]
        dot = lambda u, v: mpmath.fsum(p * q for p, q in zip(u, v))  # noqa: E731
        if model == "poincare":
            diff = [p - q for p, q in zip(a, b)]
            arg = 1 + 2 * R2 * dot(diff, diff) / ((R2 - dot(a, a)) * (R2 - dot(b, b)))
        elif model == "klein":
            arg = (R2 - dot(a, b)) / mpmath.sqrt((R2 - dot(a, a)) * (R2 - dot(b, b)))
        elif model == "hyperboloid":
            # the point is read through its spatial part, x0 recomputed
            # (the convention documented in src/hyperboloid.rs)
            sa, sb = a[1:], b[1:]
            a0 = mpmath.sqrt(R2 + dot(sa, sa))
            b0 = mpmath.sqrt(R2 + dot(sb, sb))
            arg = (a0 * b0 - dot(sa, sb)) / R2
        else:  # halfspace
            diff = [p - q for p, q in zip(a, b)]
            arg = 1 + dot(diff, diff) / (2 * a[-1] * b[-1])
        return R * mpmath.acosh(arg)


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
    R = radius_of(curvature)
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


# ---------------------------------------------------------------------- knn


def dup_points(rng, model, curvature, n, d):
    """Points with many exact duplicates (rows repeated at scattered positions)."""
    base = model_points(rng, max(n // 3, 6), d, model, curvature)
    pick = rng.integers(0, len(base), n)
    return base[pick]


@pytest.mark.parametrize("curvature", [-1.0, -4.0])
@pytest.mark.parametrize("model", MODELS)
def test_knn_self_matches_brute_force(model, curvature):
    rng = np.random.default_rng([23, MODELS.index(model)])
    x = dup_points(rng, model, curvature, 60, 3)
    D = gk.distance_matrix(x, model=model, curvature=curvature)
    for k in (1, 2, 5, 59):
        idx, dist = gk.knn(x, k, model=model, curvature=curvature)
        assert idx.dtype == np.int64 and dist.dtype == np.float64
        assert idx.shape == dist.shape == (60, k)
        ei, ed = brute_knn(D, k, exclude_self=True)
        assert_bitwise(idx, ei, f"indices k={k}")
        assert_bitwise(dist, ed, f"distances k={k}")
        assert not np.any(idx == np.arange(60)[:, None]), "self listed"
    # every point with a duplicate lists it (at distance 0) first
    idx, dist = gk.knn(x, 1, model=model, curvature=curvature)
    for i in range(60):
        dups = [j for j in range(60) if j != i and np.array_equal(x[j], x[i])]
        if dups:
            assert idx[i, 0] == min(dups) and dist[i, 0] == 0.0


@pytest.mark.parametrize("curvature", [-1.0, -0.3])
@pytest.mark.parametrize("model", MODELS)
def test_knn_other_set_matches_brute_force(model, curvature):
    rng = np.random.default_rng([29, MODELS.index(model)])
    x = dup_points(rng, model, curvature, 45, 16)
    y = np.concatenate([x[:10], dup_points(rng, model, curvature, 40, 16)])
    D = gk.distance_matrix(x, y, model=model, curvature=curvature)
    for k in (1, 3, 17, 50):
        idx, dist = gk.knn(x, k, y, model=model, curvature=curvature)
        ei, ed = brute_knn(D, k, exclude_self=False)
        assert_bitwise(idx, ei, f"indices k={k}")
        assert_bitwise(dist, ed, f"distances k={k}")
    # the first 10 rows of x are in y: each finds itself (or a lower duplicate) at 0
    idx, dist = gk.knn(x[:10], 1, y, model=model, curvature=curvature)
    assert np.all(dist[:, 0] == 0.0)
    assert np.all(idx[:, 0] <= np.arange(10))


def test_knn_ties_lower_index_first():
    # Equal distances by symmetry: +v, -v, and coordinate permutations seen
    # from the origin; plus exact duplicates. Lower index must come first.
    v = np.array([0.3, -0.1, 0.2])
    w = np.array([0.1, 0.2, -0.3])  # a permutation (with signs) of v: same norm
    y = np.array([w, [0.5, 0.0, 0.0], -v, v, -w, v, [0.0, 0.0, 0.0], -v])
    q = np.zeros((1, 3))
    D = gk.distance_matrix(q, y)
    assert D[0, 2] == D[0, 3] == D[0, 5] == D[0, 7]
    idx, dist = gk.knn(q, 8, y)
    ei, ed = brute_knn(D, 8, exclude_self=False)
    assert_bitwise(idx, ei)
    assert_bitwise(dist, ed)
    assert idx[0, 0] == 6  # the origin itself
    # ties among the copies of +-v come in index order
    pos = [list(idx[0]).index(j) for j in (2, 3, 5, 7)]
    assert pos == sorted(pos)
    # self search with duplicates: row 3 (== row 5) lists 5 at 0 and never 3
    i2, d2 = gk.knn(y, 2, None)
    assert i2[3, 0] == 5 and d2[3, 0] == 0.0 and 3 not in i2[3]
    assert i2[5, 0] == 3 and d2[5, 0] == 0.0


def test_knn_tie_of_rounded_distances_small_k():
    # Rows 0 and 2 are at distances from row 1 that differ by ~6e-17 (mpmath:
    # 1.94757805258253270..., 1.94757805258253264...), below one ulp, so the
    # reported distances are equal and (distance, index) puts row 0 first,
    # whatever k. Brute force: lexsort of the matrix.
    R = 1.0 / np.sqrt(0.3)
    x = np.array([[-0.2, -0.4, -0.4], [-0.2, -0.4, 0.0], [0.0, 0.0, -0.2]]) * R
    D = gk.distance_matrix(x, curvature=-0.3)
    assert D[1, 0] == D[1, 2]
    i1, d1 = gk.knn(x, 1, curvature=-0.3)
    i2, d2 = gk.knn(x, 2, curvature=-0.3)
    ei, ed = brute_knn(D, 1, exclude_self=True)
    assert_bitwise(i2[:, :1], i1, "knn(k=1) is not the prefix of knn(k=2)")
    assert_bitwise(i1, ei, "knn(k=1) vs (distance, index) brute force")
    assert_bitwise(d1, ed)
    # the same tie through an explicit y (rows 0 and 2 only)
    j1, _ = gk.knn(x[1:2], 1, x[[0, 2]], curvature=-0.3)
    assert j1[0, 0] == 0


@pytest.mark.parametrize("d", [5, 33])
def test_knn_permutation_ties(d):
    # candidates are coordinate permutations of one vector, the query is a
    # constant vector: all distances equal mathematically; whatever rounding
    # does, knn must be the (distance, index) lexsort of the matrix
    rng = np.random.default_rng(d)
    v = rng.standard_normal(d)
    v *= np.tanh(5.0) / np.linalg.norm(v)
    y = np.array([rng.permutation(v) for _ in range(150)])
    q = np.full((3, d), [[0.0], [0.05], [-0.1]])
    D = gk.distance_matrix(q, y)
    idx, dist = gk.knn(q, 150, y)
    ei, ed = brute_knn(D, 150, exclude_self=False)
    assert_bitwise(idx, ei)
    assert_bitwise(dist, ed)


def test_knn_k_out_of_range():
    rng = np.random.default_rng(31)
    x = model_points(rng, 8, 2, "poincare", -1.0)
    y = model_points(rng, 5, 2, "poincare", -1.0)
    gk.knn(x, 7)  # n - 1 candidates: fine
    gk.knn(x, 5, y)
    for k in (8, 9, 100):
        with pytest.raises(ValueError, match="k"):
            gk.knn(x, k)
    for k in (6, 50):
        with pytest.raises(ValueError, match="k"):
            gk.knn(x, k, y)
    for k in (0, -1):
        with pytest.raises(ValueError, match="k"):
            gk.knn(x, k)
        with pytest.raises(ValueError, match="k"):
            gk.knn(x, k, y)
    with pytest.raises(ValueError):
        gk.knn(x[:1], 1)  # a single point has no other candidate
    with pytest.raises(ValueError):
        gk.knn(x, 1, y[:0])
    # common practice (NumPy/SciPy): a count must be an integer, not a bool or float
    for k in (True, np.bool_(True), 2.0, "3"):
        with pytest.raises(TypeError, match="k must be an integer"):
            gk.knn(x, k)
    assert gk.knn(x, np.int32(2))[0].shape == (8, 2)


# --------------------------------------------------------- radius neighbours


@pytest.mark.parametrize("model", MODELS)
@pytest.mark.parametrize("use_y", [False, True])
def test_radius_matches_brute_force(model, use_y):
    rng = np.random.default_rng([37, MODELS.index(model), use_y])
    K = -0.3
    x = dup_points(rng, model, K, 50, 3)
    y = dup_points(rng, model, K, 35, 3) if use_y else None
    D = gk.distance_matrix(x, y, model=model, curvature=K)
    excl = not use_y
    offdiag = D[~np.eye(*D.shape, dtype=bool)] if excl else D.ravel()
    # r = 0 (duplicates only), matrix entries themselves (inclusive edge), quantiles
    radii = [0.0, float(offdiag[7]), float(offdiag[123]), float(np.median(offdiag)), 1e300]
    for r in radii:
        got = gk.radius_neighbors(x, r, y, model=model, curvature=K)
        exp = brute_radius(D, r, excl)
        for g, e, name in zip(got, exp, ("indptr", "indices", "distances")):
            assert_bitwise(g, e, f"{name}, r={r!r}")
    # the inclusive edge is actually hit
    r = float(offdiag[7])
    indptr, indices, dists = gk.radius_neighbors(x, r, y, model=model, curvature=K)
    assert np.any(dists == r)
    assert np.all(dists <= r)


def test_radius_bad_r():
    x = np.array([[0.1, 0.2], [0.0, -0.3], [0.5, 0.5]])
    for r in (-1.0, -1e-300, float("nan")):
        with pytest.raises(ValueError, match="r"):
            gk.radius_neighbors(x, r)
        with pytest.raises(ValueError, match="r"):
            gk.radius_neighbors(x, r, x)


def test_radius_infinite_r_agrees_with_index():
    # NeighborIndex.query_radius documents "r = inf lists every point"; the
    # brute-force function must agree with it bit for bit (also at r = inf).
    x = np.array([[0.1, 0.2], [0.0, -0.3], [0.5, 0.5], [0.1, 0.2]])
    want = gk.NeighborIndex(x).query_radius(r=np.inf)
    got = gk.radius_neighbors(x, np.inf)
    for g, e in zip(got, want):
        assert_bitwise(g, e)
    assert np.array_equal(got[0], [0, 3, 6, 9, 12])


# ----------------------------------------- property test: ties everywhere


GRID = [-0.4, -0.2, 0.0, 0.2, 0.4]


@st.composite
def grid_sets(draw):
    """Small sets on a coarse grid: many exact duplicates and symmetric ties."""
    model = draw(st.sampled_from(MODELS))
    K = draw(st.sampled_from(CURVATURES))
    d = draw(st.integers(1, 4))
    n = draw(st.integers(0, 18))
    use_y = draw(st.booleans())
    m = draw(st.integers(0, 18)) if use_y else n
    row = st.lists(st.sampled_from(GRID), min_size=d, max_size=d)
    R = radius_of(K)
    x = np.array(draw(st.lists(row, min_size=n, max_size=n)), dtype=np.float64).reshape(n, d) * R
    y = np.array(draw(st.lists(row, min_size=m, max_size=m)), dtype=np.float64).reshape(m, d) * R
    x = to_model(x, model, K).reshape(n, width(model, d))
    y = to_model(y, model, K).reshape(m, width(model, d)) if use_y else None
    return model, K, x, y


@settings(max_examples=HYP_EXAMPLES, deadline=None)
@given(grid_sets(), st.data())
def test_knn_and_radius_property(case, data):
    model, K, x, y = case
    n = len(x)
    D = gk.distance_matrix(x, y, model=model, curvature=K)
    m = D.shape[1]
    excl = y is None
    avail = m - 1 if excl else m
    if avail < 1:
        if n > 0:
            with pytest.raises(ValueError):
                gk.knn(x, 1, y, model=model, curvature=K)
    else:
        k = data.draw(st.integers(1, avail), label="k")
        idx, dist = gk.knn(x, k, y, model=model, curvature=K)
        ei, ed = brute_knn(D, k, excl)
        assert_bitwise(idx, ei, "knn indices")
        assert_bitwise(dist, ed, "knn distances")
        with pytest.raises(ValueError):
            gk.knn(x, avail + 1, y, model=model, curvature=K)
    vals = D.ravel()
    r = data.draw(
        st.one_of(st.sampled_from(vals.tolist()), st.floats(0.0, 10.0))
        if vals.size else st.floats(0.0, 10.0),
        label="r",
    )
    got = gk.radius_neighbors(x, r, y, model=model, curvature=K)
    exp = brute_radius(D, r, excl)
    for g, e, name in zip(got, exp, ("indptr", "indices", "distances")):
        assert_bitwise(g, e, name)


# ------------------------------------------------- NeighborIndex agreement


@pytest.mark.parametrize("model", MODELS)
def test_neighbor_index_agrees_bitwise(model):
    rng = np.random.default_rng([41, MODELS.index(model)])
    K = -4.0
    pts = dup_points(rng, model, K, 300, 2)
    q = dup_points(rng, model, K, 40, 2)
    index = gk.NeighborIndex(pts, model, curvature=K)
    for k in (1, 10):
        a = index.query(q, k)
        b = gk.knn(q, k, pts, model=model, curvature=K)
        assert_bitwise(a[0], b[0], f"query indices k={k}")
        assert_bitwise(a[1], b[1], f"query distances k={k}")
        a = index.query(None, k)
        b = gk.knn(pts, k, model=model, curvature=K)
        assert_bitwise(a[0], b[0], f"query indices k={k}")
        assert_bitwise(a[1], b[1], f"query distances k={k}")
    r = float(np.median(gk.distance_matrix(q, pts, model=model, curvature=K))) / 4
    for a, b in zip(index.query_radius(q, r), gk.radius_neighbors(q, r, pts, model=model, curvature=K)):
        assert_bitwise(a, b)
    for a, b in zip(index.query_radius(None, r), gk.radius_neighbors(pts, r, model=model, curvature=K)):
        assert_bitwise(a, b)


# --------------------------------------------------- dtypes and memory layout


def test_float32_inputs():
    rng = np.random.default_rng(43)
    x64 = model_points(rng, 33, 5, "poincare", -1.0)
    y64 = model_points(rng, 21, 5, "poincare", -1.0)
    x32, y32 = x64.astype(np.float32), y64.astype(np.float32)
    xu, yu = x32.astype(np.float64), y32.astype(np.float64)  # the float32 values, exactly
    D32 = gk.distance_matrix(x32, y32)
    assert D32.dtype == np.float32
    # computed in float64, then rounded once to float32
    assert_bitwise(D32, gk.distance_matrix(xu, yu).astype(np.float32))
    assert gk.distance_matrix(x32).dtype == np.float32
    mixed = gk.distance_matrix(x32, y64)
    assert mixed.dtype == np.float64
    assert_bitwise(mixed, gk.distance_matrix(xu, y64))
    idx, dist = gk.knn(x32, 4, y32)
    assert dist.dtype == np.float32 and idx.dtype == np.int64  # the SPEC dtype rule
    ei, ed = gk.knn(xu, 4, yu)
    assert_bitwise(idx, ei)
    assert_bitwise(dist, ed.astype(np.float32))
    idx, dist = gk.knn(x32, 4)
    ei, ed = gk.knn(xu, 4)
    assert_bitwise(idx, ei)
    assert_bitwise(dist, ed.astype(np.float32))
    got = gk.radius_neighbors(x32, 1.0, y32)
    exp = gk.radius_neighbors(xu, 1.0, yu)
    assert got[2].dtype == np.float32
    for g, e in zip(got, exp):
        assert_bitwise(g, e.astype(g.dtype))


def layouts(a):
    """The same logical array in several memory layouts."""
    n, d = a.shape
    big = np.zeros((2 * n + 1, 3 * d + 2))
    big[::2, ::3][:n, :d] = a
    strided = big[::2, ::3][:n, :d]
    rev_store = np.ascontiguousarray(a[::-1, ::-1])
    reversed_view = rev_store[::-1, ::-1]
    ro = a.copy()
    ro.flags.writeable = False
    out = {"fortran": np.asfortranarray(a), "strided": strided, "reversed": reversed_view, "readonly": ro}
    for v in out.values():
        assert np.array_equal(v, a)
    assert not strided.flags.c_contiguous and reversed_view.strides[0] < 0
    return out


@pytest.mark.parametrize("model", MODELS)
def test_layouts_give_identical_results(model):
    rng = np.random.default_rng([47, MODELS.index(model)])
    K = -1.0
    x = dup_points(rng, model, K, 30, 4)
    y = dup_points(rng, model, K, 26, 4)
    kw = dict(model=model, curvature=K)
    ref = (
        gk.distance_matrix(x, y, **kw),
        gk.distance_matrix(x, **kw),
        gk.condensed_distances(x, **kw),
        *gk.knn(x, 5, y, **kw),
        *gk.knn(x, 5, **kw),
        *gk.radius_neighbors(x, 2.0, y, **kw),
        *gk.radius_neighbors(x, 2.0, **kw),
    )
    lx, ly = layouts(x), layouts(y)
    for name in lx:
        a, b = lx[name], ly[name]
        got = (
            gk.distance_matrix(a, b, **kw),
            gk.distance_matrix(a, **kw),
            gk.condensed_distances(a, **kw),
            *gk.knn(a, 5, b, **kw),
            *gk.knn(a, 5, **kw),
            *gk.radius_neighbors(a, 2.0, b, **kw),
            *gk.radius_neighbors(a, 2.0, **kw),
        )
        for g, e in zip(got, ref):
            assert_bitwise(g, e, name)
    # permuting the rows of x permutes the rows of the matrix, bit for bit
    perm = rng.permutation(len(x))
    assert_bitwise(gk.distance_matrix(x[perm], y, **kw), ref[0][perm])
    assert_bitwise(gk.distance_matrix(x, y[::-1], **kw), ref[0][:, ::-1])


# ---------------------------------------------------------------- out=


def test_out_filled_and_returned():
    rng = np.random.default_rng(53)
    x = model_points(rng, 23, 3, "poincare", -1.0)
    y = model_points(rng, 17, 3, "poincare", -1.0)
    expected = gk.distance_matrix(x, y)
    out = np.full((23, 17), np.nan)
    res = gk.distance_matrix(x, y, out=out)
    assert res is out
    assert_bitwise(out, expected)
    out2 = np.full((23, 23), np.nan)
    assert gk.distance_matrix(x, out=out2) is out2
    assert_bitwise(out2, gk.distance_matrix(x))
    h = gk.convert(x, "poincare", "halfspace")
    out3 = np.empty((23, 23))
    assert gk.distance_matrix(h, model="halfspace", out=out3) is out3
    assert_bitwise(out3, gk.distance_matrix(h, model="halfspace"))


def test_out_memmap(tmp_path):
    rng = np.random.default_rng(59)
    x = model_points(rng, 40, 16, "poincare", -1.0)
    y = model_points(rng, 31, 16, "poincare", -1.0)
    path = tmp_path / "dist.f64"
    mm = np.memmap(path, dtype=np.float64, mode="w+", shape=(40, 31))
    res = gk.distance_matrix(x, y, out=mm)
    assert res is mm
    mm.flush()
    del res, mm
    back = np.fromfile(path, dtype=np.float64).reshape(40, 31)
    assert_bitwise(back, gk.distance_matrix(x, y))


def test_out_rejected():
    rng = np.random.default_rng(61)
    x = model_points(rng, 6, 2, "poincare", -1.0)
    y = model_points(rng, 4, 2, "poincare", -1.0)
    ro = np.empty((6, 4))
    ro.flags.writeable = False
    bad = {
        "shape": np.empty((4, 6)),
        "shape-1d": np.empty(24),
        "shape-3d": np.empty((6, 4, 1)),
        "dtype-int": np.empty((6, 4), dtype=np.int64),
        "dtype-complex": np.empty((6, 4), dtype=np.complex128),
        "dtype-f16": np.empty((6, 4), dtype=np.float16),
        "byteswapped": np.empty((6, 4), dtype=">f8" if sys.byteorder == "little" else "<f8"),
        "non-contiguous": np.empty((6, 8))[:, ::2],
        "fortran": np.empty((6, 4), order="F"),
        "read-only": ro,
        "list": [[0.0] * 4] * 6,
    }
    for name, out in bad.items():
        with pytest.raises((ValueError, TypeError), match="out"):
            gk.distance_matrix(x, y, out=out)


# ------------------------------------------------------------- bad input


BAD_ROW = 3


def bad_sets(model):
    """(name, array with one bad row at BAD_ROW) for a model."""
    rng = np.random.default_rng(67)
    good = model_points(rng, 6, 3, model, -1.0, rmax=3.0, extras=False)
    cases = []
    a = good.copy()
    a[BAD_ROW, 1] = np.nan
    cases.append(("nan", a))
    a = good.copy()
    a[BAD_ROW, 0] = np.inf
    cases.append(("inf", a))
    a = good.copy()
    if model in ("poincare", "klein"):
        a[BAD_ROW] = [0.8, 0.8, 0.0]
        cases.append(("outside", a))
        b = good.copy()
        b[BAD_ROW] = [1.0, 0.0, 0.0]
        cases.append(("on-sphere", b))
    elif model == "hyperboloid":
        a[BAD_ROW, 0] *= 1.01
        cases.append(("off-sheet", a))
        b = good.copy()
        b[BAD_ROW, 0] = -b[BAD_ROW, 0]
        cases.append(("lower-sheet", b))
    else:
        a[BAD_ROW, -1] = 0.0
        cases.append(("y=0", a))
        b = good.copy()
        b[BAD_ROW, -1] = -0.5
        cases.append(("y<0", b))
    return good, cases


def row_msg(arg):
    return rf"(?s)\b{arg}\b.*\brow {BAD_ROW}\b"


@pytest.mark.parametrize("model", MODELS)
def test_bad_rows_named(model):
    good, cases = bad_sets(model)
    kw = dict(model=model)
    for name, bad in cases:
        calls_x = [
            lambda: gk.distance_matrix(bad, **kw),
            lambda: gk.distance_matrix(bad, good, **kw),
            lambda: gk.condensed_distances(bad, **kw),
            lambda: gk.knn(bad, 1, **kw),
            lambda: gk.knn(bad, 1, good, **kw),
            lambda: gk.radius_neighbors(bad, 1.0, **kw),
            lambda: gk.radius_neighbors(bad, 1.0, good, **kw),
        ]
        for f in calls_x:
            with pytest.raises(ValueError, match=row_msg("x")):
                f()
        calls_y = [
            lambda: gk.distance_matrix(good, bad, **kw),
            lambda: gk.knn(good, 1, bad, **kw),
            lambda: gk.radius_neighbors(good, 1.0, bad, **kw),
        ]
        for f in calls_y:
            with pytest.raises(ValueError, match=row_msg("y")):
                f()


def test_bad_shapes_and_arguments():
    x = np.array([[0.1, 0.2], [0.0, -0.3], [0.5, 0.5]])
    y3 = np.array([[0.1, 0.2, 0.0]])
    for f in (
        lambda: gk.distance_matrix(x, y3),
        lambda: gk.knn(x, 1, y3),
        lambda: gk.radius_neighbors(x, 1.0, y3),
    ):
        with pytest.raises(ValueError, match=r"(?s)\bx\b.*\by\b|\by\b.*\bx\b"):
            f()
    for f in (
        lambda: gk.distance_matrix(x[0]),
        lambda: gk.condensed_distances(x[0]),
        lambda: gk.knn(x[0], 1),
        lambda: gk.radius_neighbors(x[0], 1.0),
        lambda: gk.distance_matrix(x[None]),
    ):
        with pytest.raises(ValueError, match=r"\bx\b"):
            f()
    with pytest.raises(ValueError, match=r"\by\b"):
        gk.distance_matrix(x, x[0])
    for f in (
        lambda: gk.distance_matrix(x, model="lorentz"),
        lambda: gk.condensed_distances(x, model="Poincare"),
        lambda: gk.knn(x, 1, model="euclidean"),
        lambda: gk.radius_neighbors(x, 1.0, model=""),
    ):
        with pytest.raises(ValueError, match="model"):
            f()
    for K in (0.0, 1.0, float("nan")):
        with pytest.raises(ValueError, match="curvature"):
            gk.distance_matrix(x, curvature=K)
        with pytest.raises(ValueError, match="curvature"):
            gk.knn(x, 1, curvature=K)


def test_empty_inputs():
    y = np.array([[0.1, 0.2], [0.0, -0.3], [0.5, 0.5]])
    e = np.empty((0, 2))
    D = gk.distance_matrix(e, y)
    assert D.shape == (0, 3) and D.dtype == np.float64
    assert gk.distance_matrix(e).shape == (0, 0)
    assert gk.distance_matrix(y, e).shape == (3, 0)
    assert gk.distance_matrix(e.astype(np.float32), y.astype(np.float32)).dtype == np.float32
    out = np.empty((0, 3))
    assert gk.distance_matrix(e, y, out=out) is out
    assert gk.condensed_distances(e).shape == (0,)
    idx, dist = gk.knn(e, 2, y)
    assert idx.shape == (0, 2) and dist.shape == (0, 2) and idx.dtype == np.int64
    indptr, indices, dists = gk.radius_neighbors(e, 1.0, y)
    assert indptr.tolist() == [0] and indices.shape == (0,) and dists.shape == (0,)
    h = gk.convert(y, "poincare", "hyperboloid")
    assert gk.distance_matrix(np.empty((0, 3)), h, model="hyperboloid").shape == (0, 3)


# ------------------------------------------------------------ thread count


THREAD_SCRIPT = textwrap.dedent(
    """
    import hashlib
    import numpy as np
    import gyrokit as gk

    h = hashlib.sha256()
    def feed(*arrays):
        for a in arrays:
            a = np.ascontiguousarray(a)
            h.update(str(a.dtype).encode() + str(a.shape).encode())
            h.update(a.tobytes())

    rng = np.random.default_rng(2024)
    for model in ("poincare", "klein", "hyperboloid", "halfspace"):
        for d in (2, 16):
            v = rng.standard_normal((1500, d))
            v /= np.linalg.norm(v, axis=1, keepdims=True)
            p = np.tanh(rng.uniform(0, 8, 1500) / 2)[:, None] * v
            p[7] = p[3]
            x = p if model == "poincare" else gk.convert(p, "poincare", model)
            a, b = x[:700], x[700:1300]
            feed(gk.distance_matrix(a, b, model=model))
            feed(gk.distance_matrix(a, model=model))
            feed(gk.condensed_distances(b, model=model))
            feed(*gk.knn(a, 9, model=model))
            feed(*gk.knn(a, 9, b, model=model))
            feed(*gk.radius_neighbors(a, 1.5, model=model))
            feed(*gk.radius_neighbors(a, 1.5, b, model=model))
            ix = gk.NeighborIndex(x, model)
            feed(*ix.query(None, 5))
    print(h.hexdigest())
    """
)


def run_hash(env_extra):
    env = {k: v for k, v in os.environ.items() if k != "RAYON_NUM_THREADS"}
    env.update(env_extra)
    res = subprocess.run(
        [sys.executable, "-c", THREAD_SCRIPT], env=env, capture_output=True, text=True, timeout=300
    )
    assert res.returncode == 0, res.stderr
    return res.stdout.strip()


def test_thread_count_does_not_change_results():
    default = run_hash({})
    one = run_hash({"RAYON_NUM_THREADS": "1"})
    three = run_hash({"RAYON_NUM_THREADS": "3"})
    assert len(default) == 64
    assert one == default, "RAYON_NUM_THREADS=1 differs from the default pool"
    assert three == default, "RAYON_NUM_THREADS=3 differs from the default pool"
