"""NeighborIndex: exact agreement with brute force, ties, references, pickling,
thread independence and bad input.

Brute force here is computed over all pairs (common practice for checking a
neighbour index): once from the index's own pair distances
(``_pair_distances``, the values it must reproduce bit for bit) and once from
the public element-wise ``gk.<model>.distance`` functions (a different, also
exact, transcendental: equal to ~1e-14 relative).
"""

from __future__ import annotations

import os
import pickle
import subprocess
import sys
import zlib

import mpmath
import numpy as np
import pytest

import gyrokit as gk
from gyrokit import _native
from gyrokit._index import DEFAULT_LEAF_SIZE, NeighborIndex

MODELS = ("poincare", "klein", "hyperboloid", "halfspace")
ELEMENTWISE = {
    "poincare": gk.poincare.distance,
    "klein": gk.klein.distance,
    "hyperboloid": gk.hyperboloid.distance,
    "halfspace": gk.halfspace.distance,
}


# ------------------------------------------------------------------ data


def points(rng, n, d, model, curvature=-1.0, rmax=8.0):
    """Points at hyperbolic distance uniform in [0, rmax R] from the origin
    (crowded against the sphere in the ball models), in ``model``."""
    R = 1.0 / np.sqrt(-curvature)
    v = rng.standard_normal((n, d))
    v /= np.linalg.norm(v, axis=1, keepdims=True)
    rho = rng.uniform(0.0, rmax, n)
    p = R * np.tanh(rho / 2)[:, None] * v
    if model == "poincare":
        return p
    return gk.convert(p, "poincare", model, curvature=curvature)


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
    return ELEMENTWISE[model](y[:, None, :], x[None, :, :], curvature=curvature)


# ------------------------------------------------------------------ mpmath


def mp_distance(model, x, y, curvature):
    """Textbook distance formulas evaluated at 50 digits on the float64
    inputs (mpmath; formulas from Cannon, Floyd, Kenyon, Parry, "Hyperbolic
    geometry", 1997, and Ratcliffe, "Foundations of hyperbolic manifolds")."""
    with mpmath.workdps(50):
        kap = -mpmath.mpf(curvature)
        R = 1 / mpmath.sqrt(kap)
        x = [mpmath.mpf(float(v)) for v in x]
        y = [mpmath.mpf(float(v)) for v in y]
        sq = lambda a: sum(t * t for t in a)  # noqa: E731
        if model == "poincare":
            diff = sq([a - b for a, b in zip(x, y)])
            arg = 1 + 2 * kap * diff / ((1 - kap * sq(x)) * (1 - kap * sq(y)))
        elif model == "klein":
            xy = sum(a * b for a, b in zip(x, y))
            arg = (1 - kap * xy) / mpmath.sqrt((1 - kap * sq(x)) * (1 - kap * sq(y)))
        elif model == "hyperboloid":
            # gyrokit reads x0 from the spatial part (x0 = R sqrt(1 + kappa |xs|^2)).
            xs, ys = x[1:], y[1:]
            x0 = R * mpmath.sqrt(1 + kap * sq(xs))
            y0 = R * mpmath.sqrt(1 + kap * sq(ys))
            arg = kap * (x0 * y0 - sum(a * b for a, b in zip(xs, ys)))
        else:
            diff = sq([a - b for a, b in zip(x, y)])
            arg = 1 + diff / (2 * x[-1] * y[-1])
        return R * mpmath.acosh(arg)


# ------------------------------------------------------------------ exact agreement


