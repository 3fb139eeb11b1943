"""Error messages for bad rows: float32 rounding near the rim, transposed
arrays, and the argument named inside the formula.

One formatter (``gyrokit::error::row_error``) writes these messages for the
element-wise functions, the pairwise paths (matrices, knn, the tree) and the
centroids, so each check runs through all three.
"""

from __future__ import annotations

import re

import numpy as np
import pytest

import gyrokit as gk


def message(fn, *args, **kw) -> str:
    with pytest.raises(ValueError) as ei:
        fn(*args, **kw)
    return str(ei.value)


# ---------------------------------------------------------------------------
# float32 cannot hold points this close to the sphere


def rim_points_f32(n=40, d=3, bad=17, gap=1e-9):
    """float32 points with row `bad` at ``1 - |x| = gap`` in float64, which
    float32 rounds onto or outside the unit sphere; the other rows are well
    inside."""
    rng = np.random.default_rng(5)
    x = rng.normal(size=(n, d))
    x *= 0.5 / np.linalg.norm(x, axis=1, keepdims=True)
    # A direction whose float32 rounding lands strictly outside the sphere
    # (|x|/R - 1 > 0, like the reports of ~1e-8 from real data).
    while True:
        u = rng.normal(size=d)
        x[bad] = (1 - gap) * u / np.linalg.norm(u)
        x32 = x.astype(np.float32)
        if np.linalg.norm(x32[bad].astype(np.float64)) > 1:
            break
    # Preconditions from NumPy itself (IEEE rounding, not gyrokit): the row is
    # inside in float64 and on or outside the sphere once rounded to float32.
    assert np.linalg.norm(x[bad]) < 1
    assert np.linalg.norm(x32[bad].astype(np.float64)) >= 1
    return x, x32


FLOAT32_PATHS = [
    ("poincare.distance", lambda x: gk.poincare.distance(x, x[:1])),
    ("poincare.add", lambda x: gk.poincare.add(x, x[:1])),
    ("klein.distance", lambda x: gk.klein.distance(x, x[:1])),
    ("distance_matrix", lambda x: gk.distance_matrix(x)),
    ("knn", lambda x: gk.knn(x, 2)),
    ("NeighborIndex", lambda x: gk.NeighborIndex(x)),
    ("frechet_mean", lambda x: gk.frechet_mean(x)),
    ("einstein_midpoint", lambda x: gk.einstein_midpoint(x)),
]


@pytest.mark.parametrize("name,fn", FLOAT32_PATHS, ids=[p[0] for p in FLOAT32_PATHS])
def test_float32_point_rounded_onto_sphere_says_float32_and_what_to_do(name, fn):
    x64, x32 = rim_points_f32()
    fn(x64)  # the float64 data is valid
    msg = message(fn, x32)
    assert re.search(r"\brow 17\b", msg), msg
    assert "float32" in msg and "float64" in msg, msg
    assert "project" in msg, msg


def test_float32_hint_absent_for_float64_and_for_points_far_outside():
    x64, x32 = rim_points_f32()
    x64[17] = [1.0, 0.0, 0.0]  # on the sphere in float64
    for fn in (lambda x: gk.poincare.distance(x, x[:1]), gk.distance_matrix, gk.frechet_mean):
        msg = message(fn, x64)
        assert "float32" not in msg, msg
        far = x32.copy()
        far[17] = [2.0, 0.0, 0.0]  # far outside: not a rounding artefact
        msg = message(fn, far)
        assert re.search(r"\brow 17\b", msg) and "float32" not in msg, msg


def test_project_repairs_what_the_float32_message_points_to():
    # The remedy named in the message works: projecting the float32 data
    # gives float32 points every function accepts (norms by NumPy).
    _, x32 = rim_points_f32()
    fixed = gk.poincare.project(x32)
    assert fixed.dtype == np.float32
    assert np.all(np.linalg.norm(fixed.astype(np.float64), axis=1) < 1)
    assert gk.distance_matrix(fixed).shape == (40, 40)
    assert np.all(np.isfinite(gk.frechet_mean(fixed).mean))


# ---------------------------------------------------------------------------
# transposed arrays


