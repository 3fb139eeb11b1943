"""Centroids: gk.frechet_mean, gk.einstein_midpoint, gk.frechet_variance.

Sources of the expected values, named again at each check:

- mpmath 50-digit minimisation: the weighted Fréchet mean found by Newton's
  method (mpmath.findroot, numerical Jacobian) on the first-order condition
  ``sum w log_m(x) = 0`` in hyperboloid coordinates, at 60 working digits,
  the residual verified to 1e-30; the objective is strictly convex, so this
  root is the unique minimiser (handbook: Karcher/Fréchet mean in a
  Hadamard manifold).
- closed forms (handbook): the mean of two points is their geodesic midpoint;
  with weights (w1, w2) it is the point at fraction w2/(w1+w2) from x1
  (minimise w1 t^2 + w2 (1-t)^2 along the geodesic); isometries (Möbius
  left translations) map means to means, so symmetric configurations
  translated to a centre have that centre as mean.
- Ungar's result (A. A. Ungar, "A Gyrovector Space Approach to Hyperbolic
  Geometry", 2008): the Einstein midpoint ``sum γ k / sum γ`` of Klein
  points, converted to the Poincaré ball, equals the Möbius gyromidpoint
  ``1/2 ⊗ (sum γ² p / sum (γ² - 1/2))`` of the Poincaré images.

Float64 cannot place a point at hyperbolic radius r more finely than the
length of one coordinate ulp there: about ``eps e^r / 2`` in the Poincaré ball
(1e-12 at r ~ 10) and ``eps e^(2r) / 4`` in the Klein ball. Tolerances use
``resolution(m, model)``, that length measured at the result, where points lie
far out; comparisons across models start from the same float64 data (the
Poincaré image of the model's own floats), never from two independent
roundings of one point. Newton stops at ``grad_norm <= tol`` and the Hessian
of ``1/2 sum w d^2 / sum w`` is at least the identity, so the distance to the
minimiser is at most ``grad_norm * R``: tolerances use that bound.
"""

from __future__ import annotations

import os
import subprocess
import sys
import warnings

import mpmath
import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from mpmath import mp, mpf

import gyrokit as gk

MODELS = ("poincare", "klein", "hyperboloid", "halfspace")
EPS = np.finfo(float).eps
HYP_EXAMPLES = int(os.environ.get("GYROKIT_HYPOTHESIS_EXAMPLES", "100"))


# ------------------------------------------------------------------ helpers


def ball_points(rng, n, d, rmax, rmin=0.0, center=None, curvature=-1.0):
    """Poincaré points at hyperbolic distance uniform in [rmin, rmax] R from
    ``center`` (a Möbius left translation of points about the origin)."""
    R = 1 / np.sqrt(-curvature)
    u = rng.standard_normal((n, d))
    u /= np.linalg.norm(u, axis=1, keepdims=True)
    p = R * np.tanh(rng.uniform(rmin, rmax, n) / 2)[:, None] * u
    if center is not None:
        p = gk.poincare.add(center, p, curvature=curvature)
    return p


def point_at(rho, d, axis=0, curvature=-1.0):
    R = 1 / np.sqrt(-curvature)
    p = np.zeros(d)
    p[axis] = R * np.tanh(rho / 2)
    return p


DIST = {
    "poincare": gk.poincare.distance,
    "klein": gk.klein.distance,
    "hyperboloid": gk.hyperboloid.distance,
    "halfspace": gk.halfspace.distance,
}


def resolution(m, model="poincare", curvature=-1.0):
    """Hyperbolic length of a rounding-level change of the model point m: the
    largest distance to m + h e_i (or - h e_i) with h = eps max(R, max_i |m_i|)
    (the hyperboloid's x0 is redundant and not perturbed)."""
    m = np.asarray(m, float)
    start = 1 if model == "hyperboloid" else 0
    h = EPS * max(np.max(np.abs(m[start:])), 1 / np.sqrt(-curvature))
    out = 0.0
    for i in range(start, m.size):
        for sign in (1.0, -1.0):
            q = m.copy()
            q[i] += sign * h
            try:
                out = max(out, float(DIST[model](m, q, curvature=curvature)))
            except ValueError:  # the neighbour is off the model
                pass
    return out


def data_rounding(X, model="poincare", curvature=-1.0):
    """The largest ``resolution`` over the rows of X: how far the float64 data
    may sit from the exact points it was computed from."""
    return max(resolution(row, model, curvature) for row in np.atleast_2d(X))