@pytest.mark.parametrize("model", MODELS)
@pytest.mark.parametrize("curvature", [-1.0, -0.2, -5.0])
def test_knn_matches_brute_force(model, curvature):
    rng = np.random.default_rng(zlib.crc32(f"{model} {curvature}".encode()))
    d = 3 if model in ("klein", "halfspace") else 2
    x = points(rng, 400, d, model, curvature)
    y = points(rng, 70, d, model, curvature)
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
    x = points(rng, 30_000, 2, "poincare")
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
    x = points(rng, 1500, 2, model, -1.5)
    x = np.vstack([x, x[:200]])  # exact duplicates: ties at distance 0
    y = points(rng, 80, 2, model, -1.5)
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
    x = points(rng, 500, 2, "poincare")
    ref = NeighborIndex(x).query(k=9)
    got = NeighborIndex(x, leaf_size=leaf_size).query(k=9)
    np.testing.assert_array_equal(got[0], ref[0])
    np.testing.assert_array_equal(got[1], ref[1])


def test_all_candidates():
    rng = np.random.default_rng(6)
    x = points(rng, 60, 2, "klein")
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
    x = points(rng, 500, 2, model, curvature, rmax=6.0)
    y = points(rng, 50, 2, model, curvature, rmax=6.0)
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
    x = points(rng, 300, 2, model, curvature, rmax=12.0)
    y = points(rng, 20, 2, model, curvature, rmax=12.0)
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
    base = points(rng, 50, 2, "poincare", rmax=20.0)
    x = np.vstack([base, base * (1 - 1e-12)])
    idx = NeighborIndex(x)
    i, dd = idx.query(k=1)
    for row in range(0, 100, 7):
        ref = mp_distance("poincare", x[row], x[i[row, 0]], -1.0)
        assert abs(dd[row, 0] - ref) <= 1e-12 * ref


# ------------------------------------------------------------------ API


def test_properties_and_repr():
    rng = np.random.default_rng(1)
    x = points(rng, 33, 3, "hyperboloid", -0.5)
    idx = NeighborIndex(x, "hyperboloid", curvature=-0.5, leaf_size=4, method="tree")
    assert idx.n == len(idx) == 33
    assert idx.model == "hyperboloid" and idx.curvature == -0.5 and idx.leaf_size == 4
    assert idx.nbytes > 33 * 8 * 4
    assert "NeighborIndex(n=33" in repr(idx)
    assert NeighborIndex(x, "hyperboloid", curvature=-0.5).leaf_size == DEFAULT_LEAF_SIZE
    # the native signature's literal default is the core's constant
    assert _native.VpTree(x, "hyperboloid", -0.5).leaf_size == _native.VpTree.default_leaf_size


def test_layouts_dtypes_and_copy():
    rng = np.random.default_rng(2)
    x = points(rng, 300, 2, "poincare")
    y = points(rng, 40, 2, "poincare")
    ref = NeighborIndex(x).query(y, 5)
    x32 = x.astype(np.float32)
    ref32 = NeighborIndex(x32.astype(np.float64)).query(y, 5)
    for got in (
        NeighborIndex(np.asfortranarray(x)).query(y[::-1].copy()[::-1], 5),
        NeighborIndex(np.repeat(x, 2, axis=0)[::2]).query(np.asfortranarray(y), 5),
        NeighborIndex(x.tolist()).query(y.tolist(), 5),
    ):
        np.testing.assert_array_equal(got[0], ref[0])
        np.testing.assert_array_equal(got[1], ref[1])
    got = NeighborIndex(x32).query(y, 5)  # float32 points widen exactly
    np.testing.assert_array_equal(got[0], ref32[0])
    assert got[1].dtype == np.float64
    # the index holds a copy: changing x afterwards changes nothing
    xc = x.copy()
    idx = NeighborIndex(xc)
    xc[:] = 0.0
    np.testing.assert_array_equal(idx.query(y, 5)[0], ref[0])


def test_empty_queries():
    rng = np.random.default_rng(3)
    idx = NeighborIndex(points(rng, 20, 2, "poincare"))
    i, dd = idx.query(np.zeros((0, 2)), 4)
    assert i.shape == dd.shape == (0, 4) and i.dtype == np.int64 and dd.dtype == np.float64
    indptr, ind, dist = idx.query_radius(np.zeros((0, 2)), 1.0)
    assert indptr.tolist() == [0] and ind.shape == dist.shape == (0,)
    # one point: y=None has no candidates, so no k is valid; radius is empty
    one = NeighborIndex(np.zeros((1, 2)))
    with pytest.raises(ValueError, match="k"):
        one.query(k=1)
    indptr, ind, dist = one.query_radius(r=np.inf)
    assert indptr.tolist() == [0, 0] and ind.size == 0


