"""Identities of the four hyperbolic models: conversions (round trips,
compositions, the handbook maps) and distances (agreement across models,
handbook formulas, the Riemannian length of short steps).

Conventions, tolerances and helpers: identities_support.py (K is the
curvature, R = 1/sqrt(-K); tolerances hold C times the float64 roundings
an identity passes through plus REL = 1e-10 relative). Hypothesis draws
(curvature, dimension, seed) and checks a batch of points per example;
example count: env var GYROKIT_HYPOTHESIS_EXAMPLES (default 100).
"""

from __future__ import annotations

import itertools

from hypothesis import given
import mpmath
import numpy as np
import pytest

import gyrokit as gk
from conftest import EPS, MANIFOLD_MODELS, MODELS, MODULES, MP50, origin, radius, unit_vectors
from identities_support import (
    _mpv,
    _pair,
    assert_close_points,
    assert_close_values,
    C,
    CASES,
    coord_rounding,
    gap,
    mp_row_distances,
    N,
    random_points,
    random_tangent,
    REL,
    RHO_MAX,
    RHO_MAX_ROUNDTRIP,
    sheet_x0,
    tangent_norm,
)


# ======================================================= conversions


@pytest.mark.parametrize("src,dst", list(itertools.permutations(MODELS, 2)))
@given(case=CASES)
def test_convert_round_trip(src, dst, case):
    K, d, seed = case
    rng = np.random.default_rng(seed)
    x = random_points(rng, src, N, d, K, RHO_MAX_ROUNDTRIP)
    mid = gk.convert(x, src, dst, curvature=K)
    assert mid.shape == (N, d + 1 if dst == "hyperboloid" else d)
    back = gk.convert(mid, dst, src, curvature=K)
    # The intermediate float64 coordinates limit what can come back: a plain
    # 1e-13 relative bound is impossible for e.g. hyperboloid -> klein -> hyperboloid
    # at rho = 10 (one Klein ulp there is ~1e-8 R of hyperbolic length).
    tol = C * EPS * (coord_rounding(dst, mid, K) + coord_rounding(src, x, K) + radius(K))
    assert_close_points(src, back, x, K, tol, f"{src} -> {dst} -> {src}")


@pytest.mark.parametrize(
    "a,b,c", [t for t in itertools.permutations(MODELS, 3)]
)
@given(case=CASES)
def test_convert_composition(a, b, c, case):
    K, d, seed = case
    rng = np.random.default_rng(seed)
    x = random_points(rng, a, N, d, K, RHO_MAX_ROUNDTRIP)
    mid = gk.convert(x, a, b, curvature=K)
    two_steps = gk.convert(mid, b, c, curvature=K)
    direct = gk.convert(x, a, c, curvature=K)
    tol = C * EPS * (
        coord_rounding(a, x, K) + coord_rounding(b, mid, K) + coord_rounding(c, direct, K) + radius(K)
    )
    assert_close_points(c, two_steps, direct, K, tol, f"{a} -> {b} -> {c} vs {a} -> {c}")


@MP50
def mp_poincare_images(p, K):
    kap = mpmath.mpf(-K)
    R = 1 / mpmath.sqrt(kap)
    want_k, want_h = [], []
    for row in p:
        a = _mpv(row)
        s = kap * sum(c * c for c in a)
        # handbook: Poincaré -> Klein is k = 2p / (1 + kappa |p|^2)
        want_k.append([float(2 * c / (1 + s)) for c in a])
        # handbook: Poincaré -> hyperboloid is
        # x = (R (1 + kappa|p|^2), 2p) / (1 - kappa|p|^2)
        want_h.append([float(R * (1 + s) / (1 - s))] + [float(2 * c / (1 - s)) for c in a])
    return np.array(want_k), np.array(want_h)


@given(case=CASES)
def test_convert_matches_handbook_maps(case):
    K, d, seed = case
    rng = np.random.default_rng(seed)
    R = radius(K)
    p = random_points(rng, "poincare", N, d, K, RHO_MAX)
    want_k, want_h = mp_poincare_images(p, K)
    got_k = gk.convert(p, "poincare", "klein", curvature=K)
    got_h = gk.convert(p, "poincare", "hyperboloid", curvature=K)
    assert_close_points("klein", got_k, want_k, K, C * EPS * (coord_rounding("klein", want_k, K) + R), "poincare -> klein")
    assert_close_points("hyperboloid", got_h, want_h, K, C * EPS * (coord_rounding("hyperboloid", want_h, K) + R), "poincare -> hyperboloid")
    # The documented images of the origin (API: origin <-> (R,0..0) <-> (0,..,0,R)).
    o = np.zeros(d)
    for dst in MODELS:
        got = gk.convert(o, "poincare", dst, curvature=K)
        np.testing.assert_allclose(got, origin(dst, d, K), rtol=4 * EPS, atol=4 * EPS * R, err_msg=dst)
        back = gk.convert(origin(dst, d, K), dst, "poincare", curvature=K)
        np.testing.assert_allclose(back, o, rtol=0, atol=4 * EPS * R, err_msg=dst)


# ====================================================== distance in every model


@pytest.mark.parametrize("model", ("klein", "hyperboloid", "halfspace"))
@given(case=CASES)
def test_distance_agrees_across_models(model, case):
    K, d, seed = case
    rng = np.random.default_rng(seed)
    R = radius(K)
    x = random_points(rng, "poincare", N, d, K)
    y = random_points(rng, "poincare", N, d, K)
    dp = gk.poincare.distance(x, y, curvature=K)
    keep = dp >= 1e-3 * R  # close pairs: the conversion's rounding dominates
    x, y, dp = x[keep], y[keep], dp[keep]
    xm = gk.convert(x, "poincare", model, curvature=K)
    ym = gk.convert(y, "poincare", model, curvature=K)
    dm = MODULES[model].distance(xm, ym, curvature=K)
    # x, y are exact; the converted points carry one rounding each
    tol = REL * dp + C * EPS * (coord_rounding(model, xm, K) + coord_rounding(model, ym, K) + R)
    assert_close_values(dm, dp, tol, f"{model} distance vs poincare distance")


