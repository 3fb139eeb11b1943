"""Contract tests for the element-wise gyrovector functions of gyrokit: the
curvature argument and the dtype rules (float32/float64, integers, lists,
Python and NumPy scalars, rejected dtypes)."""

from __future__ import annotations

import numpy as np
import pytest

from conftest import rim_points
pytestmark = pytest.mark.filterwarnings("ignore::gyrokit.poincare.RimClipWarning")
from contract_support import ABV, ARG_CASES, call, FUNC_IDS, FUNCS, make_args, names, SCALE_FUNCS


# ------------------------------------------------------------------- curvature


@pytest.mark.parametrize("bad", [0.0, -0.0, 1.0, np.nan, np.inf, -np.inf])
@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_bad_curvature_value(func, bad):
    # K must be finite and < 0; anything else is a ValueError that says which
    # parameter is wrong.
    args = make_args(func, np.random.default_rng(8), (2,), 2)
    with pytest.raises(ValueError, match="curvature"):
        call(func, args, curvature=bad)


@pytest.mark.parametrize("bad", ["a", None])
@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_non_number_curvature(func, bad):
    # A curvature that is not a number at all is a type error, not a value error.
    args = make_args(func, np.random.default_rng(9), (2,), 2)
    with pytest.raises(TypeError):
        call(func, args, curvature=bad)


@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_curvature_is_keyword_only(func):
    # The signature puts curvature after `*`: passing it positionally must fail
    # rather than be mistaken for an extra operand.
    args = make_args(func, np.random.default_rng(10), (2,), 2)
    with pytest.raises(TypeError):
        func[1](*args, -1.0)


@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_curvature_sets_ball_radius(func):
    # R = 1/sqrt(-K): with K = -0.25 (R = 2) a point at |x| = 1.5 is valid; with
    # K = -4 (R = 0.5) a point at |x| = 0.49 is valid and one at 0.5 is on
    # the sphere, hence invalid. An int curvature is a number like any other.
    rng = np.random.default_rng(11)
    for k, r_ok, r_bad in [(-0.25, 1.5, 2.0), (-4.0, 0.49, 0.5)]:
        args = make_args(func, rng, (4,), 2, curvature=k)
        pos = [i for i, (_, kind) in enumerate(func[3]) if kind == "point"][-1]
        args[pos][2] = [r_ok, 0.0]
        out = call(func, args, curvature=k)
        assert np.all(np.isfinite(out))
        args[pos][2] = [0.0, -r_bad]
        with pytest.raises(ValueError):
            call(func, args, curvature=k)
    args = make_args(func, rng, (4,), 2, curvature=-2.0)
    np.testing.assert_array_equal(call(func, args, curvature=-2), call(func, args, curvature=-2.0))


# ---------------------------------------------------------------------- dtypes


@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_float32_inputs_give_rounded_float64_result(func):
    # Computation is in float64: all-float32 input must equal the float64
    # computation on the widened values, rounded once to float32.
    rng = np.random.default_rng(12)
    args32 = [np.asarray(a, dtype=np.float32) for a in make_args(func, rng, (50,), 4)]
    # float32 rounding can push a point onto the sphere; pull those back.
    for a, (_, kind) in zip(args32, func[3]):
        if kind == "point":
            a *= np.float32(0.999)
    out = call(func, args32)
    assert out.dtype == np.float32
    ref = call(func, [a.astype(np.float64) for a in args32]).astype(np.float32)
    if func[3] != ABV:
        # Except within a few float32 ulps of the sphere, where rounding once
        # can put the point on it (the rim, test_rim.py): there the result
        # is the last float32 radius inside instead.
        rim = 1 - np.sum(ref.astype(np.longdouble) ** 2, axis=-1) < 2.0**-20
        assert np.all(np.sum(out[rim].astype(np.longdouble) ** 2, axis=-1) < 1)
        out, ref = out[~rim], ref[~rim]
    np.testing.assert_array_equal(out, ref)


@pytest.mark.parametrize("func,pos", ARG_CASES)
def test_mixed_float32_float64_gives_float64(func, pos):
    # Result is float32 only if EVERY array input is float32; one float64
    # array makes it float64, computed on the widened float32 values.
    rng = np.random.default_rng(13)
    args = [np.asarray(a, dtype=np.float32) * np.float32(0.999) for a in make_args(func, rng, (20,), 3)]
    args[pos] = args[pos].astype(np.float64)
    out = call(func, args)
    assert out.dtype == np.float64
    np.testing.assert_array_equal(out, call(func, [a.astype(np.float64) for a in args]))


