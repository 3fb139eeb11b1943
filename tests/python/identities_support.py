"""Helpers shared by the identity tests of the four models
(tests/python/test_models_identities_*.py).

Conventions of these files:

- ``K`` is the curvature, ``kappa = -K``, ``R = 1/sqrt(kappa)``.
- "hyperbolic radius" ``rho`` is the distance from the origin in units of R
  (the float64 difficulty of a point depends on rho, not on the distance).
- Accuracy is judged with the conditioning of float64 coordinates in mind:
  a coordinate rounding of one ulp moves a point by a hyperbolic length that
  grows like e^rho (Poincaré, half-space) or e^(2 rho) (Klein) near the
  sphere. ``coord_rounding`` gives that length (in units of eps), and
  ``assert_close_points`` turns an allowed hyperbolic error back into an
  allowed coordinate error. Inputs are exact float64 numbers (the SPEC's
  reference is an exact evaluation on the same inputs), so a tolerance holds
  C times the roundings of every float64 result an identity passes through
  (outputs and intermediate results, never the inputs), plus REL = 1e-10
  relative to the natural scale (a distance or a tangent norm). A wrong
  formula gives errors of order one, far above these bounds.
- Hypothesis draws (curvature, dimension, seed); each example then checks a
  batch of ``N`` random points at once. Example count: env var
  GYROKIT_HYPOTHESIS_EXAMPLES (default 100).
"""

from __future__ import annotations

from hypothesis import strategies as st
import mpmath
import numpy as np

import gyrokit as gk
from conftest import BALLS, CURVATURES, EPS, MP50, mp_distance, radius, unit_vectors


# Known defects once marked here, fixed (measured before the fix): Klein exp
# far from the origin; hyperboloid exp_map of tangents carrying far points back
# past the origin (1.8e-4 at r = 10); hyperboloid transport between far points
# (Riemannian error 1.1e-8).

DIMS = (1, 2, 5)
N = 12  # points per hypothesis example
RHO_MAX = 10.0  # identities
RHO_MAX_ROUNDTRIP = 15.0  # conversions (the Klein ball holds points up to ~18 R)
C = 64.0  # multiple of the float64 rounding allowed (see the module docstring)
REL = 1e-10  # relative error allowed on top, against the natural scale (a distance)

CASES = st.tuples(
    st.sampled_from(CURVATURES),
    st.sampled_from(DIMS),
    st.integers(min_value=0, max_value=2**63 - 1),
)


# ------------------------------------------------------------------ helpers


def norm(a):
    return np.linalg.norm(a, axis=-1)


def dot(a, b):
    return np.sum(a * b, axis=-1)


# Error-free transformations (common practice: Knuth's two-sum, Dekker's
# split and two-product), used to get the gap 1 - kappa |x|^2 to full
# relative accuracy for points near the sphere, where the plain float64
# evaluation loses every digit.
def _two_sum(a, b):
    s = a + b
    bb = s - a
    return s, (a - (s - bb)) + (b - bb)


def _split(a):
    c = 134217729.0 * a  # 2^27 + 1
    hi = c - (c - a)
    return hi, a - hi


def _two_prod(a, b):
    p = a * b
    ah, al = _split(a)
    bh, bl = _split(b)
    return p, ((ah * bh - p) + ah * bl + al * bh) + al * bl


def gap(x, K):
    """``1 - kappa |x|^2`` of the float64 point x, accurate to a few ulps."""
    x = np.asarray(x, dtype=np.float64)
    s_hi = np.zeros(x.shape[:-1])
    s_lo = np.zeros(x.shape[:-1])
    for i in range(x.shape[-1]):
        p, e = _two_prod(x[..., i], x[..., i])
        s_hi, t = _two_sum(s_hi, p)
        s_lo = s_lo + t + e
    kap = -K
    p_hi, p_lo = _two_prod(np.full_like(s_hi, kap), s_hi)
    p_lo = p_lo + kap * s_lo
    g_hi, g_lo = _two_sum(np.ones_like(s_hi), -p_hi)
    return g_hi + (g_lo - p_lo)


