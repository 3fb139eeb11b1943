"""The labelled-statistics API (issue 15, items 1, 3, 4 and 9).

1. ``weights`` and ``labels`` are keyword-only: passing labels by position
   used to be read as weights and gave one mean without a word.
3. Labels are any hashable values (strings, floats, object arrays, pandas
   Categorical); results name the label values in ``.labels``.
4. ``frechet_variance`` takes ``labels=`` and returns one variance per label.
9. The not-fitted error of ``KMeans`` has a name and a message of our own.

References: per-label results must equal the results computed on each
label's subset (the per-label definition itself; bit-identical here, since
both run the same chunked sums over the same points in the same order), and
variances are checked against a 50-digit mpmath evaluation of the
Poincaré-ball distance formula ``d = R acosh(1 + 2 kappa |x - y|^2 /
((1 - kappa |x|^2)(1 - kappa |y|^2)))`` (handbook formula, e.g. Ratcliffe,
"Foundations of Hyperbolic Manifolds", §4.5).
"""

from __future__ import annotations

import inspect

import mpmath
import numpy as np
import pytest

import gyrokit as gk
from gyrokit.kmeans import KMeans


def ball(rng, n, d, rmax=3.0):
    u = rng.standard_normal((n, d))
    u /= np.linalg.norm(u, axis=1, keepdims=True)
    return np.tanh(rng.uniform(0, rmax, n) / 2)[:, None] * u


def mp_variance(x, c, w=None, curvature=-1.0):
    """sum w d(c, x)^2 / sum w at 50 digits (Poincaré ball, handbook distance)."""
    with mpmath.workdps(50):
        kappa = -mpmath.mpf(curvature)
        R = 1 / mpmath.sqrt(kappa)
        c = [mpmath.mpf(float(v)) for v in c]
        c2 = sum(v * v for v in c)
        num = den = mpmath.mpf(0)
        for i, row in enumerate(x):
            p = [mpmath.mpf(float(v)) for v in row]
            p2 = sum(v * v for v in p)
            diff = sum((a - b) ** 2 for a, b in zip(p, c))
            dist = R * mpmath.acosh(1 + 2 * kappa * diff / ((1 - kappa * p2) * (1 - kappa * c2)))
            wi = mpmath.mpf(1) if w is None else mpmath.mpf(float(w[i]))
            num += wi * dist**2
            den += wi
        return float(num / den)


# ------------------------------------------------------------------ 1. keyword-only


@pytest.mark.parametrize("func", [gk.frechet_mean, gk.einstein_midpoint, gk.frechet_variance])
def test_weights_and_labels_are_keyword_only(func):
    params = inspect.signature(func).parameters
    for name in ("weights", "labels"):
        assert params[name].kind is inspect.Parameter.KEYWORD_ONLY, (func.__name__, name)


def test_labels_by_position_raise_instead_of_becoming_weights():
    rng = np.random.default_rng(0)
    x = ball(rng, 30, 2)
    lab = np.repeat([0, 1, 2], 10)
    with pytest.raises(TypeError):
        gk.frechet_mean(x, lab)
    with pytest.raises(TypeError):
        gk.einstein_midpoint(x, lab)
    with pytest.raises(TypeError):
        gk.frechet_variance(x, None, np.ones(30))
    # by keyword, the labels give one mean per label
    assert gk.frechet_mean(x, labels=lab).mean.shape == (3, 2)


# ------------------------------------------------------------------ 3. hashable labels


def _subset_means(x, lab, values):
    return np.array([gk.frechet_mean(x[lab == v]).mean for v in values])


