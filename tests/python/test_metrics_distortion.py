"""gk.metrics.distortion: mean and worst-case distortion, fitted scale.

References: the direct formulas of the SPEC (mean |d/s - t|/t, worst
max(d/(s t)) max(s t/d)) evaluated with numpy on gk.distance_matrix; the
fitted scale against a brute-force minimisation (scipy.optimize.minimize_scalar
on the convex objective, then every breakpoint checked: the minimum of a
piecewise-linear convex function lies at a breakpoint, common practice)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import minimize_scalar

import gyrokit as gk
from conftest import MODELS, ball_points, to_model


def _direct(d, t, s):
    """The SPEC's formulas, pair by pair."""
    mean = np.mean(np.abs(d / s - t) / t)
    worst = np.max(d / (s * t)) * np.max(s * t / d)
    return mean, worst


def _setup(model, seed, n=40, dim=3):
    rng = np.random.default_rng(seed)
    x = to_model(ball_points(rng, n, dim, 4.0), model)
    dm = gk.distance_matrix(x, model=model)
    noise = np.exp(rng.normal(0, 0.3, (n, n)))
    noise = np.sqrt(noise * noise.T)  # symmetric
    t = dm * 2.5 * noise
    np.fill_diagonal(t, 0.0)
    return x, dm, t


@pytest.mark.parametrize("model", MODELS)
def test_matrix_target_direct_formulas(model):
    x, dm, t = _setup(model, 11 + MODELS.index(model))
    iu = np.triu_indices(len(x), 1)
    r = gk.metrics.distortion(x, t, scale=0.7, model=model)
    mean, worst = _direct(dm[iu], t[iu], 0.7)
    assert r.mean == pytest.approx(mean, rel=1e-13)
    assert r.worst == pytest.approx(worst, rel=1e-13)
    assert r.scale == 0.7
    assert r.pairs == len(iu[0])


@pytest.mark.parametrize("seed", range(6))
def test_fitted_scale_is_the_minimiser(seed):
    x, dm, t = _setup("poincare", 100 + seed, n=25)
    iu = np.triu_indices(len(x), 1)
    d, tt = dm[iu], t[iu]
    r = gk.metrics.distortion(x, t)

    def f(s):
        return np.mean(np.abs(d / s - tt) / tt)

    # scipy's bounded scalar minimiser on the convex objective ...
    opt = minimize_scalar(f, bounds=(1e-3, 10.0), method="bounded", options={"xatol": 1e-12})
    assert r.mean <= opt.fun * (1 + 1e-12)
    # ... and the exact check: the objective is convex and piecewise linear
    # in 1/s with breakpoints at the ratios d/t, so its minimum over s is the
    # minimum over the breakpoints.
    best = min(f(s) for s in d / tt)
    assert r.mean == pytest.approx(best, rel=1e-12)
    assert r.mean == pytest.approx(f(r.scale), rel=1e-13)
    assert np.any(r.scale == d / tt)  # the minimiser is one of the ratios


def test_pairs_target():
    x, dm, t = _setup("klein", 5)
    rng = np.random.default_rng(1)
    pairs = rng.integers(0, len(x), (200, 2))
    pairs = pairs[pairs[:, 0] != pairs[:, 1]]
    tp = t[pairs[:, 0], pairs[:, 1]]
    r = gk.metrics.distortion(x, tp, pairs=pairs, scale=2.0, model="klein")
    mean, worst = _direct(dm[pairs[:, 0], pairs[:, 1]], tp, 2.0)
    assert r.mean == pytest.approx(mean, rel=1e-13)
    assert r.worst == pytest.approx(worst, rel=1e-13)
    assert r.pairs == len(pairs)


def test_exact_embedding_has_no_distortion():
    # Target = the embedding's own distances times 3: fitted scale 3 exactly
    # up to rounding, mean 0, worst 1 (definition).
    x, dm, _ = _setup("poincare", 2)
    r = gk.metrics.distortion(x, dm / 3.0)
    assert r.scale == pytest.approx(3.0, rel=1e-14)
    assert r.mean <= 1e-15
    assert r.worst == pytest.approx(1.0, rel=1e-14)


