"""The function table of the model accuracy tests (library function,
mpmath reference of mp_models.py, naive textbook formula, input kinds), the
known-defect table, and ``evaluate``: the cached per-(function, kind)
measurement shared by test_models_reference.py and the accuracy table."""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field
from typing import Callable, Dict, List, Optional, Tuple

import numpy as np
import pytest

import gyrokit as gk
import mp_models as M
from conftest import origin, radius
from models_reference_inputs import (
    DS,
    EDGE_KINDS,
    GAP_OF,
    KS,
    model_point,
    model_tangent,
    mp_gap,
    point_pair,
    random_rho,
    REPRESENTABLE_GAP,
    ROWS,
    single_point,
    to_float,
    TOL,
    unit,
    ZERO_ABS,
)
from models_reference_textbook import (
    tb_convert,
    tb_h_distance,
    tb_h_exp,
    tb_h_geodesic,
    tb_h_log,
    tb_h_project,
    tb_h_transport,
    tb_k_distance,
    tb_k_exp,
    tb_k_geodesic,
    tb_k_log,
    tb_k_transport,
    tb_matvec,
    tb_mink,
    tb_p_distance,
    tb_p_exp,
    tb_p_geodesic,
    tb_p_log,
    tb_p_transport,
    tb_project,
    tb_u_distance,
)


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