@pytest.mark.parametrize("func", SCALE_FUNCS)
def test_scale_python_scalar_does_not_force_float64(func):
    # A bare Python float/int r does not count as an array input (the
    # contract, like NumPy's weak scalars, NEP 50); a 0-d float64 ARRAY does.
    rng = np.random.default_rng(14)
    x32 = (rim_points(rng, (10,), 3) * 0.999).astype(np.float32)
    assert func[1](2.0, x32).dtype == np.float32
    assert func[1](2, x32).dtype == np.float32
    assert func[1](np.float32(2.0), x32).dtype == np.float32
    assert func[1](np.array(2.0), x32).dtype == np.float64
    assert func[1](np.full(10, 2.0), x32).dtype == np.float64
    assert func[1]([2.0] * 10, x32).dtype == np.float64   # a list becomes a float64 array
    np.testing.assert_array_equal(
        func[1](2.0, x32), func[1](2.0, x32.astype(np.float64)).astype(np.float32)
    )


@pytest.mark.parametrize("func", SCALE_FUNCS)
def test_scale_numpy_float64_scalar_is_not_weak(func):
    # NEP 50 (NumPy >= 2): a NumPy float64 scalar is strongly typed, unlike a
    # bare Python float, so np.float64(2) with float32 x gives float64
    # (np.result_type(np.float64(2), float32 array) is float64). The contract
    # exempts only "a bare Python float/int scalar".
    rng = np.random.default_rng(15)
    x32 = (rim_points(rng, (10,), 3) * 0.999).astype(np.float32)
    assert np.result_type(np.float64(2.0), x32) == np.float64  # the convention itself
    assert func[1](np.float64(2.0), x32).dtype == np.float64


@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_int_and_list_inputs(func):
    # Integer arrays and nested lists are accepted, converted to float64 and
    # give float64 results equal to the float64-array computation. K = -0.01
    # gives R = 10 so small integer points are inside the ball.
    k = -0.01
    ints = {
        "point": np.array([[0, 0, 0], [3, 4, 0], [-1, 2, 5], [9, 0, 0]], dtype=np.int64),
        "vector": np.array([[1, 0, 0], [0, -20, 3], [7, 7, 7], [0, 0, 0]], dtype=np.int32),
        "scalar": np.array([2, -1, 0, 3], dtype=np.int64),
    }
    args = [ints[kind][::-1] if i == 1 else ints[kind] for i, (_, kind) in enumerate(func[3])]
    ref = call(func, [a.astype(np.float64) for a in args], curvature=k)
    out = call(func, args, curvature=k)
    assert out.dtype == np.float64
    np.testing.assert_array_equal(out, ref)
    out_list = call(func, [a.tolist() for a in args], curvature=k)
    assert isinstance(out_list, np.ndarray) and out_list.dtype == np.float64
    np.testing.assert_array_equal(out_list, ref)


BAD_TYPES = {
    "complex": lambda a: np.asarray(a, dtype=np.complex128),
    "string": lambda a: np.asarray(a).astype(str),
    "object": lambda a: np.asarray(a).astype(object),
    "bool": lambda a: np.zeros(np.shape(a), dtype=bool),
}


@pytest.mark.parametrize("kind", list(BAD_TYPES))
@pytest.mark.parametrize("func,pos", ARG_CASES)
def test_bad_dtype_is_type_error_naming_argument(func, pos, kind):
    # Complex, string, object and bool inputs are not real numbers: TypeError
    # naming the offending argument (bool is excluded although NumPy would
    # cast it, because True/False as coordinates is almost always a bug).
    args = make_args(func, np.random.default_rng(16), (3,), 2)
    args[pos] = BAD_TYPES[kind](args[pos])
    name = func[3][pos][0]
    with pytest.raises(TypeError) as ei:
        call(func, args)
    assert names(str(ei.value), name), str(ei.value)


@pytest.mark.parametrize("func", SCALE_FUNCS)
def test_scale_python_complex_and_bool_r(func):
    # Bare Python complex and bool scalars are not real numbers either.
    x = rim_points(np.random.default_rng(17), (3,), 2)
    for r in (2 + 0j, True):
        with pytest.raises(TypeError) as ei:
            func[1](r, x)
        assert names(str(ei.value), "r"), str(ei.value)
