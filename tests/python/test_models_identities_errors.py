"""The four hyperbolic models: bad input (points off the hyperboloid sheet
or beyond its range, non-positive half-space coordinates, unknown models,
mismatched dimensions, NaN rows, unrepresentable conversions, empty input,
positive curvature) raises errors naming the argument and the row."""

from __future__ import annotations

import itertools
import re

import numpy as np
import pytest

import gyrokit as gk
from conftest import BALLS, MODELS, MODULES, radius
from identities_support import random_points


# ====================================================== bad input


def _hpoints(K=-1.0, n=4, d=2):
    rng = np.random.default_rng(3)
    return random_points(rng, "hyperboloid", n, d, K, rho_max=3.0)


def _hyperboloid_point_args():
    """(label, call(points), argument name) for every function taking hyperboloid points."""
    h = _hpoints()
    z = np.zeros_like(h)
    H = gk.hyperboloid
    return [
        ("distance x", lambda p: H.distance(p, h), "x"),
        ("distance y", lambda p: H.distance(h, p), "y"),
        ("exp_map base", lambda p: H.exp_map(z, p), "base"),
        ("log_map y", lambda p: H.log_map(p, h), "y"),
        ("log_map base", lambda p: H.log_map(h, p), "base"),
        ("transport start", lambda p: H.transport(z, p, h), "start"),
        ("transport end", lambda p: H.transport(z, h, p), "end"),
        ("geodesic x", lambda p: H.geodesic(p, h, 0.5), "x"),
        ("geodesic y", lambda p: H.geodesic(h, p, 0.5), "y"),
        ("convert", lambda p: gk.convert(p, "hyperboloid", "poincare"), "x"),
    ]


HYP_ARGS = _hyperboloid_point_args()


def _arg_row_pattern(arg, row):
    """The message starts with the argument's name and names the row."""
    return rf"^{re.escape(arg)}\b.*\brow {row}\b"


@pytest.mark.parametrize("label,call,arg", HYP_ARGS, ids=[a[0] for a in HYP_ARGS])
def test_hyperboloid_off_sheet_rejected(label, call, arg):
    h = _hpoints()
    bad = h.copy()
    bad[2, 0] *= 1 + 1e-3
    with pytest.raises(ValueError, match=_arg_row_pattern(arg, 2)):
        call(bad)
    bad = h.copy()
    bad[1, 0] = -bad[1, 0]
    with pytest.raises(ValueError, match=_arg_row_pattern(arg, 1)):
        call(bad)
    bad[1, 0] = 0.0
    with pytest.raises(ValueError, match=_arg_row_pattern(arg, 1)):
        call(bad)
    # documented tolerance 1e-6: a drift of 1e-9 relative is accepted
    ok = h.copy()
    ok[:, 0] *= 1 + 1e-9
    assert np.all(np.isfinite(call(ok)))
    # NaN names the row
    bad = h.copy()
    bad[3, 1] = np.nan
    with pytest.raises(ValueError, match=_arg_row_pattern(arg, 3)):
        call(bad)


def _on_line(r, K=-1.0, u=(0.6, 0.8)):
    """The hyperboloid point at hyperbolic radius ``r R`` in direction ``u``."""
    R = radius(K)
    return np.concatenate([[R * np.cosh(r)], R * np.sinh(r) * np.asarray(u)])


@pytest.mark.parametrize("label,call,arg", HYP_ARGS, ids=[a[0] for a in HYP_ARGS])
def test_hyperboloid_beyond_range_rejected(label, call, arg):
    # documented range: |x_1..d| <= 2^250 (products of coordinates fit in
    # float64); beyond it a clear error naming the argument and row, never NaN
    h = _hpoints()
    far = h.copy()
    far[2] = _on_line(180.0)  # |x_s| = sinh(180) ~ 7.4e77 > 2^250
    with pytest.raises(ValueError, match=_arg_row_pattern(arg, 2) + r".*beyond the hyperboloid range"):
        call(far)
    near = h.copy()
    near[2] = _on_line(170.0)  # inside: a finite result
    if label == "convert":  # (the Poincaré ball holds only ~37 R: use the half-space)
        call = lambda p: gk.convert(p, "hyperboloid", "halfspace")  # noqa: E731
    assert np.all(np.isfinite(call(near)))


