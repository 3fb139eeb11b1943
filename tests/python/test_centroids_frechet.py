"""Centroids: gk.frechet_mean, gk.einstein_midpoint, gk.frechet_variance.

This file: the Fréchet mean against the mpmath minimiser, closed forms
(two points, symmetric configurations, one point, points far out) and
weights. The sources and the tolerance rules are described in
centroids_support.py.
"""

from __future__ import annotations

import warnings

from mpmath import mp
import numpy as np
import pytest

import gyrokit as gk
from conftest import ball_points, DISTANCE, MODELS, point_at
from centroids_support import (
    _pairs,
    data_rounding,
    from_poincare,
    hd,
    mp_frechet_mean,
    mp_hyperboloid_distance,
    mp_lift,
    resolution,
    to_poincare,
)


REF_CASES = [
    (30, 3, 2.0, 0.0, -1.0, False, "poincare"),
    (40, 5, 6.0, 1.5, -1.0, True, "poincare"),
    (25, 2, 10.0, 0.0, -0.25, True, "poincare"),
    (20, 4, 6.0, 3.0, -3.0, True, "klein"),
    (30, 3, 5.0, 2.0, -1.0, True, "hyperboloid"),
    (30, 2, 4.0, 1.0, -2.0, False, "halfspace"),
    (12, 1, 6.0, 2.0, -1.0, True, "poincare"),
    (8, 6, 1e-6, 4.0, -1.0, True, "poincare"),  # nearly coincident points
    (15, 3, 8.0, 0.0, -1.0, True, "hyperboloid"),
]


@pytest.mark.parametrize("case", REF_CASES, ids=[f"n{c[0]}-d{c[1]}-r{c[2]}-c{c[3]}-K{c[4]}-{c[6]}" for c in REF_CASES])
def test_matches_mpmath_minimiser(case):
    n, d, rmax, rc, K, weighted, model = case
    rng = np.random.default_rng(n * 100 + d)
    center = point_at(rc, d, curvature=K) if rc else None
    x = ball_points(rng, n, d, rmax, center=center, curvature=K)
    w = rng.uniform(0.05, 5.0, n) if weighted else None
    X = from_poincare(x, model, K)
    r = gk.frechet_mean(X, weights=w, model=model, curvature=K)
    assert r.converged and r.grad_norm <= 1e-12
    ref = mp_frechet_mean(X, w, K, model)  # mpmath 50-digit minimisation, on the float64 input as given
    err = float(mp_hyperboloid_distance(ref, mp_lift(r.mean, model, K), K))
    assert err <= 1e-10, err
    # and as good as the stopping rule (distance <= grad_norm R, the Hessian
    # being >= the identity) and float64 allow
    R = 1 / np.sqrt(-K)
    assert err <= r.grad_norm * R + 64 * resolution(r.mean, model, K), err


# ------------------------------------------------------------------ closed forms


def mp_midpoint(X, model, curvature=-1.0):
    """Closed form (handbook): the geodesic midpoint of two hyperboloid points
    is (X + Y) / sqrt(-<X + Y, X + Y>_L); at 60 digits on the model floats."""
    a, b = mp_lift(X[0], model, curvature), mp_lift(X[1], model, curvature)
    with mp.workdps(60):
        s0, s = a[0] + b[0], [u + v for u, v in zip(a[1], b[1])]
        nrm = mp.sqrt(s0 * s0 - mp.fsum(v * v for v in s))
        return s0 / nrm, [v / nrm for v in s]


@pytest.mark.parametrize("model", MODELS)
def test_two_points_mean_is_geodesic_midpoint(model):
    # handbook: the Fréchet mean of two points is the midpoint of their geodesic
    rng = np.random.default_rng(21)
    worst = 0.0
    for x, y in _pairs(rng, 3, 60):
        X = from_poincare(np.array([x, y]), model)
        ref = mp_midpoint(X, model)
        r = gk.frechet_mean(X, model=model)
        assert r.converged
        # reading non-Poincaré floats into the Poincaré ball rounds them once
        tol = r.grad_norm + 16 * resolution(r.mean, model)
        if model != "poincare":
            tol += 2 * data_rounding(to_poincare(X, model))
        err = float(mp_hyperboloid_distance(ref, mp_lift(r.mean, model)))
        assert err <= tol, (x, y, err, tol)
        worst = max(worst, err)
        # the model's own midpoint function agrees (to the contract's accuracy)
        if model == "poincare":
            mid = gk.poincare.midpoint(X[0], X[1])
        elif model == "klein":
            mid = gk.klein.midpoint(X[0], X[1])
        elif model == "hyperboloid":
            mid = gk.hyperboloid.geodesic(X[0], X[1], 0.5)
        else:
            continue
        assert float(DISTANCE[model](r.mean, mid)) <= tol + 1e-13 + 16 * resolution(mid, model)
    assert worst > 0  # the check is not vacuous


