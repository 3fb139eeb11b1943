"""The table of element-wise gyrovector functions under contract test
(tests/python/test_contract_*.py) and the helpers those files share:
argument generation, broadcasting expectations, large shared input pools."""

from __future__ import annotations

import functools
import re

import numpy as np
import pytest

import gyrokit as gk
from conftest import rim_points


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


def make_arg(kind, rng, lead, d, curvature=-1.0):
    lead = tuple(lead)
    if kind == "point":
        return rim_points(rng, lead, d, curvature)
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
