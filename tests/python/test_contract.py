"""Contract tests for the element-wise gyrovector functions of gyrokit.

Each test checks one clause of the product contract (shapes, broadcasting,
dtypes, layouts, errors, determinism, threading) for every function it
applies to. The geometry itself (formulas, accuracy) is not checked here,
only what the contract promises about results (no NaN, finite values).
"""

from __future__ import annotations

import concurrent.futures
import functools
import re
import threading
import time

import numpy as np
import pytest

import gyrokit as gk

# --------------------------------------------------------------------------
# The functions under test: (id, function, arity, ((arg name, kind), ...)).
# Kinds: "point" = ball point (..., d) strictly inside the ball;
#        "scalar" = real number(s) broadcasting against x[..., 0];
#        "vector" = any finite vector (..., d) (the gyration's v).
# --------------------------------------------------------------------------
XY = (("x", "point"), ("y", "point"))
RX = (("r", "scalar"), ("x", "point"))
ABV = (("a", "point"), ("b", "point"), ("v", "vector"))

FUNCS = [
    ("poincare.add", gk.poincare.add, 2, XY),
    ("poincare.sub", gk.poincare.sub, 2, XY),
    ("poincare.coadd", gk.poincare.coadd, 2, XY),
    ("poincare.midpoint", gk.poincare.midpoint, 2, XY),
    ("poincare.scale", gk.poincare.scale, 2, RX),
    ("poincare.gyration", gk.poincare.gyration, 3, ABV),
    ("klein.add", gk.klein.add, 2, XY),
    ("klein.sub", gk.klein.sub, 2, XY),
    ("klein.midpoint", gk.klein.midpoint, 2, XY),
    ("klein.scale", gk.klein.scale, 2, RX),
    ("klein.gyration", gk.klein.gyration, 3, ABV),
]
# Results beyond what float64 holds in the ball raise by default (the rim,
# tests/python/test_rim.py); these clauses are about everything else, so such
# rows are clipped here, quietly.
FUNCS = [(i, f if k == ABV else functools.partial(f, on_rim="clip"), a, k) for i, f, a, k in FUNCS]
pytestmark = pytest.mark.filterwarnings("ignore::gyrokit.poincare.RimClipWarning")
FUNC_IDS = [f[0] for f in FUNCS]

# Sanity of the table itself: the arity column must match the kinds column,
# otherwise every parametrised test below would silently test the wrong thing.
assert all(arity == len(kinds) for _, _, arity, kinds in FUNCS)

# (function, argument position) pairs, for clauses about one argument.
ARG_CASES = [
    pytest.param(f, pos, id=f"{f[0]}-{f[3][pos][0]}")
    for f in FUNCS
    for pos in range(f[2])
]
POINT_ARG_CASES = [p for p in ARG_CASES if p.values[0][3][p.values[1]][1] == "point"]
COORD_ARG_CASES = [p for p in ARG_CASES if p.values[0][3][p.values[1]][1] != "scalar"]
# d can only mismatch in functions with at least two (..., d) operands.
MULTI_COORD_ARG_CASES = [
    p for p in COORD_ARG_CASES if sum(k != "scalar" for _, k in p.values[0][3]) >= 2
]
SCALE_FUNCS = [pytest.param(f, id=f[0]) for f in FUNCS if f[3] == RX]
GYRATION_FUNCS = [pytest.param(f, id=f[0]) for f in FUNCS if f[3] == ABV]

# Layout equivalence tolerance promised by the contract (bit-identical in
# practice, but 1e-14 is what is promised).
TOL = dict(rtol=1e-14, atol=1e-14)


# ------------------------------------------------------------------ helpers


def radius(curvature: float) -> float:
    return 1.0 / np.sqrt(-curvature)


