"""Contract tests for the element-wise gyrovector functions of gyrokit:
memory layouts (Fortran order, strides, views, read-only, byte order,
alignment) give the same results, and inputs are never modified."""

from __future__ import annotations

import numpy as np
import pytest

pytestmark = pytest.mark.filterwarnings("ignore::gyrokit.poincare.RimClipWarning")
from contract_support import call, FUNC_IDS, FUNCS, make_args, TOL


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
