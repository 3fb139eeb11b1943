"""Shared set-up of the Python test suite: the model lists, the point
samplers, the mpmath precision set-up and the hypothesis settings.

Test modules import what they use by name (``from conftest import MODELS,
ball_points``): pytest puts this directory on ``sys.path`` (rootdir-relative
"prepend" import mode, no ``__init__.py`` here), so ``conftest`` is one
module shared by every test file. The mpmath references stay in their own
modules (``mp_reference.py`` for the gyrovector algebra, ``mp_models.py`` for
the four models); the helpers of one topic split over several test files live
in ``*_support.py`` modules next to those files.

Hypothesis: one profile, ``gyrokit``, loaded for the whole suite. Its example
count comes from the environment variable GYROKIT_HYPOTHESIS_EXAMPLES
(default 100; CI sets 200), no deadline (the mpmath references are slow), and
the "too slow" / "data too large" health checks off (each example checks a
batch of points at once). The draws are derandomized (the same examples in
every run, so a CI result never depends on luck); GYROKIT_TEST_EXPLORE=1
draws fresh examples each run, for exploratory runs with a large example
count. A case found that way goes into the test as an ``@example``.
"""

from __future__ import annotations

import os

import mpmath
import numpy as np
import pytest
from hypothesis import HealthCheck, settings

import gyrokit as gk
import mp_models

# ------------------------------------------------------------------ hypothesis

HYPOTHESIS_EXAMPLES = int(os.environ.get("GYROKIT_HYPOTHESIS_EXAMPLES", "100"))

settings.register_profile(
    "gyrokit",
    max_examples=HYPOTHESIS_EXAMPLES,
    deadline=None,
    derandomize=os.environ.get("GYROKIT_TEST_EXPLORE") != "1",
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
)
settings.load_profile("gyrokit")

# ------------------------------------------------------------------ models

# The four models, in the order of the mpmath references (mp_models.MODELS):
# ("poincare", "klein", "hyperboloid", "halfspace"). Seeds of some tests are
# derived from MODELS.index(model): never reorder.
MODELS = mp_models.MODELS
MANIFOLD_MODELS = ("poincare", "klein", "hyperboloid")  # those with exp/log/transport/geodesic
BALLS = ("poincare", "klein")
MODULES = {
    "poincare": gk.poincare,
    "klein": gk.klein,
    "hyperboloid": gk.hyperboloid,
    "halfspace": gk.halfspace,
}
# the public element-wise distance of each model
DISTANCE = {model: MODULES[model].distance for model in MODELS}
CURVATURES = (-1.0, -0.3, -4.0)

EPS = float(np.finfo(np.float64).eps)


def radius(curvature: float) -> float:
    """R = 1/sqrt(-K): the radius of the ball models at curvature K."""
    return 1.0 / np.sqrt(-curvature)


def width(model: str, d: int) -> int:
    """Number of coordinates of a point of the d-dimensional ``model``."""
    return d + 1 if model == "hyperboloid" else d


def origin(model: str, d: int, curvature: float) -> np.ndarray:
    """The image of the Poincaré origin in ``model`` (API: origin <-> (R,0..0) <-> (0,..,0,R))."""
    R = radius(curvature)
    if model == "hyperboloid":
        return np.concatenate([[R], np.zeros(d)])
    if model == "halfspace":
        return np.concatenate([np.zeros(d - 1), [R]])
    return np.zeros(d)


def to_model(p, model: str, curvature: float = -1.0) -> np.ndarray:
    """Poincaré points ``p`` as points of ``model`` (a float64 copy for the Poincaré ball)."""
    if model == "poincare":
        return np.array(p, dtype=np.float64)
    return gk.convert(p, "poincare", model, curvature=curvature)


# ------------------------------------------------------------------ samplers


def unit_vectors(rng: np.random.Generator, n: int, d: int) -> np.ndarray:
    """n random directions in R^d (normalised Gaussian rows: uniform on the sphere)."""
    u = rng.standard_normal((n, d))
    return u / np.linalg.norm(u, axis=1, keepdims=True)


def ball_points(rng, n, d, rmax, *, rmin=0.0, curvature=-1.0, center=None):
    """Poincaré points at hyperbolic distance uniform in [rmin R, rmax R] from
    the origin (crowded against the sphere in the ball models) in random
    directions; with ``center``, moved there by the Möbius left translation
    ``center ⊕ p`` (an isometry)."""
    R = radius(curvature)
    u = unit_vectors(rng, n, d)
    p = R * np.tanh(rng.uniform(rmin, rmax, n) / 2)[:, None] * u
    if center is not None:
        p = gk.poincare.add(center, p, curvature=curvature)
    return p