def to_poincare(m, model, curvature=-1.0):
    return m if model == "poincare" else gk.convert(m, model, "poincare", curvature=curvature)


def from_poincare(p, model, curvature=-1.0):
    return p if model == "poincare" else gk.convert(p, "poincare", model, curvature=curvature)


def hd(a, b, curvature=-1.0):
    return float(gk.poincare.distance(a, b, curvature=curvature))


# ------------------------------------------------------------------ mpmath reference


def mp_lift(row, model, curvature=-1.0):
    """A float64 point of ``model`` (curvature K) as an mpf point (X0, [Xs]) of
    the unit hyperboloid, exactly from its coordinates (handbook maps, an
    isometry up to the factor R on distances):
    Poincaré p: ((1 + |q|^2), 2q) / (1 - |q|^2), q = sqrt(k) p;
    Klein c: (1, q) / sqrt(1 - |q|^2), q = sqrt(k) c;
    hyperboloid: spatial part q = sqrt(k) x_s, X0 = sqrt(1 + |q|^2) (x0 is
    redundant and gyrokit reads it the same way);
    half-space (u, t): ((1 + |u|^2 + t^2)/2t, u/t, (1 - |u|^2 - t^2)/2t).
    Evaluated at 60 digits whatever the caller's precision."""
    with mp.workdps(60):
        return _mp_lift(row, model, curvature)


def _mp_lift(row, model, curvature):
    sk = mp.sqrt(-mpf(curvature))
    v = [mpf(float(a)) for a in row]
    if model == "poincare":
        q = [a * sk for a in v]
        s2 = mp.fsum(a * a for a in q)
        return (1 + s2) / (1 - s2), [2 * a / (1 - s2) for a in q]
    if model == "klein":
        q = [a * sk for a in v]
        c = 1 / mp.sqrt(1 - mp.fsum(a * a for a in q))
        return c, [a * c for a in q]
    if model == "hyperboloid":
        q = [a * sk for a in v[1:]]
        return mp.sqrt(1 + mp.fsum(a * a for a in q)), q
    u, t = v[:-1], v[-1]
    a2 = mp.fsum(a * a for a in u) + t * t
    return (1 + a2) / (2 * t), [a / t for a in u] + [(1 - a2) / (2 * t)]


def mp_frechet_mean(x, w=None, curvature=-1.0, model="poincare", dps=50):
    """mpmath 50-digit minimisation of sum w d(m, x)^2: returns the minimiser
    as an mpf unit-hyperboloid point (X0, [Xs]) (see ``mp_lift``). Newton
    (mpmath.findroot, numerical Jacobian) on the stationarity condition
    G(M) = sum w d/sinh(d) (X - cosh(d) M) = 0 for M = (sqrt(1 + |s|^2), s)
    (handbook: log_M X = d/sinh d (X - cosh d M)); started from the
    normalised weighted Lorentzian centroid; the residual is verified, not
    assumed."""
    x = np.asarray(x, float)
    n = x.shape[0]
    w = np.ones(n) if w is None else np.asarray(w, float)
    with mp.workdps(dps + 10):
        W = [mpf(float(v)) for v in w]
        L = [mp_lift(row, model, curvature) for row in x]
        d = len(L[0][1])

        def parts(s):
            M0 = mp.sqrt(1 + mp.fsum(v * v for v in s))
            out0, out = mpf(0), [mpf(0)] * d
            for wi, (X0, Xs) in zip(W, L):
                if wi == 0:
                    continue
                B = M0 * X0 - mp.fsum(a * b for a, b in zip(s, Xs))
                c = mpf(1) if B <= 1 else mp.acosh(B) / mp.sqrt(B * B - 1)
                out0 += wi * c * (X0 - B * M0)
                out = [o + wi * c * (xs - B * sv) for o, xs, sv in zip(out, Xs, s)]
            return M0, out0, out

        def G(*s):
            return parts(list(s))[2]

        C0 = mp.fsum(wi * X0 for wi, (X0, _) in zip(W, L))
        Cs = [mp.fsum(wi * Xs[j] for wi, (_, Xs) in zip(W, L)) for j in range(d)]
        nrm = mp.sqrt(C0 * C0 - mp.fsum(v * v for v in Cs))
        s0 = [v / nrm for v in Cs]
        if d == 1:
            s = [mpmath.findroot(lambda t: G(t)[0], s0[0], tol=mpf(10) ** (-100), verify=False)]
        else:
            sol = mpmath.findroot(G, s0, tol=mpf(10) ** (-100), verify=False, maxsteps=60)
            s = [sol[j] for j in range(d)]
        M0, g0, g = parts(s)
        # Riemannian norm of the mean log vector: the residual must be ~0.
        gnorm = mp.sqrt(abs(mp.fsum(v * v for v in g) - g0 * g0)) / mp.fsum(W)
        assert gnorm < mpf(10) ** (-30), f"mpmath reference did not converge: {gnorm}"
        return M0, s


