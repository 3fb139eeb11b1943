"""gk.dask.KMeans against the in-memory gk.KMeans.

References: gk.KMeans (the SPEC, "Beyond one machine": KMeans on the same
partial sums as the distributed Fréchet mean); the exponential race for
weighted sampling (Efraimidis & Spirakis 2006: the smallest of E_i / w_i,
E_i standard exponential, is i with probability w_i / sum w), checked with
scipy.stats.chisquare. The cluster is the session's LocalCluster of two
worker processes (conftest.py).
"""

from __future__ import annotations

import os

import numpy as np
import pytest

import gyrokit as gk

dask = pytest.importorskip("dask")
da = pytest.importorskip("dask.array")
pytest.importorskip("distributed")

from conftest import die_once  # noqa: E402


def _blobs(n: int, d: int, seed: int, k: int = 4, spread: float = 0.3) -> np.ndarray:
    """``k`` groups of points around random centres within 3 R (Poincaré ball)."""
    rng = np.random.default_rng(seed)
    c = rng.normal(size=(k, d))
    c *= np.tanh(rng.uniform(0.5, 3.0, size=k) / 2)[:, None] / np.linalg.norm(c, axis=1)[:, None]
    tangents = rng.normal(scale=spread, size=(n, d))
    return gk.poincare.exp_map(tangents, base=c[rng.integers(0, k, size=n)])


def _far(a: np.ndarray, b: np.ndarray, model: str) -> float:
    return float(np.max(np.diagonal(gk.distance_matrix(a, b, model=model))))


CHUNKS = [(1, 1499, 1500), (431,) * 6 + (414,)]


@pytest.mark.parametrize("model", ["poincare", "hyperboloid"])
@pytest.mark.parametrize("chunks", CHUNKS)
def test_given_init_matches_in_memory(client, model, chunks):
    x = gk.convert(_blobs(3000, 3, 1), "poincare", model)
    init = x[[0, 1, 2, 3, 4]]
    ref = gk.KMeans(5, model=model, init=init).fit(x)
    got = gk.dask.KMeans(5, model=model, init=init).fit(da.from_array(x, chunks=(chunks, -1)))
    assert np.array_equal(got.labels_.compute(), ref.labels_)
    assert _far(got.cluster_centers_, ref.cluster_centers_, model) <= 1e-13
    assert got.inertia_ == pytest.approx(ref.inertia_, rel=1e-12)
    assert got.n_iter_ == ref.n_iter_
    assert len(got.inertia_history_) == len(ref.inertia_history_)
    np.testing.assert_allclose(got.inertia_history_, ref.inertia_history_, rtol=1e-12)
    # the fitted estimator answers as the in-memory one (lazy results)
    dx = da.from_array(x, chunks=(chunks, -1))
    assert np.array_equal(got.predict(dx).compute(), ref.predict(x))
    np.testing.assert_allclose(got.transform(dx).compute(), ref.transform(x), rtol=1e-13)
    assert got.score(dx) == pytest.approx(ref.score(x), rel=1e-12)


def test_empty_cluster_repair_matches_in_memory(client):
    # duplicate starting centres: the repair moves the farthest points
    x = _blobs(2000, 2, 2, k=3)
    init = np.array([x[0], x[0], x[0], x[5]])
    ref = gk.KMeans(4, init=init, max_iter=30).fit(x)
    got = gk.dask.KMeans(4, init=init, max_iter=30).fit(da.from_array(x, chunks=333))
    assert np.array_equal(got.labels_.compute(), ref.labels_)
    assert _far(got.cluster_centers_, ref.cluster_centers_, "poincare") <= 1e-13
    assert got.inertia_ == pytest.approx(ref.inertia_, rel=1e-12)


