"""gk.dask.distance_matrix and gk.dask.knn against the in-memory functions.

Reference: the in-memory gk.distance_matrix / gk.knn (bit-identical results
required by the SPEC, "Beyond one machine"); the cluster is a
distributed.LocalCluster of two worker processes started by the fixture.
"""

from __future__ import annotations

import numpy as np
import pytest

import gyrokit as gk

dask = pytest.importorskip("dask")
da = pytest.importorskip("dask.array")
distributed = pytest.importorskip("distributed")

from conftest import MODELS  # noqa: E402


def _ball(n: int, d: int, seed: int, rmax: float = 3.0) -> np.ndarray:
    rng = np.random.default_rng(seed)
    v = rng.normal(size=(n, d))
    v /= np.linalg.norm(v, axis=1)[:, None]
    return v * np.tanh(rng.uniform(0, rmax, size=n) / 2)[:, None]


def _points(model: str, n: int, d: int, seed: int) -> np.ndarray:
    return gk.convert(_ball(n, d, seed), "poincare", model)


# Uneven chunkings, single rows and one block (common practice for chunking tests).
CHUNKS = [(523,), (1, 100, 422), (97, 97, 97, 97, 97, 38)]


@pytest.mark.parametrize("model", MODELS)
@pytest.mark.parametrize("chunks", CHUNKS)
def test_distance_matrix_bit_identical(client, model, chunks):
    x = _points(model, 523, 3, 1)
    y = _points(model, 211, 3, 2)
    dx = da.from_array(x, chunks=(chunks, -1))
    got = gk.dask.distance_matrix(dx, model=model).compute()
    assert np.array_equal(got, gk.distance_matrix(x, model=model))
    got = gk.dask.distance_matrix(dx, da.from_array(y, chunks=(50, -1)), model=model).compute()
    assert np.array_equal(got, gk.distance_matrix(x, y, model=model))


@pytest.mark.parametrize("model", MODELS)
@pytest.mark.parametrize("chunks", CHUNKS)
@pytest.mark.parametrize("k", [1, 7, 40])
@pytest.mark.parametrize("index_bytes", [256 * 2**20, 8 * 5 * 150])
def test_knn_identical(client, model, chunks, k, index_bytes):
    # index_bytes: one index over all candidates, or index blocks of 150 rows
    x = _points(model, 523, 4, 3)
    dx = da.from_array(x, chunks=(chunks, -1))
    idx, dist = dask.compute(*gk.dask.knn(dx, k, model=model, index_bytes=index_bytes))
    ref_i, ref_d = gk.knn(x, k, model=model)
    assert np.array_equal(idx, ref_i) and np.array_equal(dist, ref_d)
    y = _points(model, 300, 4, 4)
    idx, dist = dask.compute(*gk.dask.knn(dx, k, da.from_array(y, chunks=(64, -1)), model=model, index_bytes=index_bytes))
    ref_i, ref_d = gk.knn(x, k, y, model=model)
    assert np.array_equal(idx, ref_i) and np.array_equal(dist, ref_d)


def test_knn_duplicates_and_ties(client):
    # Exact duplicates across blocks: the tie rule (distance, then index) decides.
    base = _ball(200, 2, 5)
    x = np.vstack([base, base[:60], base[:60]])
    for chunks, nbytes in [((140, 140, 40), 8 * 2 * 100), ((1, 319), 8 * 2 * 3), ((320,), 2**20)]:
        idx, dist = dask.compute(*gk.dask.knn(da.from_array(x, chunks=(chunks, -1)), 5, index_bytes=nbytes))
        ref_i, ref_d = gk.knn(x, 5)
        assert np.array_equal(idx, ref_i) and np.array_equal(dist, ref_d)


def test_float32_rule(client):
    x = _ball(300, 3, 6).astype(np.float32)
    dx = da.from_array(x, chunks=(70, -1))
    D = gk.dask.distance_matrix(dx)
    assert D.dtype == np.float32
    assert np.array_equal(D.compute(), gk.distance_matrix(x))
    idx, dist = dask.compute(*gk.dask.knn(dx, 6))
    ref_i, ref_d = gk.knn(x, 6)
    assert dist.dtype == np.float32
    assert np.array_equal(idx, ref_i) and np.array_equal(dist, ref_d)


def test_memmap_input(client, tmp_path):
    x = _ball(400, 5, 7)
    mm = np.lib.format.open_memmap(tmp_path / "x.npy", mode="w+", dtype=np.float64, shape=x.shape)
    mm[:] = x
    mm.flush()
    dx = da.from_array(np.load(tmp_path / "x.npy", mmap_mode="r"), chunks=(128, -1))
    idx, dist = dask.compute(*gk.dask.knn(dx, 3))
    ref_i, ref_d = gk.knn(x, 3)
    assert np.array_equal(idx, ref_i) and np.array_equal(dist, ref_d)


def test_bad_row_named_in_the_whole_array(client):
    x = _ball(300, 2, 8)
    x[257] = [1.5, 0.0]
    dx = da.from_array(x, chunks=(100, -1))
    with pytest.raises(ValueError, match=r"^x: row 257 is on or outside the ball \(\|x\|"):
        gk.dask.distance_matrix(dx).compute()
    with pytest.raises(ValueError, match=r"^x: row 257 "):
        dask.compute(*gk.dask.knn(dx, 2))
    y = _ball(120, 2, 9)
    y[101] = [np.nan, 0.0]
    with pytest.raises(ValueError, match=r"^y: row 101 "):
        gk.dask.distance_matrix(da.from_array(x[:200], chunks=(100, -1)), da.from_array(y, chunks=(50, -1))).compute()


def test_argument_errors():
    x = da.from_array(_ball(10, 2, 10), chunks=(5, -1))
    with pytest.raises(ValueError, match="k"):
        gk.dask.knn(x, 0)
    with pytest.raises(ValueError, match="candidates"):
        gk.dask.knn(x, 10)
    with pytest.raises(ValueError, match="2-d"):
        gk.dask.distance_matrix(da.zeros((3, 2, 2)))
    with pytest.raises(ValueError, match="coordinates"):
        gk.dask.distance_matrix(x, da.zeros((3, 3)))
    with pytest.raises(ValueError, match="model"):
        gk.dask.distance_matrix(x, model="sphere")


def test_empty_queries():
    y = da.from_array(_ball(10, 2, 11), chunks=(5, -1))
    idx, dist = dask.compute(*gk.dask.knn(da.zeros((0, 2)), 3, y))
    assert idx.shape == (0, 3) and dist.shape == (0, 3)