def mp_hyperboloid_distance(a, b, curvature=-1.0, dps=50):
    """R * 2 asinh(|a - b|_L / 2) for unit-hyperboloid mpf points (handbook:
    |a - b|_L^2 = -2 - 2<a, b>_L = 4 sinh^2(d/2)); no cancellation at 60 digits."""
    with mp.workdps(dps + 10):
        q = -(a[0] - b[0]) ** 2 + mp.fsum((u - v) ** 2 for u, v in zip(a[1], b[1]))
        return 2 * mp.asinh(mp.sqrt(max(q, 0)) / 2) / mp.sqrt(-mpf(curvature))


# (n, d, rmax, centre radius, curvature, weighted, model)
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


def _pairs(rng, d, count):
    """Pairs far apart (up to distance ~16), nearly coincident (1e-12..1e-4
    apart) and antipodal, all within hyperbolic radius 8 of the origin."""
    out = []
    for i in range(count):
        x = ball_points(rng, 1, d, 8.0)[0]
        kind = i % 3
        if kind == 0:
            y = ball_points(rng, 1, d, 8.0)[0]
        elif kind == 1:
            y = gk.poincare.add(x, gk.poincare.exp_map(rng.standard_normal(d) * 10 ** rng.uniform(-12, -4)))
        else:
            y = -x
        out.append((x, y))
    return out


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
        assert float(DIST[model](r.mean, mid)) <= tol + 1e-13 + 16 * resolution(mid, model)
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
        err = float(DIST[model](r.mean, X[0]))
        assert err <= r.grad_norm + 4 * resolution(X[0], model), (rho, r.mean, X[0])
        if rho <= 3.0:  # farther out: see test_einstein_midpoint_of_one_point_far_out
            e = gk.einstein_midpoint(X, model=model)
            assert float(DIST[model](e, X[0])) <= 8 * resolution(X[0], model), (rho, e, X[0])


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


# ------------------------------------------------------------------ convergence