def test_two_points_weighted_is_fraction_along_geodesic():
    # handbook: argmin_t w1 (tD)^2 + w2 ((1-t)D)^2 is t = w2 / (w1 + w2)
    rng = np.random.default_rng(22)
    for x, y in _pairs(rng, 4, 45):
        w = rng.uniform(0.1, 10.0, 2)
        expect = gk.poincare.geodesic(x, y, w[1] / w.sum())
        r = gk.frechet_mean(np.array([x, y]), weights=w)
        assert hd(r.mean, expect) <= r.grad_norm + 16 * resolution(expect), (x, y, w)


@pytest.mark.parametrize("K", [-1.0, -2.5])
def test_symmetric_configurations_have_the_symmetric_centre(K):
    # handbook: an isometry (Möbius left translation a ⊕ ·) maps the mean of a
    # configuration symmetric about the origin (mean 0) to a.
    R = 1 / np.sqrt(-K)
    rng = np.random.default_rng(int(-K * 10))
    configs, far = [], 0.0
    for rho in (0.3, 3.0, 7.0):
        r = R * np.tanh(rho / 2)
        v = rng.standard_normal(3)
        v *= r / np.linalg.norm(v)
        configs.append(np.array([v, -v]))  # ±v
        for m in (3, 5, 8):  # regular polygons in a 2-plane of R^3
            t = 2 * np.pi * np.arange(m) / m + 0.3
            configs.append(np.stack([r * np.cos(t), r * np.sin(t), np.zeros(m)], axis=1))
        configs.append(np.concatenate([r * np.eye(4), -r * np.eye(4)])[:, :4])  # cross-polytope in R^4
    for P in configs:
        d = P.shape[1]
        for rc in (0.0, 1.0, 5.0):
            u = np.arange(1.0, d + 1)
            a = R * np.tanh(rc / 2) * u / np.linalg.norm(u)
            X = gk.poincare.add(a, P, curvature=K)
            r = gk.frechet_mean(X, curvature=K)
            assert r.converged
            err = hd(r.mean, a, K)
            # X = a ⊕ P is itself rounded: allow for the data's own rounding
            tol = r.grad_norm * R + 16 * resolution(a, curvature=K) + 2 * data_rounding(X, curvature=K)
            assert err <= tol, (P, a, err, tol)
            far = max(far, np.linalg.norm(X.mean(axis=0) - a) / R)
    assert far > 0.1  # the symmetric centre is not what the Euclidean average gives


@pytest.mark.parametrize("model", MODELS)
def test_one_point_is_its_own_mean(model):
    rng = np.random.default_rng(3)
    radii = (0.0, 1e-9, 0.5, 3.0, 8.0) + ((14.0,) if model != "klein" else ())  # Klein holds r <= ~18
    for rho in radii:
        u = rng.standard_normal(3)
        X = from_poincare(np.tanh(rho / 2) * u[None] / np.linalg.norm(u), model)
        r = gk.frechet_mean(X, model=model)
        assert r.converged
        err = float(DISTANCE[model](r.mean, X[0]))
        assert err <= r.grad_norm + 4 * resolution(X[0], model), (rho, r.mean, X[0])
        if rho <= 3.0:  # farther out: see test_einstein_midpoint_of_one_point_far_out
            e = gk.einstein_midpoint(X, model=model)
            assert float(DISTANCE[model](e, X[0])) <= 8 * resolution(X[0], model), (rho, e, X[0])


# Was a strict xfail (defect found by this file); fixed in src/centroids.rs.
@pytest.mark.parametrize("rho", [8.0, 14.0, 18.0, 25.0])
def test_einstein_midpoint_of_one_point_far_out(rho):
    p = point_at(rho, 3)
    e = gk.einstein_midpoint(p[None])
    assert np.linalg.norm(e) < 1 and hd(e, p) <= 8 * resolution(p)


