"""Distance matrices, knn and radius queries: bad rows and bad arguments
raise errors naming the argument, empty inputs, and results independent of
the thread count."""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap

import numpy as np
import pytest

import gyrokit as gk
from conftest import MODELS
from neighbors_support import model_points


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
