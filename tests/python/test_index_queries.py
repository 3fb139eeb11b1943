"""NeighborIndex queries: exact agreement with brute force (knn and radius
queries), ties, and distances against mpmath.

Brute force here is computed over all pairs (common practice for checking a
neighbour index): once from the index's own pair distances
(``_pair_distances``, the values it must reproduce bit for bit) and once from
the public element-wise ``gk.<model>.distance`` functions (a different, also
exact, transcendental: equal to ~1e-14 relative).
"""

from __future__ import annotations

import zlib

import numpy as np
import pytest

import gyrokit as gk
from gyrokit._index import NeighborIndex
from conftest import DISTANCE, MODELS, mp_distance, uniform_points


def lexsort_rows(D):
    """Per row: column order by (distance, index); NaN would sort last."""
    cols = np.broadcast_to(np.arange(D.shape[1]), D.shape)
    return np.lexsort((cols, D), axis=1)


def brute_knn(D, k, exclude_self=False):
    """Brute force over all pairs (common practice): the k smallest of each
    row of the distance matrix by (distance, index)."""
    D = np.array(D, dtype=np.float64, copy=True)
    if exclude_self:
        np.fill_diagonal(D, np.inf)
    order = lexsort_rows(D)[:, :k]
    return order, np.take_along_axis(D, order, axis=1)


def elementwise_matrix(model, x, y, curvature):
    """All pair distances from the public element-wise distance function."""
    return DISTANCE[model](y[:, None, :], x[None, :, :], curvature=curvature)


# ------------------------------------------------------------------ exact agreement


@pytest.mark.parametrize("model", MODELS)
@pytest.mark.parametrize("curvature", [-1.0, -0.2, -5.0])
def test_knn_matches_brute_force(model, curvature):
    rng = np.random.default_rng(zlib.crc32(f"{model} {curvature}".encode()))
    d = 3 if model in ("klein", "halfspace") else 2
    x = uniform_points(rng, 400, d, model, 8.0, curvature=curvature)
    y = uniform_points(rng, 70, d, model, 8.0, curvature=curvature)
    idx = NeighborIndex(x, model, curvature=curvature)
    D_self = idx._pair_distances()
    D_y = idx._pair_distances(y)
    # The index's pair distances against the public element-wise function
    # (a different exact transcendental): 1e-14 relative.
    for D, q in ((D_self, x), (D_y, y)):
        E = elementwise_matrix(model, x, q, curvature)
        assert np.all(np.abs(D - E) <= 1e-14 * np.abs(E) + 1e-300)
    for k in (1, 6, 25):
        for q, D, self_q in ((None, D_self, True), (y, D_y, False)):
            got_i, got_d = idx.query(q, k)
            want_i, want_d = brute_knn(D, k, exclude_self=self_q)
            assert got_i.dtype == np.int64 and got_d.dtype == np.float64
            assert got_i.shape == got_d.shape == (D.shape[0], k)
            np.testing.assert_array_equal(got_i, want_i)
            assert np.array_equal(got_d.view(np.int64), want_d.view(np.int64))  # bit for bit
            # Against the element-wise brute force: same order wherever no
            # near-tie can swap two neighbours.
            E = elementwise_matrix(model, x, x if q is None else q, curvature)
            ei, ed = brute_knn(E, k + 1, exclude_self=self_q)
            gaps = np.diff(ed, axis=1) > 1e-12 * ed[:, 1:]
            clear = gaps.all(axis=1)
            assert clear.mean() > 0.8
            np.testing.assert_array_equal(got_i[clear], ei[clear, :k])
            np.testing.assert_allclose(got_d, np.take_along_axis(E, got_i, axis=1), rtol=1e-14, atol=0)


