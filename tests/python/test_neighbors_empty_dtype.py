"""Empty query sets and the result dtype of the neighbour functions and of
NeighborIndex (both of its methods).

References: brute force over all pairs from ``gk.distance_matrix`` on the
same (float32 values widened exactly to float64) points, ranked by numpy's
lexsort on (distance, index) (common practice for checking neighbour
search); the dtype rule is the SPEC's ("Return float64 unless every array
input is float32, then float32"), and a float32 distance is the float64 one
rounded once (the rule ``gk.distance_matrix`` already follows).
"""

from __future__ import annotations

import pickle

import numpy as np
import pytest

import gyrokit as gk
from gyrokit._index import NeighborIndex

MODELS = ("poincare", "klein", "hyperboloid", "halfspace")
BUILT = ("tree", "brute")


def points(rng, n, d, model, curvature=-1.0, rmax=6.0):
    """Points at hyperbolic distance uniform in [0, rmax R] from the origin,
    in ``model`` (converted from the Poincaré ball)."""
    R = 1.0 / np.sqrt(-curvature)
    v = rng.standard_normal((n, d))
    v /= np.linalg.norm(v, axis=1, keepdims=True)
    p = R * np.tanh(rng.uniform(0.0, rmax, n) / 2)[:, None] * v
    return p if model == "poincare" else gk.convert(p, "poincare", model, curvature=curvature)


def width(model, d):
    return d + 1 if model == "hyperboloid" else d


def brute(D, k, exclude_self=False):
    """The k smallest of each row of D by (distance, index) (common practice)."""
    D = np.array(D, dtype=np.float64, copy=True)
    if exclude_self:
        np.fill_diagonal(D, np.inf)
    cols = np.broadcast_to(np.arange(D.shape[1]), D.shape)
    order = np.lexsort((cols, D), axis=1)[:, :k]
    return order, np.take_along_axis(D, order, axis=1)


def same_bits(a, b):
    return a.dtype == b.dtype and a.shape == b.shape and np.array_equal(a.view(np.uint8), b.view(np.uint8))


# ------------------------------------------------------------ empty query sets


@pytest.mark.parametrize("model", MODELS)
def test_knn_empty_query_set(model):
    rng = np.random.default_rng(1)
    w = width(model, 3)
    y = points(rng, 6, 3, model)
    for dt in (np.float64, np.float32):
        empty = np.zeros((0, w), dtype=dt)
        i, d = gk.knn(empty, 4, y.astype(dt), model=model)
        assert i.shape == d.shape == (0, 4)
        assert i.dtype == np.int64 and d.dtype == dt
        # y=None: the candidate set is empty too, but so is the query set,
        # so no row lacks neighbours: (0, k) for any k >= 1.
        i, d = gk.knn(empty, 3, model=model)
        assert i.shape == d.shape == (0, 3) and i.dtype == np.int64 and d.dtype == dt
    # k is still checked against the candidates when they are given
    with pytest.raises(ValueError, match="k"):
        gk.knn(np.zeros((0, w)), 7, y, model=model)
    with pytest.raises(ValueError, match="k"):
        gk.knn(np.zeros((0, w)), 1, y[:0], model=model)
    for k in (0, -2):
        with pytest.raises(ValueError, match="k"):
            gk.knn(np.zeros((0, w)), k, model=model)
    # the shape of an empty input is still checked
    with pytest.raises(ValueError, match="x"):
        gk.knn(np.zeros((0,)), 1, model=model)


@pytest.mark.parametrize("model", MODELS)
def test_radius_neighbors_empty_query_set(model):
    rng = np.random.default_rng(2)
    w = width(model, 2)
    y = points(rng, 5, 2, model)
    for dt in (np.float64, np.float32):
        for args in ((np.zeros((0, w), dt), 1.0, y.astype(dt)), (np.zeros((0, w), dt), 1.0)):
            indptr, ind, dist = gk.radius_neighbors(*args, model=model)
            assert indptr.tolist() == [0] and indptr.dtype == np.int64
            assert ind.shape == dist.shape == (0,) and ind.dtype == np.int64 and dist.dtype == dt


@pytest.mark.parametrize("method", BUILT)
def test_index_empty_query_set(method):
    rng = np.random.default_rng(3)
    for dt in (np.float64, np.float32):
        idx = NeighborIndex(points(rng, 30, 2, "poincare").astype(dt), method=method)
        i, d = idx.query(np.zeros((0, 2), dt), 5)
        assert i.shape == d.shape == (0, 5) and i.dtype == np.int64 and d.dtype == dt
        indptr, ind, dist = idx.query_radius(np.zeros((0, 2), dt), 0.5)
        assert indptr.tolist() == [0] and ind.shape == dist.shape == (0,) and dist.dtype == dt
        with pytest.raises(ValueError, match="k"):
            idx.query(np.zeros((0, 2), dt), 31)


