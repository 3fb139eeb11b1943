"""gk.random: the wrapped normal (Nagano et al. 2019) and uniform points in a
hyperbolic ball, against exact laws (scipy.stats Kolmogorov–Smirnov tests),
numerical integration of the density (scipy / numpy quadrature), mpmath,
and the reproducibility contract."""

from __future__ import annotations

import hashlib
import math
import os
import subprocess
import sys

import numpy as np
import pytest
from mpmath import mp, mpf
from scipy import integrate, stats

import gyrokit as gk

ORIGINS = {
    "poincare": lambda d: np.zeros(d),
    "klein": lambda d: np.zeros(d),
    "hyperboloid": lambda d, R=1.0: np.r_[R, np.zeros(d)],
    "halfspace": lambda d, R=1.0: np.r_[np.zeros(d - 1), R],
}


def _origin(model, d, R=1.0):
    o = ORIGINS[model](d)
    if model in ("hyperboloid", "halfspace"):
        o = o * R
    return o


def _radial_cdf(m, rho):
    """The exact radial law on [0, rho] (units of R): F(t) = ∫0^t sinh^m / ∫0^rho sinh^m,
    by scipy quad with the integrand scaled by sinh(rho)^-m (no overflow)."""
    lsr = rho + math.log1p(-math.exp(-2 * rho)) - math.log(2) if rho > 0 else 0.0

    def f(t):
        if t == 0.0:
            return 0.0 if m > 0 else 1.0
        ls = t + math.log1p(-math.exp(-2 * t)) - math.log(2)
        return math.exp(m * (ls - lsr))

    total = integrate.quad(f, 0, rho, limit=200, epsabs=0, epsrel=1e-12)[0]

    def cdf(ts):
        # integrals over the gaps between sorted points, summed in order
        ts = np.atleast_1d(ts)
        order = np.argsort(ts)
        edges = np.r_[0.0, ts[order]]
        pieces = [integrate.quad(f, lo, hi, limit=200, epsabs=0, epsrel=1e-12)[0] for lo, hi in zip(edges[:-1], edges[1:])]
        out = np.empty(len(ts))
        out[order] = np.cumsum(pieces) / total
        return out

    return cdf


@pytest.mark.parametrize(
    "dim,radius,model,curvature",
    [(1, 2.0, "poincare", -1.0), (2, 1.0, "poincare", -1.0), (2, 0.01, "klein", -1.0), (3, 5.0, "halfspace", -1.0),
     (16, 2.0, "poincare", -4.0), (10, 30.0, "hyperboloid", -1.0), (200, 3.0, "hyperboloid", -1.0),
     (5, 1.2, "klein", -0.5)],
)
def test_uniform_ball_radial_law_ks(dim, radius, model, curvature):
    # Kolmogorov–Smirnov (scipy.stats.kstest) against the exact radial CDF
    R = 1 / math.sqrt(-curvature)
    n = 4000
    x = gk.random.uniform_ball(radius, n, dim, model=model, curvature=curvature, seed=17)
    assert x.shape == (n, dim + (model == "hyperboloid"))
    r = gk.distance_matrix(x, _origin(model, dim, R)[None, :], model=model, curvature=curvature)[:, 0]
    assert r.max() <= radius * (1 + 1e-12)
    cdf = _radial_cdf(dim - 1, radius / R)
    res = stats.kstest(r / R, cdf)
    assert res.pvalue > 1e-3, res


def test_uniform_ball_directions_are_uniform():
    # common practice: the mean unit direction of n uniform directions has
    # covariance I/(d n); within 5 standard errors
    x = gk.random.uniform_ball(2.0, 20000, 4, seed=3)
    u = x / np.linalg.norm(x, axis=-1, keepdims=True)
    assert np.all(np.abs(u.mean(0)) < 5 / math.sqrt(4 * 20000))
    # second moments E[u u^T] = I/d
    np.testing.assert_allclose(u.T @ u / 20000, np.eye(4) / 4, atol=5 * math.sqrt(2 / 20000) / 4)