def uniform_points(rng, n, d, model, rmax, *, curvature=-1.0):
    """``ball_points`` converted to ``model``."""
    return to_model(ball_points(rng, n, d, rmax, curvature=curvature), model, curvature)


def point_at(rho, d, axis=0, curvature=-1.0):
    """The Poincaré point at hyperbolic distance ``rho R`` from the origin on
    coordinate axis ``axis`` (handbook: |p| = R tanh(r / 2R))."""
    R = radius(curvature)
    p = np.zeros(d)
    p[axis] = R * np.tanh(rho / 2)
    return p


def rim_points(rng, lead, d, curvature=-1.0, min_gap=1e-15):
    """Ball points of leading shape ``lead`` with 1 - |x|/R log-uniform in
    [min_gap, 1]: many within 1e-15..1e-10 of the sphere, where
    cancellation-prone formulas produce NaN/inf."""
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


# ------------------------------------------------------------------ mpmath

# Every reference value is computed at an explicit working precision, in a
# ``with mpmath.workdps(...)`` block or under this decorator: 50 significant
# digits, the precision the numerical contract is measured against.
MP50 = mpmath.workdps(50)


def mp_distance(model, a, b, curvature, dps=50):
    """Textbook closed form of the model's distance, evaluated in mpmath at
    ``dps`` significant digits on the exact float64 inputs a, b (one pair of
    rows); an mpf. Formulas (handbook; Cannon, Floyd, Kenyon, Parry,
    "Hyperbolic geometry", 1997, and Ratcliffe, "Foundations of hyperbolic
    manifolds"), with R^2 = -1/K:
    Poincaré cosh(d/R) = 1 + 2 R^2 |a-b|^2 / ((R^2-|a|^2)(R^2-|b|^2));
    Klein cosh(d/R) = (R^2 - a.b) / sqrt((R^2-|a|^2)(R^2-|b|^2));
    hyperboloid cosh(d/R) = (a0 b0 - a_s.b_s) / R^2;
    half-space cosh(d/R) = 1 + |a-b|^2 / (2 a_d b_d)."""
    with mpmath.workdps(dps):
        K = mpmath.mpf(float(curvature))
        R2 = -1 / K
        R = mpmath.sqrt(R2)
        a = [mpmath.mpf(float(v)) for v in a]
        b = [mpmath.mpf(float(v)) for v in b]
        dot = lambda u, v: mpmath.fsum(p * q for p, q in zip(u, v))  # noqa: E731
        if model == "poincare":
            diff = [p - q for p, q in zip(a, b)]
            arg = 1 + 2 * R2 * dot(diff, diff) / ((R2 - dot(a, a)) * (R2 - dot(b, b)))
        elif model == "klein":
            arg = (R2 - dot(a, b)) / mpmath.sqrt((R2 - dot(a, a)) * (R2 - dot(b, b)))
        elif model == "hyperboloid":
            # the point is read through its spatial part, x0 recomputed
            # (x0 = sqrt(R^2 + |x_s|^2), the documented convention)
            sa, sb = a[1:], b[1:]
            a0 = mpmath.sqrt(R2 + dot(sa, sa))
            b0 = mpmath.sqrt(R2 + dot(sb, sb))
            arg = (a0 * b0 - dot(sa, sb)) / R2
        elif model == "halfspace":
            diff = [p - q for p, q in zip(a, b)]
            arg = 1 + dot(diff, diff) / (2 * a[-1] * b[-1])
        else:
            raise AssertionError(model)
        return R * mpmath.acosh(arg)


@pytest.fixture(autouse=True)
def _mpmath_precision_restored():
    """No test leaks a changed global mpmath precision into the next one."""
    prec = mpmath.mp.prec
    yield
    mpmath.mp.prec = prec


@pytest.fixture(scope="session")
def client():
    """A distributed.LocalCluster of two worker processes (2 GiB each), shared
    by the gyrokit.dask tests and closed at the end of the session."""
    distributed = pytest.importorskip("distributed")
    cluster = distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None, memory_limit="2GiB"
    )
    c = distributed.Client(cluster)
    yield c
    c.close()
    cluster.close()


def die_once(marker: str):
    """A ``map_blocks`` function that kills the first worker process to run it
    (``os._exit``; the marker file records that one died) and passes every
    block through unchanged: dask then reschedules the lost tasks on a
    restarted worker (the gyrokit.dask tests of a worker dying mid-run)."""
    import os

    here = os.getpid()

    def f(block):
        if os.getpid() != here and block.size and not os.path.exists(marker):
            open(marker, "w").close()
            os._exit(1)
        return block

    return f
