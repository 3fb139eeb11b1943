"""gk.dask.frechet_mean / einstein_midpoint against the in-memory functions.

Reference: gk.frechet_mean and gk.einstein_midpoint (the SPEC, "Beyond one
machine": the same answer to 1e-13, independent of the number of workers).
The cluster is the session's distributed.LocalCluster of two worker
processes (conftest.py).
"""

from __future__ import annotations

import os

import numpy as np
import pytest

import gyrokit as gk

dask = pytest.importorskip("dask")
da = pytest.importorskip("dask.array")
pytest.importorskip("distributed")

from conftest import MODELS, die_once  # noqa: E402


def _ball(n: int, d: int, seed: int, rmax: float = 4.0) -> np.ndarray:
    rng = np.random.default_rng(seed)
    v = rng.normal(size=(n, d))
    v /= np.linalg.norm(v, axis=1)[:, None]
    return v * np.tanh(rng.uniform(0, rmax, size=n) / 2)[:, None]


def _gap(a: np.ndarray, b: np.ndarray, model: str) -> float:
    """Largest hyperbolic distance between corresponding rows."""
    a, b = np.atleast_2d(a), np.atleast_2d(b)
    return float(max(gk.distance_matrix(p[None], q[None], model=model)[0, 0] for p, q in zip(a, b)))


CHUNKS = [(1, 2999, 3000), (577,) * 10 + (230,)]


@pytest.mark.parametrize("model", MODELS)
@pytest.mark.parametrize("chunks", CHUNKS)
def test_frechet_mean_matches_in_memory(client, model, chunks):
    x = gk.convert(_ball(6000, 4, 1), "poincare", model)
    ref = gk.frechet_mean(x, model=model)
    got = gk.dask.frechet_mean(da.from_array(x, chunks=(chunks, -1)), model=model)
    assert got.converged and got.grad_norm <= 1e-12
    assert _gap(got.mean, ref.mean, model) <= 1e-13
    em = gk.dask.einstein_midpoint(da.from_array(x, chunks=(chunks, -1)), model=model)
    assert _gap(em, gk.einstein_midpoint(x, model=model), model) <= 1e-13


@pytest.mark.parametrize("model", ["poincare", "hyperboloid"])
def test_weights_and_labels(client, model):
    rng = np.random.default_rng(2)
    x = gk.convert(_ball(5000, 3, 3), "poincare", model)
    w = rng.uniform(0, 3, size=5000)
    lab = rng.choice(np.array(["root", "leaf", "mid", "edge"]), size=5000)
    ref = gk.frechet_mean(x, weights=w, labels=lab, model=model)
    got = gk.dask.frechet_mean(
        da.from_array(x, chunks=(700, -1)),
        weights=da.from_array(w, chunks=900),
        labels=da.from_array(lab, chunks=1100),
        model=model,
    )
    assert list(got.labels) == list(ref.labels)
    assert _gap(got.mean, ref.mean, model) <= 1e-13
    assert np.array_equal(got.iterations, ref.iterations)
    ref_e = gk.einstein_midpoint(x, weights=w, labels=lab, model=model)
    got_e = gk.dask.einstein_midpoint(da.from_array(x, chunks=(700, -1)), weights=w, labels=lab, model=model)
    assert _gap(got_e, ref_e, model) <= 1e-13


def test_near_the_rim_and_float32(client):
    # Members 30 R from the origin: the start is translated (centroids.rs).
    x = gk.convert(_ball(3000, 2, 4, rmax=30.0), "poincare", "hyperboloid")
    ref = gk.frechet_mean(x, model="hyperboloid")
    got = gk.dask.frechet_mean(da.from_array(x, chunks=(400, -1)), model="hyperboloid")
    assert _gap(got.mean, ref.mean, "hyperboloid") <= 1e-13
    x32 = _ball(2000, 3, 5).astype(np.float32)
    got = gk.dask.frechet_mean(da.from_array(x32, chunks=(300, -1)))
    assert got.mean.dtype == np.float32
    assert np.array_equal(got.mean, gk.frechet_mean(x32).mean)


def test_independent_of_workers(client):
    # The sums are added on the client in chunk order: the same bits on the
    # cluster and on one thread.
    x = da.from_array(_ball(8000, 5, 6), chunks=(1000, -1))
    on_cluster = gk.dask.frechet_mean(x)
    with dask.config.set(scheduler="synchronous"):
        one_thread = gk.dask.frechet_mean(x)
    assert np.array_equal(on_cluster.mean, one_thread.mean)


def test_worker_killed_mid_computation(client, tmp_path):
    x = _ball(20000, 4, 7)
    marker = str(tmp_path / "died")
    ref = gk.dask.frechet_mean(da.from_array(x, chunks=(2500, -1)))
    dx = da.from_array(x, chunks=(2500, -1)).map_blocks(die_once(marker), dtype=x.dtype, meta=np.empty((0, 0)))
    got = gk.dask.frechet_mean(dx)
    assert os.path.exists(marker)  # a worker did die
    assert np.array_equal(got.mean, ref.mean)


def test_errors_name_rows_of_the_whole_array(client):
    x = _ball(3000, 2, 8)
    x[2345] = [0.8, 0.8]
    with pytest.raises(ValueError, match=r"^x: row 2345 is on or outside the ball"):
        gk.dask.frechet_mean(da.from_array(x, chunks=(1000, -1)))
    x = _ball(3000, 2, 8)
    w = np.ones(3000)
    w[2100] = -1.0
    with pytest.raises(ValueError, match=r"^weights: entry 2100 "):
        gk.dask.frechet_mean(da.from_array(x, chunks=(1000, -1)), weights=w)
    lab = np.zeros(3000)
    lab[1500] = np.nan
    with pytest.raises(ValueError, match=r"labels: entry 1500 is missing"):
        gk.dask.frechet_mean(da.from_array(x, chunks=(1000, -1)), labels=lab)
    lab = np.arange(3000) % 3
    w = np.ones(3000)
    w[lab == 2] = 0.0
    with pytest.raises(ValueError, match=r"label 2: its points all have weight zero"):
        gk.dask.frechet_mean(da.from_array(x, chunks=(1000, -1)), weights=w, labels=lab)
    with pytest.raises(ValueError, match="empty"):
        gk.dask.frechet_mean(da.zeros((0, 2)))
    with pytest.raises(ValueError, match="length"):
        gk.dask.frechet_mean(da.from_array(x, chunks=(1000, -1)), weights=np.ones(5))


def test_zarr_store_on_disk(client, tmp_path):
    # data written to a zarr store on disk and read back lazily by the
    # workers (the SPEC, "Beyond one machine": np.memmap / zarr inputs)
    zarr = pytest.importorskip("zarr")
    x = _ball(5000, 3, 9)
    lab = np.arange(5000) % 4
    store = str(tmp_path / "points.zarr")
    da.to_zarr(da.from_array(x, chunks=(1250, -1)), store)
    dx = da.from_zarr(store)
    assert isinstance(zarr.open_array(store, mode="r"), zarr.Array)
    got = gk.dask.frechet_mean(dx, labels=lab)
    ref = gk.frechet_mean(x, labels=lab)
    assert _gap(got.mean, ref.mean, "poincare") <= 1e-13
    km = gk.dask.KMeans(4, init=x[:4], tol=0).fit(dx)
    assert np.array_equal(km.labels_.compute(), gk.KMeans(4, init=x[:4], tol=0).fit(x).labels_)
    idx, dist = dask.compute(*gk.dask.knn(dx, 3))
    assert np.array_equal(idx, gk.knn(x, 3)[0])
