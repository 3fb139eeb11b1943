"""Targeted survey of tiny coordinates (fuzz finding F4): every public
element-wise function of the models, the conversions, the pairwise
functions and the centroids, on inputs whose coordinates lie below 1e-150
(their squares underflow) alone or mixed with ordinary ones.

    .venv/bin/python tests/fuzz/tiny_survey.py [N_PER_CASE] [SEED]

Oracle (common practice: the Euclidean limit at the origin, continuity):

* valid inputs never raise and never give NaN;
* all-tiny inputs: every model is Euclidean to first order at the origin,
  so a function of degree 1 in its point/vector arguments satisfies
  ``f(x) = 2^-k f(2^k x)`` up to rounding, with ``2^k x`` near 1e-100 (whose
  squares do not underflow);
* mixed inputs: replacing the tiny coordinates by 0 changes the result by
  no more than ~1e-120 times its scale.

Prints one line per kind of failure, with a reproducer, and the counts.
"""

from __future__ import annotations

import sys
import warnings

import numpy as np

import gyrokit as gk

N = int(sys.argv[1]) if len(sys.argv) > 1 else 200
rng = np.random.default_rng(int(sys.argv[2]) if len(sys.argv) > 2 else 1)

CURVATURES = [-1.0, -1e-6, -1e6, -1e-100, -1e100, -0.25]
TINY_EXP = [-155, -160, -162, -200, -250, -300, -307, -310, -320]


def tiny_vec(d):
    e = rng.choice(TINY_EXP)
    v = rng.normal(size=d) * 10.0 ** e
    if rng.random() < 0.2:
        v[rng.integers(d)] = 0.0
    if rng.random() < 0.1:
        v[:] = 0.0
        v[rng.integers(d)] = rng.choice([5e-324, -5e-324, 1e-320, 2.2e-308])
    return v


def ball_point(d, R, tiny):
    if tiny:
        return tiny_vec(d) * (R if rng.random() < 0.5 else 1.0)
    u = rng.normal(size=d)
    u /= np.linalg.norm(u)
    r = rng.choice([rng.uniform(0, 0.9), 1 - 10.0 ** -rng.uniform(1, 12)])
    return u * r * R


def hyp_point(d, R, tiny):
    p = ball_point(d, R, tiny)  # Poincaré point -> hyperboloid, spatial part 2 p / g
    s = np.sum((p / R) ** 2)
    g = 1 - s
    xs = 2 * p / g
    x0 = np.sqrt(R * R + np.sum(xs * xs))
    return np.concatenate([[x0], xs])


def vec(d, tiny):
    return tiny_vec(d) if tiny else rng.normal(size=d) * 10.0 ** rng.uniform(-3, 0.5)


def hyp_tangent(base, tiny):
    vs = vec(len(base) - 1, tiny)
    v0 = np.dot(base[1:], vs) / base[0]
    return np.concatenate([[v0], vs])


def half_point(d, R, tiny):
    x = rng.normal(size=d) * R
    if tiny:
        x[:-1] = tiny_vec(d - 1) if d > 1 else x[:-1]
    x[-1] = abs(x[-1]) + 0.1 * R
    return x


# name -> (function, argument roles, model, degree-1 homogeneous at the origin)
ELEMENTWISE = {}
for mod, model in ((gk.poincare, "poincare"), (gk.klein, "klein")):
    m = mod.__name__.split(".")[-1]
    ELEMENTWISE.update({
        f"{m}.add": (mod.add, ("p", "p"), model, True),
        f"{m}.sub": (mod.sub, ("p", "p"), model, True),
        f"{m}.scale": (mod.scale, ("r", "p"), model, True),
        f"{m}.gyration": (mod.gyration, ("p", "p", "v"), model, True),
        f"{m}.midpoint": (mod.midpoint, ("p", "p"), model, True),
        f"{m}.distance": (mod.distance, ("p", "p"), model, True),
        f"{m}.exp_map": (mod.exp_map, ("v", "p"), model, True),
        f"{m}.exp_map0": (lambda v, curvature, f=mod.exp_map: f(v, curvature=curvature), ("v",), model, True),
        f"{m}.log_map": (mod.log_map, ("p", "p"), model, True),
        f"{m}.log_map0": (lambda y, curvature, f=mod.log_map: f(y, curvature=curvature), ("p",), model, True),
        f"{m}.transport": (mod.transport, ("v", "p", "p"), model, True),
        f"{m}.geodesic": (mod.geodesic, ("p", "p", "t"), model, True),
        f"{m}.project": (mod.project, ("p",), model, True),
    })
