"""Regression tests for fuzzing findings (tests/fuzz/FINDINGS.md): each
failed before its fix (a hang, an infinite or NaN result, or an accepted
corrupted state) and must now give a correct result or a ValueError."""

import pickle

import numpy as np
import pytest

import gyrokit as gk


@pytest.mark.parametrize("mod", [gk.poincare, gk.klein])
@pytest.mark.parametrize("x", [[0.0, 1e308], [1e200, 0.0], [-3e160, 4e160]])
def test_project_of_huge_vectors_is_on_the_same_ray(mod, x):
    # F1: project looped forever (later: returned -inf) when |x|^2 overflowed.
    # Expected: the point at radius (1 - margin) R on the ray of x (the
    # definition of project, common practice).
    out = mod.project(np.array(x), margin=1e-12)
    assert np.all(np.isfinite(out))
    v = np.array(x) / np.max(np.abs(x))
    u = v / np.linalg.norm(v)
    np.testing.assert_allclose(out, (1 - 1e-12) * u, rtol=1e-15, atol=1e-300)


@pytest.mark.parametrize("k", [-1e200, -1e-200, -np.finfo(float).max])
def test_extreme_curvatures_are_rejected(k):
    # F5: |curvature| beyond ~1e150 gave NaN results.
    with pytest.raises(ValueError, match="curvature"):
        gk.poincare.add([0.0, 0.0], [0.0, 0.0], curvature=k)


def test_corrupted_index_state_is_a_value_error():
    # F9: a state with a point moved outside the ball gave NaN distances.
    rng = np.random.default_rng(3)
    x = rng.uniform(-0.4, 0.4, (200, 2))
    for method in ("tree", "brute"):
        idx = gk.NeighborIndex(x, method=method)
        state = idx.__getstate__()
        key = "tree" if "tree" in state else "points"
        fields = list(state[key])
        coords = np.array(fields[4], copy=True)
        coords[5] = [3.0, 0.0]  # outside the unit ball
        fields[4] = coords
        bad = dict(state, **{key: tuple(fields)})
        back = gk.NeighborIndex.__new__(gk.NeighborIndex)
        with pytest.raises(ValueError, match="invalid"):
            back.__setstate__(bad)
        # the intact state still round-trips
        again = pickle.loads(pickle.dumps(idx))
        np.testing.assert_array_equal(again.query(x[:5], 3)[1], idx.query(x[:5], 3)[1])


@pytest.mark.parametrize("y, z", [([0.0, 1e308], [0.0, 1.0]), ([1e308], [1472988787330559.5]), ([0.0, 1e-300], [0.0, 1.0])])
def test_halfspace_points_beyond_the_range_are_value_errors(y, z):
    # F2: |y - z|^2 overflowed and the distance came back NaN.
    with pytest.raises(ValueError, match="beyond the half-space range"):
        gk.halfspace.distance(y, z)
    with pytest.raises(ValueError, match="beyond the half-space range"):
        gk.distance_matrix(np.array([y, z]), model="halfspace")


def test_halfspace_points_inside_the_range_keep_their_digits():
    # The largest range: y_d from 2^-250 to 2^250 apart on one vertical line,
    # distance R ln(y_d / z_d) = 500 ln 2 (Ratcliffe, the upper half-space
    # metric, from memory).
    d = gk.halfspace.distance([0.0, 2.0**-250], [0.0, 2.0**250])
    assert d == pytest.approx(500 * np.log(2), rel=1e-15)


@pytest.mark.parametrize(
    "x",
    [
        [[1 - 1e-11, 0.0], [-(1 - 1e-6), 0.0]],  # 40 R apart, one at 26 R
        [[-0.9925404685657815, 0.12191561904358976], [0.6586740956439864, 0.7524268774344611]],
    ],
)
def test_centroids_of_two_far_points_are_their_midpoint(x):
    # F6: the Einstein midpoint landed on the sphere and the Fréchet mean was
    # NaN. For two points with equal weights both are the geodesic midpoint
    # (the gyromidpoint; Ungar, Analytic Hyperbolic Geometry, from memory;
    # the Fréchet mean of two points is their midpoint: common practice).
    x = np.array(x)
    mid = gk.poincare.midpoint(x[0], x[1])
    d = gk.poincare.distance(x[0], x[1])
    for m in (gk.einstein_midpoint(x), gk.frechet_mean(x).mean):
        assert np.all(np.isfinite(m))
        # within a few ulps of the output's radius resolution
        assert gk.poincare.distance(m, mid) < 1e-12 * d
        assert abs(gk.poincare.distance(m, x[0]) - gk.poincare.distance(m, x[1])) < 1e-12 * d


