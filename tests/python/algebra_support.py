"""The gyrovector functions checked against the 50-digit mpmath reference
(mp_reference.py) and the input generators shared by
tests/python/test_algebra_*.py: interior points, points at a given gap from
the sphere, coincident and opposite pairs, keyed by a stable hash so that
every case draws the same rows."""

from __future__ import annotations

import zlib
from typing import Callable, Dict, List, Tuple

import numpy as np
import pytest

import gyrokit as gk
import mp_reference as ref
from conftest import CURVATURES, radius, unit_vectors


DIMS = [1, 2, 3, 16]
BOUNDARY_GAPS = [1e-6, 1e-9, 1e-12, 1e-15]

# Normwise relative error bound for the accuracy tests (the library documents
# ~1e-15; 1e-12 leaves room for conditioning while still catching any
# rearrangement that loses digits to cancellation, which costs 1e-4 .. 1e0).
REL_BOUND = 1e-12
# Results nearer the sphere than this (1 - |r|/R) cannot be represented as a
# float64 point strictly inside the ball (the spacing of doubles just below 1
# is 1.1e-16): the library documents that they round onto the sphere
# (measured: on it or up to ~5e-16 R beyond it, normwise error still ~5e-16).
# Such rows are skipped, not scored.
UNREPRESENTABLE_GAP = 2.0**-52
# Absolute floor (in units of R) for the relative-error denominator when the
# exact result is (nearly) the origin.
ABS_FLOOR = 1e-15
# Rows of mpmath work per accuracy case (mpmath is the slow part).
ROWS = 12  # per input group; 2-3 groups per case -> 24-36 rows

# ---------------------------------------------------------------- functions

# name -> (library function, reference, kind); kind fixes the argument list:
# "binary" (x, y), "scale" (r, x), "gyration" (a, b, v).
FUNCTIONS: Dict[str, Tuple[Callable, Callable, str]] = {
    "poincare.add": (gk.poincare.add, ref.mobius_add, "binary"),
    "poincare.sub": (gk.poincare.sub, ref.mobius_sub, "binary"),
    "poincare.coadd": (gk.poincare.coadd, ref.mobius_coadd, "binary"),
    "poincare.scale": (gk.poincare.scale, ref.mobius_scale, "scale"),
    "poincare.gyration": (gk.poincare.gyration, ref.mobius_gyration, "gyration"),
    "poincare.midpoint": (gk.poincare.midpoint, ref.mobius_midpoint, "binary"),
    "klein.add": (gk.klein.add, ref.einstein_add, "binary"),
    "klein.sub": (gk.klein.sub, ref.einstein_sub, "binary"),
    "klein.scale": (gk.klein.scale, ref.einstein_scale, "scale"),
    "klein.gyration": (gk.klein.gyration, ref.einstein_gyration, "gyration"),
    "klein.midpoint": (gk.klein.midpoint, ref.einstein_midpoint, "binary"),
}

# Hard pair cases and the functions for which they are hard.
COINCIDENT_FUNCS = ["poincare.sub", "poincare.midpoint", "klein.sub", "klein.midpoint"]
OPPOSITE_FUNCS = [
    "poincare.add",
    "poincare.midpoint",
    "poincare.coadd",
    "poincare.gyration",
    "klein.add",
    "klein.midpoint",
    "klein.gyration",
]


def _rng(*key) -> np.random.Generator:
    return np.random.default_rng(zlib.crc32(repr(key).encode()))


def _interior(rng, n, d, R, rmax=0.99):
    return unit_vectors(rng, n, d) * (R * rng.uniform(0.0, rmax, (n, 1)))


def _near_boundary(rng, n, d, R, gaps):
    """Float64 points at 1 - |x|/R ≈ gap (the exact gap is re-measured later)."""
    g = np.resize(np.asarray(gaps, dtype=float), n)[:, None]
    return unit_vectors(rng, n, d) * (R * (1.0 - g))


def _perturbation(rng, n, d, R):
    """Vectors of length 1e-14 .. 1e-10 R ("1e-12-ish"), random directions."""
    return unit_vectors(rng, n, d) * (R * 10.0 ** rng.uniform(-14, -10, (n, 1)))


def _make_inputs(name: str, case: str, curvature: float, d: int):
    """Arguments (a tuple of arrays) for one accuracy case."""
    kind = FUNCTIONS[name][2]
    R = radius(curvature)
    rng = _rng(name, case, curvature, d)
    n = ROWS

    if case == "random":
        if kind == "scale":
            return (rng.uniform(-5.0, 5.0, 2 * n), _interior(rng, 2 * n, d, R))
        args = (_interior(rng, 2 * n, d, R), _interior(rng, 2 * n, d, R))
        if kind == "gyration":
            args += (_interior(rng, 2 * n, d, R),)
        return args

    if case.startswith("boundary"):
        gap = float(case.split("-", 1)[1])
        nb = lambda: _near_boundary(rng, n, d, R, [gap])  # noqa: E731
        inner = lambda: _interior(rng, n, d, R)  # noqa: E731
        if kind == "scale":
            # |r| <= 2: larger r pushes results past float64's last
            # representable shell (skipped anyway).
            return (rng.uniform(-2.0, 2.0, 2 * n), np.concatenate([nb(), nb()]))
        # (boundary, interior), (interior, boundary), (boundary, boundary)
        x = np.concatenate([nb(), inner(), nb()])
        y = np.concatenate([inner(), nb(), nb()])
        if kind == "gyration":
            return (x, y, _interior(rng, 3 * n, d, R))
        return (x, y)

    x = _near_boundary(rng, 2 * n, d, R, BOUNDARY_GAPS)
    delta = _perturbation(rng, 2 * n, d, R)
    if case == "coincident":
        # y = x + delta, delta turned to point inwards so y stays inside.
        sgn = np.where(np.sum(delta * x, axis=1, keepdims=True) > 0, -1.0, 1.0)
        y = x + sgn * delta
        return (x, y)
    if case == "opposite":
        # y = -x + delta, delta pointing inwards from -x.
        sgn = np.where(np.sum(delta * x, axis=1, keepdims=True) < 0, -1.0, 1.0)
        y = -x + sgn * delta
        a = np.concatenate([x[:n], y[n:]])  # both orders: (x, y) and (y, x)
        b = np.concatenate([y[:n], x[n:]])
        if kind == "gyration":
            return (a, b, _interior(rng, 2 * n, d, R))
        return (a, b)
    raise AssertionError(case)


def _ball_args(kind: str) -> List[int]:
    """Indices of the arguments that must be ball points."""
    return {"binary": [0, 1], "scale": [1], "gyration": [0, 1]}[kind]


def _accuracy_cases():
    cases = []
    for name in FUNCTIONS:
        for case in ["random"] + [f"boundary-{g:g}" for g in BOUNDARY_GAPS]:
            cases.append((name, case))
    cases += [(name, "coincident") for name in COINCIDENT_FUNCS]
    cases += [(name, "opposite") for name in OPPOSITE_FUNCS]
    return [
        pytest.param(name, case, K, d, id=f"{name}-{case}-K{K:g}-d{d}")
        for name, case in cases
        for K in CURVATURES
        for d in DIMS
    ]
