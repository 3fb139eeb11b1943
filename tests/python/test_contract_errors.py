"""Contract tests for the element-wise gyrovector functions of gyrokit: bad
input (dimensions, shapes, non-finite coordinates, points on or outside the
ball) raises a ValueError/TypeError naming the argument and the first bad
row; any finite gyration vector is accepted."""

from __future__ import annotations

import re

import numpy as np
import pytest

from conftest import rim_points
pytestmark = pytest.mark.filterwarnings("ignore::gyrokit.poincare.RimClipWarning")
from contract_support import (
    ARG_CASES,
    big_args,
    call,
    COORD_ARG_CASES,
    FUNC_IDS,
    FUNCS,
    GYRATION_FUNCS,
    make_args,
    MULTI_COORD_ARG_CASES,
    names,
    POINT_ARG_CASES,
    SCALE_FUNCS,
    set_bad,
)


# -------------------------------------------------------------- bad input


@pytest.mark.parametrize("func,pos", COORD_ARG_CASES)
def test_zero_d_point_is_value_error(func, pos):
    # Points lie along the last axis; a 0-d value has no point axis.
    args = make_args(func, np.random.default_rng(22), (3,), 2)
    name = func[3][pos][0]
    for bad in (0.1, np.float64(0.1), np.array(0.1)):
        args[pos] = bad
        with pytest.raises(ValueError) as ei:
            call(func, args)
        assert names(str(ei.value), name), str(ei.value)


@pytest.mark.parametrize("func,pos", MULTI_COORD_ARG_CASES)
def test_mismatched_dimension_names_both(func, pos):
    # Mismatched d: ValueError naming the odd argument and one it clashes with.
    args = make_args(func, np.random.default_rng(23), (4,), 3)
    args[pos] = args[pos][:, :2].copy()
    name = func[3][pos][0]
    others = [n for i, (n, k) in enumerate(func[3]) if i != pos and k != "scalar"]
    with pytest.raises(ValueError) as ei:
        call(func, args)
    msg = str(ei.value)
    assert names(msg, name), msg
    assert any(names(msg, o) for o in others), msg


@pytest.mark.parametrize("func,pos", ARG_CASES)
def test_non_broadcastable_leading_shapes(func, pos):
    # NumPy broadcasting rules: leading lengths 3 and 4 do not broadcast.
    leads = [(4,)] * func[2]
    leads[pos] = (3,)
    args = make_args(func, np.random.default_rng(24), None, 2, leads=leads)
    with pytest.raises(ValueError):
        call(func, args)


def _row_error(func, args):
    with pytest.raises(ValueError) as ei:
        call(func, args)
    return str(ei.value)


@pytest.mark.parametrize("bad", [np.nan, np.inf, -np.inf])
@pytest.mark.parametrize("func,pos", COORD_ARG_CASES)
def test_nonfinite_coordinates_report_first_row(func, pos, bad):
    # NaN/inf coordinates: ValueError naming the argument and the FIRST bad
    # row (bad rows at 3 and 7 -> "row 3").
    args = make_args(func, np.random.default_rng(25), (10,), 3)
    kind = func[3][pos][1]
    set_bad(args[pos], kind, (3,), bad)
    set_bad(args[pos], kind, (7,), bad)
    msg = _row_error(func, args)
    assert names(msg, func[3][pos][0]), msg
    assert re.search(r"\brow 3\b", msg), msg
    assert not re.search(r"\brow 7\b", msg), msg


@pytest.mark.parametrize("func", SCALE_FUNCS)
def test_scale_nan_r_names_r(func):
    # NaN r: ValueError naming r (and its first bad row), array or scalar.
    rng = np.random.default_rng(26)
    x = rim_points(rng, (10,), 3)
    r = np.ones(10)
    r[3] = r[7] = np.nan
    with pytest.raises(ValueError) as ei:
        func[1](r, x)
    msg = str(ei.value)
    assert names(msg, "r") and re.search(r"\brow 3\b", msg), msg
    with pytest.raises(ValueError) as ei:
        func[1](float("nan"), x)
    assert names(str(ei.value), "r"), str(ei.value)


@pytest.mark.parametrize("where", ["on_axis", "on_negative_axis", "outside", "far_outside"])
@pytest.mark.parametrize("func,pos", POINT_ARG_CASES)
def test_point_on_or_outside_ball_reports_first_row(func, pos, where):
    # |x| >= R is invalid, including exactly on the sphere (R = 2 for
    # K = -0.25 is exact in float64, so [0, 2, 0] is exactly on it).
    k = -0.25
    args = make_args(func, np.random.default_rng(27), (10,), 3, curvature=k)
    p = {
        "on_axis": [0.0, 2.0, 0.0],
        "on_negative_axis": [0.0, 0.0, -2.0],
        "outside": [0.0, np.nextafter(2.0, 3.0), 0.0],
        "far_outside": [5.0, 5.0, 5.0],
    }[where]
    args[pos][3] = p
    args[pos][7] = p
    msg = _row_error_k(func, args, k)
    assert names(msg, func[3][pos][0]), msg
    assert re.search(r"\brow 3\b", msg), msg


