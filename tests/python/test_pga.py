"""gk.PrincipalGeodesicAnalysis: tangent-space PGA at the Fréchet mean
(Fletcher, Lu, Pizer, Joshi 2004)."""

from __future__ import annotations

import mpmath
import numpy as np
import pytest
from sklearn.base import clone
from sklearn.decomposition import PCA

import gyrokit as gk


def _cloud(n=300, d=6, seed=0, curvature=-1.0):
    """Points exp_m(v) around a base point m off the origin, with tangent
    spread very different along the axes (distinct principal variances)."""
    rng = np.random.default_rng(seed)
    R = 1 / np.sqrt(-curvature)
    m = np.zeros(d)
    m[0] = 0.4 * R
    m[1] = -0.3 * R
    scales = np.linspace(1.0, 0.15, d)
    v = rng.normal(size=(n, d)) * scales * 0.35 * R
    return gk.poincare.exp_map(v, m, curvature=curvature)


def _tangent_reference(x, m, curvature=-1.0):
    """Tangent vectors at m in an orthonormal frame, by the textbook route:
    log_m(x) in ambient coordinates times the conformal factor
    lambda_m = 2/(1 - |m|^2/R^2) of the Poincaré metric (e.g. Ganea, Bécigneul,
    Hofmann 2018, eq. 1); a different path from the estimator's translation."""
    lam = 2.0 / (1.0 + curvature * (m @ m))
    return lam * gk.poincare.log_map(x, m, curvature=curvature)


def test_points_on_one_geodesic_need_one_component():
    rng = np.random.default_rng(1)
    a = np.array([0.3, -0.2, 0.1, 0.05, 0.0])
    b = np.array([-0.4, 0.5, 0.2, -0.3, 0.25])
    t = rng.uniform(-1.0, 2.0, size=200)
    x = gk.poincare.geodesic(a, b, t)
    pga = gk.PrincipalGeodesicAnalysis(3).fit(x)
    assert pga.explained_variance_ratio_[0] > 1 - 1e-12
    assert np.all(pga.explained_variance_ratio_[1:] < 1e-12)
    # the first direction is the geodesic's: the tangent towards b at the mean
    w = _tangent_reference(b, pga.mean_)
    assert abs(pga.components_[0] @ w / np.linalg.norm(w)) > 1 - 1e-12
    # one component reconstructs the points exactly (they lie on the principal geodesic)
    back = pga.inverse_transform(pga.transform(x)[:, :3])
    np.testing.assert_allclose(back, x, atol=1e-12)


@pytest.mark.parametrize("curvature", [-1.0, -0.25])
def test_all_components_keep_every_distance_to_the_mean(curvature):
    x = _cloud(curvature=curvature)
    pga = gk.PrincipalGeodesicAnalysis(x.shape[1], curvature=curvature).fit(x)
    z = pga.transform(x)
    R = 1 / np.sqrt(-curvature)
    # distance from the origin of the output ball: 2R artanh(|z|/R) (Beardon 7.2)
    dz = 2 * R * np.arctanh(np.linalg.norm(z, axis=1) / R)
    dm = gk.poincare.distance(pga.mean_, x, curvature=curvature)
    np.testing.assert_allclose(dz, dm, rtol=1e-11)
    # mpmath at 50 digits for a few rows: acosh(1 + 2|m - x|^2 / (g_m g_x)) in units of R
    mpmath.mp.dps = 50
    for i in range(0, len(x), 60):
        mm = [mpmath.mpf(float(v)) / R for v in pga.mean_]
        xx = [mpmath.mpf(float(v)) / R for v in x[i]]
        num = sum((p - q) ** 2 for p, q in zip(mm, xx))
        ref = R * mpmath.acosh(1 + 2 * num / ((1 - sum(v * v for v in mm)) * (1 - sum(v * v for v in xx))))
        assert abs(dz[i] - float(ref)) <= 1e-12 * float(ref)
    # and back: exp at the mean of the full coordinates returns the points
    np.testing.assert_allclose(pga.inverse_transform(z), x, atol=1e-12 * R)
    # fewer components: never farther than the point itself (a projection)
    z2 = gk.PrincipalGeodesicAnalysis(2, curvature=curvature).fit_transform(x)
    assert np.all(2 * R * np.arctanh(np.linalg.norm(z2, axis=1) / R) <= dm * (1 + 1e-12))