def test_hyperboloid_far_inside_range_is_finite_and_exact():
    # handbook: along a ray through the origin d = |r_x - r_y|; on opposite
    # rays d = r_x + r_y; a radial unit tangent (sinh r, cosh r u) is carried
    # to the radial unit tangent at the other point. (Points on a coordinate
    # axis, so that rounding keeps them exactly on one line.)
    H = gk.hyperboloid
    e1 = (1.0, 0.0)
    for r in (40.0, 100.0, 170.0):
        x, y, z = _on_line(r, u=e1), _on_line(r - 2.5, u=e1), _on_line(r - 1.0, u=(-1.0, 0.0))
        assert abs(H.distance(x, y) - 2.5) < 1e-15 * r + 1e-13
        assert abs(H.distance(x, z) - (2 * r - 1.0)) < 1e-14 * r
        v = 1.3 * np.concatenate([[np.sinh(r)], np.cosh(r) * np.array(e1)])
        want = 1.3 * np.concatenate([[np.sinh(r - 2.5)], np.cosh(r - 2.5) * np.array(e1)])
        got = H.transport(v, x, y)
        assert np.all(np.isfinite(got)), (r, got)
        assert np.max(np.abs(got - want)) < 1e-14 * np.max(np.abs(want)), (r, got, want)
        w = H.log_map(y, x)
        assert np.all(np.isfinite(w)), (r, w)
        # log_x(y) points inward with length 2.5 (radial: |w_s| = 2.5 cosh r)
        assert abs(np.linalg.norm(w[1:]) / np.cosh(r) - 2.5) < 1e-13, (r, w)


def test_hyperboloid_results_beyond_range_rejected():
    # exp_map and conversions whose result would lie beyond the range raise
    with pytest.raises(ValueError, match=r"^v\b.*beyond the hyperboloid range"):
        gk.hyperboloid.exp_map(np.array([0.0, 180.0, 0.0]))
    # a half-space point inside its own range (coordinates up to 2^250) whose
    # hyperboloid image lies beyond the hyperboloid's
    with pytest.raises(ValueError, match=r"^x\b.*beyond the hyperboloid range"):
        gk.convert(np.array([1e38, 1.0]), "halfspace", "hyperboloid")
    # and one beyond the half-space range itself
    with pytest.raises(ValueError, match=r"^x\b.*beyond the half-space range"):
        gk.convert(np.array([0.3, 1e-200]), "halfspace", "hyperboloid")
    y = gk.hyperboloid.exp_map(np.array([0.0, 170.0, 0.0]))
    assert abs(np.arcsinh(y[1]) - 170.0) < 1e-13 * 170.0


@pytest.mark.parametrize("label,call,arg", HYP_ARGS, ids=[a[0] for a in HYP_ARGS])
def test_hyperboloid_needs_two_coordinates(label, call, arg):
    with pytest.raises(ValueError):
        call(np.ones((4, 1)))


def test_hyperboloid_vector_args_need_two_coordinates():
    with pytest.raises(ValueError):
        gk.hyperboloid.exp_map(np.zeros((3, 1)))
    with pytest.raises(ValueError):
        gk.hyperboloid.project(np.ones((3, 1)))


def test_halfspace_nonpositive_last_coordinate_rejected():
    good = np.array([[0.1, 1.0], [0.2, 2.0], [0.3, 0.5], [0.0, 3.0]])
    for value in (0.0, -1.0, -0.0):
        bad = good.copy()
        bad[2, -1] = value
        with pytest.raises(ValueError, match=_arg_row_pattern("x", 2)):
            gk.halfspace.distance(bad, good)
        with pytest.raises(ValueError, match=_arg_row_pattern("y", 2)):
            gk.halfspace.distance(good, bad)
        with pytest.raises(ValueError, match=_arg_row_pattern("x", 2)):
            gk.convert(bad, "halfspace", "poincare")


@pytest.mark.parametrize("name", ["bogus", "Poincare", "lorentz", ""])
def test_convert_unknown_model(name):
    x = np.array([[0.1, 0.2]])
    with pytest.raises(ValueError, match=re.escape(f'"{name}"')):
        gk.convert(x, name, "klein")
    with pytest.raises(ValueError, match=re.escape(f'"{name}"')):
        gk.convert(x, "poincare", name)


def _two_point_calls():
    """Functions taking two (..., d) operands: (label, call(a, b), name of a, name of b)."""
    P, Kl, H = gk.poincare, gk.klein, gk.hyperboloid
    calls = []
    for name, f in (("poincare", P), ("klein", Kl), ("hyperboloid", H)):
        calls += [
            (f"{name}.distance", f.distance, "x", "y"),
            (f"{name}.exp_map", f.exp_map, "v", "base"),
            (f"{name}.log_map", f.log_map, "y", "base"),
            (f"{name}.geodesic", lambda a, b, f=f: f.geodesic(a, b, 0.5), "x", "y"),
            # a is both the vector and the start; the first argument is named first
            (f"{name}.transport", lambda a, b, f=f: f.transport(a, a, b), "v", "end"),
        ]
    calls += [
        ("halfspace.distance", gk.halfspace.distance, "x", "y"),
        ("hyperboloid.inner", H.inner, "u", "v"),
    ]
    return calls


TWO_POINT_CALLS = _two_point_calls()


def _valid(label, n, d):
    """Valid operands of dimension d for a function of that label."""
    if label.startswith("hyperboloid"):
        return gk.convert(np.full((n, d), 0.1), "poincare", "hyperboloid")
    if label.startswith("halfspace"):
        return np.full((n, d), 0.5)
    return np.full((n, d), 0.1)