ELEMENTWISE["poincare.coadd"] = (gk.poincare.coadd, ("p", "p"), "poincare", True)
ELEMENTWISE["poincare.matvec"] = (gk.poincare.matvec, ("m", "p"), "poincare", True)
ELEMENTWISE.update({
    "hyperboloid.distance": (gk.hyperboloid.distance, ("h", "h"), "hyperboloid", True),
    "hyperboloid.exp_map": (gk.hyperboloid.exp_map, ("hv", "h"), "hyperboloid", True),
    "hyperboloid.exp_map0": (lambda v, curvature: gk.hyperboloid.exp_map(v, curvature=curvature), ("hv0",),
                             "hyperboloid", True),
    "hyperboloid.log_map": (gk.hyperboloid.log_map, ("h", "h"), "hyperboloid", True),
    "hyperboloid.log_map0": (lambda y, curvature: gk.hyperboloid.log_map(y, curvature=curvature), ("h",),
                             "hyperboloid", True),
    "hyperboloid.transport": (gk.hyperboloid.transport, ("hv", "h", "h"), "hyperboloid", True),
    "hyperboloid.geodesic": (gk.hyperboloid.geodesic, ("h", "h", "t"), "hyperboloid", True),
    "hyperboloid.project": (gk.hyperboloid.project, ("h",), "hyperboloid", True),
    "halfspace.distance": (gk.halfspace.distance, ("q", "q"), "halfspace", False),
})
for src in ("poincare", "klein", "hyperboloid"):
    for dst in gk.MODELS:
        ELEMENTWISE[f"convert.{src}->{dst}"] = (
            lambda x, curvature, s=src, t=dst: gk.convert(x, s, t, curvature=curvature),
            ({"poincare": "p", "klein": "p", "hyperboloid": "h"}[src],), src, dst != "halfspace")
for model in ("poincare", "klein", "hyperboloid"):
    role = "h" if model == "hyperboloid" else "p"
    ELEMENTWISE[f"distance_matrix.{model}"] = (
        lambda x, y, curvature, md=model: gk.distance_matrix(x[None], y[None], model=md, curvature=curvature),
        (role, role), model, True)
    ELEMENTWISE[f"knn.{model}"] = (
        lambda x, y, curvature, md=model: next(a for a in gk.knn(np.stack([x, y]), 1, model=md, curvature=curvature)
                                               if a.dtype.kind == "f"),
        (role, role), model, True)
    ELEMENTWISE[f"frechet_mean.{model}"] = (
        lambda x, y, curvature, md=model: gk.frechet_mean(np.stack([x, y]), model=md, curvature=curvature).mean,
        (role, role), model, True)
    ELEMENTWISE[f"frechet_variance.{model}"] = (
        lambda x, y, curvature, md=model: gk.frechet_variance(np.stack([x, y]), model=md,
                                                              curvature=curvature),
        (role, role), model, False)
    ELEMENTWISE[f"einstein_midpoint.{model}"] = (
        lambda x, y, curvature, md=model: gk.einstein_midpoint(np.stack([x, y]), model=md, curvature=curvature),
        (role, role), model, True)


def draw_args(roles, model, d, K, tiny_mask):
    R = 1 / np.sqrt(-K)
    args = []
    base = None
    for role, tiny in zip(roles, tiny_mask):
        if role == "p":
            args.append(ball_point(d, R, tiny))
        elif role == "h":
            args.append(hyp_point(d, R, tiny))
        elif role == "q":
            args.append(half_point(d, R, tiny))
        elif role == "v":
            args.append(vec(d, tiny) * R)
        elif role == "hv0":
            args.append(np.concatenate([[0.0], vec(d, tiny) * R]))
        elif role == "hv":
            args.append(None)  # filled once the base is known
        elif role == "r":
            args.append(np.float64(rng.choice([0.5, 2.0, -1.0, 1e-3, 3.0])))
        elif role == "t":
            args.append(np.float64(rng.choice([0.0, 0.3, 1.0, -0.5, 2.0])))
        elif role == "m":
            args.append(rng.normal(size=(d, d)))
    for i, role in enumerate(roles):
        if role == "hv":
            base = args[i + 1]
            args[i] = hyp_tangent(base, tiny_mask[i]) * R
    return args


def scaled(args, roles, k):
    """The arguments with every point/vector coordinate times 2^k (the
    hyperboloid: spatial parts, x0 recomputed)."""
    out = []
    for a, role in zip(args, roles):
        if role in ("p", "v"):
            out.append(np.ldexp(a, k))
        elif role == "h":
            xs = np.ldexp(a[1:], k)
            R2 = a[0] ** 2 - np.sum(a[1:] ** 2)
            out.append(np.concatenate([[np.sqrt(R2 + np.sum(xs * xs))], xs]))
        elif role in ("hv", "hv0"):
            out.append(np.ldexp(a, k))
        else:
            out.append(a)
    return out


def zeroed(args, roles, tiny_mask):
    out = []
    for a, role, tiny in zip(args, roles, tiny_mask):
        if tiny and role in ("p", "v", "hv0"):
            out.append(np.zeros_like(a))
        elif tiny and role == "h":
            out.append(np.concatenate([[np.sqrt(a[0] ** 2 - np.sum(a[1:] ** 2))], np.zeros(len(a) - 1)]))
        elif tiny and role == "hv":
            out.append(np.zeros_like(a))
        else:
            out.append(a)
    return out