@pytest.mark.parametrize("model", ["klein", "hyperboloid", "halfspace"])
def test_every_model_keeps_distances_to_the_mean(model):
    K = -2.0
    R = 1 / np.sqrt(-K)
    x = gk.convert(_cloud(n=120, d=4, seed=11, curvature=K), "poincare", model, curvature=K)
    pga = gk.PrincipalGeodesicAnalysis(4, model=model, curvature=K).fit(x)
    z = pga.transform(x)
    dz = 2 * R * np.arctanh(np.linalg.norm(z, axis=1) / R)  # Beardon 7.2
    mean_p = gk.convert(pga.mean_, model, "poincare", curvature=K)
    xp = gk.convert(x, model, "poincare", curvature=K)
    # reference: the textbook arccosh form in float64 (the points are well inside)
    g = (1 - (mean_p @ mean_p) / R**2) * (1 - np.sum(xp * xp, axis=1) / R**2)
    ref = R * np.arccosh(1 + 2 * np.sum((xp - mean_p) ** 2, axis=1) / R**2 / g)
    np.testing.assert_allclose(dz, ref, rtol=1e-9)
    np.testing.assert_allclose(pga.inverse_transform(z), x, rtol=1e-11, atol=1e-12)


def test_far_out_hyperboloid_data():
    """A cloud about 60 R from the origin: beyond the Poincaré ball's float64
    range, analysed on the hyperboloid. Distances to the mean against mpmath
    at 120 digits: d = R acosh(-<m, x>_L / R^2) (Minkowski form, Ratcliffe,
    Foundations of Hyperbolic Manifolds, 3.2), of the points the spatial
    coordinates define."""
    rng = np.random.default_rng(12)
    d = 3
    base = np.zeros(d + 1)
    base[0] = np.cosh(60.0)
    base[1] = np.sinh(60.0)
    v = rng.normal(size=(50, d)) * np.array([1.0, 0.3, 0.1])
    tang = gk.hyperboloid.transport(np.concatenate([np.zeros((50, 1)), v], axis=1), np.eye(d + 1)[0], base)
    x = gk.hyperboloid.exp_map(tang, base)
    with pytest.raises(ValueError):
        gk.convert(x, "hyperboloid", "poincare")  # out of the ball's range indeed
    pga = gk.PrincipalGeodesicAnalysis(d, model="hyperboloid").fit(x)
    z = pga.transform(x)
    dz = 2 * np.arctanh(np.linalg.norm(z, axis=1))
    mpmath.mp.dps = 120

    def on_sheet(p):  # the point the spatial coordinates define (x0 = sqrt(1 + |x_s|^2), exactly)
        s = [mpmath.mpf(float(c)) for c in p[1:]]
        return [mpmath.sqrt(1 + sum(c * c for c in s))] + s

    m = on_sheet(pga.mean_)
    for i in range(0, 50, 7):
        xi = on_sheet(x[i])
        ref = mpmath.acosh(m[0] * xi[0] - sum(a * b for a, b in zip(m[1:], xi[1:])))
        assert abs(dz[i] - float(ref)) <= 1e-9 * float(ref)
    assert pga.explained_variance_ratio_[0] > 0.8
    back = pga.inverse_transform(z)
    np.testing.assert_allclose(back, x, rtol=1e-8)


