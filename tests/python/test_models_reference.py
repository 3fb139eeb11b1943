"""Accuracy of the model-level functions against 50-digit mpmath references.

Contract under test: every function's float64 result agrees with the SAME
textbook formula evaluated in mpmath (``mp_models``, >= 50 significant
digits; see ``mp_models.converged``) on the SAME float64 inputs, to relative
error <= 1e-12 (normwise ``|got - ref|/|ref|`` for vector results; absolute
1e-15 R where the reference is exactly zero), for K in {-1, -0.3, -4} and
d in {1, 2, 3, 8}, on random inputs and on hard cases:

``edge<g>``      points with ``1 - |x|/R = g`` (Poincaré, Klein), at the same
                 hyperbolic radius ``2 artanh(1 - g)`` (hyperboloid), or the
                 half-space images of the Poincaré ones;
``close1e-12``   pairs ``y = x + 1e-12 |x| w`` (relative perturbation);
                 for exp_map a tangent of length 1e-12 R; for matvec
                 ``|x| = 1e-12 R``;
``far30``        pairs up to hyperbolic distance 30 R (points at radius
                 13..15 R on nearly opposite sides); for exp_map the tangent
                 ``log_x(y)`` of such a pair; for matvec a stretching matrix;
``origin``       exp_map / log_map with ``base=None``;
``extrapolate``  geodesic with t in [-1, 2];
``outside``      project of points outside the ball.

Every test also evaluates the naive float64 textbook formula (NumPy) on the
same inputs; its errors go into the accuracy table (printed with ``-s`` and
written to /tmp/model_accuracy_table.txt) and are asserted only in
``test_textbook_is_worse_on_some_hard_case``.

Rows whose exact result cannot be held in float64 (a ball point within
~1e-16 R of the sphere) are skipped and counted: the library rounds them onto
the sphere or raises, by its documented contract.
"""

from __future__ import annotations

import functools
import math
import os
from dataclasses import dataclass, field
from typing import Callable, Dict, List, Optional, Tuple

import numpy as np
import pytest
from mpmath import mp, mpf
import mpmath

import gyrokit as gk
import mp_models as M

hypothesis = pytest.importorskip("hypothesis")
from hypothesis import given, settings, strategies as st  # noqa: E402

KS = (-1.0, -0.3, -4.0)
DS = (1, 2, 3, 8)
# rows per (function, case kind, K, d); 12 (K, d) combinations per case.
# Fixed (not an environment knob): the strict xfails below were measured on
# exactly these rows.
ROWS = 4
HYP_EXAMPLES = int(os.environ.get("GYROKIT_HYPOTHESIS_EXAMPLES", "100"))
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


def radius(curvature: float) -> float:
    return 1.0 / math.sqrt(-curvature)


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


def origin(model, d, curvature):
    if model == "hyperboloid":
        return np.concatenate([[radius(curvature)], np.zeros(d)])
    return np.zeros(d)


# ====================================================== textbook float64


def _dot(a, b):
    return np.sum(a * b, axis=-1, keepdims=True)


def tb_mobius_add(x, y, k):
    xy, xx, yy = _dot(x, y), _dot(x, x), _dot(y, y)
    return ((1 + 2 * k * xy + k * yy) * x + (1 - k * xx) * y) / (1 + 2 * k * xy + k * k * xx * yy)


def tb_mobius_scale(r, x, k):
    n = np.sqrt(_dot(x, x))
    sk = np.sqrt(k)
    return np.tanh(r * np.arctanh(sk * n)) * x / (sk * n)


def tb_lambda(x, k):
    return 2 / (1 - k * _dot(x, x))


def tb_gyration(a, b, w, k):
    # common practice: the closed form of the Möbius gyration in float64
    # (from memory; the same closed form as mp_models.mobius_gyration_closed).
    ab, aw, bw, aa, bb = _dot(a, b), _dot(a, w), _dot(b, w), _dot(a, a), _dot(b, b)
    big_a = -k * aw * bb + bw + 2 * k * ab * bw
    big_b = -k * bw * aa - aw
    return w + 2 * k * (big_a * a + big_b * b) / (1 + 2 * k * ab + k * k * aa * bb)


def tb_p_distance(x, y, k):
    arg = 1 + 2 * k * _dot(x - y, x - y) / ((1 - k * _dot(x, x)) * (1 - k * _dot(y, y)))
    return (np.arccosh(arg) / np.sqrt(k))[..., 0]


def tb_p_exp(v, x, k):
    n = np.sqrt(_dot(v, v))
    sk = np.sqrt(k)
    return tb_mobius_add(x, np.tanh(sk * tb_lambda(x, k) * n / 2) * v / (sk * n), k)


def tb_p_log(y, x, k):
    u = tb_mobius_add(-x, y, k)
    n = np.sqrt(_dot(u, u))
    sk = np.sqrt(k)
    return 2 / (sk * tb_lambda(x, k)) * np.arctanh(sk * n) * u / n


def tb_p_transport(v, s, e, k):
    return tb_lambda(s, k) / tb_lambda(e, k) * tb_gyration(e, -s, v, k)


def tb_p_geodesic(x, y, t, k):
    return tb_mobius_add(x, tb_mobius_scale(t[:, None], tb_mobius_add(-x, y, k), k), k)


def tb_project(x, margin, k):
    n = np.sqrt(_dot(x, x))
    lim = (1 - margin) / np.sqrt(k)
    return np.where(n > lim, x * (lim / n), x)


def tb_matvec(m, x, k):
    mx = x @ m.T
    nx, nmx = np.sqrt(_dot(x, x)), np.sqrt(_dot(mx, mx))
    sk = np.sqrt(k)
    return np.tanh(nmx / nx * np.arctanh(sk * nx)) * mx / (sk * nmx)


def tb_k2p(x, k):
    return x / (1 + np.sqrt(1 - k * _dot(x, x)))