# Was a strict xfail (defect found by this file); fixed in src/centroids.rs.
@pytest.mark.parametrize("rho", [20.0, 25.0, 35.0])
def test_frechet_mean_far_out(rho):
    rng = np.random.default_rng(int(rho))
    c = point_at(rho, 3)
    x = gk.poincare.add(c, gk.poincare.exp_map(1e-3 * rng.standard_normal((5, 3))))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", gk.ConvergenceWarning)
        r = gk.frechet_mean(x)
    assert np.all(np.isfinite(r.mean)) and np.linalg.norm(r.mean) < 1
    ref = mp_frechet_mean(x)  # mpmath 50-digit minimisation
    assert float(mp_hyperboloid_distance(ref, mp_lift(r.mean, "poincare"))) <= 1e-12 + 64 * resolution(r.mean)


# Was a strict xfail (defect found by this file); fixed in src/centroids.rs.
@pytest.mark.parametrize("rho,seed", [(12.0, 100), (13.0, 101)])
def test_frechet_mean_stops_at_float64_limit(rho, seed):
    rng = np.random.default_rng(seed)
    u = rng.standard_normal(3)
    c = np.tanh(rho / 2) * u / np.linalg.norm(u)
    x = gk.poincare.add(c, gk.poincare.exp_map(0.3 * rng.standard_normal((20, 3))))
    with warnings.catch_warnings():
        warnings.simplefilter("error", gk.ConvergenceWarning)
        r = gk.frechet_mean(x)
    assert r.iterations <= 10
    ref = mp_frechet_mean(x)  # mpmath 50-digit minimisation
    assert float(mp_hyperboloid_distance(ref, mp_lift(r.mean, "poincare"))) <= 64 * resolution(r.mean)


# ------------------------------------------------------------------ weights


def test_integer_weights_equal_repeated_points():
    rng = np.random.default_rng(4)
    x = ball_points(rng, 25, 3, 5.0, center=point_at(1.0, 3))
    w = rng.integers(1, 5, 25)
    rep = np.repeat(x, w, axis=0)
    a = gk.frechet_mean(x, weights=w.astype(float))
    b = gk.frechet_mean(rep)
    assert hd(a.mean, b.mean) <= 1e-14
    assert gk.frechet_variance(x, weights=w.astype(float)) == pytest.approx(gk.frechet_variance(rep), rel=1e-13)
    ea, eb = gk.einstein_midpoint(x, weights=w.astype(float)), gk.einstein_midpoint(rep)
    assert hd(ea, eb) <= 1e-14


def test_zero_weight_drops_its_point():
    rng = np.random.default_rng(5)
    x = ball_points(rng, 30, 4, 5.0)
    w = rng.uniform(0.5, 2.0, 30)
    w[[0, 7, 29]] = 0.0
    keep = w > 0
    a = gk.frechet_mean(x, weights=w)
    b = gk.frechet_mean(x[keep], weights=w[keep])
    assert hd(a.mean, b.mean) <= 1e-15
    assert hd(gk.einstein_midpoint(x, weights=w), gk.einstein_midpoint(x[keep], weights=w[keep])) <= 1e-15
    # the dropped points really mattered
    assert hd(gk.frechet_mean(x).mean, b.mean) > 1e-3


def test_weights_scale_invariant():
    # handbook: argmin of sum c w d^2 does not depend on c > 0
    rng = np.random.default_rng(6)
    x = ball_points(rng, 40, 3, 6.0, center=point_at(2.0, 3))
    w = rng.uniform(0.1, 3.0, 40)
    base = gk.frechet_mean(x, weights=w).mean
    for c in (1e-100, 1e-8, 1e8, 1e100):
        assert hd(gk.frechet_mean(x, weights=w * c).mean, base) <= 1e-14, c


# Was a strict xfail (defect found by this file); fixed in src/centroids.rs.
@pytest.mark.parametrize("c", [1e-160, 1e-200, 1e-310, 1e200, 1e300])
def test_weights_scale_invariant_extreme(c):
    rng = np.random.default_rng(6)
    x = ball_points(rng, 40, 3, 6.0, center=point_at(2.0, 3))
    base = gk.frechet_mean(x).mean
    with warnings.catch_warnings():
        warnings.simplefilter("error", gk.ConvergenceWarning)
        r = gk.frechet_mean(x, weights=np.full(40, c))
    assert r.converged and hd(r.mean, base) <= 1e-14