@pytest.mark.parametrize("label,call,name_a,name_b", TWO_POINT_CALLS, ids=[c[0] for c in TWO_POINT_CALLS])
def test_mismatched_dimension(label, call, name_a, name_b):
    with pytest.raises(ValueError, match="dimension|d ="):
        call(_valid(label, 3, 2), _valid(label, 3, 3))


@pytest.mark.parametrize("label,call,name_a,name_b", TWO_POINT_CALLS, ids=[c[0] for c in TWO_POINT_CALLS])
def test_nan_names_row(label, call, name_a, name_b):
    a = _valid(label, 4, 3)
    b = _valid(label, 4, 3)
    b[2, 1] = np.nan
    with pytest.raises(ValueError, match=_arg_row_pattern(name_b, 2)):
        call(a, b)
    a[1, 1] = np.inf
    with pytest.raises(ValueError, match=_arg_row_pattern(name_a, 1)):
        call(a, _valid(label, 4, 3))


@pytest.mark.parametrize("model", BALLS)
def test_ball_nan_and_outside_rows(model):
    f = MODULES[model]
    x = np.full((4, 2), 0.1)
    bad = x.copy()
    bad[3, 0] = np.nan
    with pytest.raises(ValueError, match=_arg_row_pattern("base", 3)):
        f.exp_map(x, bad)
    with pytest.raises(ValueError, match=_arg_row_pattern("x", 3)):
        f.project(bad)
    with pytest.raises(ValueError, match=_arg_row_pattern("x", 3)):
        gk.convert(bad, model, "hyperboloid")
    out = x.copy()
    out[2] = [0.8, 0.8]
    with pytest.raises(ValueError, match=_arg_row_pattern("y", 2)):
        f.log_map(out, x)
    with pytest.raises(ValueError, match=_arg_row_pattern("x", 2)):
        gk.convert(out, model, "halfspace")


def test_poincare_to_klein_not_representable():
    # 1 - |p| = 1e-10 maps to 1 - |k| ~ 5e-21: not representable in float64
    p = np.array([[0.0, 0.0], [1.0 - 1e-10, 0.0]])
    with pytest.raises(ValueError, match=r"row 1"):
        gk.convert(p, "poincare", "klein")
    for dst in ("hyperboloid", "halfspace"):  # ... but those models can hold it
        q = gk.convert(p, "poincare", dst)
        assert np.all(np.isfinite(q))
        np.testing.assert_allclose(gk.convert(q, dst, "poincare"), p, rtol=1e-15, atol=1e-15)


@pytest.mark.parametrize(
    "src,dst,width_in,width_out",
    [(a, b, 3 + (a == "hyperboloid"), 3 + (b == "hyperboloid")) for a, b in itertools.permutations(MODELS, 2)],
)
def test_convert_empty(src, dst, width_in, width_out):
    out = gk.convert(np.zeros((0, width_in)), src, dst)
    assert out.shape == (0, width_out) and out.dtype == np.float64
    out = gk.convert(np.zeros((2, 0, width_in)), src, dst)
    assert out.shape == (2, 0, width_out)


def test_empty_inputs_give_empty_outputs():
    e2, e3 = np.zeros((0, 2)), np.zeros((0, 3))
    for f in (gk.poincare.distance, gk.klein.distance, gk.halfspace.distance):
        r = f(e2, e2)
        assert isinstance(r, np.ndarray) and r.shape == (0,)
    assert gk.hyperboloid.distance(e3, e3).shape == (0,)
    assert gk.hyperboloid.inner(e3, e3).shape == (0,)
    assert gk.poincare.distance(np.zeros((0, 2)), np.zeros(2)).shape == (0,)
    for model in BALLS:
        f = MODULES[model]
        assert f.exp_map(e2).shape == (0, 2)
        assert f.exp_map(e2, e2).shape == (0, 2)
        assert f.log_map(e2).shape == (0, 2)
        assert f.transport(e2, e2, e2).shape == (0, 2)
        assert f.geodesic(e2, e2, 0.5).shape == (0, 2)
        assert f.geodesic(e2, e2, np.zeros(0)).shape == (0, 2)
        assert f.project(e2).shape == (0, 2)
    H = gk.hyperboloid
    assert H.exp_map(e3).shape == (0, 3)
    assert H.log_map(e3, e3).shape == (0, 3)
    assert H.transport(e3, e3, e3).shape == (0, 3)
    assert H.geodesic(e3, e3, 0.5).shape == (0, 3)
    assert H.project(e3).shape == (0, 3)


def test_positive_curvature_rejected():
    x = np.array([0.1, 0.2])
    for K in (0.0, 1.0, float("nan")):
        with pytest.raises(ValueError, match="curvature"):
            gk.poincare.distance(x, x, curvature=K)
        with pytest.raises(ValueError, match="curvature"):
            gk.convert(x, "poincare", "klein", curvature=K)