@pytest.mark.parametrize(
    "make",
    [
        lambda i: np.array(["oak", "ash", "elm", "yew"])[i],  # strings
        lambda i: np.array(["oak", "ash", "elm", "yew"], dtype=object)[i],  # object array
        lambda i: np.array([2.5, -1.0, 7.25, 0.0])[i],  # floats
        lambda i: [("grove", k) for k in i],  # tuples (hashable, object values)
        lambda i: list(np.array(["oak", "ash", "elm", "yew"])[i]),  # a plain list
    ],
    ids=["str", "object", "float", "tuple", "list"],
)
def test_hashable_labels_name_the_results(make):
    rng = np.random.default_rng(1)
    x = ball(rng, 200, 3)
    codes = rng.integers(0, 4, 200)
    lab = make(codes)
    r = gk.frechet_mean(x, labels=lab)
    arr = np.empty(len(lab), dtype=object)
    arr[:] = lab
    if isinstance(lab[0], tuple):
        expect = sorted(set(lab))  # np.unique order = sorted order of the values
    else:
        expect = list(np.unique(np.asarray(lab)))
    assert [v if not isinstance(v, np.ndarray) else tuple(v) for v in r.labels] == expect
    # per-label means equal the means of the subsets (per-label definition)
    for row, v in zip(r.mean, r.labels):
        mask = np.array([a == v for a in arr])
        np.testing.assert_allclose(row, gk.frechet_mean(x[mask]).mean, rtol=0, atol=1e-13)
    e, names = gk.einstein_midpoint(x, labels=lab, return_labels=True)
    assert list(map(str, names)) == list(map(str, r.labels))
    for row, v in zip(e, names):
        mask = np.array([a == v for a in arr])
        np.testing.assert_allclose(row, gk.einstein_midpoint(x[mask]), rtol=0, atol=1e-13)


def test_string_labels_bit_identical_to_subsets():
    rng = np.random.default_rng(2)
    x = ball(rng, 5000, 4)
    names = np.array(["river", "hill", "marsh"])
    lab = names[rng.integers(0, 3, 5000)]
    w = rng.uniform(0.1, 2.0, 5000)
    r = gk.frechet_mean(x, weights=w, labels=lab)
    assert r.labels.tolist() == ["hill", "marsh", "river"]
    for row, v in zip(r.mean, r.labels):
        np.testing.assert_array_equal(row, gk.frechet_mean(x[lab == v], weights=w[lab == v]).mean)


def test_pandas_categorical_labels():
    pd = pytest.importorskip("pandas")
    rng = np.random.default_rng(3)
    x = ball(rng, 300, 2)
    order = ["low", "mid", "high", "unused"]
    lab = pd.Categorical(np.array(["high", "low", "mid"])[rng.integers(0, 3, 300)], categories=order)
    r = gk.frechet_mean(x, labels=lab)
    # the categories that occur, in the categorical's own order
    assert list(r.labels) == ["low", "mid", "high"]
    plain = np.asarray(lab)
    for row, v in zip(r.mean, r.labels):
        np.testing.assert_array_equal(row, gk.frechet_mean(x[plain == v]).mean)
    # a Series of that dtype works the same
    rs = gk.frechet_mean(x, labels=pd.Series(lab))
    np.testing.assert_array_equal(rs.mean, r.mean)
    assert list(rs.labels) == list(r.labels)


def test_integer_labels_unchanged():
    rng = np.random.default_rng(4)
    x = ball(rng, 100, 2)
    lab = rng.integers(-3, 3, 100)
    r = gk.frechet_mean(x, labels=lab)
    np.testing.assert_array_equal(r.labels, np.unique(lab))
    assert r.labels.dtype.kind == "i"


@pytest.mark.parametrize(
    "lab,msg",
    [
        (np.array([1.0, np.nan, 2.0, 1.0]), "labels: entry 1 is missing"),
        (np.array(["a", None, "b", "a"], dtype=object), "labels: entry 1 is missing"),
        (np.array([[0, 1], [1, 0]]), "1-D"),
        (np.array(["a", "b", "a"]), "labels has length 3 but x has 4 points"),
    ],
)
def test_bad_labels(lab, msg):
    x = ball(np.random.default_rng(5), 4, 2)
    with pytest.raises(ValueError, match=msg):
        gk.frechet_mean(x, labels=lab)


