"""k nearest neighbours and radius queries (``gk.knn``,
``gk.radius_neighbors``) for the four models: brute-force sorting /
thresholding of the distance matrix itself (same kernel, so bitwise equality
is required), ties, a hypothesis property test with ties everywhere, and
agreement with ``NeighborIndex``."""

from __future__ import annotations

from hypothesis import given, strategies as st
import numpy as np
import pytest

import gyrokit as gk
from conftest import CURVATURES, MODELS, radius, to_model, width
from neighbors_support import assert_bitwise, brute_knn, brute_radius, dup_points, model_points


# ---------------------------------------------------------------------- knn


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
    R = radius(K)
    x = np.array(draw(st.lists(row, min_size=n, max_size=n)), dtype=np.float64).reshape(n, d) * R
    y = np.array(draw(st.lists(row, min_size=m, max_size=m)), dtype=np.float64).reshape(m, d) * R
    x = to_model(x, model, K).reshape(n, width(model, d))
    y = to_model(y, model, K).reshape(m, width(model, d)) if use_y else None
    return model, K, x, y


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