def tb_p2k(p, k):
    return 2 * p / (1 + k * _dot(p, p))


def tb_dk2p(x, v, k):
    s = np.sqrt(1 - k * _dot(x, x))
    return v / (1 + s) + k * _dot(x, v) * x / (s * (1 + s) ** 2)


def tb_dp2k(p, w, k):
    q = 1 + k * _dot(p, p)
    return 2 * w / q - 4 * k * _dot(p, w) * p / q ** 2


def tb_k_distance(x, y, k):
    arg = (1 - k * _dot(x, y)) / np.sqrt((1 - k * _dot(x, x)) * (1 - k * _dot(y, y)))
    return (np.arccosh(arg) / np.sqrt(k))[..., 0]


def tb_k_exp(v, x, k):
    p = tb_k2p(x, k)
    return tb_p2k(tb_p_exp(tb_dk2p(x, v, k), p, k), k)


def tb_k_log(y, x, k):
    p, q = tb_k2p(x, k), tb_k2p(y, k)
    return tb_dp2k(p, tb_p_log(q, p, k), k)


def tb_k_transport(v, s, e, k):
    ps, pe = tb_k2p(s, k), tb_k2p(e, k)
    return tb_dp2k(pe, tb_p_transport(tb_dk2p(s, v, k), ps, pe, k), k)


def tb_k_geodesic(x, y, t, k):
    return tb_p2k(tb_p_geodesic(tb_k2p(x, k), tb_k2p(y, k), t, k), k)


def tb_mink(u, v):
    return -u[..., :1] * v[..., :1] + _dot(u[..., 1:], v[..., 1:])


def tb_h_distance(x, y, k):
    return (np.arccosh(-k * tb_mink(x, y)) / np.sqrt(k))[..., 0]


def tb_h_exp(v, x, k):
    n = np.sqrt(tb_mink(v, v))
    sk = np.sqrt(k)
    return np.cosh(sk * n) * x + np.sinh(sk * n) / (sk * n) * v


def tb_h_log(y, x, k):
    w = y + k * tb_mink(x, y) * x
    return tb_h_distance(x, y, k)[:, None] * w / np.sqrt(tb_mink(w, w))


def tb_h_transport(v, s, e, k):
    return v + tb_mink(e, v) / (1 / k - tb_mink(s, e)) * (s + e)


def tb_h_geodesic(x, y, t, k):
    big_d = (tb_h_distance(x, y, k) * np.sqrt(k))[:, None]
    t = t[:, None]
    return (np.sinh((1 - t) * big_d) * x + np.sinh(t * big_d) * y) / np.sinh(big_d)


def tb_h_project(x, k):
    return np.concatenate([np.sqrt(1 / k + _dot(x[:, 1:], x[:, 1:])), x[:, 1:]], axis=1)


def tb_u_distance(x, y, k):
    arg = 1 + _dot(x - y, x - y) / (2 * x[:, -1:] * y[:, -1:])
    return (np.arccosh(arg) / np.sqrt(k))[..., 0]


def tb_convert(x, src, dst, k):
    big_r = 1 / np.sqrt(k)
    sk = np.sqrt(k)

    def p2u(p):
        z = sk * p
        z[:, -1] += 1
        y = 2 * z / _dot(z, z)
        y[:, -1] -= 1
        return y / sk

    if src == "poincare":
        p = x
    elif src == "klein":
        p = tb_k2p(x, k)
    elif src == "hyperboloid":
        p = x[:, 1:] / (1 + x[:, :1] / big_r)
    else:
        p = p2u(x.copy())
    if dst == "poincare":
        return p
    if dst == "klein":
        return tb_p2k(p, k)
    if dst == "hyperboloid":
        pp = _dot(p, p)
        g = 1 - k * pp
        return np.concatenate([big_r * (1 + k * pp) / g, 2 * p / g], axis=1)
    return p2u(p.copy())


# ====================================================== the function table


@dataclass
class Batch:
    """Rows of float64 arguments; ``args[i]`` is an (n, ...) array or None."""

    args: Tuple[Optional[np.ndarray], ...]
    extra: Dict[str, object] = field(default_factory=dict)

    def row(self, i):
        return tuple(None if a is None else a[i] for a in self.args)


@dataclass
class Func:
    name: str
    model: str               # model of the result (representability filter)
    kinds: Tuple[str, ...]
    sample: Callable         # (kind, rng, K, d) -> tuple of row arguments (None = base None)
    lib: Callable            # (Batch, K) -> ndarray
    ref: Callable            # (row args, extra, K) -> mpf or list of mpf
    textbook: Callable       # (Batch, K) -> ndarray
    extra: Callable = None   # (rng, K, d, kind) -> dict shared by a batch (m, margin)


PAIR_KINDS = ("random",) + EDGE_KINDS + ("close1e-12", "far30")
POINT_KINDS = ("random",) + EDGE_KINDS


def _kappa(K):
    return -K


def _make_distance(model, lib_fn, ref_fn, tb_fn):
    return Func(
        f"{model}.distance", "scalar", PAIR_KINDS,
        sample=lambda kind, rng, K, d: point_pair(model, kind, rng, d, K),
        lib=lambda b, K: lib_fn(b.args[0], b.args[1], curvature=K),
        ref=lambda r, e, K: M.converged(ref_fn, r[0], r[1], curvature=K),
        textbook=lambda b, K: tb_fn(b.args[0], b.args[1], _kappa(K)),
    )