# ====================================================== handbook distances


@MP50
def mp_vertical_distance(a, b, K):
    # handbook: in the upper half-space, d((0,..,a), (0,..,b)) = R |ln(a/b)|
    mR = 1 / mpmath.sqrt(mpmath.mpf(-K))
    return np.array([float(mR * abs(mpmath.log(mpmath.mpf(p) / mpmath.mpf(q)))) for p, q in zip(a, b)])


@MP50
def mp_distance_from_origin(model, x, K):
    mR = 1 / mpmath.sqrt(mpmath.mpf(-K))
    want = []
    for row in x:
        if model == "poincare":
            # handbook: distance from the origin in the Poincaré ball is 2R artanh(|x|/R)
            want.append(2 * mR * mpmath.atanh(mpmath.norm(_mpv(row)) / mR))
        elif model == "klein":
            # handbook: distance from the origin in the Klein ball is R artanh(|x|/R)
            want.append(mR * mpmath.atanh(mpmath.norm(_mpv(row)) / mR))
        else:
            # handbook: distance from (R,0..0) on the hyperboloid is R asinh(|x_s|/R)
            want.append(mR * mpmath.asinh(mpmath.norm(_mpv(row[1:])) / mR))
    return np.array([float(w) for w in want])


@pytest.mark.parametrize("model", MODELS)
@given(case=CASES)
def test_distance_from_origin_handbook(model, case):
    K, d, seed = case
    rng = np.random.default_rng(seed)
    R = radius(K)
    if model == "halfspace":
        a = R * np.exp(rng.uniform(-RHO_MAX, RHO_MAX, N))
        b = R * np.exp(rng.uniform(-RHO_MAX, RHO_MAX, N))
        b[0] = a[0]
        x = np.zeros((N, d)); x[:, -1] = a
        y = np.zeros((N, d)); y[:, -1] = b
        got = gk.halfspace.distance(x, y, curvature=K)
        want = mp_vertical_distance(a, b, K)
        assert_close_values(got, want, 1e-12 * want + 1e-15 * R, "halfspace vertical distance")
        return
    x = random_points(rng, model, N, d, K)
    o = origin(model, d, K)
    got = MODULES[model].distance(o, x, curvature=K)
    got_rev = MODULES[model].distance(x, o, curvature=K)
    want = mp_distance_from_origin(model, x, K)
    assert_close_values(got, want, 1e-12 * want + 1e-15 * R, f"{model} distance from the origin")
    assert_close_values(got_rev, want, 1e-12 * want + 1e-15 * R, f"{model} distance to the origin")


@pytest.mark.parametrize("model", MODELS)
@given(case=CASES)
def test_distance_matches_handbook_formula(model, case):
    """General pairs, including pairs 1e-12 R .. 1e-3 R apart, against mpmath."""
    K, d, rng, x, y = _pair(case, model)
    R = radius(K)
    half = N // 2
    # close pairs: nudge the spatial part / the coordinates of x
    nudge = unit_vectors(rng, half, d) * (R * 10.0 ** rng.uniform(-12, -3, half))[:, None]
    if model == "hyperboloid":
        ys = x[:half, 1:] + nudge
        y[:half] = np.concatenate([sheet_x0(ys, K)[:, None], ys], axis=-1)
    elif model == "halfspace":
        y[:half] = x[:half] + nudge * (x[:half, -1:] / R)
    else:
        y[:half] = x[:half] + nudge * gap(x[:half], K)[:, None]
    got = MODULES[model].distance(x, y, curvature=K)
    want = mp_row_distances(model, x, y, K)
    # SPEC numerical contract: relative 1e-12 (absolute 1e-15 near zero)
    assert_close_values(got, want, 1e-12 * want + 1e-15 * R, f"{model} distance vs mpmath")
    assert_close_values(MODULES[model].distance(y, x, curvature=K), got, 4 * EPS * got, f"{model} distance symmetry")


@pytest.mark.parametrize("model", MANIFOLD_MODELS)
@given(case=CASES)
def test_distance_is_the_length_of_short_steps(model, case):
    """d(x - h v, x + h v) / 2h -> |v|_x: ties the Riemannian norms used in
    this file (the Klein one derived above) to the library's distances."""
    K, d, seed = case
    rng = np.random.default_rng(seed)
    x = random_points(rng, model, N, d, K, rho_max=3.0)
    v = random_tangent(rng, model, x, K, vmax=1.0)
    v = v / tangent_norm(model, x, v, K)[:, None]  # unit Riemannian norm
    h = 1e-5 * radius(K)
    if model == "hyperboloid":
        a_s, b_s = x[:, 1:] - h * v[:, 1:], x[:, 1:] + h * v[:, 1:]
        a = np.concatenate([sheet_x0(a_s, K)[:, None], a_s], axis=-1)
        b = np.concatenate([sheet_x0(b_s, K)[:, None], b_s], axis=-1)
    else:
        a, b = x - h * v, x + h * v
    got = MODULES[model].distance(a, b, curvature=K) / (2 * h)
    # central difference: error O(h^2) plus the rounding of x +- h v
    assert_close_values(got, np.ones(N), 1e-7, f"{model}: short-step distance / step vs Riemannian norm")
