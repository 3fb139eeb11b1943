"""Accuracy and algebra of gyrokit's gyrovector operations.

1. Accuracy against mpmath evaluations of the textbook definitions
   (``mp_reference``; 50 digits, raised until the value stops moving), on
   random points, near-boundary points, nearly coincident and nearly
   opposite pairs, for several curvatures and dimensions. Run with ``-s`` to
   see the worst measured error per function.
2. Closed forms from the literature (complex Möbius form, relativistic
   velocity addition, repeated addition, the radial scalar law, the
   Poincaré -> Klein isomorphism).
3. Hypothesis property tests of the gyrogroup / gyrovector-space axioms on
   whole arrays. Example count: env var GYROKIT_HYPOTHESIS_EXAMPLES
   (default 100).

This file: part 1 (inputs and the function table in algebra_support.py);
part 2 is test_algebra_closed_forms.py, part 3 test_algebra_axioms.py.
"""

from __future__ import annotations

import warnings
from typing import Dict, Tuple

import numpy as np
import pytest

import gyrokit as gk

import mp_reference as ref
from conftest import radius
from algebra_support import (
    _accuracy_cases,
    _ball_args,
    _make_inputs,
    ABS_FLOOR,
    FUNCTIONS,
    REL_BOUND,
    ROWS,
    UNREPRESENTABLE_GAP,
)


# Worst errors seen, for the summary printed at the end of the module:
# (function, case group) -> (error, description of the worst row).
WORST: Dict[Tuple[str, str], Tuple[float, str]] = {}
SKIPPED: Dict[str, int] = {}


@pytest.fixture(scope="module", autouse=True)
def _print_worst_errors():
    yield
    if not WORST:
        return
    groups = ["random", "boundary", "coincident", "opposite"]
    lines = ["", "worst normwise relative error vs mpmath (converged, >= 50 digits; bound %.0e):" % REL_BOUND]
    lines.append("%-19s" % "function" + "".join("%12s" % g for g in groups))
    for name in FUNCTIONS:
        row = "%-19s" % name
        for g in groups:
            e = WORST.get((name, g))
            row += "%12s" % ("-" if e is None else "%.2e" % e[0])
        lines.append(row)
    lines.append("worst rows:")
    for (name, g), (e, info) in sorted(WORST.items()):
        lines.append(f"  {name:19s} {g:10s} {e:.2e}  {info}")
    if SKIPPED:
        lines.append("rows skipped (exact result within 2^-52 of the sphere): " + ", ".join(f"{k}: {v}" for k, v in sorted(SKIPPED.items())))
    print("\n".join(lines))


# ------------------------------------------------------- 1. accuracy tests


@pytest.mark.parametrize("name,case,curvature,d", _accuracy_cases())
def test_accuracy_against_mpmath(name, case, curvature, d):
    # A. A. Ungar, Analytic Hyperbolic Geometry (2005): the definitions in
    # mp_reference; common practice: judge a float64 kernel by its normwise
    # relative error against a high-precision evaluation on the *same*
    # float64 inputs.
    fn, reference, kind = FUNCTIONS[name]
    R = radius(curvature)
    args = _make_inputs(name, case, curvature, d)

    # Drop rows whose float64 ball points landed on or outside the sphere.
    keep = np.ones(len(args[0]), dtype=bool)
    for i in _ball_args(kind):
        for j, row in enumerate(args[i]):
            if keep[j] and not ref.boundary_gap(row, curvature) > 0:
                keep[j] = False
    args = tuple(a[keep] for a in args)

    # Rows whose exact result float64 cannot hold are skipped below: clip
    # them (quietly) rather than raise, so the other rows are scored.
    rim = {} if kind == "gyration" else {"on_rim": "clip"}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", gk.poincare.RimClipWarning)
        got = fn(*args, curvature=curvature, **rim)
    assert got.shape == args[-1].shape

    errors = []
    for j in range(len(args[0])):
        row_args = [a[j] for a in args]
        # Textbook definition, evaluated until its digits stop moving.
        exact = ref.converged(reference, *row_args, curvature=curvature)
        if kind != "gyration" and ref.boundary_gap(exact, curvature) < UNREPRESENTABLE_GAP:
            # Not representable strictly inside the ball in float64.
            SKIPPED[name] = SKIPPED.get(name, 0) + 1
            continue
        err = ref.rel_error(got[j], exact, ABS_FLOOR * R)
        errors.append((err, row_args))

    # Every case must actually score rows (random / hard cases always do;
    # some boundary pairs are legitimately skipped above).
    assert len(errors) >= ROWS // 2, f"only {len(errors)} scorable rows"
    worst, worst_args = max(errors, key=lambda t: t[0])
    group = case.split("-")[0]
    info = f"K={curvature:g} d={d} case={case} args={[np.asarray(a).tolist() for a in worst_args]!r}"
    if len(info) > 400:
        info = info[:400] + "..."
    if worst > WORST.get((name, group), (-1.0, ""))[0]:
        WORST[(name, group)] = (worst, info)
    assert worst <= REL_BOUND, f"{name}: relative error {worst:.3e} at {info}"