def _exp_sample(model):
    def sample(kind, rng, K, d):
        if kind == "origin":
            x = origin(model, d, K)
            length = rng.uniform(0.1, 15.0)  # Klein: exp_0 of 15 R is still representable
        elif kind == "random":
            x = model_point(model, rng, d, K, rho=random_rho(rng))
            length = rng.uniform(0.1, 3.0)
        elif kind in GAP_OF:
            x = model_point(model, rng, d, K, gap=GAP_OF[kind])
            length = 10.0 ** rng.uniform(-6, 0.3)
        elif kind == "close1e-12":
            x = model_point(model, rng, d, K, rho=random_rho(rng))
            length = 1e-12
        elif kind == "far30":
            # the tangent from x to a point up to 30 R away (far30 pair), so the
            # result is representable in every model (a Klein point farther
            # than ~18.7 R from the origin is not)
            x, y = point_pair(model, kind, rng, d, K)
            ref_log = getattr(M, f"{model}_log_map")
            return to_float(M.converged(ref_log, y, x, curvature=K)), x
        else:
            raise ValueError(kind)
        v = model_tangent(model, rng, x, length, K)
        return v, (None if kind == "origin" else x)
    return sample


def _log_sample(model):
    def sample(kind, rng, K, d):
        if kind == "origin":
            y = model_point(model, rng, d, K, gap=10.0 ** rng.uniform(-15, -0.5))
            return y, None
        x, y = point_pair(model, kind, rng, d, K)
        return y, x
    return sample


def _transport_sample(model):
    def sample(kind, rng, K, d):
        s, e = point_pair(model, kind, rng, d, K)
        v = model_tangent(model, rng, s, rng.uniform(0.1, 3.0), K)
        return v, s, e
    return sample


def _geodesic_sample(model):
    def sample(kind, rng, K, d):
        if kind == "extrapolate":
            x, y = point_pair(model, "random", rng, d, K)
            return x, y, np.float64(rng.uniform(-1.0, 2.0))
        x, y = point_pair(model, kind, rng, d, K)
        return x, y, np.float64(rng.uniform(0.0, 1.0))
    return sample


def _ref_base(ref_fn):
    # base=None rows keep None for the reference too (the mpmath origin)
    return lambda r, e, K: M.converged(ref_fn, r[0], r[1], curvature=K)


def _tb_base(model, tb_fn):
    def call(b, K):
        v, x = b.args
        if x is None:
            x = np.broadcast_to(origin(model, v.shape[1] - (model == "hyperboloid"), K), v.shape)
        return tb_fn(v, x, _kappa(K))
    return call


def _matvec_extra(rng, K, d, kind):
    d_out = (1, d, d + 2)[int(rng.integers(0, 3))]
    m = rng.standard_normal((d_out, d))
    if kind == "far30":
        m *= 8.0 / np.linalg.norm(m, 2)  # stretches |x| into ~ 8x the hyperbolic radius
    elif kind in GAP_OF:
        # a contraction, so that M ⊗ x (hyperbolic radius |Mx|/|x| times that of
        # x) stays representable in float64
        m *= rng.uniform(0.3, 1.0) / np.linalg.norm(m, 2)
    return {"m": m}


def _matvec_sample(kind, rng, K, d):
    if kind == "close1e-12":
        return (unit(rng, d) * 1e-12 * radius(K),)
    if kind == "far30":
        return (model_point("poincare", rng, d, K, rho=rng.uniform(1.0, 3.5)),)
    return (single_point("poincare", kind, rng, d, K),)


PROJECT_MARGINS = (1e-12, 1e-6)


def _project_extra(rng, K, d, kind):
    return {"margin": PROJECT_MARGINS[int(rng.integers(0, 2))]}


def _project_sample(model):
    def sample(kind, rng, K, d):
        if kind == "outside":
            return (unit(rng, d) * radius(K) * rng.uniform(1.0 + 1e-9, 3.0),)
        return (single_point(model, kind, rng, d, K),)
    return sample


def _h_project_sample(kind, rng, K, d):
    x = single_point("hyperboloid", kind, rng, d, K)
    x = x.copy()
    x[0] *= 1.0 + 1e-8 * rng.uniform(-1, 1)  # drifted x0 (within the 1e-6 read tolerance)
    return (x,)


def _inner_sample(kind, rng, K, d):
    return point_pair("hyperboloid", kind, rng, d, K)


def _convert_sample(src, dst):
    def sample(kind, rng, K, d):
        if kind in GAP_OF and "klein" in (src, dst) and src != "klein":
            # Klein points lie much closer to the sphere than Poincaré points
            # at the same hyperbolic radius: the edge kinds are Klein gaps
            # (points at hyperbolic radius artanh(1 - g) R).
            g = GAP_OF[kind]
            return (model_point(src, rng, d, K, rho=math.atanh(1.0 - g)),)
        return (single_point(src, kind, rng, d, K),)
    return sample


def _convert_func(src, dst):
    return Func(
        f"convert {src}->{dst}", dst, POINT_KINDS,
        sample=_convert_sample(src, dst),
        lib=lambda b, K: gk.convert(b.args[0], src, dst, curvature=K),
        ref=lambda r, e, K: M.converged(M.convert, r[0], src, dst, curvature=K),
        textbook=lambda b, K: tb_convert(b.args[0], src, dst, _kappa(K)),
    )


def _model_funcs(model, mod, tb):
    out = []
    out.append(Func(
        f"{model}.exp_map", model, ("origin",) + PAIR_KINDS,
        sample=_exp_sample(model),
        lib=lambda b, K: mod.exp_map(b.args[0], b.args[1], curvature=K),
        ref=_ref_base(getattr(M, f"{model}_exp_map")),
        textbook=_tb_base(model, tb["exp"]),
    ))
    out.append(Func(
        f"{model}.log_map", "tangent", ("origin",) + PAIR_KINDS,
        sample=_log_sample(model),
        lib=lambda b, K: mod.log_map(b.args[0], b.args[1], curvature=K),
        ref=_ref_base(getattr(M, f"{model}_log_map")),
        textbook=_tb_base(model, tb["log"]),
    ))
    out.append(Func(
        f"{model}.transport", "tangent", PAIR_KINDS,
        sample=_transport_sample(model),
        lib=lambda b, K: mod.transport(*b.args, curvature=K),
        ref=lambda r, e, K, f=getattr(M, f"{model}_transport"): M.converged(f, *r, curvature=K),
        textbook=lambda b, K: tb["transport"](*b.args, _kappa(K)),
    ))
    out.append(Func(
        f"{model}.geodesic", model, PAIR_KINDS + ("extrapolate",),
        sample=_geodesic_sample(model),
        lib=lambda b, K: mod.geodesic(*b.args, curvature=K),
        ref=lambda r, e, K, f=getattr(M, f"{model}_geodesic"): M.converged(f, *r, curvature=K),
        textbook=lambda b, K: tb["geodesic"](*b.args, _kappa(K)),
    ))
    return out