def test_pickle_round_trip():
    rng = np.random.default_rng(4)
    for model in MODELS:
        x = points(rng, 400, 2, model, -3.0)
        y = points(rng, 30, 2, model, -3.0)
        idx = NeighborIndex(x, model, curvature=-3.0, leaf_size=5, method="tree")
        state = idx.__getstate__()
        back = pickle.loads(pickle.dumps(idx, protocol=pickle.HIGHEST_PROTOCOL))
        assert (back.n, back.model, back.curvature, back.leaf_size) == (400, model, -3.0, 5)
        for q in (None, y):
            a, b = idx.query(q, 7), back.query(q, 7)
            assert np.array_equal(a[0], b[0]) and np.array_equal(a[1], b[1])
            for u, v in zip(idx.query_radius(q, 0.4), back.query_radius(q, 0.4)):
                assert np.array_equal(u, v)
        # the state carries the tree itself (nodes and bounds), not just points
        fields = state["tree"]
        assert fields[7].shape[1] == 3 and fields[8].shape[1] == 4 and len(fields[7]) > 1


def test_corrupted_state_is_a_value_error():
    rng = np.random.default_rng(8)
    idx = NeighborIndex(points(rng, 100, 2, "poincare"), leaf_size=4, method="tree")
    fields = list(idx.__getstate__()["tree"])
    bad_perm = fields[6].copy()
    bad_perm[0] = bad_perm[1]
    bad_nodes = fields[7].copy()
    bad_nodes[1, 1] += 1
    bad_child = fields[7].copy()
    bad_child[0, 2] = 10**6
    for i, v in ((6, bad_perm), (7, bad_nodes), (7, bad_child), (0, 99), (1, "sphere")):
        f = list(fields)
        f[i] = v
        with pytest.raises(ValueError):
            NeighborIndex.__new__(NeighborIndex).__setstate__({"tree": tuple(f)})
    with pytest.raises(ValueError):
        NeighborIndex.__new__(NeighborIndex).__setstate__({"tree": tuple(fields[:5])})


def test_results_do_not_depend_on_the_thread_count_or_cpu_path():
    script = r"""
import hashlib, sys
import numpy as np
import gyrokit as gk
from gyrokit._index import NeighborIndex
rng = np.random.default_rng(9)
n = 60000
r = rng.uniform(0, 8, n); a = rng.uniform(0, 2 * np.pi, n)
x = np.tanh(r / 2)[:, None] * np.c_[np.cos(a), np.sin(a)]
y = x[:5000] * 0.999
h = hashlib.sha256()
idx = NeighborIndex(x)
for arr in idx.query(k=8) + idx.query(y, 3) + idx.query_radius(y, 0.05):
    h.update(np.ascontiguousarray(arr).tobytes())
h.update(np.ascontiguousarray(idx.__getstate__()["tree"][6]).tobytes())
print(h.hexdigest())
"""
    out = []
    # thread counts, and the baseline (no SIMD) copy of the kernels
    for threads, simd in (("1", None), ("2", None), ("3", None), ("2", "baseline")):
        env = dict(os.environ, RAYON_NUM_THREADS=threads)
        if simd:
            env["GYROKIT_SIMD"] = simd
        res = subprocess.run([sys.executable, "-c", script], env=env, capture_output=True, text=True, timeout=300)
        assert res.returncode == 0, res.stderr
        out.append(res.stdout.strip())
    assert out[0] == out[1] == out[2] == out[3]


