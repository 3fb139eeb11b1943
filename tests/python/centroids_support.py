"""Helpers shared by the centroid tests (tests/python/test_centroids_*.py):
the float64 resolution of a point in each model, conversions, and the
mpmath references.

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

from mpmath import mp, mpf
import mpmath
import numpy as np

import gyrokit as gk
from conftest import ball_points, DISTANCE, EPS


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
                out = max(out, float(DISTANCE[model](m, q, curvature=curvature)))
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