def test_zero_weight_group_names_the_label_value():
    x = ball(np.random.default_rng(6), 6, 2)
    lab = np.array(["pine", "pine", "fir", "fir", "ash", "ash"])
    w = np.array([1.0, 1.0, 0.0, 0.0, 1.0, 1.0])
    with pytest.raises(ValueError, match="label 'fir'"):
        gk.frechet_mean(x, weights=w, labels=lab)


# ------------------------------------------------------------------ 4. variance per label


@pytest.mark.parametrize("weighted", [False, True])
def test_variance_per_label_equals_subsets(weighted):
    rng = np.random.default_rng(7)
    x = ball(rng, 3000, 3)
    lab = np.array(["north", "south", "east", "west"])[rng.integers(0, 4, 3000)]
    w = rng.uniform(0.5, 3.0, 3000) if weighted else None
    v = gk.frechet_variance(x, weights=w, labels=lab)
    assert isinstance(v, gk.FrechetVariance)
    assert v.labels.tolist() == ["east", "north", "south", "west"]
    assert v.variance.shape == (4,)
    for val, name in zip(v.variance, v.labels):
        m = lab == name
        sub = gk.frechet_variance(x[m], weights=None if w is None else w[m])
        assert val == sub  # bit-identical: same sums over the same points
    # about the per-label Fréchet means
    means = gk.frechet_mean(x, weights=w, labels=lab)
    about = gk.frechet_variance(x, means.mean, weights=w, labels=lab)
    np.testing.assert_allclose(about.variance, v.variance, rtol=1e-13)


def test_variance_per_label_against_mpmath():
    rng = np.random.default_rng(8)
    K = -2.0
    R = 1 / np.sqrt(-K)
    x = R * ball(rng, 60, 2, rmax=5.0)
    lab = np.array(["a", "b", "c"])[rng.integers(0, 3, 60)]
    w = rng.uniform(0.2, 1.0, 60)
    centers = R * ball(rng, 3, 2, rmax=2.0)
    v = gk.frechet_variance(x, centers, weights=w, labels=lab, curvature=K)
    for j, name in enumerate(v.labels):
        m = lab == name
        ref = mp_variance(x[m], centers[j], w[m], curvature=K)  # mpmath, 50 digits
        assert v.variance[j] == pytest.approx(ref, rel=1e-13)
    # one center for every label
    one = gk.frechet_variance(x, centers[0], labels=lab, curvature=K)
    for j, name in enumerate(one.labels):
        ref = mp_variance(x[lab == name], centers[0], curvature=K)  # mpmath, 50 digits
        assert one.variance[j] == pytest.approx(ref, rel=1e-13)


def test_variance_labels_bad_center_rows():
    x = ball(np.random.default_rng(9), 10, 2)
    lab = np.repeat(["a", "b"], 5)
    with pytest.raises(ValueError, match="center has 3 rows but there are 2 labels"):
        gk.frechet_variance(x, np.zeros((3, 2)), labels=lab)


# ------------------------------------------------------------------ 9. our own words


def test_unfitted_error_is_our_own():
    assert gk.UnfittedError is gk.kmeans.UnfittedError
    assert issubclass(gk.UnfittedError, ValueError) and issubclass(gk.UnfittedError, AttributeError)
    assert not hasattr(gk.kmeans, "NotFittedError")
    km = KMeans(2)
    x = ball(np.random.default_rng(10), 10, 2)
    for f in (km.predict, km.transform, km.score):
        with pytest.raises(gk.UnfittedError) as e:
            f(x)
        text = str(e.value)
        # scikit-learn's wording is "This KMeans instance is not fitted yet.
        # Call 'fit' with appropriate arguments before using this estimator."
        assert "is not fitted yet" not in text and "appropriate arguments" not in text
        assert f.__name__ in text and "fit(X)" in text