@pytest.mark.parametrize("model", ["poincare", "klein", "hyperboloid", "halfspace"])
def test_wrapped_normal_distance_law_isotropic(model):
    # isotropic cov = s^2 I: the distance from the mean is s times a chi
    # variable with d degrees of freedom (scipy.stats.chi), whatever the mean
    d, s, curvature = 5, 0.8, -2.0
    R = 1 / math.sqrt(-curvature)
    mean_p = np.array([0.3, -0.2, 0.1, 0.25, 0.0]) * R
    mean = gk.convert(mean_p, "poincare", model, curvature=curvature) if model != "poincare" else mean_p
    x = gk.random.wrapped_normal(mean, s * s, 5000, model=model, curvature=curvature, seed=5)
    dist = gk.distance_matrix(x, mean[None, :], model=model, curvature=curvature)[:, 0]
    res = stats.kstest(dist, stats.chi(d, scale=s).cdf)
    assert res.pvalue > 1e-3, res


def test_wrapped_normal_covariance_in_tangent_coordinates():
    # the intrinsic coordinates recovered by the library's log map at the
    # mean and transport back to the origin (scaled by the conformal factor
    # 2 of the Poincaré metric at the origin) have covariance cov: sample
    # covariance within 5 standard errors (common practice)
    cov = np.array([[0.5, 0.2, 0.0], [0.2, 0.3, -0.1], [0.0, -0.1, 0.2]])
    mean = np.array([0.5, 0.3, -0.4])
    n = 40000
    x = gk.random.wrapped_normal(mean, cov, n, seed=11)
    v = gk.poincare.log_map(x, base=mean)
    z = 2 * gk.poincare.transport(v, mean, np.zeros(3))
    S = z.T @ z / n
    se = np.sqrt((cov**2 + np.outer(np.diag(cov), np.diag(cov))) / n)
    assert np.all(np.abs(S - cov) < 5 * se), (S, cov)
    assert np.all(np.abs(z.mean(0)) < 5 * np.sqrt(np.diag(cov) / n))


@pytest.mark.parametrize("curvature,cov,mean", [(-1.0, [[0.3, 0.1], [0.1, 0.5]], [0.4, -0.3]), (-0.25, 2.0, [1.5, 0.2])])
def test_logpdf_integrates_to_one_in_the_plane(curvature, cov, mean):
    # ∫ p dV = 1 over the hyperbolic plane, in geodesic polar coordinates about
    # the origin: x = R tanh(t/2)(cos φ, sin φ), dV = R^2 sinh(t) dt dφ
    # (Gauss–Legendre in t, the trapezoid rule in φ: numpy quadrature nodes)
    R = 1 / math.sqrt(-curvature)
    tn, tw = np.polynomial.legendre.leggauss(400)
    T = 40.0
    t = (tn + 1) * T / 2
    tw = tw * T / 2
    phi = np.linspace(0, 2 * np.pi, 512, endpoint=False)
    tt, pp = np.meshgrid(t, phi, indexing="ij")
    x = R * np.tanh(tt / 2)[..., None] * np.stack([np.cos(pp), np.sin(pp)], -1)
    ok = np.linalg.norm(x, axis=-1) < R * (1 - 1e-15)
    lp = np.full(tt.shape, -np.inf)
    lp[ok] = gk.random.wrapped_normal_logpdf(x[ok], np.array(mean), cov, curvature=curvature)
    integrand = np.exp(lp) * R * R * np.sinh(tt)
    total = (integrand.sum(1) * (2 * np.pi / 512) * tw).sum()
    assert abs(total - 1) < 1e-8, total