def test_seeding_does_not_depend_on_chunks_or_workers(client):
    x = _blobs(2500, 4, 3, k=6)
    fits = [
        gk.dask.KMeans(6, random_state=11, tol=0).fit(da.from_array(x, chunks=c)) for c in (2500, 97, ((1000, 1, 1499), -1))
    ]
    with dask.config.set(scheduler="synchronous"):
        fits.append(gk.dask.KMeans(6, random_state=11, tol=0).fit(da.from_array(x, chunks=600)))
    seeded = [
        gk.dask.KMeans(6)._seed(*gk.dask.KMeans(6)._blocks(da.from_array(x, chunks=c)), 2500, 123, "k-means++")
        for c in (2500, 97)
    ]
    assert np.array_equal(seeded[0], seeded[1])  # the same points drawn, bit for bit
    assert all(np.any(np.all(x == row, axis=1)) for row in seeded[0])  # centres are data points
    for f in fits[1:]:
        assert np.array_equal(f.labels_.compute(), fits[0].labels_.compute())
        assert _far(f.cluster_centers_, fits[0].cluster_centers_, "poincare") <= 1e-13
    # with tol=0, a fixed point of Lloyd's iteration (common practice): every point is
    # with its nearest centre, every centre is the Fréchet mean of its points
    lab = fits[0].labels_.compute()
    assert np.array_equal(gk.knn(x, 1, fits[0].cluster_centers_)[0][:, 0], lab)
    means = gk.frechet_mean(x, labels=lab).mean
    assert _far(means, fits[0].cluster_centers_, "poincare") <= 1e-13


def test_exponential_race_draws_in_proportion():
    # Efraimidis & Spirakis 2006; chi-square goodness of fit (scipy.stats)
    stats = pytest.importorskip("scipy.stats")
    from gyrokit.dask import _seed_block

    w = np.array([1.0, 2.0, 0.0, 7.0, 4.0])
    x = np.zeros((5, 2))
    counts = np.zeros(5)
    for seed in range(3000):
        _, best, _ = _seed_block(x, w, None, [], seed, 1, 1, "poincare", -1.0, 0)
        counts[best[0][1]] += 1
    assert counts[2] == 0  # weight zero is never drawn
    keep = w > 0
    expected = w[keep] / w.sum() * counts.sum()
    assert stats.chisquare(counts[keep], expected).pvalue > 1e-4


def test_random_init_draws_distinct_points(client):
    x = _blobs(1000, 2, 4)
    f = gk.dask.KMeans(7, init="random", random_state=5).fit(da.from_array(x, chunks=300))
    assert f.cluster_centers_.shape == (7, 2)
    assert len(np.unique(f.labels_.compute())) == 7
    assert f.inertia_history_[-1] == f.inertia_


def test_worker_killed_mid_fit(client, tmp_path):
    x = _blobs(8000, 3, 5)
    init = x[:4]
    ref = gk.dask.KMeans(4, init=init).fit(da.from_array(x, chunks=1000))
    marker = str(tmp_path / "died")
    dx = da.from_array(x, chunks=(1000, -1)).map_blocks(die_once(marker), dtype=x.dtype, meta=np.empty((0, 0)))
    got = gk.dask.KMeans(4, init=init).fit(dx)
    assert os.path.exists(marker)
    assert np.array_equal(got.cluster_centers_, ref.cluster_centers_)
    assert np.array_equal(got.labels_.compute(), ref.labels_.compute())


def test_errors(client):
    x = _blobs(3000, 2, 6)
    x[2345] = [0.8, 0.8]
    with pytest.raises(ValueError, match=r"^X: row 2345 is on or outside the ball"):
        gk.dask.KMeans(3, random_state=0).fit(da.from_array(x, chunks=1000))
    with pytest.raises(ValueError, match="larger than the number of points"):
        gk.dask.KMeans(5).fit(da.from_array(x[:3], chunks=2))
    with pytest.raises(ValueError, match="empty"):
        gk.dask.KMeans(1).fit(da.zeros((0, 2)))
    with pytest.raises(ValueError, match="init must have shape"):
        gk.dask.KMeans(2, init=np.zeros((3, 2))).fit(da.from_array(x[:10], chunks=5))
    with pytest.raises(ValueError, match="init is not a valid array"):
        gk.dask.KMeans(2, init=np.array([[0.0, 0.0], [2.0, 0.0]])).fit(da.from_array(x[:10], chunks=5))
    with pytest.raises(ValueError, match="n_clusters"):
        gk.dask.KMeans(0).fit(da.from_array(x[:10], chunks=5))
    with pytest.raises(gk.UnfittedError if hasattr(gk, "UnfittedError") else ValueError):
        gk.dask.KMeans(2).predict(x[:10])
    with pytest.raises(TypeError):
        gk.dask.KMeans(2).fit(np.array([["a", "b"]], dtype=object))