def _spread_out(rng, d, n=3000):
    """Hyperbolic radius ~6 about an off-origin point, plus a small cluster."""
    a = point_at(2.0, d)
    return np.concatenate([ball_points(rng, n - n // 6, d, 7.0, rmin=5.0, center=a), ball_points(rng, n // 6, d, 1.0)])


@pytest.mark.parametrize("d", [2, 5, 16])
def test_spread_out_data_converges_in_few_newton_steps(d):
    rng = np.random.default_rng(14 + d)
    x = _spread_out(rng, d)
    with warnings.catch_warnings():
        warnings.simplefilter("error", gk.ConvergenceWarning)
        r = gk.frechet_mean(x, tol=1e-12)
    assert r.converged and r.grad_norm <= 1e-12 and r.iterations <= 8
    # independent first-order check with the public log map (handbook: the
    # Riemannian gradient of 1/2 sum d^2 is -sum log_m(x); Riemannian norm
    # of an ambient tangent vector at m is 2|v|/(1 - |m|^2))
    m = r.mean
    g = gk.poincare.log_map(x, m).mean(axis=0)
    assert np.linalg.norm(g) * 2 / (1 - m @ m) <= 1e-11
    # premise (common practice): Riemannian gradient descent with step 1
    # (m <- exp_m(mean log_m x)) from the same start stalls on this data.
    m = gk.einstein_midpoint(x)
    for _ in range(r.iterations + 10):
        m = gk.poincare.exp_map(gk.poincare.log_map(x, m).mean(axis=0), m)
    g = gk.poincare.log_map(x, m).mean(axis=0)
    assert np.linalg.norm(g) * 2 / (1 - m @ m) > 1e-3


def test_max_iter_hit_warns_not_raises():
    rng = np.random.default_rng(15)
    x = _spread_out(rng, 3)
    with pytest.warns(gk.ConvergenceWarning, match="did not reach tol"):
        r = gk.frechet_mean(x, max_iter=1)
    assert r.converged is False and r.iterations == 1 and r.grad_norm > 1e-12
    assert np.all(np.isfinite(r.mean)) and np.linalg.norm(r.mean) < 1
    # per label: the warning names the labels that did not converge
    lab = np.zeros(len(x), dtype=np.int64)
    lab[: len(x) // 2] = 7
    with pytest.warns(gk.ConvergenceWarning, match="labels"):
        rl = gk.frechet_mean(x, labels=lab, max_iter=1)
    assert not rl.converged.all()
    # enough iterations: no warning
    with warnings.catch_warnings():
        warnings.simplefilter("error", gk.ConvergenceWarning)
        assert gk.frechet_mean(x).converged


_DET_SCRIPT = r"""
import hashlib, numpy as np, gyrokit as gk
rng = np.random.default_rng(0)
u = rng.standard_normal((30000, 16)); u /= np.linalg.norm(u, axis=1, keepdims=True)
x = np.tanh(rng.uniform(0, 6, 30000) / 2)[:, None] * u
w = rng.uniform(0, 2, 30000)
lab = rng.integers(0, 50, 30000)
h = hashlib.sha256()
r = gk.frechet_mean(x, weights=w); h.update(r.mean.tobytes()); h.update(np.float64(r.grad_norm).tobytes())
r = gk.frechet_mean(x, labels=lab); h.update(r.mean.tobytes()); h.update(r.grad_norm.tobytes())
h.update(gk.einstein_midpoint(x, weights=w, labels=lab).tobytes())
h.update(np.float64(gk.frechet_variance(x, weights=w)).tobytes())
k = gk.convert(x, "poincare", "hyperboloid")
h.update(gk.frechet_mean(k, model="hyperboloid").mean.tobytes())
print(h.hexdigest())
"""


def test_bit_identical_across_threads_and_simd():
    def run(extra):
        env = {k: v for k, v in os.environ.items() if k not in ("RAYON_NUM_THREADS", "GYROKIT_SIMD")}
        env.update(extra)
        out = subprocess.run([sys.executable, "-c", _DET_SCRIPT], env=env, capture_output=True, text=True, check=True)
        return out.stdout.strip()

    one = run({"RAYON_NUM_THREADS": "1"})
    assert len(one) == 64
    assert run({"RAYON_NUM_THREADS": "2"}) == one
    assert run({"RAYON_NUM_THREADS": "2", "GYROKIT_SIMD": "baseline"}) == one


# ------------------------------------------------------------------ variance


@pytest.mark.parametrize("K", [-1.0, -3.0])
def test_frechet_variance_is_mean_squared_distance(K):
    rng = np.random.default_rng(16)
    x = ball_points(rng, 400, 3, 5.0, curvature=K)
    w = rng.uniform(0.0, 2.0, 400)
    c = ball_points(rng, 1, 3, 2.0, curvature=K)[0]
    dist = gk.poincare.distance(x, c, curvature=K)
    assert gk.frechet_variance(x, c, curvature=K) == pytest.approx(np.mean(dist**2), rel=1e-13)
    assert gk.frechet_variance(x, c, weights=w, curvature=K) == pytest.approx(np.sum(w * dist**2) / np.sum(w), rel=1e-13)
    # center=None: about the Fréchet mean, which minimises it
    m = gk.frechet_mean(x, weights=w, curvature=K).mean
    v = gk.frechet_variance(x, weights=w, curvature=K)
    dm = gk.poincare.distance(x, m, curvature=K)
    assert v == pytest.approx(np.sum(w * dm**2) / np.sum(w), rel=1e-13)
    for _ in range(10):
        step = gk.poincare.exp_map(1e-4 * rng.standard_normal(3), m, curvature=K)
        assert gk.frechet_variance(x, step, weights=w, curvature=K) > v


# ------------------------------------------------------------------ property


@settings(max_examples=HYP_EXAMPLES, deadline=None)
@given(
    seed=st.integers(0, 2**32 - 1),
    n=st.integers(1, 12),
    d=st.integers(1, 4),
    rmax=st.floats(1e-6, 6.0),
    rc=st.floats(0.0, 2.0),  # means within radius ~8, where tol = 1e-12 is above float64 resolution
    weighted=st.booleans(),
)
def test_property_first_order_condition_and_minimality(seed, n, d, rmax, rc, weighted):
    # handbook: at the minimiser sum w log_m(x) = 0 and any nearby point is worse
    rng = np.random.default_rng(seed)
    x = ball_points(rng, n, d, rmax, center=point_at(rc, d))
    w = rng.uniform(0.01, 5.0, n) if weighted else np.ones(n)
    r = gk.frechet_mean(x, weights=w)
    assert r.converged
    m = r.mean
    g = (w @ gk.poincare.log_map(x, m)) / w.sum()
    assert np.linalg.norm(g) * 2 / (1 - m @ m) <= 1e-11
    f = lambda c: np.sum(w * gk.poincare.distance(x, c) ** 2)  # noqa: E731
    f0 = f(m)
    for _ in range(3):
        v = rng.standard_normal(d)
        other = gk.poincare.exp_map(1e-3 * v / np.linalg.norm(v) * (1 - m @ m) / 2, m)  # distance 1e-3
        assert f(other) > f0


# ------------------------------------------------------------------ bad input


def _bad():
    rng = np.random.default_rng(0)
    x = ball_points(rng, 5, 2, 2.0)
    nan = x.copy()
    nan[2, 0] = np.nan
    out = x.copy()
    out[4] = [0.9, 0.9]
    return [
        ("weights negative", dict(x=x, weights=[1, 1, -1, 1, 1]), ValueError, "weights: entry 2 is -1"),
        ("weights all zero", dict(x=x, weights=np.zeros(5)), ValueError, "weights are all zero"),
        ("weights NaN", dict(x=x, weights=[1, np.nan, 1, 1, 1]), ValueError, "weights: entry 1 is NaN"),
        ("weights inf", dict(x=x, weights=[1, 1, 1, np.inf, 1]), ValueError, "weights: entry 3"),
        ("weights length", dict(x=x, weights=np.ones(4)), ValueError, "weights has length 4 but x has 5 points"),
        ("labels length", dict(x=x, labels=[0, 1, 0]), ValueError, "labels has length 3 but x has 5 points"),
        ("labels missing", dict(x=x, labels=np.array([0.0, 1, np.nan, 1, 0])), ValueError, "labels: entry 2 is missing"),
        ("labels None", dict(x=x, labels=np.array(["a", "b", None, "a", "b"], dtype=object)), ValueError, "labels: entry 2 is missing"),
        ("label all zero weight", dict(x=x, weights=[0, 0, 1, 1, 1], labels=[3, 3, 4, 4, 4]), ValueError,
         "label 3: its points all have weight zero"),
        ("empty x", dict(x=np.zeros((0, 2))), ValueError, "x is empty"),
        ("NaN point", dict(x=nan), ValueError, "x: row 2 contains NaN"),
        ("outside ball", dict(x=out), ValueError, "x: row 4 is on or outside the ball"),
        ("bad model", dict(x=x, model="lorentz"), ValueError, "model must be one of"),
        ("curvature >= 0", dict(x=x, curvature=0.0), ValueError, "curvature"),
        ("x 1-D", dict(x=x[0]), ValueError, "2-D array"),
    ]


@pytest.mark.parametrize("fn", ["frechet_mean", "einstein_midpoint"])
@pytest.mark.parametrize("name,kw,exc,msg", _bad(), ids=[b[0] for b in _bad()])
def test_bad_input(fn, name, kw, exc, msg):
    kw = dict(kw)
    x = kw.pop("x")
    with pytest.raises(exc, match=msg):
        getattr(gk, fn)(x, **kw)


def test_bad_input_variance():
    rng = np.random.default_rng(0)
    x = ball_points(rng, 5, 2, 2.0)
    with pytest.raises(ValueError, match="center has 3 coordinates but x has 2"):
        gk.frechet_variance(x, np.zeros(3))
    with pytest.raises(ValueError, match="center"):
        gk.frechet_variance(x, np.array([2.0, 0.0]))
    with pytest.raises(ValueError, match="weights are all zero"):
        gk.frechet_variance(x, np.zeros(2), weights=np.zeros(5))
    with pytest.raises(ValueError, match="x is empty"):
        gk.frechet_variance(np.zeros((0, 2)), np.zeros(2))
    with pytest.raises(ValueError, match="tol must be >= 0"):
        gk.frechet_mean(x, tol=-1.0)