def spatial(res, model):
    res = np.asarray(res, dtype=float)
    return res


failures = {}
counts = {"calls": 0, "fail": 0}


def fail(key, msg):
    counts["fail"] += 1
    if key not in failures:
        failures[key] = msg
        print(f"FAIL {key}: {msg}", flush=True)


def call(f, args, K):
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        return f(*args, curvature=K)


for name, (f, roles, model, homog) in ELEMENTWISE.items():
    npt = sum(r in ("p", "h", "q", "v", "hv", "hv0") for r in roles)
    for it in range(N):
        d = int(rng.choice([1, 2, 2, 3, 5]))
        if model == "halfspace" and d < 2:
            d = 2
        K = float(rng.choice(CURVATURES))
        mode = rng.choice(["all", "mixed"])
        tiny_mask = [(mode == "all") or (rng.random() < 0.5) for _ in roles]
        if mode == "mixed" and not any(tiny_mask):
            tiny_mask[rng.integers(len(roles))] = True
        if name.endswith("project") and mode == "mixed":
            continue
        args = draw_args(roles, model, d, K, tiny_mask)
        counts["calls"] += 1
        rep = f"{name}({', '.join(repr(np.asarray(a).tolist()) for a in args)}, curvature={K})"
        try:
            with np.errstate(all="ignore"):
                got = np.asarray(call(f, args, K), dtype=float)
        except (ValueError, TypeError, ArithmeticError, Warning) as e:
            if model == "halfspace":
                continue  # half-space points beyond 2^-250 raise by design
            if mode == "mixed":
                # a legitimate error (a result beyond the rim) if the same
                # call with the tiny coordinates set to 0 raises too
                try:
                    with np.errstate(all="ignore"):
                        call(f, zeroed(args, roles, tiny_mask), K)
                except (ValueError, TypeError, Warning):
                    continue
            fail((name, "raises", mode), f"{rep} -> {type(e).__name__}: {e}")
            continue
        if np.isnan(got).any():
            fail((name, "nan", mode), f"{rep} -> {got.tolist()}")
            continue
        if mode == "all" and homog and model != "halfspace":
            # 2^k x near 1e-100
            mags = [np.max(np.abs(a[1:] if r in ("h",) else a)) for a, r in zip(args, roles)
                    if r in ("p", "v", "h", "hv", "hv0") and np.max(np.abs(a[1:] if r == "h" else a)) > 0]
            if not mags:
                continue
            k = int(-332 - np.floor(np.log2(max(mags))))
            try:
                with np.errstate(all="ignore"):
                    ref = np.asarray(call(f, scaled(args, roles, k), K), dtype=float)
            except (ValueError, TypeError, Warning) as e:
                fail((name, "ref raises", mode), f"{rep} (scaled by 2^{k}) -> {e}")
                continue
            if model == "hyperboloid" and ref.ndim and ref.shape[-1] == d + 1 and not name.startswith(
                    ("convert", "hyperboloid.log", "hyperboloid.transport")):
                # a point result: compare spatial parts, x0 must be R
                want = np.concatenate([[got[0]], np.ldexp(ref[1:], -k)])
                ref_scaled = want
            elif name.startswith("convert.hyperboloid") or name.endswith("->hyperboloid"):
                ref_scaled = np.concatenate([[got[0]], np.ldexp(ref[1:], -k)]) if ref.shape[-1] == d + 1 \
                    else np.ldexp(ref, -k)
            elif "frechet_variance" in name:
                ref_scaled = np.ldexp(ref, -2 * k)
            else:
                ref_scaled = np.ldexp(ref, -k)
            scale = np.max(np.abs(ref_scaled)) if ref_scaled.size else 0
            err = np.max(np.abs(got - ref_scaled)) if got.size else 0
            # tolerance: 1e-12 relative, plus subnormal granularity
            if not err <= 1e-12 * scale + 1e-300 * 0 + 4.5e-322 * 8:
                fail((name, "homogeneity", mode), f"{rep} -> {got.tolist()}, want {ref_scaled.tolist()} "
                     f"(err {err:.3g}, scale {scale:.3g})")
        elif mode == "mixed":
            try:
                with np.errstate(all="ignore"):
                    ref = np.asarray(call(f, zeroed(args, roles, tiny_mask), K), dtype=float)
            except (ValueError, TypeError, Warning):
                continue
            scale = max(np.max(np.abs(ref)) if ref.size else 0, 1e-300)
            err = np.max(np.abs(got - ref)) if got.size else 0
            if not err <= 1e-10 * scale + 1e-120 * max(1.0, 1 / np.sqrt(-K)):
                fail((name, "continuity", mode), f"{rep} -> {got.tolist()}, zeroed {ref.tolist()} "
                     f"(err {err:.3g})")

print(f"calls {counts['calls']}, failing {counts['fail']}, kinds {len(failures)}")
