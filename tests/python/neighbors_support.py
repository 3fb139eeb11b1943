"""Helpers shared by the distance-matrix / knn / radius-query tests
(tests/python/test_neighbors_*.py): test points with duplicates and close
pairs mixed in, element-wise brute force, brute-force knn and radius
queries by sorting the matrix, and comparison helpers."""

from __future__ import annotations

import numpy as np

from conftest import ball_points, DISTANCE, radius, to_model


def model_points(rng, n, d, model, curvature, rmax=10.0, extras=True):
    """Random points of ``model`` with, when ``extras``, an exact duplicate
    (row 2 == row 0), a pair about 1e-12 R apart (rows 3, 4) and the origin
    (row 5) mixed in."""
    p = ball_points(rng, n, d, rmax, curvature=curvature)
    if extras and n >= 6:
        R = radius(curvature)
        p[2] = p[0]
        p[4] = p[3] + 1e-12 * R * rng.standard_normal(d) / np.sqrt(d)
        p[5] = 0.0
    return to_model(p, model, curvature)


def elementwise_matrix(x, y, model, curvature):
    """Brute force point by point with gk.<model>.distance (common practice)."""
    f = DISTANCE[model]
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


def dup_points(rng, model, curvature, n, d):
    """Points with many exact duplicates (rows repeated at scattered positions)."""
    base = model_points(rng, max(n // 3, 6), d, model, curvature)
    pick = rng.integers(0, len(base), n)
    return base[pick]