FUNCS: List[Func] = []
FUNCS.append(_make_distance("poincare", gk.poincare.distance, M.poincare_distance, tb_p_distance))
FUNCS += _model_funcs("poincare", gk.poincare, {
    "exp": tb_p_exp, "log": tb_p_log, "transport": tb_p_transport, "geodesic": tb_p_geodesic})
FUNCS.append(Func(
    "poincare.project", "poincare", POINT_KINDS + ("outside",),
    sample=_project_sample("poincare"),
    lib=lambda b, K: gk.poincare.project(b.args[0], b.extra["margin"], curvature=K),
    ref=lambda r, e, K: M.poincare_project(r[0], e["margin"], curvature=K),
    textbook=lambda b, K: tb_project(b.args[0], b.extra["margin"], _kappa(K)),
    extra=_project_extra,
))
FUNCS.append(Func(
    "poincare.matvec", "poincare", POINT_KINDS + ("close1e-12", "far30"),
    sample=_matvec_sample,
    lib=lambda b, K: gk.poincare.matvec(b.extra["m"], b.args[0], curvature=K),
    ref=lambda r, e, K: M.converged(M.poincare_matvec, e["m"], r[0], curvature=K),
    textbook=lambda b, K: tb_matvec(b.extra["m"], b.args[0], _kappa(K)),
    extra=_matvec_extra,
))
FUNCS.append(_make_distance("klein", gk.klein.distance, M.klein_distance, tb_k_distance))
FUNCS += _model_funcs("klein", gk.klein, {
    "exp": tb_k_exp, "log": tb_k_log, "transport": tb_k_transport, "geodesic": tb_k_geodesic})
FUNCS.append(Func(
    "klein.project", "klein", POINT_KINDS + ("outside",),
    sample=_project_sample("klein"),
    lib=lambda b, K: gk.klein.project(b.args[0], b.extra["margin"], curvature=K),
    ref=lambda r, e, K: M.klein_project(r[0], e["margin"], curvature=K),
    textbook=lambda b, K: tb_project(b.args[0], b.extra["margin"], _kappa(K)),
    extra=_project_extra,
))
FUNCS.append(_make_distance("hyperboloid", gk.hyperboloid.distance, M.hyperboloid_distance,
                            tb_h_distance))
FUNCS += _model_funcs("hyperboloid", gk.hyperboloid, {
    "exp": tb_h_exp, "log": tb_h_log, "transport": tb_h_transport, "geodesic": tb_h_geodesic})
FUNCS.append(Func(
    "hyperboloid.project", "hyperboloid", POINT_KINDS,
    sample=_h_project_sample,
    lib=lambda b, K: gk.hyperboloid.project(b.args[0], curvature=K),
    ref=lambda r, e, K: M.hyperboloid_project(r[0], curvature=K),
    textbook=lambda b, K: tb_h_project(b.args[0], _kappa(K)),
))
FUNCS.append(Func(
    "hyperboloid.inner", "scalar", PAIR_KINDS,
    sample=_inner_sample,
    lib=lambda b, K: gk.hyperboloid.inner(b.args[0], b.args[1]),
    ref=lambda r, e, K: M.hyperboloid_inner(r[0], r[1]),
    textbook=lambda b, K: tb_mink(b.args[0], b.args[1])[..., 0],
))
FUNCS.append(_make_distance("halfspace", gk.halfspace.distance, M.halfspace_distance,
                            tb_u_distance))
FUNCS += [_convert_func(s, t) for s in M.MODELS for t in M.MODELS if s != t]

FUNC_BY_NAME = {f.name: f for f in FUNCS}

# Cases where the library misses the contract: (function, kind) -> measured
# worst error at the rows generated here (ROWS = 4). Marked
# xfail(strict=True), the bound is never loosened. Each reference was
# confirmed by a second, independent mpmath route (test_reference_routes_agree
# below: the same operation on the hyperboloid) to ~1e-80.
# "sens" is the largest relative change of the exact result when the float64
# inputs are moved by one ulp: where the library error is far above it (ratio
# >> 1) the case is well-conditioned and the library is plainly wrong; where it
# is far below, the case is ill-conditioned and the library gets more digits
# than the inputs warrant, yet still fewer than the contract promises.
# Geodesics: fixed by the closed-form hyperboloid weights (measured before:
# up to 4.3e-1 Poincaré, 1.8e-1 Klein, 3.6e14 hyperboloid on these cases).
KNOWN_DEFECTS: Dict[Tuple[str, str], str] = {
    # Fixed, with the error measured before the fix:
    # ("poincare.exp_map", "far30"): ideal-endpoint form (was 3.4e-10).
    # ("klein.exp_map", "far30"): Klein chord form (was 7.0e-4, results outside the ball).
    # ("klein.transport", edge/close/far30): through the Poincaré ball (was up to 6.1e-9).
    # ("hyperboloid.exp_map", "far30"): ideal endpoint from the Klein chord (was 6.4e-4).
}


# ====================================================== evaluation


