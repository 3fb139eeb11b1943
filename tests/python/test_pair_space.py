"""Pairwise distances of every model through the one tiled kernel (the pair
space of ``src/pairwise``): Klein and hyperboloid points stored as
double-double Poincaré images, refined for close pairs, far hyperboloid pairs
by the law-of-cosines form. Checked against mpmath at high precision on the
hard cases, and for agreement between every pairwise path."""

from __future__ import annotations

import mpmath as mp
import numpy as np
import pytest

import gyrokit as gk


def _mp_distance(model: str, x, y, curvature: float) -> mp.mpf:
    """Textbook closed forms evaluated in mpmath on the float64 inputs
    (cosh d/R = (1 - kappa k.l)/sqrt(g_k g_l) in the Klein ball,
    cosh d/R = kappa (x0 y0 - x_s.y_s) on the hyperboloid with x0 recomputed
    from the spatial part, as the library reads points; Ratcliffe,
    Foundations of Hyperbolic Manifolds, ch. 6, from memory). 400 digits:
    far hyperboloid points need ~300 to cancel x0 y0 - x_s.y_s."""
    with mp.workdps(400):
        kap = mp.mpf(-curvature)
        R = 1 / mp.sqrt(kap)
        X = [mp.mpf(float(v)) for v in x]
        Y = [mp.mpf(float(v)) for v in y]
        if model == "klein":
            gx = 1 - kap * mp.fsum(v * v for v in X)
            gy = 1 - kap * mp.fsum(v * v for v in Y)
            c = (1 - kap * mp.fsum(a * b for a, b in zip(X, Y))) / mp.sqrt(gx * gy)
        else:
            xs, ys = X[1:], Y[1:]
            x0 = mp.sqrt(R**2 + mp.fsum(v * v for v in xs))
            y0 = mp.sqrt(R**2 + mp.fsum(v * v for v in ys))
            c = kap * (x0 * y0 - mp.fsum(a * b for a, b in zip(xs, ys)))
        return R * mp.acosh(c) if c > 1 else mp.mpf(0)


def _rel_err(got: float, ref: mp.mpf) -> float:
    # absolute below 1e-300 (the reference of a point with itself is ~1e-145
    # at 400 digits instead of 0)
    if ref < mp.mpf("1e-100"):
        return abs(got)
    return float(abs((mp.mpf(got) - ref) / ref))


def _hard_points(model: str, d: int, rng) -> np.ndarray:
    """Points near the sphere (Klein: 1 - |x|/R from 1e-15 to 1), or out to
    170 R (hyperboloid), then each with a partner 1e-12 away (relative to its
    largest coordinate) and, on the hyperboloid, partners on the same ray 1 R
    and 1e-6 R further out."""
    u = rng.standard_normal((30, d))
    u /= np.linalg.norm(u, axis=1, keepdims=True)
    if model == "klein":
        base = u * (1 - 10.0 ** rng.uniform(-15, 0, 30))[:, None]
        close = base + 1e-12 * rng.standard_normal(base.shape)
        close[np.linalg.norm(close, axis=1) >= 1] = base[np.linalg.norm(close, axis=1) >= 1]
        return np.vstack([base, close])
    r = rng.uniform(0, 170, 30)
    pts = []
    for rr in (r, r + 1.0, r + 1e-6):
        xs = np.sinh(rr)[:, None] * u
        pts.append(np.c_[np.sqrt(1 + np.sum(xs * xs, axis=1)), xs])
    base = pts[0]
    close = base.copy()
    close[:, 1:] *= 1 + 1e-12 * rng.standard_normal((30, d))
    close[:, 0] = np.sqrt(1 + np.sum(close[:, 1:] ** 2, axis=1))
    return np.vstack(pts + [close])


@pytest.mark.parametrize("model", ["klein", "hyperboloid"])
@pytest.mark.parametrize("d", [2, 5])
def test_hard_cases_against_mpmath(model, d):
    rng = np.random.default_rng(40 + d)
    x = _hard_points(model, d, rng)
    D = gk.distance_matrix(x, model=model)
    n = len(x)
    worst = 0.0
    for i in range(n):
        for j in range(i, n):
            if (i + j) % 3 and abs(i - j) % 30:  # every partner pair, a third of the rest
                continue
            worst = max(worst, _rel_err(D[i, j], _mp_distance(model, x[i], x[j], -1.0)))
    # the numerical contract: 1e-12 relative (measured: below 4e-16)
    assert worst < 1e-14, worst


@pytest.mark.parametrize("model", ["poincare", "klein", "hyperboloid", "halfspace"])
def test_large_sets_all_paths_agree(model):
    """More points than one preparation chunk (4096): the matrix rows equal
    the element-wise distances bit for bit, and knn / NeighborIndex report the
    same bits as the matrix (common practice: one kernel, one result)."""
    rng = np.random.default_rng(7)
    n, d = 5000, 3
    u = rng.standard_normal((n, d))
    u /= np.linalg.norm(u, axis=1, keepdims=True)
    p = u * np.tanh(rng.uniform(0, 6, n) / 2)[:, None]
    x = gk.convert(p, "poincare", model)
    rows = [0, 4095, 4096, 4999]
    D = gk.distance_matrix(x[rows], x, model=model)
    ew = getattr(gk, model).distance(x[rows][:, None, :], x[None, :, :])
    np.testing.assert_array_equal(D, ew)  # one kernel: bit for bit
    idx, dist = gk.knn(x[rows], 5, x, model=model)
    np.testing.assert_array_equal(dist, np.take_along_axis(D, idx, axis=1))
    tree = gk.NeighborIndex(x, model=model)
    ti, td = tree.query(x[rows], 5)
    np.testing.assert_array_equal(ti, idx)
    np.testing.assert_array_equal(td, dist)
