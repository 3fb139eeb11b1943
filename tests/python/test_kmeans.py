"""KMeans: recovery of separated hyperbolic blobs, monotone inertia, seeding,
reproducibility, the estimator interface, every model, and bad input.

The adjusted Rand index is computed by hand from the contingency table (the
Hubert & Arabie 1985 formula); scikit-learn is not installed in the venv.
"""

from __future__ import annotations

import numpy as np
import pytest

import gyrokit as gk
from gyrokit.kmeans import KMeans, UnfittedError
from conftest import DISTANCE, MODELS, ball_points


# ------------------------------------------------------------------ helpers


def ari(a, b):
    """Adjusted Rand index computed by hand (Hubert & Arabie 1985 formula):
    (sum_ij C(n_ij, 2) - E) / (mean(sum_i C(a_i, 2), sum_j C(b_j, 2)) - E),
    E = sum_i C(a_i, 2) sum_j C(b_j, 2) / C(n, 2)."""
    a = np.unique(np.asarray(a), return_inverse=True)[1]
    b = np.unique(np.asarray(b), return_inverse=True)[1]
    table = np.zeros((a.max() + 1, b.max() + 1), dtype=np.int64)
    np.add.at(table, (a, b), 1)
    c2 = lambda v: (v * (v - 1) // 2).sum()  # noqa: E731
    n = a.size
    index, rows, cols = c2(table), c2(table.sum(axis=1)), c2(table.sum(axis=0))
    expected = rows * cols / (n * (n - 1) / 2)
    top = 0.5 * (rows + cols)
    if top == expected:  # both labelings trivial (one cluster or all singletons)
        return 1.0
    return (index - expected) / (top - expected)


def test_ari_by_hand_known_values():
    # from memory: the scikit-learn documentation example gives 0.57 (= 4/7)
    assert ari([0, 0, 1, 1], [0, 0, 1, 2]) == pytest.approx(4 / 7, rel=1e-15)
    # worked by hand from the contingency table: index 1 = expected 1 -> 0
    assert ari([0, 0, 1, 1], [0, 0, 0, 1]) == pytest.approx(0.0, abs=1e-15)
    assert ari([0, 0, 1, 1, 2, 2], [5, 5, 3, 3, 9, 9]) == 1.0  # a relabelling
    assert ari([0, 0, 1, 1, 2, 2], [5, 5, 3, 3, 9, 3]) < 1.0


def ball_point(rng, d, rho):
    """A Poincaré point at hyperbolic distance rho from the origin, random direction."""
    u = rng.standard_normal(d)
    return np.tanh(rho / 2) * u / np.linalg.norm(u)


def blobs(rng, n_blobs, per_blob, d, spread=0.1, min_sep=3.0, rmax=3.0, curvature=-1.0):
    """Blobs in the Poincaré ball: centres at hyperbolic radius <= rmax with
    pairwise distance >= min_sep; each point is c ⊕ exp_0(v) (a Möbius
    translation, an isometry, of a Gaussian tangent cloud at the origin whose
    typical hyperbolic radius is 2 spread R: exp_0 maps |v| to distance 2|v|)."""
    R = 1 / np.sqrt(-curvature)
    centers = []
    while len(centers) < n_blobs:
        c = R * ball_point(rng, d, rng.uniform(0.5, rmax))
        if all(gk.poincare.distance(c, o, curvature=curvature) >= min_sep * R for o in centers):
            centers.append(c)
    centers = np.array(centers)
    X, y = [], []
    for j, c in enumerate(centers):
        v = R * spread / np.sqrt(d) * rng.standard_normal((per_blob, d))
        X.append(gk.poincare.add(c, gk.poincare.exp_map(v, curvature=curvature), curvature=curvature))
        y.append(np.full(per_blob, j))
    X, y = np.concatenate(X), np.concatenate(y)
    perm = rng.permutation(len(y))
    X, y = X[perm], y[perm]
    # The test's premise: every blob is far tighter than the separation.
    radius = gk.poincare.distance(X, centers[y], curvature=curvature).max()
    assert radius < 0.25 * min_sep * R
    return X, y, centers


def overlapping(rng, n, d):
    """Hard data for Lloyd: one broad cloud, hyperbolic radii uniform in [0, 4]."""
    return ball_points(rng, n, d, 4.0)


# ------------------------------------------------------------------ recovery


@pytest.mark.parametrize("d,n_blobs", [(2, 5), (5, 4), (16, 6)])
def test_recovers_separated_blobs(d, n_blobs):
    rng = np.random.default_rng(100 + d)
    X, y, _ = blobs(rng, n_blobs, 150, d)
    # n_init=4: the best of four runs (one k-means++ run can merge two blobs)
    km = KMeans(n_blobs, random_state=1, n_init=4).fit(X)
    assert ari(y, km.labels_) == 1.0
    # Each centre is the Fréchet mean of its cluster (the fixed point of Lloyd).
    ref = gk.frechet_mean(X, labels=km.labels_).mean
    np.testing.assert_allclose(km.cluster_centers_, ref, rtol=0, atol=1e-12)
    assert km.labels_.dtype == np.int64 and km.labels_.shape == (len(X),)
    assert km.cluster_centers_.shape == (n_blobs, d)


@pytest.mark.parametrize("model", MODELS)
def test_every_model_same_clustering(model):
    rng = np.random.default_rng(7)
    X, y, _ = blobs(rng, 4, 100, 3)
    base = KMeans(4, random_state=3, n_init=4).fit(X)
    Xm = X if model == "poincare" else gk.convert(X, "poincare", model)
    km = KMeans(4, model=model, random_state=3, n_init=4).fit(Xm)
    assert ari(y, km.labels_) == 1.0
    np.testing.assert_array_equal(km.labels_, base.labels_)
    width = 4 if model == "hyperboloid" else 3
    assert km.cluster_centers_.shape == (4, width)
    back = km.cluster_centers_ if model == "poincare" else gk.convert(km.cluster_centers_, model, "poincare")
    np.testing.assert_allclose(back, base.cluster_centers_, rtol=0, atol=1e-10)
    assert km.inertia_ == pytest.approx(base.inertia_, rel=1e-10)
    # transform in the model's own coordinates: distances to its centres
    T = km.transform(Xm)
    np.testing.assert_allclose(T, DISTANCE[model](Xm[:, None, :], km.cluster_centers_[None, :, :]), rtol=1e-12, atol=1e-14)
    np.testing.assert_array_equal(km.predict(Xm), km.labels_)


def test_other_curvature():
    K = -4.0
    rng = np.random.default_rng(11)
    X, y, _ = blobs(rng, 3, 120, 4, curvature=K)
    km = KMeans(3, curvature=K, random_state=0, n_init=4).fit(X)
    assert ari(y, km.labels_) == 1.0
    ref = gk.frechet_mean(X, labels=km.labels_, curvature=K).mean
    np.testing.assert_allclose(km.cluster_centers_, ref, rtol=0, atol=1e-12)
    d = gk.poincare.distance(X, km.cluster_centers_[km.labels_], curvature=K)
    assert km.inertia_ == pytest.approx(np.sum(d**2), rel=1e-12)


# ------------------------------------------------------------------ inertia


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_inertia_never_rises(seed):
    rng = np.random.default_rng(seed)
    X = overlapping(rng, 3000, 3)
    km = KMeans(12, random_state=seed, n_init=2, max_iter=200, init="random").fit(X)
    h = np.array(km.inertia_history_)
    assert len(h) == km.n_iter_ + 1
    assert km.n_iter_ >= 5  # hard data: Lloyd really iterates
    # Rounding in the sums only (relative 1e-12), never a real rise.
    assert np.all(np.diff(h) <= 1e-12 * h[:-1]), np.diff(h).max()
    assert h[-1] < h[0]
    assert h[-1] == km.inertia_


def test_inertia_and_score_consistent():
    rng = np.random.default_rng(5)
    X = overlapping(rng, 800, 4)
    km = KMeans(6, random_state=0).fit(X)
    T = km.transform(X)
    assert T.shape == (800, 6)
    # transform = distances to cluster_centers_ (element-wise distance, a different kernel)
    np.testing.assert_allclose(T, gk.poincare.distance(X[:, None, :], km.cluster_centers_[None]), rtol=1e-13, atol=1e-15)
    # labels_ are the nearest centres; inertia is their squared-distance sum
    np.testing.assert_array_equal(km.labels_, np.argmin(T, axis=1))
    assert km.inertia_ == pytest.approx(np.sum(np.min(T, axis=1) ** 2), rel=1e-12)
    assert km.score(X) == pytest.approx(-km.inertia_, rel=1e-14)
    np.testing.assert_array_equal(km.predict(X), km.labels_)
    # new data: predict is the argmin of transform
    Y = overlapping(rng, 300, 4)
    np.testing.assert_array_equal(km.predict(Y), np.argmin(km.transform(Y), axis=1))
    assert km.score(Y) == pytest.approx(-np.sum(np.min(km.transform(Y), axis=1) ** 2), rel=1e-12)


def test_converged_centres_are_frechet_means_of_labels():
    rng = np.random.default_rng(9)
    X = overlapping(rng, 1500, 2)
    km = KMeans(5, random_state=4, n_init=1, max_iter=500, tol=0.0).fit(X)
    assert km.n_iter_ < 500  # stopped because the labels stopped changing
    ref = gk.frechet_mean(X, labels=km.labels_).mean
    np.testing.assert_allclose(km.cluster_centers_, ref, rtol=0, atol=1e-12)
    # A Lloyd fixed point: one more assignment changes nothing.
    assert gk.knn(X, 1, km.cluster_centers_)[0][:, 0].tolist() == km.labels_.tolist()


def test_max_iter_caps_iterations():
    rng = np.random.default_rng(2)
    X = overlapping(rng, 2000, 3)
    km = KMeans(10, random_state=0, n_init=1, max_iter=2).fit(X)
    assert km.n_iter_ == 2 and len(km.inertia_history_) == 3


def test_best_of_n_init():
    rng = np.random.default_rng(6)
    X = overlapping(rng, 600, 2)
    # Seeding draws from one generator run after run (Lloyd draws nothing),
    # so three n_init=1 fits on one generator replay the three runs.
    g = np.random.default_rng(123)
    single = [KMeans(7, n_init=1, random_state=g).fit(X).inertia_ for _ in range(3)]
    best = KMeans(7, n_init=3, random_state=np.random.default_rng(123)).fit(X)
    assert best.inertia_ == min(single)
    assert len(set(single)) > 1  # the runs really differ, so the choice matters


# ------------------------------------------------------------------ seeding


def _pair_counts(km, X, rng, runs, trials=None):
    """How often each pair of rows of X is seeded, over ``runs`` seedings."""
    counts = {}
    for _ in range(runs):
        c = km._kmeanspp(X, rng, trials=trials)
        key = tuple(sorted(int(np.flatnonzero((X == row).all(axis=1))[0]) for row in c))
        counts[key] = counts.get(key, 0) + 1
    return counts


def _assert_counts_match(counts, p, runs):
    """Each pair's count within 5 binomial standard deviations of ``runs * p``."""
    for key, prob in p.items():
        sd = np.sqrt(runs * prob * (1 - prob))
        assert abs(counts.get(key, 0) - runs * prob) < 5 * sd, (key, counts, p)


def test_kmeanspp_samples_proportional_to_squared_distance():
    # Three points on a geodesic through the origin at hyperbolic positions 0, 1, 3.
    X = np.array([[0.0, 0.0], [np.tanh(0.5), 0.0], [np.tanh(1.5), 0.0]])
    D2 = gk.distance_matrix(X) ** 2
    # P(pair {i, j} seeded) = 1/3 (D2[i, j] / sum_k D2[i, k] + D2[j, i] / sum_k D2[j, k])
    p = {}
    for i in range(3):
        for j in range(3):
            if i != j:
                key = tuple(sorted((i, j)))
                p[key] = p.get(key, 0.0) + D2[i, j] / D2[i].sum() / 3
    runs = 6000
    # one candidate per centre: plain D^2 sampling
    counts = _pair_counts(KMeans(2, n_init=1), X, np.random.default_rng(0), runs, trials=1)
    _assert_counts_match(counts, p, runs)
    # With D (not D^2) sampling the pair {0, 1} would have probability 0.37, not 0.28.
    assert p[(0, 1)] == pytest.approx((1 / 10 + 1 / 5) / 3, rel=1e-12)


def test_greedy_kmeanspp_keeps_the_candidate_of_least_potential():
    # The fit's seeding draws 2 + floor(ln k) candidates by D^2 sampling and
    # keeps the one that leaves the smallest potential sum_i min_c d(x_i, c)^2,
    # the first drawn on ties (greedy k-means++: Arthur & Vassilvitskii 2007,
    # section 6; the candidate count is scikit-learn's, common practice).
    # Exact pair probabilities by enumerating the first centre and the two
    # candidates (k = 2: two candidates), on three points of a geodesic at
    # positions 0, 1, 3: from point 2 both candidates leave potential 1 (a
    # tie: the first candidate is kept).
    X = np.array([[0.0, 0.0], [np.tanh(0.5), 0.0], [np.tanh(1.5), 0.0]])
    D2 = gk.distance_matrix(X) ** 2
    p = {}
    for i in range(3):
        q = D2[i] / D2[i].sum()
        for a in range(3):
            for b in range(3):
                if q[a] * q[b] == 0:
                    continue  # a candidate on the first centre is never drawn
                pot = [np.minimum(D2[i], D2[c]).sum() for c in (a, b)]
                keep = b if pot[1] < pot[0] else a
                key = tuple(sorted((i, keep)))
                p[key] = p.get(key, 0.0) + q[a] * q[b] / 3
    # by hand: from 0, candidate 2 wins unless both draws are 1, and so on
    assert p[(0, 1)] == pytest.approx((1 / 100 + 1 / 25) / 3, rel=1e-12)
    assert p[(1, 2)] == pytest.approx((24 / 25 + 4 / 13) / 3, rel=1e-12)
    runs = 6000
    counts = _pair_counts(KMeans(2, n_init=1), X, np.random.default_rng(1), runs)
    assert set(counts) <= set(p)
    _assert_counts_match(counts, p, runs)


def test_greedy_kmeanspp_seeds_lower_potential_than_plain():
    # On a ball of radius 4 (most volume, and so most D^2 mass, far out) the
    # greedy choice leaves a lower potential than plain D^2 sampling, seed
    # by seed on average (common practice: the reason for the greedy variant).
    rng = np.random.default_rng(21)
    X = overlapping(rng, 3000, 4)
    km = KMeans(10, n_init=1)

    def potential(C):
        return float(np.sum(gk.knn(X, 1, C)[1] ** 2))

    g = np.random.default_rng(0)
    plain = [potential(km._kmeanspp(X, g, trials=1)) for _ in range(30)]
    greedy = [potential(km._kmeanspp(X, g)) for _ in range(30)]
    # measured: greedy / plain 0.79-0.86 on five such data sets, the
    # standard error of the plain mean 2-3.5%
    assert np.mean(greedy) < 0.93 * np.mean(plain), (np.mean(greedy), np.mean(plain))


def test_random_state_reproducible():
    rng = np.random.default_rng(8)
    X = overlapping(rng, 1000, 3)
    a = KMeans(6, random_state=42).fit(X)
    b = KMeans(6, random_state=42).fit(X)
    np.testing.assert_array_equal(a.cluster_centers_, b.cluster_centers_)
    np.testing.assert_array_equal(a.labels_, b.labels_)
    assert a.inertia_ == b.inertia_ and a.n_iter_ == b.n_iter_
    # the same estimator refitted gives the same result too
    np.testing.assert_array_equal(a.fit(X).cluster_centers_, b.cluster_centers_)
    others = [KMeans(6, random_state=s, n_init=1, init="random").fit(X).inertia_ for s in range(4)]
    assert len(set(others)) > 1  # the seed is really used


def test_fit_predict_and_float32():
    rng = np.random.default_rng(12)
    X, y, _ = blobs(rng, 3, 80, 2)
    lab = KMeans(3, random_state=0).fit_predict(X)
    np.testing.assert_array_equal(lab, KMeans(3, random_state=0).fit(X).labels_)
    km32 = KMeans(3, random_state=0).fit(X.astype(np.float32))
    assert ari(y, km32.labels_) == 1.0
    assert km32.cluster_centers_.dtype == np.float64
    # Fortran-ordered and strided inputs give the same clustering
    kmf = KMeans(3, random_state=0).fit(np.asfortranarray(X))
    np.testing.assert_array_equal(kmf.labels_, lab)


# ------------------------------------------------------------------ empty clusters


def test_duplicate_initial_centres_are_repaired_deterministically():
    rng = np.random.default_rng(3)
    X = overlapping(rng, 400, 2)
    init = np.array([X[0], X[0], X[1]])  # cluster 1 starts empty (ties go to 0)
    runs = [KMeans(3, init=init, max_iter=50).fit(X) for _ in range(2)]
    km = runs[0]
    np.testing.assert_array_equal(runs[0].cluster_centers_, runs[1].cluster_centers_)
    assert np.bincount(km.labels_, minlength=3).min() > 0
    h = np.array(km.inertia_history_)
    assert np.all(np.diff(h) <= 1e-12 * h[:-1])
    # The repair moved the point farthest from its centre into cluster 1:
    # the first update then starts cluster 1 from that point.
    lab0, d0 = gk.knn(X, 1, init)
    assert set(lab0[:, 0].tolist()) == {0, 2}
    one = KMeans(3, init=init, max_iter=1).fit(X)
    far = int(np.argmax(d0[:, 0]))
    labels = lab0[:, 0].copy()
    labels[far] = 1
    expect = gk.frechet_mean(X, labels=labels).mean
    np.testing.assert_array_equal(one.cluster_centers_, expect)


def test_fewer_distinct_points_than_clusters():
    base = np.array([[0.1, 0.2], [-0.5, 0.3], [0.0, -0.7]])
    X = np.repeat(base, 4, axis=0)
    km = KMeans(5, random_state=0).fit(X)
    # Every point sits on a centre: the Fréchet mean of copies of one point
    # is that point to rounding (not bit for bit: it starts from the Einstein
    # midpoint, computed through the Klein ball).
    assert km.inertia_ < 1e-26
    assert np.all(km.transform(X).min(axis=1) < 1e-14)
    assert len(np.unique(km.labels_)) == 3


def test_one_cluster_is_the_frechet_mean():
    rng = np.random.default_rng(4)
    X = overlapping(rng, 500, 3)
    km = KMeans(1).fit(X)
    np.testing.assert_allclose(km.cluster_centers_[0], gk.frechet_mean(X).mean, rtol=0, atol=1e-13)
    assert np.all(km.labels_ == 0)
    assert km.inertia_ == pytest.approx(500 * gk.frechet_variance(X), rel=1e-11)


def test_n_clusters_equal_n_points():
    rng = np.random.default_rng(1)
    X = overlapping(rng, 6, 2)
    km = KMeans(6, random_state=0).fit(X)
    assert km.inertia_ < 1e-26  # each centre is its own point, to rounding
    assert sorted(km.labels_.tolist()) == list(range(6))


# ------------------------------------------------------------------ interface


def test_get_set_params():
    km = KMeans(3, model="klein", tol=1e-8)
    p = km.get_params()
    assert p == {
        "n_clusters": 3, "model": "klein", "curvature": -1.0, "init": "k-means++", "n_init": "auto",
        "max_iter": 100, "tol": 1e-8, "random_state": None,
    }
    assert KMeans(3).tol == 1e-4  # the default of scikit-learn's KMeans too (its docs)
    assert km.set_params(n_clusters=5, random_state=1) is km
    assert km.n_clusters == 5 and km.random_state == 1
    assert KMeans(**km.get_params()).get_params() == km.get_params()
    with pytest.raises(ValueError, match="invalid parameter"):
        km.set_params(n_cluster=2)
    assert "n_clusters=5" in repr(km)


def test_fit_returns_self_and_predict_needs_fit():
    X = overlapping(np.random.default_rng(0), 50, 2)
    km = KMeans(2, random_state=0)
    with pytest.raises(UnfittedError, match="run fit"):
        km.predict(X)
    with pytest.raises(ValueError, match="run fit"):
        km.transform(X)
    assert km.fit(X) is km
    with pytest.raises(ValueError, match="3 coordinates per point but KMeans was fitted with 2"):
        km.predict(np.zeros((4, 3)))


# ------------------------------------------------------------------ bad input


def _bad_cases():
    X = overlapping(np.random.default_rng(0), 10, 2)
    nan = X.copy()
    nan[3, 1] = np.nan
    out = X.copy()
    out[7] = [0.8, 0.8]
    hyp = gk.convert(X, "poincare", "hyperboloid")
    hyp[2, 0] *= 2  # off the hyperboloid
    return [
        (dict(n_clusters=11), X, ValueError, r"n_clusters=11 is larger than the number of points \(10\)"),
        (dict(n_clusters=0), X, ValueError, "n_clusters must be >= 1"),
        (dict(n_clusters=-2), X, ValueError, "n_clusters must be >= 1"),
        (dict(n_clusters=2.5), X, TypeError, "n_clusters must be an integer"),
        (dict(n_clusters=True), X, TypeError, "n_clusters must be an integer"),
        (dict(n_clusters=2, model="lorentz"), X, ValueError, "model must be one of"),
        (dict(n_clusters=2, curvature=0.0), X, ValueError, "curvature must be finite and < 0"),
        (dict(n_clusters=2, curvature=1.0), X, ValueError, "curvature must be finite and < 0"),
        (dict(n_clusters=2, init="kmeans"), X, ValueError, "init must be one of"),
        (dict(n_clusters=2, n_init=0), X, ValueError, "n_init must be >= 1"),
        (dict(n_clusters=2, n_init="many"), X, ValueError, "n_init must be an integer >= 1 or 'auto'"),
        (dict(n_clusters=2, max_iter=0), X, ValueError, "max_iter must be >= 1"),
        (dict(n_clusters=2, tol=-1.0), X, ValueError, "tol must be >= 0"),
        (dict(n_clusters=2), nan, ValueError, "X is not a valid array of poincare points: x: row 3 contains NaN"),
        (dict(n_clusters=2), out, ValueError, "X is not a valid array of poincare points: x: row 7 is on or outside the ball"),
        (dict(n_clusters=2, model="hyperboloid"), hyp, ValueError, "row 2"),
        (dict(n_clusters=2), X[0], ValueError, "2-D array"),
        (dict(n_clusters=2), np.zeros((0, 2)), ValueError, "X is empty"),
        (dict(n_clusters=2), np.array([["a", "b"]]), TypeError, "real numbers"),
        (dict(n_clusters=2, init=X[:3]), X, ValueError, r"init must have shape"),
        (dict(n_clusters=2, init=out[6:8]), X, ValueError, "init is not a valid array of poincare points: x: row 1"),
    ]


@pytest.mark.parametrize("params,X,exc,msg", _bad_cases())
def test_bad_input(params, X, exc, msg):
    with pytest.raises(exc, match=msg):
        KMeans(**params).fit(X)


def test_bad_input_at_predict():
    X = overlapping(np.random.default_rng(0), 20, 2)
    km = KMeans(2, random_state=0).fit(X)
    bad = X.copy()
    bad[5] = [np.inf, 0]
    for f in (km.predict, km.transform, km.score):
        with pytest.raises(ValueError, match="row 5 contains NaN or infinity"):
            f(bad)


def test_n_init_auto_is_one_kmeanspp_run_or_ten_random_runs():
    # the rule of scikit-learn's n_init="auto" (its documentation)
    rng = np.random.default_rng(12)
    X = overlapping(rng, 400, 2)
    for init, runs in (("k-means++", 1), ("random", 10)):
        a = KMeans(5, init=init, n_init="auto", random_state=3).fit(X)
        b = KMeans(5, init=init, n_init=runs, random_state=3).fit(X)
        np.testing.assert_array_equal(a.cluster_centers_, b.cluster_centers_)
        np.testing.assert_array_equal(a.labels_, b.labels_)
    # n_init=2 with k-means++ is a different fit (one more seed drawn)
    c = KMeans(5, n_init=2, random_state=3).fit(X)
    assert c.inertia_ <= KMeans(5, n_init="auto", random_state=3).fit(X).inertia_

