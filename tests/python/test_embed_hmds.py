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


def _sample(rng, n, dim, rmax, curvature, cluster=None, at=None, clusters=1):
    """Hyperboloid points, hyperbolic radius uniform in [0, rmax R]; with
    ``cluster``, ``clusters`` groups of 8 points (the first rows) at distances
    ~``cluster`` R around the last rows, moved to radius ``at`` R if given
    (the rim of the sample: far from the points' 1-centre)."""
    R = 1 / np.sqrt(-curvature)
    x = gk.convert(ball_points(rng, n, dim, rmax, curvature=curvature), "poincare", "hyperboloid", curvature=curvature)
    o = np.r_[R, np.zeros(dim)]
    for k in range(clusters if cluster is not None else 0):
        centre = n - 1 - k
        if at is not None:
            p = ball_points(rng, 1, dim, at, rmin=at, curvature=curvature)
            x[centre] = gk.convert(p, "poincare", "hyperboloid", curvature=curvature)[0]
        v = rng.standard_normal((8, dim + 1)) * (cluster * R)
        v[:, 0] = 0.0
        v = gk.hyperboloid.transport(v, o, x[centre], curvature=curvature)
        x[8 * k : 8 * k + 8] = gk.hyperboloid.exp_map(v, x[centre], curvature=curvature)
    return x


def _relative_errors(D, D2):
    iu = np.triu_indices(len(D), 1)
    return np.abs(D2[iu] - D[iu]) / D[iu]


@pytest.mark.parametrize("dim", [2, 5, 10])
@pytest.mark.parametrize(
    "rmax, cluster, at, curvature",
    [
        (10.0, None, None, -1.0),  # large distances: pairs up to ~20 R
        (4.0, 1e-4, None, -1.0),  # small distances (1e-4 R) beside distances of ~8 R
        (5.0, 1e-6, 5.0, -1.0),  # 1e-6 R pairs at the rim, 5 R from the points' centre
        (5.0, 1e-8, 5.0, -1.0),  # 1e-8 R pairs there
        (10.0, 1e-6, 10.0, -1.0),  # 1e-6 R pairs 10 R out, beside pairs up to 20 R
        (10.0, 1e-8, 10.0, -1.0),  # 1e-8 R pairs 10 R out
        (2.0, 1e-8, 2.0, -0.25),  # another curvature
    ],
)
def test_distances_of_points_of_hdim_are_reproduced(dim, rmax, cluster, at, curvature):
    # Before the frame choice and the Gauss-Newton polish, the 1e-6 R pairs
    # 5 R out were off by up to 4e-7 and the 1e-8 R pairs 10 R out by 7e-3.
    rng = np.random.default_rng(dim * 100 + int(rmax) + (0 if cluster is None else int(-np.log10(cluster))))
    n = 36
    x = _sample(rng, n, dim, rmax, curvature, cluster, at)
    D = _mp_table(x, curvature)
    e = gk.embed.from_distances(D, dim, curvature=curvature)
    assert e.points.shape == (n, dim + 1)
    assert e.model == "hyperboloid" and e.curvature == curvature and e.scale is None
    # 50-digit distances of the exact float64 output (mpmath)
    rel = _relative_errors(D, _mp_table(e.points, curvature))
    assert rel.max() <= 1e-8, (rel.max(), D[D > 0].min(), D.max())
    # the library's own distances of the result agree as well
    D3 = gk.distance_matrix(e.points, model="hyperboloid", curvature=curvature)
    assert _relative_errors(D, D3).max() <= 1e-8


@pytest.mark.parametrize("dim", [2, 5, 10])
@pytest.mark.parametrize("at, cluster", [(1.0, 1e-8), (3.0, 1e-8), (8.0, 1e-6)])
def test_two_far_apart_clusters_are_held_to_the_float64_grid(dim, at, cluster):
    """Two tight clusters far apart cannot both sit near the origin: a point
    ``a R`` from it has float64 coordinates ``R sinh a`` spaced ``u R sinh a``
    (u = 2^-53; spacing of the grid, common practice), which bounds how well
    any float64 hyperboloid point set holds a pair ``d`` apart there. The
    documented bound: every pair within ``max(2^-36, 2 u sinh(a) R / d)``
    relative, ``a R`` the distance of the pair's nearer point from the
    origin."""
    rng = np.random.default_rng(int(10 * at) + dim)
    n = 36
    x = _sample(rng, n, dim, at, -1.0, cluster, at, clusters=2)
    D = _mp_table(x, -1.0)
    e = gk.embed.from_distances(D, dim)
    rel = _relative_errors(D, _mp_table(e.points, -1.0))
    iu = np.triu_indices(n, 1)
    a = np.arcsinh(np.linalg.norm(e.points[:, 1:], axis=1))
    bound = np.maximum(2.0**-36, 2 * 2.0**-53 * np.sinh(np.minimum(a[iu[0]], a[iu[1]])) / D[iu])
    assert (rel <= bound).all(), (rel / bound).max()
    # the eigensolver alone left these configurations at 4e-8 .. 3e-5 (worst
    # pair over 3 seeds); now 2e-9 .. 4e-7
    assert rel.max() <= 1e-6


def test_a_table_that_is_not_hyperbolic_keeps_the_gram_approximation():
    """A table from H^5 embedded in dim 2 is not the table of any point set
    of H^2: the result is h-MDS's rank-2 approximation of the Gram matrix
    (Sala, De Sa, Gu and Ré 2018, with the base point the 1-centre), not a
    polished one. The reference is the textbook form ``G = cosh a_i cosh a_j
    - cosh D_ij`` and NumPy's ``eigh`` on these moderate distances."""
    rng = np.random.default_rng(3)
    n = 30
    x = _sample(rng, n, 5, 2.0, -1.0)
    D = _mp_table(x, -1.0)
    b = int(np.argmin(D.max(axis=1)))
    G = np.multiply.outer(np.cosh(D[b]), np.cosh(D[b])) - np.cosh(D)
    lam, U = np.linalg.eigh(G)
    s = U[:, -2:] * np.sqrt(np.clip(lam[-2:], 0, None))
    ref = gk.distance_matrix(np.column_stack([np.sqrt(1 + (s * s).sum(1)), s]), model="hyperboloid")
    e = gk.embed.from_distances(D, 2)
    got = gk.distance_matrix(e.points, model="hyperboloid")
    iu = np.triu_indices(n, 1)
    assert np.max(np.abs(got[iu] - ref[iu]) / ref[iu]) <= 1e-9
    assert _relative_errors(D, got).max() > 1e-3  # it is an approximation


def test_a_tight_pair_at_the_end_of_a_line():
    """Points 0, 17 and 34 R along a geodesic and one more 1e-3 R from the
    last, across the line: the Gram matrix's second eigenvalue (~1e-20) is
    far below its rounding (~1e-2), so the eigensolver alone places the
    last two points 11 times too far apart; the polish recovers the pair.
    Reference distances: mpmath at 50 digits on the exact float64 points."""
    x = np.zeros((4, 3))
    x[:, 1] = np.sinh([0.0, 17.0, 34.0, 34.0])
    x[3, 2] = 1e-3
    x[:, 0] = np.sqrt(1 + (x[:, 1:] ** 2).sum(1))
    D = _mp_table(x, -1.0)
    for model in ("hyperboloid", "poincare"):
        e = gk.embed.from_distances(D, 2, model=model)
        hyp = gk.convert(e.points, model, "hyperboloid") if model != "hyperboloid" else e.points
        rel = _relative_errors(D, _mp_table(hyp, -1.0))
        assert rel.max() <= 1e-8, (model, rel)


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
