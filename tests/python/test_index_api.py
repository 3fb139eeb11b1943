"""NeighborIndex interface: properties, layouts and dtypes, empty queries,
pickling, thread independence and bad input."""

from __future__ import annotations

import os
import pickle
import subprocess
import sys

import numpy as np
import pytest

from gyrokit import _native
from gyrokit._index import DEFAULT_LEAF_SIZE, NeighborIndex
from conftest import MODELS, uniform_points


# ------------------------------------------------------------------ API


def test_properties_and_repr():
    rng = np.random.default_rng(1)
    x = uniform_points(rng, 33, 3, "hyperboloid", 8.0, curvature=-0.5)
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
    x = uniform_points(rng, 300, 2, "poincare", 8.0)
    y = uniform_points(rng, 40, 2, "poincare", 8.0)
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
    idx = NeighborIndex(uniform_points(rng, 20, 2, "poincare", 8.0))
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
        x = uniform_points(rng, 400, 2, model, 8.0, curvature=-3.0)
        y = uniform_points(rng, 30, 2, model, 8.0, curvature=-3.0)
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
    idx = NeighborIndex(uniform_points(rng, 100, 2, "poincare", 8.0), leaf_size=4, method="tree")
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
    x = uniform_points(rng, 5000, 2, "poincare", 8.0)
    idx = NeighborIndex(x)
    ref = idx.query(k=5)
    with ThreadPoolExecutor(4) as ex:
        res = list(ex.map(lambda _: idx.query(k=5), range(4)))
    for got in res:
        assert np.array_equal(got[0], ref[0]) and np.array_equal(got[1], ref[1])


# ------------------------------------------------------------------ bad input


def test_bad_input_raises_naming_the_argument():
    rng = np.random.default_rng(10)
    x = uniform_points(rng, 30, 2, "poincare", 8.0)
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