def ball_points(rng, lead, d, curvature=-1.0, min_gap=1e-15):
    """Random points with 1 - |x|/R log-uniform in [min_gap, 1].

    The log-uniform gap puts many points within 1e-15..1e-10 of the sphere,
    where cancellation-prone formulas produce NaN/inf.
    """
    lead = tuple(lead)
    n = int(np.prod(lead, dtype=np.int64))
    u = rng.standard_normal((n, d))
    nrm = np.linalg.norm(u, axis=1, keepdims=True)
    nrm[nrm == 0] = 1.0
    u /= nrm
    eps = 10.0 ** rng.uniform(np.log10(min_gap), 0.0, n)
    x = u * (radius(curvature) * (1.0 - eps))[:, None]
    # Guard the generator (not the library): every point must be strictly
    # inside the ball, checked in extended precision, or a failure would be
    # misattributed to the library.
    sq = (x.astype(np.longdouble) ** 2).sum(axis=1) * np.longdouble(-curvature)
    assert np.all(sq < 1), "test generator produced a point outside the ball"
    return x.reshape(lead + (d,))


def make_arg(kind, rng, lead, d, curvature=-1.0):
    lead = tuple(lead)
    if kind == "point":
        return ball_points(rng, lead, d, curvature)
    if kind == "vector":
        # any finite vector, inside or (mostly) outside the ball
        return rng.standard_normal(lead + (d,)) * 10.0 ** rng.uniform(-2, 2, lead + (1,))
    assert kind == "scalar"
    return rng.standard_normal(lead) * 3.0


def make_args(func, rng, lead, d, curvature=-1.0, leads=None):
    """One valid argument per position; `leads` overrides per-position leading shapes."""
    kinds = func[3]
    leads = leads if leads is not None else [lead] * len(kinds)
    return [make_arg(k, rng, leads[i], d, curvature) for i, (_, k) in enumerate(kinds)]


@functools.lru_cache(maxsize=None)
def _pool(kind, slot, n, d):
    """Large read-only random inputs, generated once and shared by the large
    tests (generation, not the library, would otherwise dominate runtime)."""
    a = make_arg(kind, np.random.default_rng(1000 + slot), (n,), d)
    a.flags.writeable = False
    return a


# Rows held per point dimension: just what the large tests below ask for
# (d = 8: three disjoint 200 000-row blocks for the threading test).
POOL_ROWS = {4: 200_000, 8: 600_000, 16: 300_000}


def big_args(func, n, d, part=0):
    """Valid arguments with n rows; `part` selects a disjoint block of rows."""
    out, slots = [], {"point": 0, "vector": 10, "scalar": 20}
    for _, kind in func[3]:
        a = _pool(kind, slots[kind], POOL_ROWS[d], d)
        slots[kind] += 1
        out.append(a[part * n:(part + 1) * n])
    assert all(len(a) == n for a in out)
    return out


def call(func, args, curvature=-1.0):
    return func[1](*args, curvature=curvature)


def names(msg: str, arg: str) -> bool:
    """The message names argument `arg` as a word (not inside |x| or another word)."""
    return re.search(rf"(?<![\w|]){re.escape(arg)}(?![\w|])", msg) is not None


def expected_shape(func, args, d):
    """NumPy broadcasting rules applied to the leading shapes, then (d,)."""
    leads = []
    for a, (_, kind) in zip(args, func[3]):
        s = np.shape(a)
        leads.append(s if kind == "scalar" else s[:-1])
    return tuple(np.broadcast_shapes(*leads)) + (d,)


def expand(func, args):
    """Every argument materialised at the full broadcast shape, C-contiguous float64."""
    leads = []
    for a, (_, kind) in zip(args, func[3]):
        s = np.shape(a)
        leads.append(s if kind == "scalar" else s[:-1])
    full = np.broadcast_shapes(*leads)
    out = []
    for a, (_, kind) in zip(args, func[3]):
        a = np.asarray(a, dtype=np.float64)
        shape = full if kind == "scalar" else full + (a.shape[-1],)
        out.append(np.ascontiguousarray(np.broadcast_to(a, shape)))
    return out