def sheet_x0(xs, K):
    """x0 of the hyperboloid point with spatial part xs (no cancellation)."""
    return np.sqrt(radius(K) ** 2 + np.sum(xs * xs, axis=-1))


def coord_rounding(model, x, K):
    """Hyperbolic length (units of eps) by which float64 rounding of the
    coordinates of x can move it: the best any float64 result there can do.

    From the metrics (handbook): Poincaré ds = 2|dp|/g, Klein ds <= |dk|/g
    (radial direction), hyperboloid ds <= |dx_s| (x0 follows x_s), half-space
    ds = R |dy|/y_d.
    """
    R = radius(K)
    if model == "poincare":
        return 2.0 * norm(x) / gap(x, K)
    if model == "klein":
        return norm(x) / gap(x, K)
    if model == "hyperboloid":
        return norm(x[..., 1:])
    if model == "halfspace":
        return R * norm(x) / x[..., -1]
    raise AssertionError(model)


def euclid_per_hyp(model, x, K):
    """Largest coordinate (Euclidean) displacement per unit hyperbolic length at x.

    Poincaré g/2; Klein sqrt(g) (the angular direction: ds^2 = |dk|^2/g there);
    hyperboloid: the spatial part moves by at most x0/R per unit (radially),
    x0 by at most as much again; half-space y_d/R.
    """
    R = radius(K)
    if model == "poincare":
        return gap(x, K) / 2.0
    if model == "klein":
        return np.sqrt(gap(x, K))
    if model == "hyperboloid":
        return np.sqrt(2.0) * sheet_x0(x[..., 1:], K) / R
    if model == "halfspace":
        return x[..., -1] / R
    raise AssertionError(model)


def anisotropy(model, x, K):
    """How much a relative Euclidean rounding of a tangent vector at x can be
    magnified in its Riemannian norm (ratio of largest to smallest metric factor)."""
    if model == "poincare":
        return np.ones(np.shape(x)[:-1])
    if model == "klein":
        return 1.0 / np.sqrt(gap(x, K))
    if model == "hyperboloid":
        return sheet_x0(x[..., 1:], K) / radius(K)
    raise AssertionError(model)


def fail_rows(ok, *arrays, names=()):
    ok = np.asarray(ok)
    bad = np.flatnonzero(~ok.reshape(-1))
    lines = [f"{bad.size} bad rows, first {bad[:3].tolist()}"]
    for name, a in zip(names, arrays):
        a = np.asarray(a)
        if a.shape[: ok.ndim] == ok.shape:
            a = a.reshape(ok.size, -1)[bad[:3]]
        lines.append(f"  {name} = {a.tolist()}")
    return "\n".join(lines)


def assert_close_points(model, got, want, K, hyp_tol, what=""):
    """got == want up to a hyperbolic error hyp_tol (absolute, per row)."""
    got = np.asarray(got)
    want = np.asarray(want)
    assert got.shape == want.shape, (what, got.shape, want.shape)
    assert np.all(np.isfinite(got)), what
    err = norm(got - want)
    allowed = np.asarray(hyp_tol) * euclid_per_hyp(model, want, K) + 4.0 * EPS * norm(want)
    ok = err <= allowed
    if not np.all(ok):
        raise AssertionError(
            f"{what} ({model}, K={K}): |got - want| exceeds the allowed error\n"
            + fail_rows(ok, got, want, err, allowed, names=("got", "want", "err", "allowed"))
        )


def assert_close_values(got, want, tol, what=""):
    got = np.asarray(got, dtype=np.float64)
    want = np.asarray(want, dtype=np.float64)
    assert got.shape == want.shape, (what, got.shape, want.shape)
    assert np.all(np.isfinite(got)), what
    ok = np.abs(got - want) <= tol
    if not np.all(ok):
        raise AssertionError(
            f"{what}: values differ beyond tolerance\n"
            + fail_rows(ok, got, want, np.abs(got - want), np.broadcast_to(tol, got.shape),
                        names=("got", "want", "err", "tol"))
        )