def points(n=300, d=3, radius=0.9, seed=1):
    rng = np.random.default_rng(seed)
    x = rng.normal(size=(n, d))
    return radius * x / np.linalg.norm(x, axis=1, keepdims=True)


TRANSPOSED_PATHS = [
    ("poincare.distance", lambda x: gk.poincare.distance(x, x)),
    ("poincare.exp_map", lambda x: gk.poincare.exp_map(np.zeros_like(x), x)),
    ("klein.midpoint", lambda x: gk.klein.midpoint(x, x)),
    ("distance_matrix", lambda x: gk.distance_matrix(x)),
    ("condensed_distances", lambda x: gk.condensed_distances(x)),
    ("knn", lambda x: gk.knn(x, 1)),
    ("NeighborIndex", lambda x: gk.NeighborIndex(x)),
    ("frechet_mean", lambda x: gk.frechet_mean(x)),
]


@pytest.mark.parametrize("name,fn", TRANSPOSED_PATHS, ids=[p[0] for p in TRANSPOSED_PATHS])
def test_transposed_array_is_named_as_such(name, fn):
    x = points()
    fn(x[:5])  # correctly shaped data is valid
    msg = message(fn, x.T)
    assert "(3, 300)" in msg, msg
    assert "transpose" in msg and ".T" in msg, msg


def test_transposed_hyperboloid_and_halfspace_arrays():
    x = points()
    h = gk.convert(x, "poincare", "hyperboloid")
    msg = message(gk.distance_matrix, h.T, model="hyperboloid")
    assert "(4, 300)" in msg and "transpose" in msg, msg
    hs = gk.convert(x, "poincare", "halfspace")
    # the first row of hs.T holds first coordinates, some negative
    msg = message(gk.distance_matrix, hs.T, model="halfspace")
    assert "(3, 300)" in msg and "transpose" in msg, msg


def test_transposed_operand_against_a_point_gives_dimension_hint():
    x = points()
    msg = message(gk.poincare.distance, x.T, x[0])
    assert "mismatched point dimension" in msg, msg
    assert "transpose" in msg and "x.T" in msg, msg


def test_no_transposition_hint_for_a_plausible_shape():
    # 5 points of dimension 3 with row 0 outside: nothing suggests a
    # transposition, and the message must not invent one.
    x = points(n=5)
    x[0] = [1.5, 0.0, 0.0]
    for fn in (lambda a: gk.poincare.distance(a, a), gk.distance_matrix, gk.frechet_mean):
        msg = message(fn, x)
        assert re.search(r"\brow 0\b", msg) and "transpose" not in msg, msg
    # nor for a wide array whose bad row is not the first
    w = points(n=64, d=2).reshape(2, 64) * 0.05
    w[1, :] = 0.5
    msg = message(gk.poincare.distance, w, w)
    assert re.search(r"\brow 1\b", msg) and "transpose" not in msg, msg


# ---------------------------------------------------------------------------
# the argument is named inside the formula


def test_bad_y_is_reported_with_y_in_the_formula():
    x = points(n=4)
    y = x.copy()
    y[2] = [0.0, 1.25, 0.0]
    msg = message(gk.poincare.distance, x, y)
    assert msg.startswith("y: row 2"), msg
    assert "|y|/R - 1" in msg and "|x|" not in msg, msg
    # |y|/R - 1 = 0.25, printed to 3 decimals (the value itself is checked)
    assert re.search(r"\|y\|/R - 1 = 2\.500e-1", msg), msg


def test_each_argument_named_in_its_own_formula():
    x = points(n=4)
    bad = x.copy()
    bad[1] = [2.0, 0.0, 0.0]
    assert "|b|/R - 1" in message(gk.poincare.gyration, x, bad, x)
    assert "|end|/R - 1" in message(gk.klein.transport, x * 0.1, x, bad)
    assert "|y|/R - 1" in message(gk.distance_matrix, x, bad)
    # relativity: the velocity argument is named in |v|/c - 1
    c = 3.0e8
    u = np.array([[1e7, 0, 0]])
    v = np.array([[0, 3.1e8, 0]])
    assert "|v|/c - 1" in message(gk.relativity.compose, u, v, c=c)
