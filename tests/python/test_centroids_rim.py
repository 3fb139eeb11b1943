"""Centroids of points near the rim of the Poincaré ball (fuzz finding F6,
tests/fuzz/FINDINGS.md): one point, a few points packed together, and points
far apart, against mpmath at 50 digits.

References (mpmath, 50 digits, no cancellation to fear at that precision):
* Einstein midpoint: the normalised hyperboloid centroid. A Poincaré point
  p maps to X = ((1 + |p|^2)/(1 - |p|^2), 2p/(1 - |p|^2)); the midpoint is
  M/sqrt(-<M, M>) for M = sum w X, mapped back by Y_s/(1 + Y_0) (the
  gyrocentroid of Ungar, "Analytic Hyperbolic Geometry", is sum w γ k / sum w γ
  in the Klein ball, which is the same point; from memory, and checked here
  against gk.poincare.midpoint for two points by the existing tests).
* Fréchet mean: Riemannian gradient descent,
  m <- m ⊕ exp_0(eta mean_i log_0((-m) ⊕ x_i)), eta = 2 / (1 + max_i d_i coth d_i)
  (the Hessian's eigenvalues lie in [1, d coth d]), in mpmath, with the handbook
  Möbius addition and log_0(u) = 2 artanh(|u|) u/|u|, exp_0(v) = tanh(|v|/2) v/|v|
  (curvature -1), run until the step is below 1e-30.
* Distances: cosh d = 1 + 2|x - y|^2 / ((1 - |x|^2)(1 - |y|^2)) (handbook).

Float64 cannot place a point near the rim more finely than one ulp of its
coordinates, which is about ``res = 2 eps |m| / (1 - |m|^2)`` of hyperbolic
distance there; results are checked to a few ``res``.
"""

from __future__ import annotations

import re
from pathlib import Path

import mpmath as mp
import numpy as np
import pytest

import gyrokit as gk

mp.mp.dps = 50
EPS = np.finfo(float).eps


def _v(p):
    return [mp.mpf(float(v)) for v in p]


def _dot(a, b):
    return mp.fsum(x * y for x, y in zip(a, b))


def _gap(p):
    return 1 - _dot(p, p)


def _add(x, y):
    """Möbius addition (handbook formula, curvature -1)."""
    xy, x2, y2 = _dot(x, y), _dot(x, x), _dot(y, y)
    den = 1 + 2 * xy + x2 * y2
    return [((1 + 2 * xy + y2) * a + (1 - x2) * b) / den for a, b in zip(x, y)]


def mp_dist(x, y):
    h = mp.fsum((a - b) ** 2 for a, b in zip(x, y)) / (_gap(x) * _gap(y))
    return mp.acosh(1 + 2 * h)


def mp_einstein(P, w=None):
    P = [_v(p) for p in P]
    w = [mp.mpf(1)] * len(P) if w is None else [mp.mpf(float(v)) for v in w]
    m0 = mp.fsum(wi * (1 + _dot(p, p)) / _gap(p) for wi, p in zip(w, P))
    ms = [mp.fsum(wi * 2 * p[j] / _gap(p) for wi, p in zip(w, P)) for j in range(len(P[0]))]
    lam = mp.sqrt(m0 ** 2 - _dot(ms, ms))
    return [v / (lam + m0) for v in ms]


def mp_frechet(P):
    P = [_v(p) for p in P]
    m = mp_einstein(P)
    for _ in range(400):
        v = [mp.mpf(0)] * len(m)
        lmax = mp.mpf(1)
        for p in P:
            u = _add([-a for a in m], p)
            nu = mp.sqrt(_dot(u, u))
            if nu > 0:
                dist = 2 * mp.atanh(nu)
                lmax = max(lmax, dist / mp.tanh(dist))  # Hessian eigenvalues lie in [1, d coth d]
                f = dist / nu / len(P)
                v = [a + f * b for a, b in zip(v, u)]
        nv = mp.sqrt(_dot(v, v))
        if nv < mp.mpf(10) ** -20:
            return m
        step = 2 / (1 + lmax) * nv  # a contracting step length (common practice)
        m = _add(m, [mp.tanh(step / 2) * a / nv for a in v])
    raise AssertionError("reference did not converge")


def res(m):
    """Hyperbolic length of one ulp of the coordinates at m (radial)."""
    m = np.asarray(m, dtype=float)
    r = float(np.linalg.norm(m))
    g = float(_gap(_v(m)))
    return 2 * EPS * (2 * r / g + 1)


def rim_point(rng, d, delta):
    """A point with 1 - |x| = delta (to rounding), random direction."""
    u = rng.standard_normal(d)
    u /= np.linalg.norm(u)
    return u * (1 - delta)