@dataclass
class Outcome:
    worst: float = 0.0            # gyrokit, relative error as defined in the contract
    worst_row: object = None      # (K, d, row args) of the worst gyrokit row
    textbook: float = 0.0         # naive float64 textbook, same inputs
    rows: int = 0
    skipped: int = 0              # exact result not representable in float64
    failures: List[str] = field(default_factory=list)


def _representable(func: Func, ref, K) -> bool:
    if func.model in ("poincare", "klein"):
        # a ball point within ~1e-16 R of the sphere cannot be held in float64
        # (it rounds onto the sphere; the library rounds or raises): skipped.
        return mp_gap(ref, K) >= REPRESENTABLE_GAP
    if func.model == "hyperboloid":
        return max(abs(float(c)) for c in ref) < 1e300
    return True


def _row_error(got, ref, K) -> float:
    """The contract's error: relative (normwise); where the reference is
    exactly zero, the absolute error measured so that the same TOL bound
    means ``ZERO_ABS * R`` absolute."""
    if M.value_norm(ref) == 0:
        return M.error(got, ref, floor=ZERO_ABS / TOL * radius(K))
    return M.error(got, ref)


def _fmt_row(args):
    def f(a):
        if a is None:
            return "None"
        if isinstance(a, np.ndarray) and a.ndim > 0:
            return "np.array([" + ", ".join(repr(float(c)) for c in a) + "])"
        return repr(float(a))
    return "(" + ", ".join(f(a) for a in args) + ")"


@functools.lru_cache(maxsize=None)
def evaluate(name: str, kind: str) -> Outcome:
    func = FUNC_BY_NAME[name]
    out = Outcome()
    seed = sum(ord(c) * 131 ** i for i, c in enumerate(name + "|" + kind)) % (2 ** 32)
    rng = np.random.default_rng(seed)
    for K in KS:
        for d in DS:
            extra = func.extra(rng, K, d, kind) if func.extra else {}
            rows, refs = [], []
            for _ in range(ROWS):
                args = func.sample(kind, rng, K, d)
                ref = func.ref(args, extra, K)
                if not _representable(func, ref, K):
                    out.skipped += 1
                    continue
                rows.append(args)
                refs.append(ref)
            if not rows:
                continue
            cols = []
            for j in range(len(rows[0])):
                if rows[0][j] is None:
                    cols.append(None)
                else:
                    cols.append(np.stack([np.asarray(r[j], dtype=np.float64) for r in rows]))
            batch = Batch(tuple(cols), extra)
            got = np.asarray(func.lib(batch, K))
            with np.errstate(all="ignore"):
                try:
                    tb = np.asarray(func.textbook(batch, K), dtype=np.float64)
                except (FloatingPointError, ValueError, ZeroDivisionError):
                    tb = np.full(got.shape, np.nan)
            for i, ref in enumerate(refs):
                e = _row_error(got[i], ref, K)
                et = _row_error(tb[i], ref, K)
                out.rows += 1
                if e > out.worst or out.worst_row is None:
                    out.worst = max(out.worst, e)
                    out.worst_row = (K, d, batch.row(i), extra)
                out.textbook = max(out.textbook, et)
                if not e <= TOL:
                    out.failures.append(
                        f"K={K} d={d} err={e:.3g} args={_fmt_row(batch.row(i))}"
                        + (f" extra={extra}" if extra else ""))
    return out


CASES = [
    pytest.param(
        f.name, kind, id=f"{f.name}-{kind}",
        marks=([pytest.mark.xfail(strict=True, reason=KNOWN_DEFECTS[(f.name, kind)])]
               if (f.name, kind) in KNOWN_DEFECTS else []),
    )
    for f in FUNCS
    for kind in f.kinds
]


@pytest.mark.parametrize("name,kind", CASES)
def test_agrees_with_mpmath_reference(name, kind):
    # mpmath 50-digit reference of the textbook formula (mp_models), same float64 inputs
    out = evaluate(name, kind)
    # every case must actually exercise the library on most of its rows
    assert out.rows >= 0.5 * (out.rows + out.skipped) and out.rows > 0, (
        f"{name}/{kind}: only {out.rows} rows representable, {out.skipped} skipped")
    assert not out.failures, (
        f"{name}/{kind}: {len(out.failures)} of {out.rows} rows above {TOL:g}:\n"
        + "\n".join(out.failures[:5]))


# ====================================================== textbook sanity

# The naive float64 textbook formula misses the contract on at least one hard
# case where gyrokit meets it -- asserted for every function except these
# (measured: the textbook is as good as gyrokit on every hard case here, or
# gyrokit itself misses every hard case where the textbook does).
TEXTBOOK_NOT_WORSE: Dict[str, str] = {
    "poincare.exp_map": "textbook fine on edge/close",
    "poincare.project": "a rescaling: the textbook is already exact",
    "klein.project": "a rescaling: the textbook is already exact",
    "hyperboloid.project": "sqrt(R^2 + |x_s|^2) is already accurate",
    "convert poincare->klein": "2p/(1 + kappa|p|^2) has no cancellation",
    "convert hyperboloid->poincare": "x_s/(1 + x0/R) has no cancellation",
    "convert hyperboloid->klein": "R x_s/x0 has no cancellation",
    "convert halfspace->poincare": "the inversion has no cancellation at these inputs",
    "convert halfspace->klein": "the inversion has no cancellation at these inputs",
}


@pytest.mark.parametrize("name", [f.name for f in FUNCS if f.name not in TEXTBOOK_NOT_WORSE])
def test_textbook_is_worse_on_some_hard_case(name):
    func = FUNC_BY_NAME[name]
    worse = []
    for kind in func.kinds:
        if kind == "random" or (name, kind) in KNOWN_DEFECTS:
            continue
        out = evaluate(name, kind)
        if out.textbook > TOL and out.worst <= TOL:
            worse.append(kind)
    assert worse, f"{name}: the float64 textbook formula met the contract on every hard case"


