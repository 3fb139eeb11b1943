"""Centroids: gk.einstein_midpoint against Ungar's result (the Einstein
midpoint of Klein points equals the Möbius gyromidpoint of their Poincaré
images, A. A. Ungar, "A Gyrovector Space Approach to Hyperbolic Geometry",
2008), every model giving the same mean, and per-label means. The sources
and the tolerance rules are described in centroids_support.py."""

from __future__ import annotations

from mpmath import mp, mpf
import numpy as np
import pytest

import gyrokit as gk
from conftest import ball_points, MODELS, point_at
from centroids_support import (
    _pairs,
    data_rounding,
    from_poincare,
    hd,
    mp_hyperboloid_distance,
    mp_lift,
    resolution,
    to_poincare,
)


# ------------------------------------------------------------------ Einstein midpoint (Ungar)


def _half_mobius(y):
    # 1/2 ⊗ y = y / (1 + sqrt(1 - |y|^2)) in the unit ball (handbook: tanh(artanh(|y|)/2))
    return y / (1 + np.sqrt(1 - np.sum(y * y, axis=-1, keepdims=True)))


def mp_einstein_midpoint(k, w, curvature=-1.0):
    """The Einstein midpoint sum w γ c / sum w γ of Klein points, at 60 digits,
    as a unit-hyperboloid mpf point (handbook formula, on the exact floats)."""
    with mp.workdps(60):
        sk = mp.sqrt(-mpf(curvature))
        num, den = [mpf(0)] * k.shape[1], mpf(0)
        for wi, row in zip(w, k):
            q = [mpf(float(a)) * sk for a in row]
            g = 1 / mp.sqrt(1 - mp.fsum(a * a for a in q))
            num = [a + mpf(float(wi)) * g * b for a, b in zip(num, q)]
            den += mpf(float(wi)) * g
        m = [a / den for a in num]
        c = 1 / mp.sqrt(1 - mp.fsum(a * a for a in m))
        return c, [a * c for a in m]


def mp_mobius_gyromidpoint(p, w, curvature=-1.0):
    """Ungar's Möbius gyromidpoint 1/2 ⊗ (sum w γ² q / sum w (γ² - 1/2)),
    γ² = 1/(1 - |q|^2), of Poincaré points, at 60 digits, as a unit-hyperboloid
    mpf point (1/2 ⊗ y = y / (1 + sqrt(1 - |y|^2)))."""
    with mp.workdps(60):
        sk = mp.sqrt(-mpf(curvature))
        num, den = [mpf(0)] * p.shape[1], mpf(0)
        for wi, row in zip(w, p):
            q = [(a if isinstance(a, mpf) else mpf(float(a))) * sk for a in row]
            g2 = 1 / (1 - mp.fsum(a * a for a in q))
            num = [a + mpf(float(wi)) * g2 * b for a, b in zip(num, q)]
            den += mpf(float(wi)) * (g2 - mpf(1) / 2)
        y = [a / den for a in num]
        h = [a / (1 + mp.sqrt(1 - mp.fsum(b * b for b in y))) for a in y]
        s2 = mp.fsum(a * a for a in h)
        return (1 + s2) / (1 - s2), [2 * a / (1 - s2) for a in h]


def test_einstein_midpoint_of_two_klein_points_is_poincare_midpoint():
    # Ungar's result for two points: the Einstein midpoint of Klein images is
    # the Möbius gyromidpoint of the Poincaré images.
    rng = np.random.default_rng(8)
    for x, y in _pairs(rng, 3, 45):
        k = gk.convert(np.array([x, y]), "poincare", "klein")
        P = gk.convert(k, "klein", "poincare")  # the Klein floats' own Poincaré images
        em = gk.einstein_midpoint(k, model="klein")
        mid = gk.poincare.midpoint(P[0], P[1])
        ref = mp_einstein_midpoint(k, [1.0, 1.0])  # 60-digit Einstein formula on the same floats
        tol = 16 * resolution(em, "klein")
        assert float(mp_hyperboloid_distance(ref, mp_lift(em, "klein"))) <= tol, (x, y)
        # (gk.poincare.midpoint: the contract's Möbius accuracy, 1e-12 relative)
        assert float(mp_hyperboloid_distance(ref, mp_lift(mid, "poincare"))) <= tol + 1e-13, (x, y)
        # the Einstein midpoint of two points is also the Fréchet mean
        r = gk.frechet_mean(k, model="klein")
        assert gk.klein.distance(em, r.mean) <= r.grad_norm + 2 * tol


