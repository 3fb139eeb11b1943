"""Distance matrices, knn and radius queries: float32 inputs, memory layouts
(bit-identical results) and the ``out=`` argument."""

from __future__ import annotations

import sys

import numpy as np
import pytest

import gyrokit as gk
from conftest import MODELS
from neighbors_support import assert_bitwise, dup_points, model_points


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