def set_bad(arr, kind, index, value):
    """Poison row `index` of an argument with `value` (one coordinate suffices)."""
    if kind == "scalar":
        arr[index] = value
    else:
        arr[index + (min(1, arr.shape[-1] - 1),)] = value


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
    x = ball_points(rng, (6,), 3)
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
    x = ball_points(rng, (5,), 3)
    with pytest.raises(ValueError):
        func[1](np.ones(3), x)


@pytest.mark.parametrize("func", GYRATION_FUNCS)
def test_gyration_three_way_broadcast(func):
    # NumPy broadcasting rules across three operands: (n,1,d), (m,d), (d,) -> (n,m,d).
    rng = np.random.default_rng(6)
    a = ball_points(rng, (3, 1), 4)
    b = ball_points(rng, (5,), 4)
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
    x32 = (ball_points(rng, (10,), 3) * 0.999).astype(np.float32)
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
    x32 = (ball_points(rng, (10,), 3) * 0.999).astype(np.float32)
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
    x = ball_points(np.random.default_rng(17), (3,), 2)
    for r in (2 + 0j, True):
        with pytest.raises(TypeError) as ei:
            func[1](r, x)
        assert names(str(ei.value), "r"), str(ei.value)


# --------------------------------------------------------------------- layouts


def _layout(kind, a):
    """The same values as `a` in another memory layout (copied base)."""
    a = np.asarray(a, dtype=np.float64)
    if kind == "fortran":
        return np.asfortranarray(a)
    if kind == "strided":  # x[::2] of a twice-as-long base
        base = np.repeat(a, 2, axis=0) if a.ndim else a
        return base[::2] if a.ndim else base
    if kind == "reversed":  # negative strides on every axis, same values
        base = a[tuple(slice(None, None, -1) for _ in range(a.ndim))].copy()
        return base[tuple(slice(None, None, -1) for _ in range(a.ndim))]
    if kind == "transposed":  # x = base.T of a (..., reversed) C base
        return np.ascontiguousarray(a.T).T
    if kind == "readonly":
        b = a.copy()
        b.flags.writeable = False
        return b
    if kind == "zero_stride":  # np.broadcast_to-style view of one row
        if a.ndim == 0:
            return a
        base = np.ascontiguousarray(a[:1])
        b = np.broadcast_to(base, a.shape)
        return b
    if kind == "byteswapped":  # float64 in non-native byte order
        return a.astype(a.dtype.newbyteorder())
    if kind == "unaligned":  # a valid float64 view at an odd byte offset
        buf = np.zeros(a.nbytes + 8, dtype=np.uint8)
        b = np.ndarray(a.shape, dtype=np.float64, buffer=buf, offset=1)
        b[...] = a
        assert a.size == 0 or not b.flags.aligned  # really exercises unaligned data
        return b
    raise AssertionError(kind)


LAYOUTS = ["fortran", "strided", "reversed", "transposed", "readonly", "zero_stride", "byteswapped", "unaligned"]


@pytest.mark.parametrize("layout", LAYOUTS)
@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_layout_does_not_change_result(func, layout):
    # Results do not depend on memory layout: each argument alone, then all
    # together, in another layout must agree with the C-contiguous float64
    # result to 1e-14. (2-D leading shape so Fortran order and transposes
    # differ from C order on the leading axes too.)
    rng = np.random.default_rng(18)
    args = make_args(func, rng, (6, 5), 3)
    if layout == "zero_stride":
        # a broadcast view repeats its first row; compare against that data
        args = [np.ascontiguousarray(np.broadcast_to(a[:1], a.shape)) for a in args]
    ref = call(func, [np.ascontiguousarray(a) for a in args])
    for pos in list(range(len(args))) + [None]:
        varied = [
            _layout(layout, a) if (pos is None or i == pos) else a for i, a in enumerate(args)
        ]
        for v, a in zip(varied, args):
            np.testing.assert_array_equal(v, a)  # the test's own layouts keep the values
        out = call(func, varied)
        assert out.dtype == np.float64
        np.testing.assert_allclose(out, ref, **TOL, err_msg=f"layout {layout}, arg {pos}")