def assert_valid_points(model, z, K, what):
    """Results must be points of the model: strictly inside the ball (the
    gap 1 - kappa |z|^2 > 0, exactly evaluated), or on the hyperboloid sheet
    with x0 consistent with the spatial part to rounding."""
    z = np.asarray(z)
    assert np.all(np.isfinite(z)), what
    if model in BALLS:
        g = gap(z, K)
        ok = g > 0
        if not np.all(ok):
            raise AssertionError(
                f"{what} ({model}, K={K}): result on or outside the sphere\n"
                + fail_rows(ok, z, norm(z) / radius(K) - 1, names=("z", "|z|/R - 1"))
            )
    elif model == "hyperboloid":
        x0 = sheet_x0(z[..., 1:], K)
        assert_close_values(z[..., 0], x0, 8 * EPS * x0, f"{what}: x0 of the result vs sqrt(R^2 + |x_s|^2)")


# ------------------------------------------------------- random geometry


def sample_rho(rng, n, rho_max):
    rho = rng.uniform(0.0, rho_max, n)
    k = n // 4
    rho[:k] = rho_max * 10.0 ** rng.uniform(-9.0, 0.0, k)  # some near the origin
    if rng.random() < 0.25:
        rho[-1] = 0.0  # the origin itself
    return rho


def model_points(model, rho, u, K):
    """Points at hyperbolic radius rho (units of R) in direction u."""
    R = radius(K)
    if model == "poincare":
        # handbook: in the Poincaré ball |p| = R tanh(r / 2R)
        return R * np.tanh(rho / 2.0)[:, None] * u
    if model == "klein":
        # handbook: in the Klein ball |k| = R tanh(r / R)
        return R * np.tanh(rho)[:, None] * u
    if model == "hyperboloid":
        # handbook: x = (R cosh(r/R), R sinh(r/R) u)
        return np.concatenate([(R * np.cosh(rho))[:, None], (R * np.sinh(rho))[:, None] * u], axis=-1)
    if model == "halfspace":
        # No closed form chosen here: the half-space convention beyond the
        # image of the origin is the library's (checked through distances).
        return gk.convert(model_points("poincare", rho, u, K), "poincare", "halfspace", curvature=K)
    raise AssertionError(model)


def random_points(rng, model, n, d, K, rho_max=RHO_MAX):
    return model_points(model, sample_rho(rng, n, rho_max), unit_vectors(rng, n, d), K)


def _pair(case, model, n=N):
    """The hypothesis case unpacked: (K, d, rng, x, y) with n random points
    each for x and y, drawn in that order from the case's seed."""
    K, d, seed = case
    rng = np.random.default_rng(seed)
    return K, d, rng, random_points(rng, model, n, d, K), random_points(rng, model, n, d, K)


def tangent_inner(model, x, u, v, K):
    """Riemannian inner product of tangent vectors u, v at x (ambient coordinates).

    Poincaré (handbook): <u,v>_x = 4 u.v / g^2, g = 1 - kappa |x|^2.
    Klein: from ds^2 = |dx|^2/g + kappa (x.dx)^2/g^2 (the unit-ball Klein
    metric |dx|^2/(1-|x|^2) + (x.dx)^2/(1-|x|^2)^2, from memory, rescaled to
    radius R; checked numerically against distances in
    test_distance_is_the_length_of_short_steps):
        <u,v>_x = u.v/g + kappa (x.u)(x.v)/g^2.
    Hyperboloid: the Minkowski product of tangent vectors, evaluated from the
    spatial parts (v0 = x_s.v_s/x0 by tangency) without cancellation:
        <u,v>_L = u_perp.v_perp + (xh.u_s)(xh.v_s) R^2/x0^2, xh = x_s/|x_s|.
    """
    kap = -K
    if model == "poincare":
        g = gap(x, K)
        return 4.0 * dot(u, v) / g**2
    if model == "klein":
        g = gap(x, K)
        return dot(u, v) / g + kap * dot(x, u) * dot(x, v) / g**2
    if model == "hyperboloid":
        xs, us, vs = x[..., 1:], u[..., 1:], v[..., 1:]
        r = norm(xs)
        xh = xs / np.where(r == 0.0, 1.0, r)[..., None]
        ur, vr = dot(xh, us), dot(xh, vs)
        up = us - ur[..., None] * xh
        vp = vs - vr[..., None] * xh
        x0 = sheet_x0(xs, K)
        return dot(up, vp) + ur * vr * (radius(K) / x0) ** 2
    raise AssertionError(model)