def test_boundary_crowded_data_with_many_points():
    # The performance case in miniature: radii uniform in [0, 8], most points
    # within 1e-3 of the unit circle; rows checked against brute force.
    rng = np.random.default_rng(11)
    x = uniform_points(rng, 30_000, 2, "poincare", 8.0)
    idx = NeighborIndex(x)
    got_i, got_d = idx.query(k=10)
    rows = rng.choice(len(x), 300, replace=False)
    D = idx._pair_distances(x[rows])
    D[np.arange(len(rows)), rows] = np.inf  # the self-match is excluded
    want_i, want_d = brute_knn(D, 10)
    np.testing.assert_array_equal(got_i[rows], want_i)
    assert np.array_equal(got_d[rows], want_d)


@pytest.mark.parametrize("model", MODELS)
def test_agrees_with_the_brute_force_knn_and_radius_functions(model):
    # gk.knn / gk.radius_neighbors: the library's brute force over all pairs
    # (tiled kernels computing the same pair distances); results must be
    # identical, conventions included (self-matches excluded for y=None).
    if not (hasattr(gk, "knn") and hasattr(gk, "radius_neighbors")):
        pytest.skip("gk.knn / gk.radius_neighbors not available")
    rng = np.random.default_rng(17)
    x = uniform_points(rng, 1500, 2, model, 8.0, curvature=-1.5)
    x = np.vstack([x, x[:200]])  # exact duplicates: ties at distance 0
    y = uniform_points(rng, 80, 2, model, 8.0, curvature=-1.5)
    idx = NeighborIndex(x, model, curvature=-1.5)
    for q in (None, y):
        got = idx.query(q, 12)
        want = gk.knn(x if q is None else q, 12, None if q is None else x, model=model, curvature=-1.5)
        assert np.array_equal(got[0], want[0]) and np.array_equal(got[1], want[1])
        got = idx.query_radius(q, 0.2)
        want = gk.radius_neighbors(x if q is None else q, 0.2, None if q is None else x, model=model, curvature=-1.5)
        assert all(np.array_equal(u, v) for u, v in zip(got, want))


@pytest.mark.parametrize("leaf_size", [1, 2, 7, 1000])
def test_leaf_size_does_not_change_results(leaf_size):
    rng = np.random.default_rng(5)
    x = uniform_points(rng, 500, 2, "poincare", 8.0)
    ref = NeighborIndex(x).query(k=9)
    got = NeighborIndex(x, leaf_size=leaf_size).query(k=9)
    np.testing.assert_array_equal(got[0], ref[0])
    np.testing.assert_array_equal(got[1], ref[1])


def test_all_candidates():
    rng = np.random.default_rng(6)
    x = uniform_points(rng, 60, 2, "klein", 8.0)
    idx = NeighborIndex(x, "klein")
    i, dd = idx.query(None, 59)
    want_i, want_d = brute_knn(idx._pair_distances(), 59, exclude_self=True)
    np.testing.assert_array_equal(i, want_i)
    i, dd = idx.query(x, 60)
    want_i, _ = brute_knn(idx._pair_distances(x), 60)
    np.testing.assert_array_equal(i, want_i)
    assert np.all(i[:, 0] == np.arange(60))  # a point's nearest is itself when queried as y


@pytest.mark.parametrize("model", MODELS)
def test_radius_matches_brute_force(model):
    rng = np.random.default_rng(21)
    curvature = -0.5
    x = uniform_points(rng, 500, 2, model, 6.0, curvature=curvature)
    y = uniform_points(rng, 50, 2, model, 6.0, curvature=curvature)
    idx = NeighborIndex(x, model, curvature=curvature)
    for q, self_q in ((None, True), (y, False)):
        D = idx._pair_distances(q)
        if self_q:
            np.fill_diagonal(D, np.nan)  # never <= r: the self-match is excluded
        for r in (0.0, float(np.nanquantile(D, 0.01)), float(np.nanquantile(D, 0.2)), np.inf):
            indptr, ind, dist = idx.query_radius(q, r)
            assert indptr.dtype == ind.dtype == np.int64 and dist.dtype == np.float64
            assert indptr.shape == (D.shape[0] + 1,) and indptr[0] == 0
            order = lexsort_rows(D)
            for i in range(D.shape[0]):
                row = order[i][D[i, order[i]] <= r]
                np.testing.assert_array_equal(ind[indptr[i]:indptr[i + 1]], row)
                assert np.array_equal(dist[indptr[i]:indptr[i + 1]], D[i, row])
    # r given positionally or by keyword
    a = idx.query_radius(y, 0.3)
    b = idx.query_radius(y=y, r=0.3)
    for u, v in zip(a, b):
        np.testing.assert_array_equal(u, v)


