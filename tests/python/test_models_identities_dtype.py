"""The four hyperbolic models: the dtype policy (float32 in, float32 out,
computed in float64; mixed inputs give float64) and 0-d results as NumPy
scalars."""

from __future__ import annotations

import itertools

import numpy as np
import pytest

import gyrokit as gk
from conftest import MODELS


# ====================================================== dtypes


def _dtype_calls():
    """(label, call(dtype_a, dtype_b)) exercising every new function with two
    array inputs where possible; 'b' is the dtype of the second array input."""
    p1 = np.array([[0.1, 0.2], [0.3, -0.4]])
    p2 = np.array([[0.2, -0.1], [0.05, 0.3]])
    h1 = gk.convert(p1, "poincare", "hyperboloid")
    h2 = gk.convert(p2, "poincare", "hyperboloid")
    hv = gk.hyperboloid.log_map(h2, h1)
    hs1 = gk.convert(p1, "poincare", "halfspace")
    hs2 = gk.convert(p2, "poincare", "halfspace")
    P, Kl, H = gk.poincare, gk.klein, gk.hyperboloid
    c = lambda a, t: a.astype(t)  # noqa: E731
    calls = []
    for name, f in (("poincare", P), ("klein", Kl)):
        calls += [
            (f"{name}.distance", lambda a, b, f=f: f.distance(c(p1, a), c(p2, b))),
            (f"{name}.exp_map", lambda a, b, f=f: f.exp_map(c(p2, a), c(p1, b))),
            (f"{name}.log_map", lambda a, b, f=f: f.log_map(c(p2, a), c(p1, b))),
            (f"{name}.transport", lambda a, b, f=f: f.transport(c(p2, a), c(p1, b), c(p2, b))),
            (f"{name}.geodesic", lambda a, b, f=f: f.geodesic(c(p1, a), c(p2, b), c(np.array([0.3, 0.7]), b))),
            (f"{name}.project", lambda a, b, f=f: f.project(c(p1, a))),
        ]
    calls += [
        ("hyperboloid.distance", lambda a, b: H.distance(c(h1, a), c(h2, b))),
        ("hyperboloid.exp_map", lambda a, b: H.exp_map(c(hv, a), c(h1, b))),
        ("hyperboloid.log_map", lambda a, b: H.log_map(c(h2, a), c(h1, b))),
        ("hyperboloid.transport", lambda a, b: H.transport(c(hv, a), c(h1, b), c(h2, b))),
        ("hyperboloid.geodesic", lambda a, b: H.geodesic(c(h1, a), c(h2, b), 0.25)),
        ("hyperboloid.project", lambda a, b: H.project(c(h1, a))),
        ("hyperboloid.inner", lambda a, b: H.inner(c(h1, a), c(h2, b))),
        ("halfspace.distance", lambda a, b: gk.halfspace.distance(c(hs1, a), c(hs2, b))),
        ("poincare.matvec", lambda a, b: P.matvec(c(np.array([[1.0, 2.0], [0.5, -1.0], [0.0, 1.0]]), b), c(p1, a))),
    ]
    for src, dst in itertools.permutations(MODELS, 2):
        start = {"poincare": p1, "klein": gk.convert(p1, "poincare", "klein"), "hyperboloid": h1, "halfspace": hs1}[src]
        calls.append((f"convert {src}->{dst}", lambda a, b, s=start, src=src, dst=dst: gk.convert(c(s, a), src, dst)))
    return calls


DTYPE_CALLS = _dtype_calls()
SINGLE_INPUT = {"poincare.project", "klein.project", "hyperboloid.project"}


@pytest.mark.parametrize("label,call", DTYPE_CALLS, ids=[c[0] for c in DTYPE_CALLS])
def test_dtype_policy(label, call):
    r32 = call(np.float32, np.float32)
    r64 = call(np.float64, np.float64)
    assert r32.dtype == np.float32, label
    assert r64.dtype == np.float64, label
    assert r32.shape == r64.shape
    # the same values up to the float32 rounding of inputs and result
    np.testing.assert_allclose(r32, r64, rtol=1e-5, atol=1e-6, err_msg=label)
    if label.startswith("convert") or label in SINGLE_INPUT:
        return
    assert call(np.float32, np.float64).dtype == np.float64, label
    assert call(np.float64, np.float32).dtype == np.float64, label


def test_float32_computed_in_float64():
    # README dtype policy: computation in float64; float32 inputs are widened
    # exactly and the float64 result is rounded once to float32
    x = np.array([[0.1, 0.2], [0.3, -0.4]], dtype=np.float32)
    y = np.array([[0.2, -0.1], [0.05, 0.3]], dtype=np.float32)
    for f in (gk.poincare.distance, gk.klein.distance):
        np.testing.assert_array_equal(f(x, y), f(x.astype(np.float64), y.astype(np.float64)).astype(np.float32))


@pytest.mark.parametrize(
    "label,call",
    [
        ("poincare.distance", lambda t: gk.poincare.distance(np.array([0.1, 0.2], t), np.array([0.3, 0.1], t))),
        ("klein.distance", lambda t: gk.klein.distance(np.array([0.1, 0.2], t), np.array([0.3, 0.1], t))),
        ("hyperboloid.distance", lambda t: gk.hyperboloid.distance(np.array([1.0, 0.0], t), np.array([np.sqrt(2.0), 1.0], t))),
        ("halfspace.distance", lambda t: gk.halfspace.distance(np.array([0.1, 1.0], t), np.array([0.3, 2.0], t))),
        ("hyperboloid.inner", lambda t: gk.hyperboloid.inner(np.array([1.0, 2.0], t), np.array([3.0, 1.0], t))),
    ],
    ids=lambda v: v if isinstance(v, str) else "",
)
def test_zero_d_results_are_numpy_scalars(label, call):
    r = call(np.float64)
    assert type(r) is np.float64, (label, type(r))
    r = call(np.float32)
    assert type(r) is np.float32, (label, type(r))