@pytest.mark.parametrize("weighted", [False, True])
def test_einstein_midpoint_ungar_many_points(weighted):
    rng = np.random.default_rng(9 + weighted)
    for n, d, rmax, rc in [(50, 3, 3.0, 0.0), (200, 5, 5.0, 2.0), (7, 2, 8.0, 1.0)]:
        k = gk.convert(ball_points(rng, n, d, rmax, center=point_at(rc, d) if rc else None), "poincare", "klein")
        p = gk.convert(k, "klein", "poincare")  # the Klein floats' own Poincaré images
        w = rng.uniform(0.1, 4.0, n) if weighted else np.ones(n)
        ref = mp_einstein_midpoint(k, w)
        # Ungar's identity itself, at 60 digits on the Klein floats' exact Poincaré images
        with mp.workdps(60):
            exact_p = []
            for row in k:
                q = [mpf(float(a)) for a in row]
                a = mp.sqrt(1 - mp.fsum(b * b for b in q))
                exact_p.append([b / (1 + a) for b in q])
        assert mp_hyperboloid_distance(ref, mp_mobius_gyromidpoint(np.array(exact_p, dtype=object), w)) < mpf(10) ** -40
        # gyrokit: Klein input (converted to Poincaré) and Poincaré input agree with it
        from_klein = gk.convert(gk.einstein_midpoint(k, weights=w if weighted else None, model="klein"), "klein", "poincare")
        from_p = gk.einstein_midpoint(p, weights=w if weighted else None)
        tol = 16 * resolution(from_p) + 2 * data_rounding(p) + 1e-15
        for got in (from_klein, from_p):
            err = float(mp_hyperboloid_distance(ref, mp_lift(got, "poincare")))
            assert err <= tol, (n, d, err, tol)
        assert hd(from_klein, from_p) <= 2 * tol
        # NumPy, Ungar's Möbius gyromidpoint formula in float64 (a looser check:
        # the plain formula is not arranged for accuracy)
        g2 = 1 / (1 - np.sum(p * p, axis=1))
        np_mobius = _half_mobius((w * g2) @ p / np.sum(w * (g2 - 0.5)))
        assert hd(from_p, np_mobius) <= 1e-11
        # the Einstein midpoint is close to, but not, the Fréchet mean
        assert hd(from_p, gk.frechet_mean(p, weights=w).mean) > 1e-6


@pytest.mark.parametrize("model", MODELS)
def test_einstein_midpoint_per_label_and_models(model):
    rng = np.random.default_rng(10)
    p = ball_points(rng, 300, 3, 4.0)
    lab = rng.integers(0, 5, 300) * 3 - 4
    X = from_poincare(p, model)
    e = gk.einstein_midpoint(X, labels=lab, model=model)
    assert e.shape == (5, X.shape[1])
    for i, l in enumerate(np.unique(lab)):
        sep = gk.einstein_midpoint(X[lab == l], model=model)
        np.testing.assert_array_equal(e[i], sep)
        assert hd(to_poincare(sep, model), gk.einstein_midpoint(p[lab == l])) <= 1e-13


# ------------------------------------------------------------------ models, labels


@pytest.mark.parametrize("K", [-1.0, -0.5, -4.0])
def test_every_model_gives_the_same_mean(K):
    rng = np.random.default_rng(11)
    R = 1 / np.sqrt(-K)
    p0 = ball_points(rng, 500, 4, 6.0, center=point_at(2.0, 4, curvature=K), curvature=K)
    w = rng.uniform(0.2, 2.0, 500)
    for model in MODELS:
        X = from_poincare(p0, model, K)
        p = to_poincare(X, model, K)  # the model floats' own Poincaré images
        base = gk.frechet_mean(p, weights=w, curvature=K)
        r = gk.frechet_mean(X, weights=w, model=model, curvature=K)
        assert r.converged
        width = 5 if model == "hyperboloid" else 4
        assert r.mean.shape == (width,)
        m = to_poincare(r.mean, model, K)
        assert hd(m, base.mean, K) <= (r.grad_norm + base.grad_norm) * R + 16 * resolution(r.mean, model, K), model
        v = gk.frechet_variance(X, weights=w, model=model, curvature=K)
        assert v == pytest.approx(gk.frechet_variance(p, weights=w, curvature=K), rel=1e-13)


def test_per_label_means_equal_separate_means():
    rng = np.random.default_rng(12)
    n = 20000  # several reduction chunks per group
    p = ball_points(rng, n, 4, 5.0)
    lab = (rng.integers(-3, 5, n) * 7).astype(np.int32)
    w = rng.uniform(0.0, 2.0, n)
    for weights in (None, w):
        r = gk.frechet_mean(p, weights=weights, labels=lab)
        np.testing.assert_array_equal(r.labels, np.unique(lab))
        assert r.mean.shape == (8, 4) and r.iterations.shape == (8,) and r.converged.all()
        for i, l in enumerate(np.unique(lab)):
            s = gk.frechet_mean(p[lab == l], weights=None if weights is None else weights[lab == l])
            # same points, same order, same chunking: the same bits
            np.testing.assert_array_equal(r.mean[i], s.mean)
            assert r.iterations[i] == s.iterations and r.grad_norm[i] == s.grad_norm
    # the groups really have different means
    assert hd(r.mean[0], r.mean[1]) > 1e-3


def test_labels_of_other_integer_dtypes():
    rng = np.random.default_rng(13)
    p = ball_points(rng, 100, 2, 3.0)
    lab = rng.integers(0, 3, 100)
    ref = gk.frechet_mean(p, labels=lab).mean
    for dt in (np.int8, np.uint16, np.int64, np.uint64):
        np.testing.assert_array_equal(gk.frechet_mean(p, labels=lab.astype(dt)).mean, ref)
    np.testing.assert_array_equal(gk.frechet_mean(p, labels=list(lab)).mean, ref)