# ====================================================== the references themselves
#
# The references are only as good as their formulas: each is checked here
# against a second, independent mpmath formulation on the same hard-case
# inputs. Failures here mean a wrong reference, not a library defect.

REF_KINDS = ("random", "edge1e-3", "edge1e-15", "close1e-12", "far30")
REF_DS = (1, 3)


def _ref_rows(func_name, kinds=REF_KINDS):
    """A few rows of each kind from the accuracy test's own generators."""
    func = FUNC_BY_NAME[func_name]
    rng = np.random.default_rng(20240601)
    for kind in kinds:
        if kind not in func.kinds:
            continue
        for K in KS:
            for d in REF_DS:
                extra = func.extra(rng, K, d, kind) if func.extra else {}
                yield kind, K, func.sample(kind, rng, K, d), extra


def _rel(a, b, floor_r=0.0, K=-1.0):
    """Relative difference of two mpmath values, computed at 100 digits."""
    with mp.workdps(100):
        den = max(M.value_norm(b), mpf(floor_r) * radius(K))
        diff = M.value_diff_norm(a, b)
        return float(diff / den) if den > 0 else float(diff)


_VIA = {"exp_map": M.exp_map_via_hyperboloid, "log_map": M.log_map_via_hyperboloid,
        "transport": M.transport_via_hyperboloid, "geodesic": M.geodesic_via_hyperboloid}


@pytest.mark.parametrize("name", [f"{m}.{op}" for m in ("poincare", "klein") for op in _VIA])
def test_reference_routes_agree(name):
    # mpmath 50-digit reference of the textbook formula vs the same operation
    # computed on the hyperboloid (independent formulas, see mp_models)
    model, op = name.split(".")
    via = _VIA[op]
    kinds = REF_KINDS + (("origin",) if op in ("exp_map", "log_map") else ())
    worst = 0.0
    for kind, K, args, extra in _ref_rows(name, kinds):
        a = M.converged(getattr(M, f"{model}_{op}"), *args, curvature=K)
        b = M.converged(lambda *xs, **kw: via(model, *xs, **kw), *args, curvature=K)
        worst = max(worst, _rel(a, b, 1e-40, K))
    assert worst < 1e-30, worst


def test_reference_distances_agree_across_models():
    # five formulas for one distance: Poincaré acosh, Poincaré 2R artanh|(-x)⊕y|/R,
    # and the Klein, hyperboloid and half-space formulas on the exact (120-digit)
    # images of the points
    worst = 0.0
    for kind, K, (x, y), _ in _ref_rows("poincare.distance"):
        dps = 120
        ref = M.poincare_distance(x, y, curvature=K, dps=dps)
        others = [M.poincare_distance_asinh(x, y, curvature=K, dps=dps)]
        for model, fn in (("klein", M.klein_distance), ("hyperboloid", M.hyperboloid_distance),
                          ("halfspace", M.halfspace_distance)):
            xi = M.convert(x, "poincare", model, curvature=K, dps=dps)
            yi = M.convert(y, "poincare", model, curvature=K, dps=dps)
            others.append(fn(xi, yi, curvature=K, dps=dps))
        for o in others:
            worst = max(worst, _rel(o, ref, 1e-40, K))
    assert worst < 1e-30, worst


def test_reference_gyration_closed_form_matches_definition():
    # from memory (Ungar's closed form) vs the gyrator identity, on edge points
    rng = np.random.default_rng(3)
    worst = 0.0
    for K in KS:
        for d in (2, 3, 8):
            for gap in (0.5, 1e-9, 1e-15):
                a = ball_point(rng, d, K, gap=gap)
                b = ball_point(rng, d, K, gap=gap)
                w = rng.standard_normal(d) * 10.0
                c = M.converged(M.mobius_gyration, a, b, w, curvature=K)
                o = M.mobius_gyration_closed(a, b, w, curvature=K, dps=400)
                worst = max(worst, _rel(o, c))
    assert worst < 1e-30, worst


def test_reference_klein_tangent_maps_match_finite_differences():
    # chain rule vs central differences of the point maps at 90 digits, step 1e-25
    rng = np.random.default_rng(4)
    worst = 0.0
    for K in KS:
        for d in (1, 3, 8):
            for gap in (0.5, 1e-6, 1e-12):
                x = ball_point(rng, d, K, gap=gap, model="klein")
                v = rng.standard_normal(d)
                a = M.klein_to_poincare_tangent(v, x, curvature=K, dps=90)
                b = M.klein_to_poincare_tangent_fd(v, x, curvature=K, dps=90)
                worst = max(worst, _rel(a, b))
                p = ball_point(rng, d, K, gap=gap, model="poincare")
                a = M.poincare_to_klein_tangent(v, p, curvature=K, dps=90)
                b = M.poincare_to_klein_tangent_fd(v, p, curvature=K, dps=90)
                worst = max(worst, _rel(a, b))
    # central differences: error ~ (step/gap)^2 relative, 1e-26 at gap 1e-12
    assert worst < 1e-20, worst