# The F6 residual reproducer (tests/fuzz/FINDINGS.md): d = 40, 1 - |p| = 8.3e-10.
_txt = (Path(__file__).resolve().parents[1] / "fuzz" / "FINDINGS.md").read_text()
F6_P = np.array(eval(re.search(r"`p = (\[.*?\])`", _txt).group(1)))  # noqa: S307 (a list literal of floats)
F6_Q = np.array([-0.9925404685657815, 0.12191561904358976])


@pytest.mark.parametrize("p", [F6_P, F6_Q], ids=["d40", "d2"])
def test_one_point_near_the_rim_is_its_own_centroid(p):
    # Before the fix: the Einstein midpoint of F6_P landed on the sphere
    # (a ValueError when measured), its Fréchet mean was NaN after 50
    # iterations, and F6_Q's reported converged=True with grad_norm 2.4e-6.
    # The centroid of one point is that point (definition; common practice).
    X = np.array([p])
    np.testing.assert_array_equal(gk.einstein_midpoint(X), p)
    r = gk.frechet_mean(X)
    np.testing.assert_array_equal(r.mean, p)
    assert r.converged and r.grad_norm <= 1e-12
    assert gk.frechet_variance(X) == 0.0


def test_random_single_points_near_the_rim():
    # Before: off by more than 1e-12 (relative to the radius) in 4 of 1000.
    rng = np.random.default_rng(15)
    for _ in range(300):
        d = int(rng.integers(2, 41))
        p = rim_point(rng, d, 10.0 ** rng.uniform(-15, -6))
        X = p[None, :]
        for m in (gk.einstein_midpoint(X), gk.frechet_mean(X).mean):
            assert np.all(np.isfinite(m))
            assert float(mp_dist(_v(m), _v(p))) <= 4 * res(p)


def packed(rng, n, d, delta):
    """n points near the rim, 1 - |x| ~ delta, within ~delta of each other
    in the coordinates (hyperbolic distances of order 1)."""
    base = rim_point(rng, d, delta)
    out = []
    for _ in range(n):
        t = rng.standard_normal(d) * delta * 0.3
        q = (base + t) * (1 - delta * rng.uniform(0, 0.5)) / np.linalg.norm(base + t) * np.linalg.norm(base)
        out.append(q)
    return np.array(out)


@pytest.mark.parametrize("n", [2, 3])
@pytest.mark.parametrize("delta", [1e-14, 1e-11, 8e-10, 1e-7])
@pytest.mark.parametrize("d", [2, 5, 40])
def test_points_packed_near_the_rim(n, delta, d):
    rng = np.random.default_rng(int(1e6 * delta) + 31 * n + d)
    X = packed(rng, n, d, delta)
    assert np.all(1 - np.linalg.norm(X, axis=1) > 0)
    em = gk.einstein_midpoint(X)
    ref = mp_einstein(X)
    assert float(mp_dist(_v(em), ref)) <= 8 * res(em)
    r = gk.frechet_mean(X)
    assert np.all(np.isfinite(r.mean)) and r.converged
    fref = mp_frechet(X)
    assert float(mp_dist(_v(r.mean), fref)) <= 8 * res(r.mean)


@pytest.mark.parametrize("X", [
    [[1 - 1e-13, 0.0], [-(1 - 1e-13), 1e-20], [0.0, 1 - 1e-9]],
    [[1 - 1e-15, 0.0, 0.0], [1 - 1e-12, 1e-7, 0.0], [-0.3, 0.2, 0.1]],
    [[0.6, 0.8 - 1e-14], [0.8, -0.6 + 1e-14], [-(1 - 1e-10), 0.0]],
])
def test_points_far_apart_near_the_rim(X):
    # the midpoint far from every member and from the origin: several
    # translated rounds
    X = np.array(X)
    em = gk.einstein_midpoint(X)
    ref = mp_einstein(X)
    assert np.all(np.isfinite(em))
    assert float(mp_dist(_v(em), ref)) <= 8 * res(em) + 1e-14


def test_kmeans_one_point_cluster_near_the_rim():
    # Before: a NaN centre for the cluster holding only F6_P.
    rng = np.random.default_rng(2)
    u = rng.standard_normal((200, 40))
    u /= np.linalg.norm(u, axis=1, keepdims=True)
    X = np.vstack([np.tanh(rng.uniform(0, 1, 200) / 2)[:, None] * u, F6_P[None, :]])
    init = np.vstack([X[0], F6_P])
    km = gk.KMeans(2, init=init, max_iter=20).fit(X)
    assert np.all(np.isfinite(km.cluster_centers_))
    assert km.labels_[-1] == 1 and np.sum(km.labels_ == 1) == 1
    np.testing.assert_array_equal(km.cluster_centers_[1], F6_P)