def test_logpdf_integrates_to_one_in_three_dimensions():
    # ∫ p dV = 1 over H^3 in geodesic polar coordinates about the origin,
    # dV = R^3 sinh(t)^2 dt dΩ: Gauss–Legendre in t and cos θ, trapezoid in φ
    cov = np.array([[0.3, 0.1, 0.0], [0.1, 0.2, 0.05], [0.0, 0.05, 0.4]])
    mean = np.array([0.3, -0.2, 0.1])
    tn, tw = np.polynomial.legendre.leggauss(200)
    T = 25.0
    t, tw = (tn + 1) * T / 2, tw * T / 2
    cn, cw = np.polynomial.legendre.leggauss(64)
    phi = np.linspace(0, 2 * np.pi, 128, endpoint=False)
    st = np.sqrt(1 - cn**2)
    dirs = np.stack([st[:, None] * np.cos(phi), st[:, None] * np.sin(phi), np.broadcast_to(cn[:, None], (64, 128))], -1)
    x = np.tanh(t / 2)[:, None, None, None] * dirs[None]
    ok = np.linalg.norm(x, axis=-1) < 1 - 1e-15
    lp = np.full(ok.shape, -np.inf)
    lp[ok] = gk.random.wrapped_normal_logpdf(x[ok], mean, cov)
    w = tw[:, None, None] * np.sinh(t)[:, None, None] ** 2 * cw[None, :, None] * (2 * np.pi / 128)
    total = (np.exp(lp) * w).sum()
    assert abs(total - 1) < 1e-7, total


def test_logpdf_against_mpmath_and_across_models():
    # mpmath, 50 digits: z from the textbook Möbius addition (-mean) ⊕ x,
    # r = 2R artanh(|z|/R), then log N(z; 0, cov) - (d-1) log(sinh(r/R)/(r/R))
    curvature = -1.5
    cov = np.array([[0.4, 0.1, 0.0], [0.1, 0.2, 0.05], [0.0, 0.05, 0.3]])
    mean = np.array([0.2, -0.5, 0.3])
    xs = np.array([[0.1, 0.1, 0.1], [0.2, -0.5, 0.3 + 1e-9], [-0.6, 0.4, 0.2], [0.79, 0.1, 0.0]])
    got = gk.random.wrapped_normal_logpdf(xs, mean, cov, curvature=curvature)
    with mp.workdps(50):
        k = mpf(1.5)
        R = 1 / mp.sqrt(k)
        ci = mp.matrix(cov.tolist()) ** -1
        det = mp.det(mp.matrix(cov.tolist()))
        for x, g in zip(xs, got):
            a = [-mpf(float(v)) for v in mean]
            b = [mpf(float(v)) for v in x]
            ab = sum(p * q for p, q in zip(a, b))
            aa = sum(p * p for p in a)
            bb = sum(p * p for p in b)
            den = 1 + 2 * k * ab + k * k * aa * bb
            u = [((1 + 2 * k * ab + k * bb) * p + (1 - k * aa) * q) / den for p, q in zip(a, b)]
            nu = mp.sqrt(sum(p * p for p in u))
            r = 2 * R * mp.atanh(nu / R)
            z = mp.matrix([p * r / nu for p in u])
            q = (z.T * ci * z)[0]
            ref = -q / 2 - mp.log(det) / 2 - 3 * mp.log(2 * mp.pi) / 2 - 2 * mp.log(mp.sinh(r / R) / (r / R))
            assert abs(g - float(ref)) < 1e-13 * max(1.0, abs(float(ref))), (g, ref)
    # the same distribution in every model (isometric images)
    for model in ("klein", "hyperboloid", "halfspace"):
        xm = gk.convert(xs, "poincare", model, curvature=curvature)
        mm = gk.convert(mean, "poincare", model, curvature=curvature)
        if model == "halfspace":
            # the half-space frame at its origin has the last axis reversed
            # relative to the Poincaré frame carried by the conversion
            flip = np.diag([1.0, 1.0, -1.0])
            c2 = flip @ cov @ flip
        else:
            c2 = cov
        np.testing.assert_allclose(gk.random.wrapped_normal_logpdf(xm, mm, c2, model=model, curvature=curvature), got, rtol=1e-12)