def test_weighted_median_tie():
    # Two pairs with ratios 1 and 2 (hand count): weights 1 and 2, half the
    # total 1.5 is first reached at ratio 2, so s = 2 and the mean is
    # (|1/2 - 1| + 0)/2 = 0.25; for s = 1 it would be (0 + 1)/2.
    x = np.array([[0.0, 0.0], [np.tanh(0.5), 0.0], [-np.tanh(1.0), 0.0]])  # d(0,1)=1, d(0,2)=2
    pairs = np.array([[0, 1], [0, 2]])
    r = gk.metrics.distortion(x, np.array([1.0, 1.0]), pairs=pairs)
    assert r.scale == pytest.approx(2.0, rel=1e-15)
    assert r.mean == pytest.approx(0.25, rel=1e-15)
    assert r.worst == pytest.approx(2.0, rel=1e-15)


def test_coincident_points_give_infinite_worst():
    x = np.array([[0.1, 0.0], [0.1, 0.0], [0.3, 0.2]])
    t = np.array([[0, 1, 1], [1, 0, 1], [1, 1, 0.0]])
    r = gk.metrics.distortion(x, t, scale=1.0)
    assert r.worst == np.inf
    assert np.isfinite(r.mean)


@pytest.mark.parametrize(
    "t, match",
    [
        (np.array([[0, 1, 2], [1, 0, 0], [2, 0, 0.0]]), r"target row 1: target\[1, 2\] = 0 for two distinct points"),
        (np.array([[0, 1, 2], [1, 0, 3], [2, 3.5, 0.0]]), r"target row 1: not symmetric"),
        (np.array([[0, 1, 2], [1, 0.5, 3], [2, 3, 0.0]]), r"target row 1: target\[1, 1\] = 0.5; the diagonal"),
        (np.array([[0, 1, np.nan], [1, 0, 3], [np.nan, 3, 0.0]]), r"target row 0: target\[0, 2\] = NaN"),
        (np.array([[0, 1, 2], [1, 0, -3], [2, -3, 0.0]]), r"target row 1: target\[1, 2\] = -3"),
        (np.ones((2, 2)), r"target must have shape \(3, 3\)"),
        (np.ones(3), r"target must be an \(n, n\) distance matrix"),
    ],
)
def test_bad_matrix_targets(t, match):
    x = np.array([[0.0, 0.0], [0.2, 0.0], [0.0, 0.3]])
    with pytest.raises(ValueError, match=match):
        gk.metrics.distortion(x, t)


def test_bad_pairs_and_scale():
    x = np.array([[0.0, 0.0], [0.2, 0.0], [0.0, 0.3]])
    with pytest.raises(ValueError, match=r"pairs row 1: \(1, 3\) names point 3"):
        gk.metrics.distortion(x, [1.0, 1.0], pairs=[[0, 1], [1, 3]])
    with pytest.raises(ValueError, match=r"pairs row 0: \(2, 2\) pairs a point with itself"):
        gk.metrics.distortion(x, [1.0], pairs=[[2, 2]])
    with pytest.raises(ValueError, match=r"target row 1: 0 for pair \(1, 2\)"):
        gk.metrics.distortion(x, [1.0, 0.0], pairs=[[0, 1], [1, 2]])
    with pytest.raises(ValueError, match=r"p = len\(target\) = 1"):
        gk.metrics.distortion(x, [1.0], pairs=[[0, 1], [1, 2]])
    with pytest.raises(ValueError, match=r"with pairs=, target must be 1-D"):
        gk.metrics.distortion(x, np.ones((3, 3)), pairs=[[0, 1]])
    with pytest.raises(ValueError, match="scale must be a finite number > 0"):
        gk.metrics.distortion(x, np.ones((3, 3)) - np.eye(3), scale=0.0)
    with pytest.raises(TypeError, match="scale must be a real number"):
        gk.metrics.distortion(x, np.ones((3, 3)) - np.eye(3), scale="1")
    with pytest.raises(ValueError, match="no pairs"):
        gk.metrics.distortion(x[:1], np.zeros((1, 1)))
