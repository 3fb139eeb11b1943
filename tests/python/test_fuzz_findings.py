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