def _ungar_gyration(a, b, w, curvature):
    # A. A. Ungar, Analytic Hyperbolic Geometry (2005), Möbius gyrations in
    # closed form: gyr[a,b]w = w + 2(A a + B b)/D with
    #   A = -k^2 <a,w>|b|^2 + k <b,w> + 2 k^2 <a,b><b,w>,
    #   B = -k^2 <b,w>|a|^2 - k <a,w>,   D = 1 + 2k<a,b> + k^2|a|^2|b|^2.
    # Evaluated at 200 digits (enough for gaps >= 1e-16).
    with ref.mp.workdps(200):
        k = -ref.mpf(curvature)
        a, b, w = ref.to_mp(a), ref.to_mp(b), ref.to_mp(w)
        dot = lambda x, y: ref.mpmath.fsum(p * q for p, q in zip(x, y))  # noqa: E731
        ab, aw, bw, aa, bb = dot(a, b), dot(a, w), dot(b, w), dot(a, a), dot(b, b)
        A = -k * k * aw * bb + k * bw + 2 * k * k * ab * bw
        B = -k * k * bw * aa - k * aw
        D = 1 + 2 * k * ab + k * k * aa * bb
        return [wi + 2 * (A * ai + B * bi) / D for wi, ai, bi in zip(w, a, b)]


@pytest.mark.parametrize("case", ["boundary-1e-15", "opposite"])
def test_reference_gyration_agrees_with_closed_form(case):
    # Checks the reference itself on the hardest inputs: the converged
    # composition ⊖(a⊕b)⊕(a⊕(b⊕v)) must equal Ungar's closed form, and for
    # Einstein the Möbius gyration of the Poincaré images p = k/(1+sqrt(1-kappa|k|^2))
    # (Ungar 2005: isomorphic gyrovector spaces share their gyrations).
    # (Why `converged` exists: at a bare 50 digits the composition is wrong
    # in its leading digits for 1 - |a|/R <= 1e-12 and can divide by zero.)
    for K in [-1.0, -0.3]:
        R = radius(K)
        a, b, v = _make_inputs("poincare.gyration", case, K, 3)
        for j in range(0, len(a), 4):
            exact = _ungar_gyration(a[j], b[j], v[j], K)
            conv = ref.converged(ref.mobius_gyration, a[j], b[j], v[j], curvature=K)
            with ref.mp.workdps(200):
                diff = max(abs(p - q) for p, q in zip(conv, exact))
                assert diff < ref.mpf(10) ** -28 * R, (K, j)
        ka, kb, kv = _make_inputs("klein.gyration", case, K, 3)
        for j in range(0, len(ka), 4):
            with ref.mp.workdps(200):
                k = -ref.mpf(K)
                to_p = lambda x: [xi / (1 + ref.mpmath.sqrt(1 - k * sum(t * t for t in ref.to_mp(x)))) for xi in ref.to_mp(x)]  # noqa: E731
                exact = _ungar_gyration(to_p(ka[j]), to_p(kb[j]), kv[j], K)
            conv = ref.converged(ref.einstein_gyration, ka[j], kb[j], kv[j], curvature=K)
            with ref.mp.workdps(200):
                diff = max(abs(p - q) for p, q in zip(conv, exact))
                assert diff < ref.mpf(10) ** -28 * R, ("klein", K, j)