@pytest.mark.parametrize("model", ["poincare", "klein", "hyperboloid"])
def test_reference_exp_log_transport_geodesic_identities(model):
    # identities of the exact operations, in mpmath at converged precision:
    #   exp_x(log_x y) = y;   |log_x y| = d(x, y);   P_{x->y}(log_x y) = -log_y x;
    #   d(x, gamma(t)) = t d(x, y)
    exp_f, log_f = getattr(M, f"{model}_exp_map"), getattr(M, f"{model}_log_map")
    tr_f, geo_f = getattr(M, f"{model}_transport"), getattr(M, f"{model}_geodesic")
    dist_f = getattr(M, f"{model}_distance")
    norm_f = {"poincare": M.poincare_riemannian_norm, "klein": M.klein_riemannian_norm,
              "hyperboloid": M.hyperboloid_minkowski_norm}[model]
    rng = np.random.default_rng(5)
    worst = 0.0
    for kind in ("random", "edge1e-9", "close1e-12", "far30"):
        for K in KS:
            for d in (1, 3):
                x, y = point_pair(model, kind, rng, d, K)
                dps = 200
                lg = log_f(y, x, curvature=K, dps=dps)
                dxy = dist_f(x, y, curvature=K, dps=dps)
                back = exp_f(lg, x, curvature=K, dps=dps)
                yy = M.convert(y, model, model, curvature=K, dps=dps)
                worst = max(worst, _rel(back, yy))
                worst = max(worst, _rel(norm_f(lg, x, curvature=K, dps=dps), dxy))
                moved = tr_f(lg, x, y, curvature=K, dps=dps)
                with mp.workdps(dps):  # mpf negation rounds to the working precision
                    minus = M.neg(log_f(x, y, curvature=K, dps=dps))
                worst = max(worst, _rel(moved, minus))
                t = float(rng.uniform(0, 1))
                g = geo_f(x, y, t, curvature=K, dps=dps)
                with mp.workdps(dps):  # t * d at full precision, not mp's default 15
                    t_dxy = mpf(t) * dxy
                worst = max(worst, _rel(dist_f(x, g, curvature=K, dps=dps), t_dxy))
                if model == "klein" and d > 1:
                    # Klein geodesics are straight chords: g - x is parallel to y - x
                    with mp.workdps(dps):
                        u, w = M.vsub(g, M.to_mp(x)), M.vsub(M.to_mp(y), M.to_mp(x))
                        s_ = M.dot(u, w) / M.sq(w)
                        worst = max(worst, float(M.norm(M.vsub(u, M.smul(s_, w))) / M.norm(w)))
    assert worst < 1e-30, worst


def test_reference_matvec_and_convert_identities():
    rng = np.random.default_rng(6)
    worst = 0.0
    for K in KS:
        big_r = radius(K)
        for d in (1, 3, 8):
            x = ball_point(rng, d, K, gap=10.0 ** rng.uniform(-12, 0))
            r = float(rng.uniform(-2, 2))
            # (r I) ⊗ x = r ⊗ x  (Ganea et al. 2018; from memory)
            a = M.poincare_matvec(r * np.eye(d), x, curvature=K, dps=80)
            b = M.mobius_scale(r, x, curvature=K, dps=80)
            worst = max(worst, _rel(a, b))
            # round trips through every model
            for dst in M.MODELS:
                there = M.convert(x, "poincare", dst, curvature=K, dps=120)
                back = M.convert(there, dst, "poincare", curvature=K, dps=120)
                worst = max(worst, _rel(back, M.to_mp(x)))
        # the ball origin goes to (0, ..., 0, R) in the half-space
        o = [float(c) for c in M.convert(np.zeros(3), "poincare", "halfspace", curvature=K)]
        assert o[:2] == [0.0, 0.0] and abs(o[2] - big_r) <= 1e-15 * big_r, o
    assert worst < 1e-30, worst


# ====================================================== other clauses


@pytest.mark.parametrize("model", ["poincare", "klein"])
def test_project_leaves_inside_points_bit_for_bit(model):
    # points inside radius (1 - margin) R come back unchanged, bit for bit
    rng = np.random.default_rng(8)
    mod = getattr(gk, model)
    for K in KS:
        for d in DS:
            for margin in (1e-12, 1e-6):
                x = np.stack([ball_point(rng, d, K, gap=g, model=model)
                              for g in (0.5, 1e-3, 1e-5, 1e-9, 1e-11)])
                inside = np.array([mp_gap(r, K) > margin * 1.01 for r in x])
                assert inside.sum() >= 3
                out = mod.project(x, margin, curvature=K)
                assert np.array_equal(out[inside], x[inside])
                assert not np.array_equal(out[~inside], x[~inside]) or not (~inside).any()


def test_hyperboloid_project_keeps_spatial_part_bit_for_bit():
    rng = np.random.default_rng(9)
    for K in KS:
        x = np.stack([hyperboloid_point(rng, 3, K, rho=r) for r in (0.5, 5, 20, 35)])
        x[:, 0] *= 1 + 1e-8
        out = gk.hyperboloid.project(x, curvature=K)
        assert np.array_equal(out[:, 1:], x[:, 1:])


# ====================================================== hypothesis


@settings(max_examples=HYP_EXAMPLES, deadline=None)
@given(
    k_i=st.integers(0, len(KS) - 1),
    d=st.sampled_from(DS),
    log_gap=st.floats(-15.0, -0.05),
    log_sep=st.floats(-12.0, 0.0),
    seed=st.integers(0, 2 ** 32 - 1),
)
def test_distance_all_models_hypothesis(k_i, d, log_gap, log_sep, seed):
    # mpmath 50-digit reference of the textbook formula, each model's own
    # distance formula on the float64 image of the same pair
    K = KS[k_i]
    rng = np.random.default_rng(seed)
    x = ball_point(rng, d, K, gap=10.0 ** log_gap)
    y = x + 10.0 ** log_sep * np.linalg.norm(x) * unit(rng, d)
    if mp_gap(y, K) <= 0:
        y = ball_point(rng, d, K, gap=10.0 ** log_gap)
    pairs = {"poincare": (x, y)}
    for model in ("klein", "hyperboloid", "halfspace"):
        xi = to_float(M.convert(x, "poincare", model, curvature=K))
        yi = to_float(M.convert(y, "poincare", model, curvature=K))
        if model == "klein" and min(mp_gap(xi, K), mp_gap(yi, K)) < REPRESENTABLE_GAP:
            continue  # a Klein point within ~1e-16 R of the sphere: not representable
        pairs[model] = (xi, yi)
    for model, (a, b) in pairs.items():
        ref = M.converged(getattr(M, f"{model}_distance"), a, b, curvature=K)
        got = getattr(gk, model).distance(a, b, curvature=K)
        err = _row_error(got, ref, K)
        assert err <= TOL, (model, K, d, _fmt_row((a, b)), err)