def _row_error_k(func, args, k):
    with pytest.raises(ValueError) as ei:
        call(func, args, curvature=k)
    return str(ei.value)


@pytest.mark.parametrize("func,pos", POINT_ARG_CASES)
def test_boundary_point_d1(func, pos):
    # d = 1: the sphere is {-R, R}; R itself is rejected, the largest float
    # below R is accepted and gives a finite result.
    args = make_args(func, np.random.default_rng(28), (5,), 1)
    args[pos][2] = [-1.0]
    msg = _row_error(func, args)
    assert names(msg, func[3][pos][0]) and re.search(r"\brow 2\b", msg), msg
    args[pos][2] = [-np.nextafter(1.0, 0.0)]
    assert np.all(np.isfinite(call(func, args)))


@pytest.mark.parametrize("func,pos", ARG_CASES)
def test_bad_row_in_3d_input_is_a_tuple(func, pos):
    # For a 3-D input (2-D leading shape) the row is a multi-index tuple, the
    # first in C order: bad at (1, 2) and (2, 0) -> "row (1, 2)".
    args = make_args(func, np.random.default_rng(29), (3, 4), 2)
    kind = func[3][pos][1]
    set_bad(args[pos], kind, (1, 2), np.nan)
    set_bad(args[pos], kind, (2, 0), np.nan)
    msg = _row_error(func, args)
    assert names(msg, func[3][pos][0]), msg
    assert "row (1, 2)" in msg, msg


@pytest.mark.parametrize("func,pos", ARG_CASES)
def test_bad_row_counted_in_argument_own_shape(func, pos):
    # When the bad argument is broadcast (shape (m, d) against (n, 1, d)), the
    # row named is the index in that argument, "row 3", as the contract's
    # "first bad row at index 3".
    leads = [(2, 1)] * func[2]
    leads[pos] = (6,)
    args = make_args(func, np.random.default_rng(30), None, 2, leads=leads)
    set_bad(args[pos], func[3][pos][1], (3,), np.nan)
    set_bad(args[pos], func[3][pos][1], (5,), np.nan)
    msg = _row_error(func, args)
    assert names(msg, func[3][pos][0]), msg
    assert re.search(r"\brow 3\b", msg), msg


@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_first_bad_row_in_large_parallel_input(func):
    # Large inputs run in parallel chunks; the reported row must still be the
    # first bad one, not whichever chunk finished first.
    n = 200_000
    pos = [i for i, (_, k) in enumerate(func[3]) if k == "point"][0]
    name = func[3][pos][0]
    args = big_args(func, n, 4)
    for rows, first in (((3, 7, 150_000, n - 1), 3), ((150_001, 199_999), 150_001)):
        bad_args = [a.copy() for a in args]
        for r in rows:
            bad_args[pos][r] = [2.0, 0.0, 0.0, 0.0]  # outside the unit ball
        msg = _row_error(func, bad_args)
        assert names(msg, name), msg
        assert re.search(rf"\brow {first}\b", msg), msg


@pytest.mark.parametrize("func", GYRATION_FUNCS)
def test_gyration_v_any_finite_vector(func):
    # v may be any finite vector, including far outside the ball (gyrations
    # are rotations of R^d); infinite or NaN v is a ValueError naming v.
    rng = np.random.default_rng(32)
    a = rim_points(rng, (10,), 3)
    b = rim_points(rng, (10,), 3)
    v = rng.standard_normal((10, 3)) * 1e6
    v[0] = [1.0, 0.0, 0.0]  # on the unit sphere: fine for v
    out = func[1](a, b, v)
    assert np.all(np.isfinite(out))
    for bad in (np.inf, -np.inf, np.nan):
        vb = v.copy()
        vb[3, 2] = bad
        vb[7, 0] = bad
        with pytest.raises(ValueError) as ei:
            func[1](a, b, vb)
        msg = str(ei.value)
        assert names(msg, "v") and re.search(r"\brow 3\b", msg), msg


@pytest.mark.parametrize("func", GYRATION_FUNCS)
def test_gyration_huge_v_no_nan(func):
    # Never a silent NaN: gyr[a, b] is a rotation, so a v with coordinates
    # near the float64 maximum (|v| still representable) is valid input.
    rng = np.random.default_rng(33)
    a = rim_points(rng, (200,), 2)
    b = rim_points(rng, (200,), 2)
    v = np.sign(rng.standard_normal((200, 2))) * 1e308
    out = func[1](a, b, v)
    assert not np.any(np.isnan(out)), f"{np.isnan(out).any(axis=1).sum()} of 200 rows NaN"