@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_reversed_coordinates_view(func):
    # x[:, ::-1] is a negatively-strided view along the point axis; it must
    # give the same result as its contiguous copy.
    rng = np.random.default_rng(19)
    args = make_args(func, rng, (9,), 4)
    views = [a[:, ::-1] if a.ndim == 2 else a[::-1] for a in args]
    ref = call(func, [np.ascontiguousarray(v) for v in views])
    np.testing.assert_allclose(call(func, views), ref, **TOL)


@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_float32_layouts(func):
    # float32 inputs in non-C layouts are widened the same way as C ones.
    rng = np.random.default_rng(20)
    args = [np.asarray(a * 0.999, dtype=np.float32) for a in make_args(func, rng, (7, 4), 3)]
    ref = call(func, [np.ascontiguousarray(a) for a in args])
    for varied in (
        [np.asfortranarray(a) for a in args],
        [np.repeat(a, 2, axis=0)[::2] for a in args],
        [np.ascontiguousarray(a.T).T for a in args],
    ):
        out = call(func, varied)
        assert out.dtype == np.float32
        np.testing.assert_array_equal(out, ref)


@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_inputs_not_modified(func):
    # Inputs are never modified in place, whatever their layout or dtype.
    rng = np.random.default_rng(21)
    base = make_args(func, rng, (40,), 5)
    for conv in (
        lambda a: a.copy(),
        np.asfortranarray,
        lambda a: np.repeat(a, 2, axis=0)[::2],
        lambda a: (a * 0.999).astype(np.float32),
    ):
        args = [conv(a) for a in base]
        before = [a.copy() for a in args]
        out = call(func, args)
        for a, b in zip(args, before):
            np.testing.assert_array_equal(a, b)
            # NumPy ufunc convention (no out=): the result is a new array, so
            # writing to it can never modify an input either.
            assert not np.shares_memory(out, a)


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
    x = ball_points(rng, (10,), 3)
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
    a = ball_points(rng, (10,), 3)
    b = ball_points(rng, (10,), 3)
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
    a = ball_points(rng, (200,), 2)
    b = ball_points(rng, (200,), 2)
    v = np.sign(rng.standard_normal((200, 2))) * 1e308
    out = func[1](a, b, v)
    assert not np.any(np.isnan(out)), f"{np.isnan(out).any(axis=1).sum()} of 200 rows NaN"


# ------------------------------------------------------------------ no NaN


def _hard_args(func, rng, n, d, k):
    """Valid inputs concentrated where formulas break: near the sphere,
    nearly coincident, nearly opposite, zero and tiny points."""
    R = radius(k)
    kinds = [kind for _, kind in func[3]]
    args = make_args(func, rng, (n,), d, curvature=k)
    pts = [i for i, kd in enumerate(kinds) if kd == "point"]
    if len(pts) >= 2:
        i, j = pts[0], pts[1]
        q = n // 6
        args[j][:q] = -args[i][:q] * (1 - 1e-15)           # nearly opposite
        args[j][q:2 * q] = args[i][q:2 * q] * (1 - 1e-15)  # nearly coincident
        args[j][2 * q:3 * q] = -args[i][2 * q:3 * q]       # exactly opposite
        args[j][3 * q:4 * q] = args[i][3 * q:4 * q]        # identical
    i = pts[0]
    args[i][-4:] = 0.0
    args[i][-8:-4] = R * 1e-300
    args[i][-12:-8] = 5e-324
    if "scalar" in kinds:
        s = kinds.index("scalar")
        args[s][:] = rng.standard_normal(n) * 10.0 ** rng.uniform(-300, 300, n)
        args[s][:6] = [0.0, -0.0, 1e308, -1e308, 5e-324, 1.0]
    if "vector" in kinds:
        s = kinds.index("vector")
        args[s] *= 10.0 ** rng.uniform(-300, 300, (n, 1))
        args[s][:3] = 0.0
    for a, kd in zip(args, kinds):
        if kd == "point":
            sq = (a.astype(np.longdouble) ** 2).sum(axis=1) * np.longdouble(-k)
            assert np.all(sq < 1), "test generator produced a point outside the ball"
    return args