# ====================================================== the table


def _cell(x: float) -> str:
    if not math.isfinite(x):
        return "nan/inf"
    return f"{x:.1e}"


def accuracy_table() -> str:
    kinds: List[str] = []
    for f in FUNCS:
        for k in f.kinds:
            if k not in kinds:
                kinds.append(k)
    width = max(len(f.name) for f in FUNCS) + 2
    colw = 22
    lines = [
        "Worst error vs 50-digit mpmath reference (same float64 inputs); "
        "each cell: gyrokit / naive float64 textbook.",
        f"K in {KS}, d in {DS}, {ROWS} rows per (K, d) per cell; contract bound {TOL:g}. "
        "'-' = case not applicable; 'X' = known defect (strict xfail); "
        "'(sN)' = N rows skipped (exact result not representable in float64).",
        "",
        "function".ljust(width) + "".join(k.rjust(colw) for k in kinds),
    ]
    for f in FUNCS:
        cells = []
        for k in kinds:
            if k not in f.kinds:
                cells.append("-".rjust(colw))
                continue
            o = evaluate(f.name, k)
            c = f"{_cell(o.worst)}/{_cell(o.textbook)}"
            if (f.name, k) in KNOWN_DEFECTS:
                c += "X"
            if o.skipped:
                c += f"(s{o.skipped})"
            cells.append(c.rjust(colw))
        lines.append(f.name.ljust(width) + "".join(cells))
    return "\n".join(lines) + "\n"


def _mixed_ball_point(rng, d, K):
    """A ball point near the centre, in the bulk, or near the sphere."""
    u = unit(rng, d)
    mode = int(rng.integers(0, 4))
    if mode == 0:
        r = 10.0 ** rng.uniform(-12, -1)
    elif mode == 1:
        r = rng.uniform(0.0, 0.99)
    else:
        r = 1.0 - 10.0 ** rng.uniform(-15, -1)
    return ball_point(rng, d, K, gap=1.0 - r, u=u)


def _rows_within_contract(seed, n, make, lib, ref):
    """``n`` rows ``args = make(rng, K, d)`` (K and d cycling over KS and DS);
    each ``lib(*args, curvature=K)`` must be within TOL of the mpmath
    reference ``ref(*args)``. Returns the worst error."""
    rng = np.random.default_rng(seed)
    worst = 0.0
    for trial in range(n):
        K, d = KS[trial % 3], DS[trial % 4]
        args = make(rng, K, d)
        err = _row_error(lib(*args, curvature=K), M.converged(ref, *args, curvature=K), K)
        worst = max(worst, err)
        assert err <= TOL, (K, d, [np.asarray(a).tolist() for a in args], err)
    return worst


def _klein_any_direction(rng, K, d):
    x = _mixed_ball_point(rng, d, K)
    y = _mixed_ball_point(rng, d, K)
    if rng.random() < 0.2:
        y = perturbed("klein", x, rng, K, eps=10.0 ** rng.uniform(-12, -6))
    return rng.standard_normal(d) * 10.0 ** rng.uniform(-8, 2), x, y


@pytest.mark.parametrize("seed", range(4))
def test_klein_transport_any_direction_and_radius(seed):
    # mpmath 50-digit reference (mp_models.klein_transport, the Poincaré-ball
    # route evaluated exactly) on tangents of any Euclidean direction: near
    # the sphere a random Klein vector is dominated by its radial part in the
    # Riemannian sense, the case the hard-case tangents above do not reach.
    # Pairs mix the centre, the bulk and the sphere; 1/5 are nearly equal.
    worst = _rows_within_contract(1000 + seed, 60, _klein_any_direction,
                                  gk.klein.transport, M.klein_transport)
    assert worst > 0.0  # the comparison ran on inexact results


@pytest.mark.parametrize("seed", range(3))
def test_klein_log_close_pairs_many_rows(seed):
    # mpmath 50-digit reference on 120 more close pairs (the close1e-12 kind
    # above): near the sphere the Poincaré difference of a close pair is
    # dominated by its radial part, and the part across the radius must come
    # from the inputs (it was 1.1e-12 off in 1 row of 400 when taken from it)
    def make(rng, K, d):
        x, y = point_pair("klein", "close1e-12", rng, d, K)
        return y, x
    _rows_within_contract(3000 + seed, 120, make, gk.klein.log_map, M.klein_log_map)


def _hyperboloid_mixed_radii(rng, K, d):
    x = hyperboloid_point(rng, d, K, rho=10.0 ** rng.uniform(-12, 1.3))
    y = hyperboloid_point(rng, d, K, rho=10.0 ** rng.uniform(-12, 1.3))
    vs = rng.standard_normal(d) * 10.0 ** rng.uniform(-6, 1)
    return np.concatenate([[x[1:] @ vs / x[0]], vs]), x, y


@pytest.mark.parametrize("seed", range(4))
def test_hyperboloid_transport_mixed_radii(seed):
    # mpmath 50-digit reference (mp_models.hyperboloid_transport, the textbook
    # v + <y,v>_L/(R^2 - <x,y>_L)(x + y) evaluated exactly) between points
    # anywhere from the centre to 20 R out: carrying a tangent from far out to
    # the centre shrinks its coordinates by x0/y0, the case the hard-case
    # pairs above (both points alike) do not reach.
    _rows_within_contract(2000 + seed, 60, _hyperboloid_mixed_radii,
                          gk.hyperboloid.transport, M.hyperboloid_transport)


def test_zz_accuracy_table():
    table = accuracy_table()
    with open(TABLE_PATH, "w") as fh:
        fh.write(table)
    print("\n" + table)
    # the table holds every function and case kind
    assert table.count("\n") >= len(FUNCS) + 4
