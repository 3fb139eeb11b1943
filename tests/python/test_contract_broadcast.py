"""Contract tests for the element-wise gyrovector functions of gyrokit:
shapes, broadcasting and empty inputs (the tables are in contract_support.py).

Each test checks one clause of the product contract for every function it
applies to; the geometry itself is not checked here."""

from __future__ import annotations

import numpy as np
import pytest

from conftest import rim_points
pytestmark = pytest.mark.filterwarnings("ignore::gyrokit.poincare.RimClipWarning")
from contract_support import (
    ARG_CASES,
    call,
    expand,
    expected_shape,
    FUNC_IDS,
    FUNCS,
    GYRATION_FUNCS,
    make_args,
    SCALE_FUNCS,
    TOL,
)


# ------------------------------------------------------ shapes / broadcasting


@pytest.mark.parametrize("d", [1, 3])
@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_same_shape_rows(func, d):
    # Points are the last axis; equal leading shapes give (n, d). d = 1 must work.
    rng = np.random.default_rng(1)
    args = make_args(func, rng, (7,), d)
    out = call(func, args)
    assert isinstance(out, np.ndarray)
    assert out.shape == (7, d)
    assert out.dtype == np.float64
    assert np.all(np.isfinite(out))


@pytest.mark.parametrize("d", [1, 3])
@pytest.mark.parametrize("func,pos", ARG_CASES)
def test_broadcast_one_against_single(func, pos, d):
    # NumPy broadcasting rules: (n, d) with (d,) -> (n, d); for scale a 0-d r
    # with (n, d), or r of shape (n,) with a single point (d,).
    rng = np.random.default_rng(2)
    leads = [() for _ in func[3]]
    leads[pos] = (5,)
    args = make_args(func, rng, None, d, leads=leads)
    out = call(func, args)
    assert out.shape == expected_shape(func, args, d) == (5, d)
    # Broadcasting must mean the same as repeating the single operand.
    np.testing.assert_allclose(out, call(func, expand(func, args)), **TOL)


@pytest.mark.parametrize("d", [1, 3])
@pytest.mark.parametrize("func,pos", ARG_CASES)
def test_broadcast_outer(func, pos, d):
    # NumPy broadcasting rules: (n, 1, d) with (m, d) -> (n, m, d); for scale
    # r of shape (n, 1) with x of shape (m, d) -> (n, m, d).
    rng = np.random.default_rng(3)
    leads = [(4,) for _ in func[3]]
    leads[pos] = (3, 1)
    args = make_args(func, rng, None, d, leads=leads)
    out = call(func, args)
    assert out.shape == (3, 4, d)
    np.testing.assert_allclose(out, call(func, expand(func, args)), **TOL)


@pytest.mark.parametrize("func", SCALE_FUNCS)
def test_scale_r_forms(func):
    # The contract's listed r forms: Python scalar, 0-d array, (n,), (n, 1).
    rng = np.random.default_rng(4)
    x = rim_points(rng, (6,), 3)
    ref = func[1](np.full(6, 2.0), x)
    np.testing.assert_allclose(func[1](2.0, x), ref, **TOL)
    np.testing.assert_allclose(func[1](2, x), ref, **TOL)
    np.testing.assert_allclose(func[1](np.array(2.0), x), ref, **TOL)
    r = np.array([0.5, 2.0])
    out = func[1](r[:, None], x)
    assert out.shape == (2, 6, 3)
    np.testing.assert_allclose(out[1], ref, **TOL)


@pytest.mark.parametrize("func", SCALE_FUNCS)
def test_scale_r_shaped_like_point_is_rejected(func):
    # r broadcasts against x[..., 0], not against x: r of shape (d,) with x of
    # shape (n, d), n != d, is non-broadcastable (NumPy broadcasting rules).
    rng = np.random.default_rng(5)
    x = rim_points(rng, (5,), 3)
    with pytest.raises(ValueError):
        func[1](np.ones(3), x)


@pytest.mark.parametrize("func", GYRATION_FUNCS)
def test_gyration_three_way_broadcast(func):
    # NumPy broadcasting rules across three operands: (n,1,d), (m,d), (d,) -> (n,m,d).
    rng = np.random.default_rng(6)
    a = rim_points(rng, (3, 1), 4)
    b = rim_points(rng, (5,), 4)
    v = rng.standard_normal(4)
    out = func[1](a, b, v)
    assert out.shape == (3, 5, 4)
    np.testing.assert_allclose(out, func[1](*expand(func, [a, b, v])), **TOL)


@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_empty_inputs(func):
    # Element-wise functions on empty inputs return empty results of the
    # broadcast shape (NumPy ufunc convention), with the contract's dtype.
    d = 3
    cases = []
    arity = func[2]
    cases.append([(0,)] * arity)                       # all (0, d) -> (0, d)
    for pos in range(arity):
        leads = [()] * arity
        leads[pos] = (0,)
        cases.append(leads)                            # (0, d) with (d,) -> (0, d)
        leads = [(5,)] * arity
        leads[pos] = (0, 1)
        cases.append(leads)                            # (0, 1, d) with (5, d) -> (0, 5, d)
    rng = np.random.default_rng(7)
    for leads in cases:
        args = make_args(func, rng, None, d, leads=leads)
        want = expected_shape(func, args, d)
        out = call(func, args)
        assert isinstance(out, np.ndarray)
        assert out.shape == want, (leads, out.shape, want)
        assert out.dtype == np.float64
        out32 = call(func, [np.asarray(a, dtype=np.float32) for a in args])
        assert out32.shape == want
        assert out32.dtype == np.float32