def test_empty_matrices():
    rng = np.random.default_rng(4)
    x = points(rng, 3, 2, "poincare")
    for a, b, shape in ((x[:0], x, (0, 3)), (x, x[:0], (3, 0)), (x[:0], None, (0, 0))):
        D = gk.distance_matrix(a, b)
        assert D.shape == shape and D.dtype == np.float64
    assert gk.condensed_distances(x[:0]).shape == (0,)
    assert gk.condensed_distances(x[:0].astype(np.float32)).dtype == np.float32


# ------------------------------------------------------------ the dtype rule


def dtype_cases(rng, model):
    x64 = points(rng, 60, 3, model)
    y64 = points(rng, 25, 3, model)
    return x64.astype(np.float32), y64.astype(np.float32), x64, y64


@pytest.mark.parametrize("model", MODELS)
def test_knn_dtype_rule(model):
    rng = np.random.default_rng(5)
    x32, y32, x64, y64 = dtype_cases(rng, model)
    xw, yw = x32.astype(np.float64), y32.astype(np.float64)  # the float32 values, exactly
    k = 7
    for x, y, want in (
        (x32, y32, np.float32),
        (x32, y64, np.float64),
        (x64, y32, np.float64),
        (x32, None, np.float32),
        (x32, y32.tolist(), np.float64),  # a list becomes float64
    ):
        i, d = gk.knn(x, k, y, model=model)
        assert i.dtype == np.int64 and d.dtype == want, (x.dtype, type(y), d.dtype)
        # reference: the float64 brute force on the widened values, ranked in
        # float64, distances rounded once to the result dtype
        xr = x.astype(np.float64)
        yr = xr if y is None else np.asarray(y, dtype=np.float64)
        D = gk.distance_matrix(xr, yr, model=model)
        wi, wd = brute(D, k, exclude_self=y is None)
        np.testing.assert_array_equal(i, wi)
        assert same_bits(d, wd.astype(want))
        if want == np.float32:
            # and equal to the float32 distance matrix of the same inputs
            D32 = gk.distance_matrix(x, y, model=model)
            assert D32.dtype == np.float32
            assert same_bits(d, np.take_along_axis(D32, i, axis=1))
    assert np.array_equal(xw, x32) and np.array_equal(yw, y32)


@pytest.mark.parametrize("model", MODELS)
def test_radius_dtype_rule(model):
    rng = np.random.default_rng(6)
    x32, y32, x64, y64 = dtype_cases(rng, model)
    r = 2.5
    for x, y, want in ((x32, y32, np.float32), (x32, y64, np.float64), (x64, y32, np.float64), (x32, None, np.float32)):
        indptr, ind, dist = gk.radius_neighbors(x, r, y, model=model)
        assert dist.dtype == want and ind.dtype == indptr.dtype == np.int64
        xr = x.astype(np.float64)
        yr = xr if y is None else y.astype(np.float64)
        D = gk.distance_matrix(xr, yr, model=model)  # float64 reference
        if y is None:
            np.fill_diagonal(D, np.inf)
        cols = np.broadcast_to(np.arange(D.shape[1]), D.shape)
        order = np.lexsort((cols, D), axis=1)
        assert indptr[-1] > len(x)  # the radius catches several neighbours per row
        for row in range(len(x)):
            keep = order[row][D[row, order[row]] <= r]
            np.testing.assert_array_equal(ind[indptr[row]:indptr[row + 1]], keep)
            assert same_bits(dist[indptr[row]:indptr[row + 1]], D[row, keep].astype(want))


@pytest.mark.parametrize("method", BUILT)
@pytest.mark.parametrize("model", MODELS)
def test_index_dtype_rule(model, method):
    rng = np.random.default_rng(7)
    x32, y32, x64, y64 = dtype_cases(rng, model)
    for x, y, want in ((x32, y32, np.float32), (x32, y64, np.float64), (x64, y32, np.float64), (x32, None, np.float32),
                       (x64, None, np.float64)):
        idx = NeighborIndex(x, model, method=method)
        assert idx.method == method
        gi, gd = idx.query(y, 6)
        ki, kd = gk.knn(y if y is not None else x, 6, None if y is None else x, model=model)
        assert gd.dtype == want
        np.testing.assert_array_equal(gi, ki)
        assert same_bits(gd, kd)  # the brute-force function follows the same rule
        got = idx.query_radius(y, 1.5)
        exp = gk.radius_neighbors(y if y is not None else x, 1.5, None if y is None else x, model=model)
        for u, v in zip(got, exp):
            assert same_bits(u, v)
        # the dtype rule survives pickling
        back = pickle.loads(pickle.dumps(idx))
        assert back.method == method
        bi, bd = back.query(y, 6)
        assert same_bits(bi, gi) and same_bits(bd, gd)
