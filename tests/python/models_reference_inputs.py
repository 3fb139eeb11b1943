"""Input generators of the model accuracy tests
(tests/python/test_models_reference*.py): points at a given gap from the
sphere or hyperbolic radius in each model, perturbed (close) pairs, pairs
far apart, and tangent vectors of a given Riemannian length (built through
the mpmath references of mp_models.py), with the constants of the contract
(curvatures, dimensions, rows per case, the 1e-12 bound)."""

from __future__ import annotations

import math

from mpmath import mp, mpf
import mpmath
import numpy as np

import mp_models as M
from conftest import radius


KS = (-1.0, -0.3, -4.0)
DS = (1, 2, 3, 8)
# rows per (function, case kind, K, d); 12 (K, d) combinations per case.
# Fixed (not an environment knob): the strict xfails below were measured on
# exactly these rows.
ROWS = 4
TOL = 1e-12
ZERO_ABS = 1e-15  # times R, where the reference is exactly zero
EDGE_GAPS = (1e-3, 1e-9, 1e-12, 1e-15)
EDGE_KINDS = tuple(f"edge{g:.0e}".replace("e-0", "e-") for g in EDGE_GAPS)
GAP_OF = dict(zip(EDGE_KINDS, EDGE_GAPS))
# a ball point must lie at least this far (relative to R) inside the sphere
# to be held in float64 with room to spare: the spacing of float64 near R is
# 1.1e-16 R (2.2e-16 just above), and the library rounds or rejects below.
REPRESENTABLE_GAP = 4e-16
TABLE_PATH = "/tmp/model_accuracy_table.txt"


# ====================================================== input generators


def unit(rng, d: int) -> np.ndarray:
    while True:
        u = rng.standard_normal(d)
        n = np.linalg.norm(u)
        if n > 1e-3:
            return u / n


def mp_gap(x, curvature: float) -> float:
    """``1 - |x|/R`` of a ball point (or of an mpf vector), at 60 digits."""
    with mp.workdps(60):
        return float(1 - mpmath.sqrt(M.kappa_of(curvature) * M.sq(M.to_mp(x))))


def ball_point(rng, d, curvature, *, gap=None, rho=None, model="poincare", u=None):
    """A Poincaré/Klein point at ``1 - |x|/R = gap`` or hyperbolic radius ``rho R``."""
    big_r = radius(curvature)
    u = unit(rng, d) if u is None else u
    if gap is None:
        r = big_r * (math.tanh(rho / 2) if model == "poincare" else math.tanh(rho))
    else:
        r = big_r * (1.0 - gap)
    x = u * r
    # generator guard (not a library check): the float64 point is strictly inside
    assert mp_gap(x, curvature) > 0, "generator produced a point outside the ball"
    return x


def hyperboloid_point(rng, d, curvature, *, rho, u=None):
    """``x_s = R sinh(rho) u``, ``x0 = R sqrt(1 + |x_s|^2/R^2)`` (float64)."""
    big_r = radius(curvature)
    u = unit(rng, d) if u is None else u
    xs = big_r * math.sinh(rho) * u
    x0 = big_r * math.sqrt(1.0 + float(xs @ xs) / big_r ** 2)
    return np.concatenate([[x0], xs])


def rho_of_gap(gap: float) -> float:
    """Hyperbolic radius (in R) of a Poincaré point with ``1 - |p|/R = gap``."""
    return math.log((2.0 - gap) / gap)


def to_float(v) -> np.ndarray:
    return np.array([float(c) for c in v])


def model_point(model, rng, d, curvature, *, gap=None, rho=None, u=None):
    """A point of ``model``: ``gap`` is the Poincaré/Klein gap (hyperboloid and
    half-space: at the hyperbolic radius of a Poincaré point with that gap)."""
    if model in ("poincare", "klein"):
        return ball_point(rng, d, curvature, gap=gap, rho=rho, model=model, u=u)
    if rho is None:
        rho = rho_of_gap(gap)
    if model == "hyperboloid":
        return hyperboloid_point(rng, d, curvature, rho=rho, u=u)
    # the half-space image of a Poincaré point (the edge point itself for a gap)
    p = ball_point(rng, d, curvature, gap=gap, rho=None if gap is not None else rho,
                   model="poincare", u=u)
    x = to_float(M.convert(p, "poincare", "halfspace", curvature=curvature))
    assert x[-1] > 0
    return x