def test_samples_are_reproducible_and_independent_of_threads():
    a = gk.random.wrapped_normal([0.1, 0.2, 0.3], 0.5, 3000, seed=42)
    b = gk.random.wrapped_normal([0.1, 0.2, 0.3], 0.5, 3000, seed=42)
    c = gk.random.wrapped_normal([0.1, 0.2, 0.3], 0.5, 3000, seed=43)
    np.testing.assert_array_equal(a, b)
    assert not np.array_equal(a, c)
    g1 = gk.random.uniform_ball(1.0, 10, 2, seed=np.random.default_rng(7))
    g2 = gk.random.uniform_ball(1.0, 10, 2, seed=np.random.default_rng(7))
    np.testing.assert_array_equal(g1, g2)
    assert gk.random.uniform_ball(1.0, (4, 5), 3).shape == (4, 5, 3)
    assert gk.random.wrapped_normal([0.0, 0.0], 1.0, (2, 0)).shape == (2, 0, 2)
    code = (
        "import gyrokit as gk, hashlib, numpy as np;"
        "a = gk.random.wrapped_normal(np.full(16, 0.05), 0.3, 10000, seed=9);"
        "b = gk.random.uniform_ball(4.0, 10000, 7, model='hyperboloid', seed=9);"
        "print(hashlib.sha256(a.tobytes() + b.tobytes()).hexdigest())"
    )
    outs = []
    for threads in ("1", "2"):
        env = dict(os.environ, RAYON_NUM_THREADS=threads)
        outs.append(subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, check=True).stdout)
    assert outs[0] == outs[1] and len(outs[0].strip()) == 64


def test_errors():
    with pytest.raises(ValueError, match="positive definite"):
        gk.random.wrapped_normal([0.1, 0.2], [[1.0, 2.0], [2.0, 1.0]], 5)
    with pytest.raises(ValueError, match="symmetric"):
        gk.random.wrapped_normal_logpdf([0.0, 0.0], [0.1, 0.2], [[1.0, 0.5], [0.1, 1.0]])
    with pytest.raises(ValueError, match="mean .*outside the ball"):
        gk.random.wrapped_normal([1.1, 0.0], 1.0, 5)
    with pytest.raises(ValueError, match="x: row 1 .*outside"):
        gk.random.wrapped_normal_logpdf([[0.0, 0.0], [2.0, 0.0]], [0.1, 0.2], 1.0)
    with pytest.raises(ValueError, match="dimension"):
        gk.random.wrapped_normal_logpdf([[0.0, 0.0, 0.0]], [0.1, 0.2], 1.0)
    with pytest.raises(ValueError, match="hyperboloid"):
        gk.random.uniform_ball(60.0, 100, 2, seed=1)
    with pytest.raises(ValueError, match="half-space range"):
        gk.random.uniform_ball(200.0, 100, 2, model="halfspace", seed=1)
    with pytest.raises(ValueError, match="radius"):
        gk.random.uniform_ball(-1.0, 10, 2)
    with pytest.raises(ValueError, match="dim"):
        gk.random.uniform_ball(1.0, 10, 0)
    with pytest.raises(TypeError, match="seed"):
        gk.random.uniform_ball(1.0, 10, 2, seed="x")
    with pytest.raises(ValueError, match="seed"):
        gk.random.uniform_ball(1.0, 10, 2, seed=-3)
    with pytest.raises(ValueError, match="size"):
        gk.random.uniform_ball(1.0, -1, 2)
    with pytest.raises(ValueError, match="diagonal"):
        gk.random.wrapped_normal([0.1, 0.2], [1.0, 2.0, 3.0], 5)
    with pytest.raises(ValueError, match="curvature"):
        gk.random.wrapped_normal([0.1, 0.2], 1.0, 5, curvature=0.0)