# ------------------------------------------------------------------ ties


def test_ties_go_to_the_lower_index():
    # 4 distinct points, each repeated 25 times (interleaved): every point
    # has 24 duplicates at distance exactly 0.
    base = np.array([[0.1, 0.2], [-0.5, 0.3], [0.9, -0.1], [0.0, -0.7]])
    x = np.tile(base, (25, 1))
    idx = NeighborIndex(x, leaf_size=3)
    i, dd = idx.query(k=30)
    for row in (0, 1, 41, 99):
        same = [j for j in range(row % 4, 100, 4) if j != row]
        np.testing.assert_array_equal(i[row, :24], same)
        assert np.all(dd[row, :24] == 0.0) and np.all(dd[row, 24:] > 0.0)
        # after the duplicates: the next base point's copies, lowest index first
        nxt = i[row, 24:30]
        assert np.all(np.diff(nxt) > 0) and len(set(nxt % 4)) == 1
    want_i, _ = brute_knn(idx._pair_distances(), 30, exclude_self=True)
    np.testing.assert_array_equal(i, want_i)
    # Queried with y, a point's duplicates (itself included) come in index order.
    i, dd = idx.query(base, 25)
    for b in range(4):
        np.testing.assert_array_equal(i[b], np.arange(b, 100, 4))
    indptr, ind, dist = idx.query_radius(base[:1], 0.0)
    np.testing.assert_array_equal(ind, np.arange(0, 100, 4))


def test_symmetric_configuration_ties():
    # Points on a circle about the origin at equal angles: the origin is
    # equidistant from all of them up to rounding; the index must order them
    # exactly as brute force does.
    t = 2 * np.pi * np.arange(64) / 64
    x = 0.7 * np.c_[np.cos(t), np.sin(t)]
    idx = NeighborIndex(np.vstack([x, x]))
    i, dd = idx.query(np.zeros((1, 2)), 128)
    want_i, want_d = brute_knn(idx._pair_distances(np.zeros((1, 2))), 128)
    np.testing.assert_array_equal(i, want_i)
    assert np.array_equal(dd, want_d)


# ------------------------------------------------------------------ references


@pytest.mark.parametrize("model", MODELS)
def test_distances_against_mpmath(model):
    # mpmath, 50 significant digits, textbook formulas (see mp_distance).
    rng = np.random.default_rng(31)
    curvature = -2.0
    x = uniform_points(rng, 300, 2, model, 12.0, curvature=curvature)
    y = uniform_points(rng, 20, 2, model, 12.0, curvature=curvature)
    idx = NeighborIndex(x, model, curvature=curvature)
    i, dd = idx.query(y, 3)
    worst = 0.0
    for q in range(len(y)):
        for t in range(3):
            ref = mp_distance(model, y[q], x[i[q, t]], curvature)
            worst = max(worst, float(abs(dd[q, t] - ref) / ref))
    assert worst <= 1e-12


def test_close_pairs_against_mpmath():
    # Pairs 1e-12 apart near the boundary: the case where arccosh(1 + delta)
    # in float64 returns garbage; 50-digit mpmath reference.
    rng = np.random.default_rng(41)
    base = uniform_points(rng, 50, 2, "poincare", 20.0)
    x = np.vstack([base, base * (1 - 1e-12)])
    idx = NeighborIndex(x)
    i, dd = idx.query(k=1)
    for row in range(0, 100, 7):
        ref = mp_distance("poincare", x[row], x[i[row, 0]], -1.0)
        assert abs(dd[row, 0] - ref) <= 1e-12 * ref