def tangent_norm(model, x, v, K):
    return np.sqrt(np.maximum(tangent_inner(model, x, v, v, K), 0.0))


def random_tangent(rng, model, x, K, vmax):
    """Tangent vectors at x with Riemannian norms in [0, vmax R], random directions."""
    n, D = x.shape
    if model == "hyperboloid":
        ws = rng.normal(size=(n, D - 1))
        w0 = dot(x[:, 1:], ws) / sheet_x0(x[:, 1:], K)
        w = np.concatenate([w0[:, None], ws], axis=-1)
    else:
        w = rng.normal(size=(n, D))
    target = vmax * radius(K) * rng.uniform(0.0, 1.0, n)
    target[: n // 4] = vmax * radius(K) * 10.0 ** rng.uniform(-9.0, 0.0, n // 4)
    return w * (target / tangent_norm(model, x, w, K))[:, None]


def assert_tangent(x, v, K, what):
    """Hyperboloid tangency: v0 = x_s.v_s / x0 (i.e. <x, v>_L = 0)."""
    v0 = dot(x[..., 1:], v[..., 1:]) / sheet_x0(x[..., 1:], K)
    tol = C * EPS * (np.abs(v0) + norm(v))
    assert_close_values(v[..., 0], v0, tol, what + ": tangent vectors satisfy <x, v>_L = 0")


# mpmath references (handbook formulas, evaluated at 50 digits on the float64 inputs)


def _mpv(row):
    return [mpmath.mpf(float(c)) for c in row]


@MP50
def _mp_to_hyperboloid(model, x, K):
    """Handbook maps of a float64 point to the hyperboloid, exactly (mpmath).

    Poincaré p -> (R (1 + kappa|p|^2), 2p) / (1 - kappa|p|^2);
    Klein k -> (R, k) / sqrt(1 - kappa|k|^2); a hyperboloid point is read
    through its spatial part (x0 = sqrt(R^2 + |x_s|^2)), as documented.
    """
    kap = mpmath.mpf(-K)
    R = 1 / mpmath.sqrt(kap)
    x = _mpv(x)
    if model == "hyperboloid":
        return [mpmath.sqrt(R**2 + sum(c * c for c in x[1:]))] + x[1:]
    n2 = sum(c * c for c in x)
    g = 1 - kap * n2
    if model == "poincare":
        return [R * (1 + kap * n2) / g] + [2 * c / g for c in x]
    return [R / mpmath.sqrt(g)] + [c / mpmath.sqrt(g) for c in x]


@MP50
def _mp_tangent_to_hyperboloid(model, x, v, K):
    """The differential of the map above: a tangent vector at x to one at X."""
    kap = mpmath.mpf(-K)
    R = 1 / mpmath.sqrt(kap)
    x, v = _mpv(x), _mpv(v)
    if model == "hyperboloid":
        X = _mp_to_hyperboloid(model, x, K)
        return [sum(a * b for a, b in zip(X[1:], v[1:])) / X[0]] + v[1:]  # tangency fixes v0
    xv = sum(a * b for a, b in zip(x, v))
    g = 1 - kap * sum(c * c for c in x)
    if model == "poincare":
        return [4 * R * kap * xv / g**2] + [2 * b / g + 4 * kap * xv * a / g**2 for a, b in zip(x, v)]
    s3 = kap * xv / g**1.5
    return [R * s3] + [b / mpmath.sqrt(g) + a * s3 for a, b in zip(x, v)]


@MP50
def _mp_tangent_from_hyperboloid(model, X, V, K):
    """Inverse differential: hyperboloid tangent V at X to the model's ambient vector."""
    R = 1 / mpmath.sqrt(mpmath.mpf(-K))
    if model == "hyperboloid":
        return V
    if model == "poincare":  # p = R X_s / (R + X0)
        den = R + X[0]
        return [R * b / den - R * a * V[0] / den**2 for a, b in zip(X[1:], V[1:])]
    return [R * b / X[0] - R * a * V[0] / X[0] ** 2 for a, b in zip(X[1:], V[1:])]  # k = R X_s / X0


def _mink(a, b):
    return -a[0] * b[0] + sum(p * q for p, q in zip(a[1:], b[1:]))


def _mp_hyp_distance(X, Y, R):
    """Distance on the hyperboloid through the chord, 2R asinh(|X - Y|_L / 2R)."""
    dxy = [a - b for a, b in zip(X, Y)]
    return 2 * R * mpmath.asinh(mpmath.sqrt(max(_mink(dxy, dxy), 0)) / (2 * R))


# Hyperboloid formulas (handbook), evaluated in mpmath on the float64 inputs:
#     exp_X(V) = cosh(|V|/R) X + R sinh(|V|/R) V/|V|,
#     log_X(Y) = d (Y - cosh(d/R) X) / |Y - cosh(d/R) X|_L,
#     P_{X->Y} V = V + <Y,V>_L / (R^2 - <X,Y>_L) (X + Y).
# Each returns the library's error per row: a hyperbolic distance for points,
# the Riemannian (Minkowski) norm of the difference for tangent vectors.


@MP50
def mp_exp_errors(model, x, v, lib_exp, K):
    R = 1 / mpmath.sqrt(mpmath.mpf(-K))
    out = []
    for i in range(len(x)):
        X = _mp_to_hyperboloid(model, x[i], K)
        V = _mp_tangent_to_hyperboloid(model, x[i], v[i], K)
        n = mpmath.sqrt(max(_mink(V, V), 0))
        Z = X if n == 0 else [mpmath.cosh(n / R) * a + R * mpmath.sinh(n / R) * b / n for a, b in zip(X, V)]
        out.append(float(_mp_hyp_distance(Z, _mp_to_hyperboloid(model, lib_exp[i], K), R)))
    return np.array(out)


@MP50
def mp_log_errors(model, x, y, lib_log, K):
    R = 1 / mpmath.sqrt(mpmath.mpf(-K))
    out = []
    for i in range(len(x)):
        X = _mp_to_hyperboloid(model, x[i], K)
        Y = _mp_to_hyperboloid(model, y[i], K)
        d = _mp_hyp_distance(X, Y, R)
        W = [b - mpmath.cosh(d / R) * a for a, b in zip(X, Y)]
        nw = mpmath.sqrt(max(_mink(W, W), 0))
        L = [0 * c for c in X] if nw == 0 else [d * c / nw for c in W]
        D = [a - b for a, b in zip(_mp_tangent_to_hyperboloid(model, x[i], lib_log[i], K), L)]
        out.append(float(mpmath.sqrt(max(_mink(D, D), 0))))
    return np.array(out)


@MP50
def mp_transport_errors(model, x, y, u, lib_tr, K):
    R = 1 / mpmath.sqrt(mpmath.mpf(-K))
    out = []
    for i in range(len(x)):
        X = _mp_to_hyperboloid(model, x[i], K)
        Y = _mp_to_hyperboloid(model, y[i], K)
        U = _mp_tangent_to_hyperboloid(model, x[i], u[i], K)
        c = _mink(Y, U) / (R**2 - _mink(X, Y))
        P = [a + c * (p + q) for a, p, q in zip(U, X, Y)]
        D = [a - b for a, b in zip(_mp_tangent_to_hyperboloid(model, y[i], lib_tr[i], K), P)]
        out.append(float(mpmath.sqrt(max(_mink(D, D), 0))))
    return np.array(out)


N_MP = 6  # points per example for the (slower) mpmath references


def mp_row_distances(model, x, y, K):
    """The handbook distance (conftest.mp_distance: cosh(d/R) from the
    model's closed form, 50 digits on the float64 inputs) of every pair of
    broadcast rows of x and y, as float64."""
    out = []
    for a, b in zip(np.asarray(x).reshape(-1, np.shape(x)[-1]), np.asarray(y).reshape(-1, np.shape(y)[-1])):
        out.append(float(mp_distance(model, a, b, K)))
    return np.array(out).reshape(np.broadcast_shapes(np.shape(x)[:-1], np.shape(y)[:-1]))