def test_matches_sklearn_pca_of_the_tangent_vectors():
    x = _cloud(n=400, d=6, seed=3)
    k = 4
    pga = gk.PrincipalGeodesicAnalysis(k).fit(x)
    mean = gk.frechet_mean(x).mean
    np.testing.assert_allclose(pga.mean_, mean, atol=1e-15)
    U = _tangent_reference(x, mean)
    ref = PCA(n_components=k, svd_solver="full").fit(U)
    n = len(x)
    # sklearn normalises by n - 1 and centres (the log vectors at the Fréchet mean average
    # to ~1e-13, the stationarity of the mean)
    np.testing.assert_allclose(pga.explained_variance_, ref.explained_variance_ * (n - 1) / n, rtol=1e-9)
    dots = np.abs(np.sum(pga.components_ * ref.components_, axis=1))
    np.testing.assert_allclose(dots, 1.0, atol=1e-9)
    # component coordinates of transform(x): 2 log_0(z), up to each component's sign
    coords = 2 * gk.poincare.log_map(pga.transform(x))
    sk = ref.transform(U)
    sign = np.sign(np.sum(pga.components_ * ref.components_, axis=1))
    np.testing.assert_allclose(coords, sk * sign, atol=1e-9)
    # the ratios: scikit-learn's over the total variance of all directions
    full = PCA(svd_solver="full").fit(U)
    np.testing.assert_allclose(pga.explained_variance_ratio_, full.explained_variance_ratio_[:k], rtol=1e-9)


def test_explained_variance_sums_to_the_frechet_variance():
    x = _cloud(n=250, d=5, seed=4)
    pga = gk.PrincipalGeodesicAnalysis(5).fit(x)
    total = gk.frechet_variance(x)
    assert abs(pga.explained_variance_.sum() - total) <= 1e-12 * total
    assert abs(pga.explained_variance_ratio_.sum() - 1.0) < 1e-13
    assert np.all(np.diff(pga.explained_variance_) <= 0)
    np.testing.assert_allclose(pga.components_ @ pga.components_.T, np.eye(5), atol=1e-14)
    np.testing.assert_allclose(pga.singular_values_**2 / len(x), pga.explained_variance_, rtol=1e-14)


def test_any_input_model_gives_the_same_analysis():
    x = _cloud(n=150, d=4, seed=5, curvature=-0.5)
    ref = gk.PrincipalGeodesicAnalysis(2, curvature=-0.5).fit(x)
    zr = ref.transform(x)
    for model in ("klein", "hyperboloid", "halfspace"):
        xm = gk.convert(x, "poincare", model, curvature=-0.5)
        pga = gk.PrincipalGeodesicAnalysis(2, model=model, curvature=-0.5).fit(xm)
        np.testing.assert_allclose(pga.explained_variance_, ref.explained_variance_, rtol=1e-10)
        np.testing.assert_allclose(pga.transform(xm), zr, atol=1e-10)
        assert pga.mean_.shape == (xm.shape[1],)
        np.testing.assert_allclose(gk.convert(pga.mean_, model, "poincare", curvature=-0.5), ref.mean_, atol=1e-12)
        back = pga.inverse_transform(zr)
        assert back.shape == xm.shape
        np.testing.assert_allclose(gk.convert(back, model, "poincare", curvature=-0.5), ref.inverse_transform(zr),
                                   atol=1e-10)


def test_estimator_protocol_and_unfitted_use():
    pga = gk.PrincipalGeodesicAnalysis(3, model="klein", curvature=-2.0)
    assert pga.get_params() == {"n_components": 3, "model": "klein", "curvature": -2.0}
    c = clone(pga)
    assert c.get_params() == pga.get_params() and c is not pga
    assert pga.set_params(n_components=1) is pga and pga.n_components == 1
    with pytest.raises(ValueError, match="invalid parameter"):
        pga.set_params(n_clusters=2)
    for call in (lambda: pga.transform(np.zeros((2, 3))), lambda: pga.inverse_transform(np.zeros((2, 1)))):
        with pytest.raises(gk.UnfittedError, match="fit"):
            call()
    x = _cloud(n=20, d=3)
    fitted = gk.PrincipalGeodesicAnalysis(2).fit(x)
    assert fitted.n_components_ == 2 and fitted.n_features_in_ == 3
    assert repr(fitted) == "PrincipalGeodesicAnalysis(n_components=2, model='poincare', curvature=-1.0)"
    np.testing.assert_allclose(gk.PrincipalGeodesicAnalysis(2).fit_transform(x), fitted.transform(x))


