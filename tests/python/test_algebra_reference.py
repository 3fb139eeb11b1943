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
"""

from __future__ import annotations

import os
import sys
import warnings
import zlib
from typing import Callable, Dict, List, Tuple

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp

import gyrokit as gk

sys.path.insert(0, os.path.dirname(__file__))
import mp_reference as ref  # noqa: E402

# ----------------------------------------------------------------- settings

settings.register_profile(
    "gyrokit-algebra",
    max_examples=int(os.environ.get("GYROKIT_HYPOTHESIS_EXAMPLES", "100")),
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
)
HYPOTHESIS = settings.get_profile("gyrokit-algebra")

CURVATURES = [-1.0, -0.3, -4.0]
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

# Worst errors seen, for the summary printed at the end of the module:
# (function, case group) -> (error, description of the worst row).
WORST: Dict[Tuple[str, str], Tuple[float, str]] = {}
SKIPPED: Dict[str, int] = {}


def _radius(curvature: float) -> float:
    return 1.0 / np.sqrt(-curvature)


def _rng(*key) -> np.random.Generator:
    return np.random.default_rng(zlib.crc32(repr(key).encode()))


def _units(rng: np.random.Generator, n: int, d: int) -> np.ndarray:
    u = rng.standard_normal((n, d))
    return u / np.linalg.norm(u, axis=1, keepdims=True)


def _interior(rng, n, d, R, rmax=0.99):
    return _units(rng, n, d) * (R * rng.uniform(0.0, rmax, (n, 1)))


def _near_boundary(rng, n, d, R, gaps):
    """Float64 points at 1 - |x|/R ≈ gap (the exact gap is re-measured later)."""
    g = np.resize(np.asarray(gaps, dtype=float), n)[:, None]
    return _units(rng, n, d) * (R * (1.0 - g))


def _perturbation(rng, n, d, R):
    """Vectors of length 1e-14 .. 1e-10 R ("1e-12-ish"), random directions."""
    return _units(rng, n, d) * (R * 10.0 ** rng.uniform(-14, -10, (n, 1)))


def _make_inputs(name: str, case: str, curvature: float, d: int):
    """Arguments (a tuple of arrays) for one accuracy case."""
    kind = FUNCTIONS[name][2]
    R = _radius(curvature)
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
    R = _radius(curvature)
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
        R = _radius(K)
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


# --------------------------------------------------------- 2. closed forms


@pytest.mark.parametrize("curvature", [-1.0, -0.3, -4.0, -2.5])
def test_mobius_addition_is_the_complex_disc_form(curvature):
    # A. A. Ungar, Analytic Hyperbolic Geometry (2005): in the complex disc of
    # radius s, a ⊕ z = (a + z)/(1 + conj(a) z / s^2); with kappa = 1/s^2 = -K
    # this is (a + z)/(1 + kappa conj(a) z) (K = -1: the disc automorphism
    # (a + z)/(1 + conj(a) z)).
    kappa = -curvature
    R = _radius(curvature)
    rng = _rng("complex", curvature)
    x = _interior(rng, 200, 2, R, rmax=0.95)
    y = _interior(rng, 200, 2, R, rmax=0.95)
    got = gk.poincare.add(x, y, curvature=curvature)
    for j in range(len(x)):
        a = complex(x[j, 0], x[j, 1])
        z = complex(y[j, 0], y[j, 1])
        w = (a + z) / (1 + kappa * a.conjugate() * z)
        err = abs(complex(got[j, 0], got[j, 1]) - w) / max(abs(w), 1e-15 * R)
        assert err < 1e-12, (j, x[j], y[j], got[j], w)


@pytest.mark.parametrize("space", ["klein", "poincare"])
@pytest.mark.parametrize("curvature", CURVATURES)
@pytest.mark.parametrize("d", [1, 3, 16])
def test_collinear_addition_is_velocity_addition(space, curvature, d):
    # handbook: relativistic velocity addition of parallel velocities,
    # w = (u + v)/(1 + u v / c^2), with c = R; opposite directions = signed
    # speeds. Einstein addition reduces to it (Ungar 2005); so does Möbius
    # addition in one dimension (from memory: (u+v)/(1+kappa u v) is the
    # Möbius sum of collinear vectors too).
    R = _radius(curvature)
    rng = _rng("collinear", space, curvature, d)
    add = getattr(gk, space).add
    n = 60
    u = R * rng.uniform(-0.999, 0.999, n)
    v = R * rng.uniform(-0.999, 0.999, n)
    v[:20] = -u[:20] * (1.0 + rng.uniform(-1e-6, 1e-6, 20))  # nearly opposite
    axis = rng.integers(0, d, n)
    x = np.zeros((n, d))
    y = np.zeros((n, d))
    x[np.arange(n), axis] = u
    y[np.arange(n), axis] = v
    got = add(x, y, curvature=curvature)
    with ref.mp.workdps(50):
        for j in range(n):
            uu, vv, c2 = ref.mpf(u[j]), ref.mpf(v[j]), 1 / -ref.mpf(curvature)
            w = (uu + vv) / (1 + uu * vv / c2)
            exact = [ref.mpf(0)] * d
            exact[axis[j]] = w
            err = ref.rel_error(got[j], exact, 1e-15 * R)
            assert err < 1e-13, (j, u[j], v[j], got[j], float(w))

    # Along a random direction (inputs are then rounded): absolute error in R.
    e = _units(rng, 1, d)[0]
    x, y = u[:, None] * e, v[:, None] * e
    got = add(x, y, curvature=curvature)
    w = (u + v) / (1 + u * v / R**2)
    assert np.max(np.abs(got - w[:, None] * e)) < 1e-13 * R


@pytest.mark.parametrize("space", ["poincare", "klein"])
@pytest.mark.parametrize("curvature", CURVATURES)
@pytest.mark.parametrize("d", DIMS)
def test_integer_scaling_is_repeated_addition(space, curvature, d):
    # Ungar (2005), scalar multiplication axiom: n ⊗ x = x ⊕ ... ⊕ x (n terms);
    # and (-n) ⊗ x = ⊖(n ⊗ x).
    mod = getattr(gk, space)
    R = _radius(curvature)
    x = _interior(_rng("repeat", space, curvature, d), 40, d, R, rmax=0.7)
    acc = x.copy()
    for n in range(1, 7):
        if n > 1:
            acc = mod.add(acc, x, curvature=curvature)
        got = mod.scale(float(n), x, curvature=curvature)
        err = np.linalg.norm(got - acc, axis=1) / np.maximum(np.linalg.norm(acc, axis=1), 1e-15 * R)
        assert np.max(err) < 1e-12, (n, np.max(err))
        neg = mod.scale(-float(n), x, curvature=curvature)
        assert np.max(np.abs(neg + acc)) < 1e-12 * R, n


@pytest.mark.parametrize("space", ["poincare", "klein"])
@pytest.mark.parametrize("curvature", CURVATURES)
@pytest.mark.parametrize("d", DIMS)
def test_scalar_law(space, curvature, d):
    # Ungar (2005): r ⊗ x = R tanh(r artanh(|x|/R)) x/|x|, here in float64
    # NumPy at interior points (|x| <= 0.9 R) where it is well conditioned.
    mod = getattr(gk, space)
    R = _radius(curvature)
    rng = _rng("scalar-law", space, curvature, d)
    x = _interior(rng, 200, d, R, rmax=0.9)
    r = rng.uniform(-5.0, 5.0, 200)
    nx = np.linalg.norm(x, axis=1)
    want = (R * np.tanh(r * np.arctanh(nx / R)) / nx)[:, None] * x
    got = mod.scale(r, x, curvature=curvature)
    err = np.linalg.norm(got - want, axis=1) / np.linalg.norm(want, axis=1)
    assert np.max(err) < 1e-12
    # common practice: a scalar r and an array of equal r give identical rows.
    assert np.allclose(mod.scale(0.5, x, curvature=curvature)[:5],
                       mod.scale(np.full(5, 0.5), x[:5], curvature=curvature), rtol=0, atol=0)
    # 0 ⊗ x = 0, 1 ⊗ x = x.
    assert np.max(np.abs(mod.scale(0.0, x, curvature=curvature))) == 0.0
    assert np.max(np.abs(mod.scale(1.0, x, curvature=curvature) - x)) < 1e-15 * R


def _to_klein(p: np.ndarray, curvature: float) -> np.ndarray:
    # Ungar (2005): the isomorphism Möbius -> Einstein is p -> 2 ⊗ p = 2p/(1 + kappa |p|^2).
    kappa = -curvature
    return 2.0 * p / (1.0 + kappa * np.sum(p * p, axis=-1, keepdims=True))


@pytest.mark.parametrize("curvature", CURVATURES)
@pytest.mark.parametrize("d", DIMS)
def test_poincare_to_klein_isomorphism(curvature, d):
    # A. A. Ungar, Analytic Hyperbolic Geometry (2005): p -> 2 ⊗ p is a
    # gyrovector-space isomorphism from Möbius to Einstein; the Möbius
    # gyromidpoint goes to the Einstein midpoint, gyrations coincide.
    R = _radius(curvature)
    rng = _rng("iso", curvature, d)
    p = _interior(rng, 100, d, R, rmax=0.8)
    q = _interior(rng, 100, d, R, rmax=0.8)
    w = rng.standard_normal((100, d)) * R
    r = rng.uniform(-3, 3, 100)
    kp, kq = _to_klein(p, curvature), _to_klein(q, curvature)
    P, Kl = gk.poincare, gk.klein
    c = {"curvature": curvature}

    def close(a, b, what):
        err = np.linalg.norm(a - b, axis=1) / np.maximum(np.linalg.norm(b, axis=1), 1e-15 * R)
        assert np.max(err) < 1e-12, (what, np.max(err))

    close(Kl.add(kp, kq, **c), _to_klein(P.add(p, q, **c), curvature), "add")
    close(Kl.sub(kp, kq, **c), _to_klein(P.sub(p, q, **c), curvature), "sub")
    close(Kl.midpoint(kp, kq, **c), _to_klein(P.midpoint(p, q, **c), curvature), "midpoint")
    close(Kl.scale(r, kp, **c), _to_klein(P.scale(r, p, **c), curvature), "scale")
    close(Kl.gyration(kp, kq, w, **c), P.gyration(p, q, w, **c), "gyration")


# ---------------------------------------------------- 3. gyrogroup axioms

SPACES = ["poincare", "klein"]
PROPERTY_CURVATURES = [-1.0, -0.3, -4.0, -0.05, -20.0]
TOL = 1e-9  # in units of R (|x| <= 0.9 R keeps every identity well conditioned)


@st.composite
def ball_batches(draw, count: int, extra_vectors: int = 0):
    """``count`` arrays of n ball points (|x| <= 0.9 R) plus ``extra_vectors``
    arrays of arbitrary vectors (|v| <= 3 R), all of shape (n, d)."""
    curvature = draw(st.sampled_from(PROPERTY_CURVATURES))
    d = draw(st.sampled_from([1, 2, 3, 5, 16]))
    n = draw(st.integers(1, 6))
    R = _radius(curvature)
    raw = draw(
        hnp.arrays(
            np.float64,
            (count + extra_vectors, n, d),
            elements=st.floats(-1.0, 1.0, allow_subnormal=False),
        )
    )
    norms = np.linalg.norm(raw, axis=-1, keepdims=True)
    pts = 0.9 * R * raw / np.maximum(norms, 1.0)
    pts[count:] *= 3.0 / 0.9
    return curvature, [pts[i] for i in range(count + extra_vectors)]


def _safe_norm(x: np.ndarray) -> np.ndarray:
    """Row norms that neither underflow nor overflow."""
    m = np.max(np.abs(x), axis=-1)
    safe = np.where(m > 0, m, 1.0)
    return m * np.linalg.norm(x / safe[..., None], axis=-1)


def _assert_close(a, b, R, what):
    err = np.max(np.linalg.norm(np.asarray(a) - np.asarray(b), axis=-1)) if np.size(a) else 0.0
    assert err <= TOL * R, f"{what}: |difference| = {err / R:.3e} R"


@pytest.mark.parametrize("space", SPACES)
@HYPOTHESIS
@given(ball_batches(1))
def test_identity_and_inverse(space, batch):
    # Ungar (2005), gyrogroup axioms (G1), (G2): 0 ⊕ a = a, (⊖a) ⊕ a = 0, with
    # ⊖a = -a in both spaces; common practice: also the right-hand versions.
    curvature, (a,) = batch
    mod, R, c = getattr(gk, space), _radius(curvature), {"curvature": curvature}
    zero = np.zeros_like(a)
    _assert_close(mod.add(zero, a, **c), a, R, "0 ⊕ a = a")
    _assert_close(mod.add(a, zero, **c), a, R, "a ⊕ 0 = a")
    _assert_close(mod.add(-a, a, **c), zero, R, "(⊖a) ⊕ a = 0")
    _assert_close(mod.sub(a, a, **c), zero, R, "a ⊖ a = 0")


@pytest.mark.parametrize("space", SPACES)
@HYPOTHESIS
@given(ball_batches(3))
def test_left_and_right_gyroassociative_laws(space, batch):
    # Ungar (2005), (G3) left gyroassociative law a ⊕ (b ⊕ c) = (a ⊕ b) ⊕ gyr[a,b]c
    # and the right gyroassociative law (a ⊕ b) ⊕ c = a ⊕ (b ⊕ gyr[b,a]c).
    curvature, (a, b, cc) = batch
    mod, R, c = getattr(gk, space), _radius(curvature), {"curvature": curvature}
    lhs = mod.add(a, mod.add(b, cc, **c), **c)
    rhs = mod.add(mod.add(a, b, **c), mod.gyration(a, b, cc, **c), **c)
    _assert_close(lhs, rhs, R, "left gyroassociative law")
    lhs = mod.add(mod.add(a, b, **c), cc, **c)
    rhs = mod.add(a, mod.add(b, mod.gyration(b, a, cc, **c), **c), **c)
    _assert_close(lhs, rhs, R, "right gyroassociative law")


@pytest.mark.parametrize("space", SPACES)
@HYPOTHESIS
@given(ball_batches(4))
def test_gyration_is_an_automorphism(space, batch):
    # Ungar (2005), (G4): gyr[a,b](c ⊕ d) = gyr[a,b]c ⊕ gyr[a,b]d, and it
    # commutes with scalar multiplication (gyrovector space axiom (V6)).
    curvature, (a, b, cc, dd) = batch
    mod, R, c = getattr(gk, space), _radius(curvature), {"curvature": curvature}
    lhs = mod.gyration(a, b, mod.add(cc, dd, **c), **c)
    rhs = mod.add(mod.gyration(a, b, cc, **c), mod.gyration(a, b, dd, **c), **c)
    _assert_close(lhs, rhs, R, "gyr[a,b](c ⊕ d)")
    r = np.linspace(-3.0, 3.0, len(a))
    lhs = mod.gyration(a, b, mod.scale(r, cc, **c), **c)
    rhs = mod.scale(r, mod.gyration(a, b, cc, **c), **c)
    _assert_close(lhs, rhs, R, "gyr[a,b](r ⊗ c)")


@pytest.mark.parametrize("space", SPACES)
@HYPOTHESIS
@given(ball_batches(2, extra_vectors=1))
def test_loop_properties(space, batch):
    # Ungar (2005), (G5) left loop property gyr[a,b] = gyr[a ⊕ b, b]; and the
    # right loop property gyr[a,b] = gyr[a, b ⊕ a]. Checked on arbitrary
    # vectors w (gyrations act on all of R^d).
    curvature, (a, b, w) = batch
    mod, R, c = getattr(gk, space), _radius(curvature), {"curvature": curvature}
    g = mod.gyration(a, b, w, **c)
    _assert_close(g, mod.gyration(mod.add(a, b, **c), b, w, **c), R, "left loop property")
    _assert_close(g, mod.gyration(a, mod.add(b, a, **c), w, **c), R, "right loop property")


@pytest.mark.parametrize("space", SPACES)
@HYPOTHESIS
@given(ball_batches(2))
def test_gyrocommutative_law(space, batch):
    # Ungar (2005): a ⊕ b = gyr[a,b](b ⊕ a).
    curvature, (a, b) = batch
    mod, R, c = getattr(gk, space), _radius(curvature), {"curvature": curvature}
    _assert_close(mod.add(a, b, **c), mod.gyration(a, b, mod.add(b, a, **c), **c), R, "gyrocommutative law")


@pytest.mark.parametrize("space", SPACES)
@HYPOTHESIS
@given(ball_batches(2, extra_vectors=2))
def test_gyrations_are_linear_isometries(space, batch):
    # Ungar (2005): gyrations preserve inner products, <gyr u, gyr v> = <u, v>,
    # and gyr[b,a] is the inverse of gyr[a,b] (gyroinversion law); common
    # practice: a rotation is linear on all of R^d.
    curvature, (a, b, u, v) = batch
    mod, R, c = getattr(gk, space), _radius(curvature), {"curvature": curvature}
    gu = mod.gyration(a, b, u, **c)
    gv = mod.gyration(a, b, v, **c)
    lhs = np.sum(gu * gv, axis=-1)
    rhs = np.sum(u * v, axis=-1)
    # |u||v| without underflow (hypothesis likes 1e-290-sized coordinates);
    # 1e-320: products that land in the subnormal range are only accurate
    # to the absolute spacing of subnormals.
    scale = _safe_norm(u) * _safe_norm(v)
    assert np.all(np.abs(lhs - rhs) <= TOL * scale + 1e-320), "inner product not preserved"
    _assert_close(mod.gyration(b, a, gu, **c), u, R, "gyr[b,a] gyr[a,b] u = u")
    lin = mod.gyration(a, b, 2.5 * u - 0.75 * v, **c)
    _assert_close(lin, 2.5 * gu - 0.75 * gv, R, "linearity")


@HYPOTHESIS
@given(ball_batches(2))
def test_coaddition(batch):
    # Ungar (2005): a ⊞ b = a ⊕ gyr[a, ⊖b] b; ⊞ is commutative; and the
    # gyromidpoint is ½ ⊗ (a ⊞ b).
    curvature, (a, b) = batch
    P, R, c = gk.poincare, _radius(curvature), {"curvature": curvature}
    co = P.coadd(a, b, **c)
    _assert_close(co, P.add(a, P.gyration(a, -b, b, **c), **c), R, "a ⊞ b = a ⊕ gyr[a,⊖b]b")
    _assert_close(co, P.coadd(b, a, **c), R, "a ⊞ b = b ⊞ a")
    _assert_close(P.midpoint(a, b, **c), P.scale(0.5, co, **c), R, "midpoint = ½ ⊗ (a ⊞ b)")


@pytest.mark.parametrize("space", SPACES)
@HYPOTHESIS
@given(ball_batches(2))
def test_midpoint_is_the_gyromidpoint(space, batch):
    # Ungar (2005): the gyromidpoint of a and b is a ⊕ ½ ⊗ (⊖a ⊕ b) in both
    # spaces (for Einstein it has the closed form (γa a + γb b)/(γa + γb)),
    # and it is gyro-equidistant: |⊖m ⊕ a| = |⊖m ⊕ b|.
    curvature, (a, b) = batch
    mod, R, c = getattr(gk, space), _radius(curvature), {"curvature": curvature}
    m = mod.midpoint(a, b, **c)
    _assert_close(m, mod.add(a, mod.scale(0.5, mod.add(-a, b, **c), **c), **c), R, "a ⊕ ½⊗(⊖a ⊕ b)")
    da = np.linalg.norm(mod.add(-m, a, **c), axis=-1)
    db = np.linalg.norm(mod.add(-m, b, **c), axis=-1)
    assert np.all(np.abs(da - db) <= TOL * R), "midpoint not equidistant"


@pytest.mark.parametrize("space", SPACES)
@HYPOTHESIS
@given(ball_batches(1), st.floats(-3, 3), st.floats(-3, 3))
def test_scalar_distributive_and_associative_laws(space, batch, r1, r2):
    # Ungar (2005), gyrovector space axioms: (r1 + r2) ⊗ a = r1 ⊗ a ⊕ r2 ⊗ a
    # (scalar distributive law), (r1 r2) ⊗ a = r1 ⊗ (r2 ⊗ a) (scalar
    # associative law).
    curvature, (a,) = batch
    mod, R, c = getattr(gk, space), _radius(curvature), {"curvature": curvature}
    # |r1 + r2| <= 6 and |a| <= 0.9 R keep every r ⊗ a at least 4.5e-8 R
    # inside the sphere (tanh(6 artanh 0.9)), where the laws are well conditioned.
    _assert_close(
        mod.scale(r1 + r2, a, **c),
        mod.add(mod.scale(r1, a, **c), mod.scale(r2, a, **c), **c),
        R,
        "scalar distributive law",
    )
    r2 = r2 / 3.0
    _assert_close(mod.scale(r1 * r2, a, **c), mod.scale(r1, mod.scale(r2, a, **c), **c), R, "scalar associative law")