def test_concurrent_python_threads_agree():
    from concurrent.futures import ThreadPoolExecutor

    rng = np.random.default_rng(12)
    x = points(rng, 5000, 2, "poincare")
    idx = NeighborIndex(x)
    ref = idx.query(k=5)
    with ThreadPoolExecutor(4) as ex:
        res = list(ex.map(lambda _: idx.query(k=5), range(4)))
    for got in res:
        assert np.array_equal(got[0], ref[0]) and np.array_equal(got[1], ref[1])


# ------------------------------------------------------------------ bad input


def test_bad_input_raises_naming_the_argument():
    rng = np.random.default_rng(10)
    x = points(rng, 30, 2, "poincare")
    idx = NeighborIndex(x)
    with pytest.raises(ValueError, match="k"):
        idx.query(x, 31)  # k > n
    with pytest.raises(ValueError, match="k"):
        idx.query(None, 30)  # y=None: only n - 1 candidates
    with pytest.raises(ValueError, match="k must be at least 1"):
        idx.query(x, 0)
    with pytest.raises(ValueError, match="k must be at least 1"):
        idx.query(x, -3)
    with pytest.raises(TypeError, match="k"):
        idx.query(x, 2.0)
    with pytest.raises(ValueError, match="r must be"):
        idx.query_radius(x, -0.1)
    with pytest.raises(ValueError, match="r must be"):
        idx.query_radius(x, np.nan)
    with pytest.raises(TypeError, match="'r'"):
        idx.query_radius(x)
    with pytest.raises(TypeError, match="r must be"):
        idx.query_radius(x, "1")
    with pytest.raises(ValueError, match="y"):
        idx.query(np.zeros((3, 3)), 2)  # wrong d
    with pytest.raises(ValueError, match="y"):
        idx.query(np.zeros(2), 2)  # not 2-D
    with pytest.raises(ValueError, match="y"):
        idx.query_radius(np.zeros((3, 3)), 0.5)
    y = x[:5].copy()
    y[3, 1] = np.nan
    with pytest.raises(ValueError, match="y: row 3"):
        idx.query(y, 2)
    y = x[:5].copy()
    y[2] = [0.8, 0.7]
    with pytest.raises(ValueError, match="y: row 2"):
        idx.query_radius(y, 0.1)
    with pytest.raises(TypeError, match="y"):
        idx.query(np.array([["a", "b"]]), 1)

    bad = x.copy()
    bad[7, 0] = np.nan
    with pytest.raises(ValueError, match="x: row 7"):
        NeighborIndex(bad)
    bad = x.copy()
    bad[4] = [1.0, 0.0]  # on the sphere
    with pytest.raises(ValueError, match="x: row 4"):
        NeighborIndex(bad)
    bad = 0.5 * x
    bad[4] = [0.3, -0.4]  # |x| = 0.5 = R for K = -4
    with pytest.raises(ValueError, match="x: row 4"):
        NeighborIndex(bad, curvature=-4.0)
    with pytest.raises(ValueError, match="x: row 0"):
        NeighborIndex(np.array([[0.0, -1.0]]), "halfspace")
    with pytest.raises(ValueError, match="x: row 1"):
        NeighborIndex(np.array([[1.0, 0.0, 0.0], [2.0, 0.0, 0.0]]), "hyperboloid")
    with pytest.raises(ValueError, match="model"):
        NeighborIndex(x, "lorentz")
    with pytest.raises(TypeError, match="model"):
        NeighborIndex(x, 3)
    with pytest.raises(ValueError, match="curvature"):
        NeighborIndex(x, curvature=0.0)
    with pytest.raises(ValueError, match="curvature"):
        NeighborIndex(x, curvature=np.nan)
    with pytest.raises(ValueError, match="x"):
        NeighborIndex(np.zeros((0, 2)))
    with pytest.raises(ValueError, match="x"):
        NeighborIndex(np.zeros(3))
    with pytest.raises(ValueError, match="leaf_size"):
        NeighborIndex(x, leaf_size=0)
    with pytest.raises(TypeError, match="leaf_size"):
        NeighborIndex(x, leaf_size=1.5)
    with pytest.raises(TypeError, match="x"):
        NeighborIndex([["a", "b"]])
