"""NeighborIndex(method=...): the tree and brute force give the same results
bit for bit, "auto" follows its documented rule, and every method pickles.

Reference: ``gk.knn`` / ``gk.radius_neighbors`` (the library's brute force
over all pairs) and, independently, ``gk.distance_matrix`` ranked by numpy's
lexsort on (distance, index) (common practice for checking neighbour search).
"""

from __future__ import annotations

import pickle

import numpy as np
import pytest

import gyrokit as gk
from gyrokit._index import NeighborIndex

MODELS = ("poincare", "klein", "hyperboloid", "halfspace")


def points(rng, n, d, model, curvature=-1.0, rmax=8.0):
    """Points at hyperbolic distance uniform in [0, rmax R] from the origin."""
    R = 1.0 / np.sqrt(-curvature)
    v = rng.standard_normal((n, d))
    v /= np.linalg.norm(v, axis=1, keepdims=True)
    p = R * np.tanh(rng.uniform(0.0, rmax, n) / 2)[:, None] * v
    return p if model == "poincare" else gk.convert(p, "poincare", model, curvature=curvature)


def brute(D, k, exclude_self=False):
    """The k smallest of each row of D by (distance, index) (common practice)."""
    D = np.array(D, dtype=np.float64, copy=True)
    if exclude_self:
        np.fill_diagonal(D, np.inf)
    cols = np.broadcast_to(np.arange(D.shape[1]), D.shape)
    order = np.lexsort((cols, D), axis=1)[:, :k]
    return order, np.take_along_axis(D, order, axis=1)


@pytest.mark.parametrize("model", MODELS)
@pytest.mark.parametrize("d", [2, 6])
def test_methods_agree_with_brute_force_bit_for_bit(model, d):
    rng = np.random.default_rng(d * 10 + MODELS.index(model))
    c = -0.7
    x = points(rng, 700, d, model, c)
    x = np.vstack([x, x[:60]])  # exact duplicates: ties at distance 0
    y = np.vstack([points(rng, 50, d, model, c), x[100:110]])
    D_self = gk.distance_matrix(x, model=model, curvature=c)
    D_y = gk.distance_matrix(y, x, model=model, curvature=c)
    for method in ("tree", "brute", "auto"):
        idx = NeighborIndex(x, model, curvature=c, method=method, leaf_size=5)
        for q, D, self_q in ((None, D_self, True), (y, D_y, False)):
            for k in (1, 9, 40):
                gi, gd = idx.query(q, k)
                wi, wd = brute(D, k, exclude_self=self_q)
                np.testing.assert_array_equal(gi, wi)
                assert np.array_equal(gd.view(np.int64), wd.view(np.int64))
                ki, kd = gk.knn(x if q is None else q, k, None if q is None else x, model=model, curvature=c)
                assert np.array_equal(gi, ki) and np.array_equal(gd.view(np.int64), kd.view(np.int64))
            for r in (0.0, 0.3, float(np.quantile(D, 0.05))):
                got = idx.query_radius(q, r)
                exp = gk.radius_neighbors(x if q is None else q, r, None if q is None else x, model=model, curvature=c)
                for u, v in zip(got, exp):
                    assert u.dtype == v.dtype and np.array_equal(u, v)
                assert got[0][-1] > 0 or r == 0.0


def test_method_argument_is_validated():
    x = points(np.random.default_rng(1), 20, 2, "poincare")
    for bad in ("kd", "Tree", "", "brute "):
        with pytest.raises(ValueError, match="method"):
            NeighborIndex(x, method=bad)
    for bad in (None, 1, b"tree"):
        with pytest.raises(TypeError, match="method"):
            NeighborIndex(x, method=bad)
    for m in ("tree", "brute"):
        idx = NeighborIndex(x, method=m)
        assert idx.method == m and f"method={m!r}" in repr(idx)
    assert NeighborIndex(x).method in ("tree", "brute")


def test_auto_follows_the_measured_rule():
    # The rule: keep the tree when its sample searches (k = 10, 64 indexed
    # points) evaluate at most 1/20 of the points. A network map in the disk
    # prunes well; the same law in 10 dimensions does not.
    rng = np.random.default_rng(2)
    low = NeighborIndex(points(rng, 20_000, 2, "poincare"))
    high = NeighborIndex(points(rng, 4_000, 10, "poincare"))
    for idx in (low, high):
        f = idx._tree.auto_visited
        assert 0.0 < f <= 1.0
        assert idx.method == ("tree" if f <= 0.05 else "brute")
    assert low.method == "tree" and high.method == "brute"
    # the measured figure is the tree's own count (a deterministic count,
    # not a time): the same for a tree built explicitly
    assert NeighborIndex(points(np.random.default_rng(3), 20_000, 2, "poincare"), method="tree")._visited_fraction() < 0.05
    assert NeighborIndex(points(np.random.default_rng(3), 50, 2, "poincare"), method="brute")._visited_fraction() is None
    # a single point: nothing to measure, brute force
    assert NeighborIndex(np.zeros((1, 2))).method == "brute"


@pytest.mark.parametrize("model", MODELS)
def test_brute_index_pickles(model):
    rng = np.random.default_rng(4)
    x = points(rng, 300, 3, model, -2.0)
    y = points(rng, 20, 3, model, -2.0)
    idx = NeighborIndex(x, model, curvature=-2.0, method="brute", leaf_size=9)
    back = pickle.loads(pickle.dumps(idx))
    assert (back.n, back.model, back.curvature, back.leaf_size, back.method) == (300, model, -2.0, 9, "brute")
    for q in (None, y):
        a, b = idx.query(q, 5), back.query(q, 5)
        assert np.array_equal(a[0], b[0]) and np.array_equal(a[1], b[1])
    state = idx.__getstate__()
    assert set(state) == {"points", "float32"} and len(state["points"]) == 6
    # corrupted states are ValueErrors
    fields = list(state["points"])
    bad_aux = fields[5].copy()
    bad_aux[3] = -1.0
    bad_coords = fields[4].copy()
    bad_coords[2, 0] = np.nan
    for i, v in ((5, bad_aux), (4, bad_coords), (5, fields[5][:-1]), (0, 7), (1, "plane")):
        f = list(fields)
        f[i] = v
        with pytest.raises(ValueError):
            NeighborIndex.__new__(NeighborIndex).__setstate__({"points": tuple(f)})
    for bad in ({"points": tuple(fields[:4])}, {}, {"points": tuple(fields), "float32": "yes"}, [1, 2]):
        with pytest.raises(ValueError):
            NeighborIndex.__new__(NeighborIndex).__setstate__(bad)


def test_tree_state_of_the_first_layout_still_loads():
    # The first release pickled {"tree": <9 fields>} with no "float32".
    rng = np.random.default_rng(5)
    x = points(rng, 500, 2, "klein")
    idx = NeighborIndex(x, "klein", method="tree")
    old = {"tree": idx.__getstate__()["tree"]}
    back = NeighborIndex.__new__(NeighborIndex)
    back.__setstate__(old)
    assert back.method == "tree"
    a, b = idx.query(k=4), back.query(k=4)
    assert np.array_equal(a[0], b[0]) and np.array_equal(a[1], b[1])