def perturbed(model, x, rng, curvature, eps=1e-12):
    """``x + eps |x| w`` (on the spatial part for the hyperboloid)."""
    if model == "hyperboloid":
        xs = x[1:]
        ys = xs + eps * np.linalg.norm(xs) * unit(rng, len(xs))
        big_r = radius(curvature)
        return np.concatenate([[big_r * math.sqrt(1.0 + float(ys @ ys) / big_r ** 2)], ys])
    for _ in range(20):
        y = x + eps * np.linalg.norm(x) * unit(rng, len(x))
        if model == "halfspace" and y[-1] > 0:
            return y
        if model != "halfspace" and mp_gap(y, curvature) > 0:
            return y
    raise AssertionError("generator could not perturb inside the model")


def random_rho(rng) -> float:
    return float(rng.uniform(0.0, 4.0))


def point_pair(model, kind, rng, d, curvature):
    """(x, y) for a pair kind."""
    if kind == "random":
        return (model_point(model, rng, d, curvature, rho=random_rho(rng)),
                model_point(model, rng, d, curvature, rho=random_rho(rng)))
    if kind in GAP_OF:
        g = GAP_OF[kind]
        return (model_point(model, rng, d, curvature, gap=g),
                model_point(model, rng, d, curvature, gap=g))
    if kind == "close1e-12":
        # base anywhere from the origin region out to 1e-9 of the sphere
        x = model_point(model, rng, d, curvature, gap=10.0 ** rng.uniform(-9, -0.5))
        return x, perturbed(model, x, rng, curvature)
    if kind == "far30":
        u = unit(rng, d)
        w = -u if d == 1 else -u + 0.3 * unit(rng, d)
        w = w / np.linalg.norm(w)
        return (model_point(model, rng, d, curvature, rho=rng.uniform(13, 15), u=u),
                model_point(model, rng, d, curvature, rho=rng.uniform(13, 15), u=w))
    raise ValueError(kind)


def single_point(model, kind, rng, d, curvature):
    if kind == "random":
        return model_point(model, rng, d, curvature, rho=random_rho(rng))
    return model_point(model, rng, d, curvature, gap=GAP_OF[kind])


# ------------------------------------------------------ tangent vectors


def poincare_tangent(rng, p, length, curvature):
    """Ambient vector at Poincaré point ``p`` of Riemannian length ``length * R``."""
    big_r = radius(curvature)
    lam = float(M.poincare_riemannian_norm(unit(rng, len(p)), p, curvature=curvature))
    return unit(rng, len(p)) * (length * big_r / lam)


def klein_tangent(rng, x, length, curvature):
    """Klein tangent at ``x`` of Riemannian length ``length * R`` (random direction)."""
    with mp.workdps(60):
        k = M.kappa_of(curvature)
        p = M._k2p(M.to_mp(x), k)
        w = M.to_mp(unit(rng, len(x)))
        w = M.smul(length / (mpmath.sqrt(k) * M._lambda(p, k) * M.norm(w)), w)
        return to_float(M._dp2k(p, w, k))


def hyperboloid_tangent(rng, x, length, curvature):
    """Tangent at hyperboloid point ``x`` (read through x_s) of Minkowski length
    ``length * R``; ``v0`` is filled in (float64) from tangency."""
    with mp.workdps(60):
        k = M.kappa_of(curvature)
        xp = M._h_lift(M.to_mp(x[1:]), k)
        vs = M.to_mp(unit(rng, len(x) - 1))
        t = M._h_tangent([mpf(0)] + vs, xp)
        n = mpmath.sqrt(M._minkowski(t, t))
        vs = [c * length / (mpmath.sqrt(k) * n) for c in vs]
    vs = to_float(vs)
    v0 = float(x[1:] @ vs) / x[0]
    return np.concatenate([[v0], vs])


def model_tangent(model, rng, x, length, curvature):
    if model == "poincare":
        return poincare_tangent(rng, x, length, curvature)
    if model == "klein":
        return klein_tangent(rng, x, length, curvature)
    return hyperboloid_tangent(rng, x, length, curvature)