# F4: coordinates whose squares underflow (below ~1e-154 R, or below ~1e-154
# once multiplied by kappa). Before the fix: NaN (Klein transport and
# log_map), a false rim error (Poincaré exp_map at curvature -1e-6), or the
# tangent dropped ([0, 0] for exp_map([1e-162, 1e-162]); the base point for
# Klein and hyperboloid exp_map at curvature -1e-100). References: mpmath at
# 50 digits (tests/python/mp_models.py, textbook formulas), which has no
# underflow.
import mp_models as mpm  # noqa: E402

TINY_CASES = [
    # (function, reference, args, curvature)
    (gk.poincare.exp_map, mpm.poincare_exp_map, ([1e-162, 1e-162],), -1.0),
    (gk.poincare.exp_map, mpm.poincare_exp_map, ([1e-162, 3e-162],), -1e-6),
    (gk.poincare.exp_map, mpm.poincare_exp_map, ([1e-162, 3e-162], [0.3, -0.2]), -1.0),
    (gk.poincare.exp_map, mpm.poincare_exp_map, ([1.065e-112, 0.0],), -1e-100),
    (gk.poincare.exp_map, mpm.poincare_exp_map, ([5e-324, 0.0], [1e-300, 2e-310]), -1.0),
    (gk.poincare.log_map, mpm.poincare_log_map, ([3e-170, -1e-171], [1e-169, 2e-170]), -1.0),
    (gk.poincare.log_map, mpm.poincare_log_map, ([3e-130, -1e-131],), -1e-100),
    (gk.klein.exp_map, mpm.klein_exp_map, ([1e-162, 3e-162],), -1.0),
    (gk.klein.exp_map, mpm.klein_exp_map, ([2.1771483678986576e-113], [-2.5526595395087626e-113]), -1e-100),
    (gk.klein.exp_map, mpm.klein_exp_map, ([-3.2e-113, 1.2e-112, 6.6e-113],), -1e-100),
    (gk.klein.log_map, mpm.klein_log_map, ([0.0, 0.0], [-7.5503466601267487e-162, -6.6688439590107331e-161]), -1.0),
    (gk.klein.log_map, mpm.klein_log_map, ([0.5, 0.1], [-7.55e-162, -6.67e-161]), -1.0),
    (gk.klein.log_map, mpm.klein_log_map, ([6.9e-273, -2.6e-271], [6.4e-312, -1.6e-310]), -1e-100),
    (gk.klein.transport, mpm.klein_transport, ([0.0176, 0.0062], [0.0, 0.0], [5.78e-162, -2.85e-162]), -1.0),
    (gk.klein.transport, mpm.klein_transport, ([0.0176, 0.0062], [3e-160, 1e-161], [0.2, -0.4]), -1.0),
    (gk.klein.transport, mpm.klein_transport, ([1.3e-155, -1.6e-155, -2.3e-156], [-3.9e-311, 6.4e-311, 1.5e-311],
                                               [-1.9e-160, 0.0, 7.4e-161]), -1.0),
    (gk.klein.transport, mpm.klein_transport, ([2.2e-05, 1.9e-05], [0.0, 3.2e-156], [8.1e-163, -8.4e-163]), -1e6),
    (gk.hyperboloid.exp_map, mpm.hyperboloid_exp_map, ([0.0, 2.3e-251, 9.0e-251],), -1e-100),
    (gk.hyperboloid.exp_map, mpm.hyperboloid_exp_map, ([0.0, 3e-170, -1e-170],), -1.0),
]


@pytest.mark.parametrize("case", TINY_CASES, ids=lambda c: f"{c[0].__module__.split('.')[-1]}.{c[0].__name__}")
def test_tiny_coordinates_keep_their_digits(case):
    fn, ref_fn, args, k = case
    got = fn(*[np.array(a) for a in args], curvature=k)
    assert np.all(np.isfinite(got)), got
    ref = ref_fn(*args, curvature=k)
    # normwise relative error against the 50-digit reference; results in the
    # subnormal range are held to their absolute granularity (1e-322)
    err = mpm.error(got, ref)
    scale = float(mpm.value_norm(ref))
    assert err <= 1e-13 or err * scale <= 1e-321, (got, [float(v) for v in ref], err)