@pytest.mark.parametrize("k", [-1.0, -0.3, -4.0, -1e-6])
@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_valid_input_never_nan(func, k):
    # Never a silent NaN: valid input, including points with 1 - |x|/R down
    # to 1e-15 and the degenerate pairs above, gives no NaN anywhere.
    rng = np.random.default_rng(34)
    for d in (1, 3, 16):
        args = _hard_args(func, rng, 3000, d, k)
        out = call(func, args, curvature=k)
        assert out.shape == (3000, d)
        bad = np.any(np.isnan(out), axis=1)
        assert not bad.any(), f"d={d}: {bad.sum()} NaN rows, first {np.flatnonzero(bad)[:5]}"


@pytest.mark.parametrize("k", [-1.0, -0.3, -4.0, -1e-6])
@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_valid_input_finite(func, k):
    # Stronger than "no NaN": every result is finite. Ball operations return
    # (at worst rounded-onto-the-sphere) ball points, and a gyration is a
    # rotation (its docstring: it preserves norms), so |gyr[a,b] v| = |v|,
    # here at most ~1e301: an inf is as silent a failure as a NaN.
    rng = np.random.default_rng(34)
    for d in (1, 3, 16):
        args = _hard_args(func, rng, 3000, d, k)
        out = call(func, args, curvature=k)
        bad = ~np.all(np.isfinite(out), axis=1)
        first = np.flatnonzero(bad)[:3]
        assert not bad.any(), (
            f"d={d}: {bad.sum()} non-finite rows, first {first}: "
            + "; ".join(f"args {[a[i].tolist() for a in args]} -> {out[i].tolist()}" for i in first)
        )


# ---------------------------------------------------- determinism / threads


@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_repeated_calls_bit_identical(func):
    # Repeated calls agree bit for bit (no state, no nondeterministic reduction).
    args = big_args(func, 50_000, 8)
    first = call(func, args)
    for _ in range(2):
        np.testing.assert_array_equal(call(func, args), first)


@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_threads_agree_with_serial(func):
    # Calls from 4 Python threads at once (large enough that the native code
    # runs with the GIL released) agree bit for bit with serial calls.
    inputs = [big_args(func, 200_000, 8, part=t) for t in range(3)]
    inputs.append(inputs[0])  # two threads on the very same arrays
    serial = [call(func, a) for a in inputs]
    with concurrent.futures.ThreadPoolExecutor(max_workers=4) as ex:
        results = list(ex.map(lambda a: call(func, a), inputs))
    for s, r in zip(serial, results):
        np.testing.assert_array_equal(r, s)


@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_large_input_equals_small_slices(func):
    # Chunking and threading must not change bits: a 300 000 x 16 call equals
    # the same rows computed in small slices (a prime slice length, so slice
    # edges do not line up with any internal chunking).
    n, step = 300_000, 7919
    args = big_args(func, n, 16)
    full = call(func, args)
    for s in range(0, n, step):
        np.testing.assert_array_equal(call(func, [a[s:s + step] for a in args]), full[s:s + step])


@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_gil_released_during_large_call(func):
    # The native code runs with the GIL released: while a worker thread runs
    # 4 large calls (tens of ms each), the main thread keeps waking up from
    # 1 ms sleeps, and every wake-up needs the GIL. Were the GIL held during
    # a call, the main thread could only wake between calls: about one
    # wake-up per call, i.e. at most ~6 in all. Counting wake-ups (rather
    # than timing gaps) keeps this robust on a loaded machine.
    args = big_args(func, 200_000, 16)
    calls = 4
    done = threading.Event()

    def work():
        for _ in range(calls):
            call(func, args)
        done.set()

    th = threading.Thread(target=work)
    th.start()
    wakeups = 0
    t0 = time.perf_counter()
    while not done.is_set():
        time.sleep(0.001)
        wakeups += 1
    elapsed = time.perf_counter() - t0
    th.join()
    assert wakeups >= 4 * (calls + 2), (wakeups, elapsed)