def test_bad_input_names_the_argument_and_row():
    x = _cloud(n=10, d=3)
    bad = x.copy()
    bad[4] = [0.9, 0.9, 0.9]
    with pytest.raises(ValueError, match=r"X .*row 4"):
        gk.PrincipalGeodesicAnalysis(2).fit(bad)
    nan = x.copy()
    nan[7, 1] = np.nan
    with pytest.raises(ValueError, match=r"row 7"):
        gk.PrincipalGeodesicAnalysis(2).fit(nan)
    with pytest.raises(ValueError, match="n_components=4"):
        gk.PrincipalGeodesicAnalysis(4).fit(x)
    with pytest.raises(ValueError, match="n_components"):
        gk.PrincipalGeodesicAnalysis(0).fit(x)
    with pytest.raises(TypeError, match="n_components"):
        gk.PrincipalGeodesicAnalysis(True).fit(x)
    with pytest.raises(ValueError, match="model"):
        gk.PrincipalGeodesicAnalysis(2, model="ball").fit(x)
    with pytest.raises(ValueError, match="curvature"):
        gk.PrincipalGeodesicAnalysis(2, curvature=0.0).fit(x)
    with pytest.raises(ValueError, match="2-D"):
        gk.PrincipalGeodesicAnalysis(2).fit(x[0])
    with pytest.raises(ValueError, match="empty"):
        gk.PrincipalGeodesicAnalysis(2).fit(np.zeros((0, 3)))
    with pytest.raises(TypeError, match="X must be"):
        gk.PrincipalGeodesicAnalysis(2).fit(np.array([["a", "b"]]))
    pga = gk.PrincipalGeodesicAnalysis(2).fit(x)
    with pytest.raises(ValueError, match="4 coordinates"):
        pga.transform(np.zeros((2, 4)))
    with pytest.raises(ValueError, match=r"X .*row 4"):
        pga.transform(bad)
    with pytest.raises(ValueError, match="Z has 3"):
        pga.inverse_transform(np.zeros((2, 3)))
    with pytest.raises(ValueError, match=r"Z .*row 1"):
        pga.inverse_transform(np.array([[0.1, 0.1], [1.0, 0.5]]))


def test_coincident_points_and_fewer_points_than_dimensions():
    x = np.tile([0.2, -0.1, 0.3], (5, 1))
    pga = gk.PrincipalGeodesicAnalysis(2).fit(x)
    # the mean is the point to an ulp or so: variances at the level of rounding
    assert np.all(pga.explained_variance_ < 1e-30)
    np.testing.assert_allclose(pga.transform(x), 0.0, atol=1e-15)
    y = _cloud(n=2, d=5, seed=9)
    p = gk.PrincipalGeodesicAnalysis(5).fit(y)
    assert p.explained_variance_ratio_[0] > 1 - 1e-12  # two points: one geodesic
    np.testing.assert_allclose(p.inverse_transform(p.transform(y)), y, atol=1e-13)


def test_disk_plot_of_a_ten_dimensional_cloud():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    x = _cloud(n=200, d=10, seed=7)
    z = gk.PrincipalGeodesicAnalysis(2).fit_transform(x)
    ax = gk.plot.disk(z, labels=np.arange(200) % 2)
    (sc,) = [c for c in ax.collections if c.get_gid() == "gyrokit-points"]
    np.testing.assert_allclose(np.asarray(sc.get_offsets()), z, atol=1e-15)
    plt.close("all")