@pytest.mark.parametrize("mod", [gk.poincare, gk.klein])
def test_tiny_tangents_and_points_are_euclidean_at_the_origin(mod):
    # F4, closed form (common practice: every model is Euclidean to first
    # order at the origin, exp_0(v) = R tanh(|v|/R) v/|v| in both balls' radial
    # law): for |v| < 1e-150 R, exp_0(v) = v and log_0(y) = y to rounding.
    v = np.array([[1e-162, 1e-162], [5e-324, -5e-324], [3e-200, 0.0], [-1e-155, 2e-160]])
    for k in (-1.0, -1e-6, -1e6):
        np.testing.assert_allclose(mod.exp_map(v, curvature=k), v, rtol=1e-15, atol=1e-322)
        np.testing.assert_allclose(mod.log_map(v, curvature=k), v, rtol=1e-15, atol=1e-322)


def test_knn_of_an_empty_set_with_a_huge_k_is_a_value_error():
    # Long fuzz run: knn(np.zeros((0, 3)), 2**62) crashed the interpreter
    # (NumPy segfault on a (0, k) array whose byte strides overflow).
    # Expected (common practice, as for any impossible size): ValueError.
    for k in (2 ** 60, 2 ** 62, 2 ** 63 - 1):
        with pytest.raises(ValueError, match="k must be at most"):
            gk.knn(np.zeros((0, 3), np.float32), k)
    idx, dist = gk.knn(np.zeros((0, 3)), 5)
    assert idx.shape == (0, 5) and dist.shape == (0, 5)


@pytest.mark.parametrize("big", [2.0 ** 250, 1e75])
def test_halfspace_distance_at_the_edge_of_the_range_is_finite(big):
    # F2 (long fuzz run): points inside the half-space range whose h =
    # |x - y|^2 / (4 x_d y_d) exceeds 1e154 gave NaN (h (1 + h) overflowed).
    # Reference: the closed form cosh(d/R) = 1 + |x - y|^2 / (2 x_d y_d)
    # (half-space metric, textbook), in mpmath at 50 digits.
    import mpmath
    x = np.array([0.0144, big, 40.2])
    y = np.array([-0.0125, 0.0412, 2.4e-9])
    got = gk.halfspace.distance(x, y)
    with mpmath.workdps(50):
        xm, ym = [mpmath.mpf(float(v)) for v in x], [mpmath.mpf(float(v)) for v in y]
        sq = sum((a - b) ** 2 for a, b in zip(xm, ym))
        want = mpmath.acosh(1 + sq / (2 * xm[-1] * ym[-1]))
    assert abs(got - float(want)) <= 1e-14 * float(want), (got, want)


@pytest.mark.parametrize("mod", [gk.poincare, gk.klein])
@pytest.mark.parametrize("scale", [1e-300, 1e-100, 1e-20])
def test_geodesic_far_beyond_nearly_coincident_points(mod, scale):
    # Fuzz F11: NaN for t = 2^250 between the origin and a point whose
    # distance from it underflows (the closed-form weights 1 - t and t
    # cancelled). From the origin the geodesic is t ⊗ y = tanh(t artanh|y|)
    # y/|y| in both models (Ungar's gyroline; the distance from the origin is
    # 2 artanh|p| in the Poincaré ball, artanh|p| in the Klein ball).
    import mpmath

    y = np.array([1.86, 0.139, -0.456]) * scale
    t = 2.0**250 if scale < 1e-200 else 1e10
    got = mod.geodesic(np.zeros(3), y, t)
    mpmath.mp.dps = 50
    ny = mpmath.sqrt(sum(mpmath.mpf(v) ** 2 for v in y))
    f = mpmath.tanh(t * mpmath.atanh(ny)) / ny
    want = np.array([float(f * mpmath.mpf(v)) for v in y])
    assert np.all(np.isfinite(got))
    np.testing.assert_allclose(got, want, rtol=1e-15)


def test_plot_center_of_complex_numbers_is_a_type_error():
    # fuzz finding F12 (long run, seeds 101-120): a complex `center` was cast
    # to real with only NumPy's ComplexWarning (common practice: no silent
    # loss of the imaginary part)
    pytest.importorskip("matplotlib")
    import matplotlib

    matplotlib.use("Agg")
    x = np.array([[0.1, 0.2], [-0.3, 0.1]])
    with pytest.raises(TypeError, match="^center must be an array of real numbers, got dtype complex128"):
        gk.plot.disk(x, center=np.array([0.2 + 0.001j, 0.1 + 0j]))
