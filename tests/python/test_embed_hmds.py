"""gk.embed.from_distances (h-MDS, Sala, De Sa, Gu and Ré 2018).

Reference: points sampled in H^dim (hyperboloid coordinates, exact float64
inputs), their distances from the textbook closed form in mpmath at 50
digits (conftest.mp_distance); the embedding's distances are again
evaluated in mpmath at 50 digits on its exact float64 output, so the check
measures h-MDS alone."""

from __future__ import annotations

import numpy as np
import pytest

import gyrokit as gk
from conftest import ball_points, mp_distance


def _mp_table(x, curvature):
    n = len(x)
    D = np.zeros((n, n))
    for i in range(n):
        for j in range(i + 1, n):
            D[i, j] = D[j, i] = float(mp_distance("hyperboloid", x[i], x[j], curvature, dps=50))
    return D


def _sample(rng, n, dim, rmax, curvature, cluster=None):
    """Hyperboloid points, hyperbolic radius uniform in [0, rmax R]; with
    ``cluster``, the first 8 points at distances ~``cluster`` R around point 9."""
    R = 1 / np.sqrt(-curvature)
    x = gk.convert(ball_points(rng, n, dim, rmax, curvature=curvature), "poincare", "hyperboloid", curvature=curvature)
    if cluster is not None:
        v = rng.standard_normal((8, dim + 1)) * (cluster * R)
        v[:, 0] = 0.0
        o = np.r_[R, np.zeros(dim)]
        v = gk.hyperboloid.transport(v, o, x[9], curvature=curvature)
        x[:8] = gk.hyperboloid.exp_map(v, x[9], curvature=curvature)
    return x


@pytest.mark.parametrize("dim", [2, 5, 10])
@pytest.mark.parametrize(
    "rmax, cluster, curvature",
    [
        (10.0, None, -1.0),  # large distances: pairs up to ~20 R
        (4.0, 1e-4, -1.0),  # small distances (1e-4 R) beside distances of ~8 R
        (2.0, 1e-6, -0.25),  # very small distances (1e-6 R), another curvature
    ],
)
def test_distances_of_points_of_hdim_are_reproduced(dim, rmax, cluster, curvature):
    rng = np.random.default_rng(dim * 100 + int(rmax))
    n = 36
    x = _sample(rng, n, dim, rmax, curvature, cluster)
    D = _mp_table(x, curvature)
    e = gk.embed.from_distances(D, dim, curvature=curvature)
    assert e.points.shape == (n, dim + 1)
    assert e.model == "hyperboloid" and e.curvature == curvature and e.scale is None
    D2 = _mp_table(e.points, curvature)
    iu = np.triu_indices(n, 1)
    rel = np.abs(D2[iu] - D[iu]) / D[iu]
    assert rel.max() <= 1e-8, (rel.max(), D[iu].min(), D[iu].max())
    # the library's own distances of the result agree as well
    D3 = gk.distance_matrix(e.points, model="hyperboloid", curvature=curvature)
    assert np.max(np.abs(D3[iu] - D[iu]) / D[iu]) <= 1e-8


@pytest.mark.parametrize("model", ["poincare", "klein", "halfspace"])
def test_other_models(model):
    rng = np.random.default_rng(5)
    x = _sample(rng, 20, 3, 3.0, -1.0)
    D = _mp_table(x, -1.0)
    e = gk.embed.from_distances(D, 3, model=model)
    assert e.points.shape == (20, 3) and e.model == model
    D2 = gk.distance_matrix(e.points, model=model)
    iu = np.triu_indices(20, 1)
    assert np.max(np.abs(D2[iu] - D[iu]) / D[iu]) <= 1e-9


def test_lower_dimension_than_the_data_and_padding():
    rng = np.random.default_rng(9)
    x = _sample(rng, 12, 2, 2.0, -1.0)
    D = _mp_table(x, -1.0)
    # dim larger than needed: the extra coordinates are 0 up to rounding and
    # distances still reproduced
    e = gk.embed.from_distances(D, 4)
    iu = np.triu_indices(12, 1)
    D2 = gk.distance_matrix(e.points, model="hyperboloid")
    assert np.max(np.abs(D2[iu] - D[iu]) / D[iu]) <= 1e-9
    # dim larger than n - 1 is allowed (padded with zero coordinates)
    assert gk.embed.from_distances(D[:3, :3], 5).points.shape == (3, 6)


@pytest.mark.parametrize(
    "D, match",
    [
        (np.array([[0, 1, 2], [1, 0, 3], [2, 3.5, 0.0]]), r"D row 1: not symmetric: D\[1, 2\] = 3.0 but D\[2, 1\] = 3.5"),
        (np.array([[0, 1, 2], [1, 0, -3], [2, -3, 0.0]]), r"D row 1: D\[1, 2\] = -3.0 is not a finite distance"),
        (np.array([[0, 1, 2], [1, 0, np.nan], [2, np.nan, 0.0]]), r"D row 1: D\[1, 2\] = nan"),
        (np.array([[0, 1, 2], [1, 0.5, 3], [2, 3, 0.0]]), r"D row 1: D\[1, 1\] = 0.5; the diagonal must be 0"),
        (np.ones((2, 3)), r"D must be a square \(n, n\) distance matrix, got shape \(2, 3\)"),
        (np.ones(3), r"D must be a square"),
        (np.zeros((0, 0)), r"D is empty"),
        (np.array([[0.0, 200.0], [200.0, 0.0]]), r"D row 1: distance 200.0 from the central point"),
    ],
)
def test_bad_tables(D, match):
    with pytest.raises(ValueError, match=match):
        gk.embed.from_distances(D, 2)


def test_bad_arguments():
    D = np.array([[0.0, 1.0], [1.0, 0.0]])
    with pytest.raises(ValueError, match="dim must be >= 1"):
        gk.embed.from_distances(D, 0)
    with pytest.raises(TypeError, match="dim must be an integer"):
        gk.embed.from_distances(D, 2.5)
    with pytest.raises(ValueError, match="model must be one of"):
        gk.embed.from_distances(D, 2, model="sphere")
    with pytest.raises(ValueError, match="curvature must be a finite number < 0"):
        gk.embed.from_distances(D, 2, curvature=1.0)
    with pytest.raises(TypeError, match="D must be an"):
        gk.embed.from_distances(np.array([["a", "b"], ["c", "d"]]), 2)
    # beyond the Poincaré ball's range: the conversion says so
    with pytest.raises(ValueError):
        gk.embed.from_distances(np.array([[0.0, 80.0], [80.0, 0.0]]), 1, model="poincare")
