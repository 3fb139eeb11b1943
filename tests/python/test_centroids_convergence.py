"""Centroids: Newton convergence on spread-out data, the max_iter warning,
bit-identical results across threads and SIMD paths, gk.frechet_variance, a
hypothesis property (first-order condition and minimality) and bad input."""

from __future__ import annotations

import os
import subprocess
import sys
import warnings

from hypothesis import given, strategies as st
import numpy as np
import pytest

import gyrokit as gk
from conftest import ball_points, point_at


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
