"""Resident memory stays flat over many calls of every public function.

Each public function and class (enumerated from ``__all__`` of gyrokit and
of its submodules, so new functions are covered) is called 10 000 times
with small valid inputs and 10 000 times with an invalid input (the error
path: a ValueError or TypeError built and dropped). The resident set size,
read from ``/proc/self/statm`` (Linux), must not grow by more than a loose
bound after a warm-up. Inputs are sized so that leaking one result or one
converted input per call would exceed the bound.
"""

from __future__ import annotations

import gc
import inspect
import os
import types
import warnings

import numpy as np
import pytest

import gyrokit as gk

pytestmark = pytest.mark.skipif(not os.path.exists("/proc/self/statm"), reason="needs /proc/self/statm (Linux)")

CALLS = 10_000
WARMUP = 500
N, D = 64, 3  # one (64, 3) float64 array is 1.5 kB: 10 000 leaked copies are 15 MB
PER_FUNCTION_MB = 2.0  # measured growth: 0.0 to 0.004 MB per function; a leaked (64,) result per call is 6 MB
TOTAL_MB = 20.0
PAGE = os.sysconf("SC_PAGE_SIZE") if hasattr(os, "sysconf") else 4096


def rss_mb() -> float:
    with open("/proc/self/statm") as f:
        return int(f.read().split()[1]) * PAGE / 2**20


def public_callables():
    mods = [("gyrokit", gk)]
    for name in gk.__all__:
        ob = getattr(gk, name)
        if isinstance(ob, types.ModuleType):
            mods.append((name, ob))
    seen, out = set(), []
    for mname, mod in mods:
        for name in mod.__all__:
            ob = getattr(mod, name)
            if isinstance(ob, types.ModuleType) or not callable(ob) or id(ob) in seen:
                continue
            if inspect.isclass(ob) and (issubclass(ob, BaseException) or hasattr(ob, "__dataclass_fields__")):
                continue  # exceptions, warnings and result records
            if mname == "plot":
                continue  # matplotlib drawing: pure Python over the functions tested here, far too slow for 10 000 calls
            seen.add(id(ob))
            out.append((f"{mname}.{name}", ob, mname))
    return out


rng = np.random.default_rng(11)
_dirs = rng.normal(size=(N, D))
_dirs /= np.linalg.norm(_dirs, axis=1, keepdims=True)
BALL = _dirs * rng.uniform(0.05, 0.9, size=(N, 1))
BALL2 = BALL[::-1].copy()
_s = np.sum(BALL * BALL, axis=1, keepdims=True)
# Poincaré -> hyperboloid, the textbook map (x0, x_s) = (1 + |p|^2, 2p) / (1 - |p|^2)
HYP = np.concatenate([(1 + _s) / (1 - _s), 2 * BALL / (1 - _s)], axis=1)
HALF = np.concatenate([BALL[:, :-1], 0.1 + np.abs(BALL[:, -1:])], axis=1)
C = gk.relativity.SPEED_OF_LIGHT
VEL = BALL * 0.5 * C
VEC = rng.normal(size=(N, D)) * 0.3
LABELS = np.arange(N) % 3

TREE = np.r_[-1, np.arange(N - 1) // 2]  # a binary tree on N nodes, as a parent array
TREE_PAIRS = np.stack([np.arange(N), np.arange(N)[::-1]], axis=1)

POINTS = {"poincare": BALL, "klein": BALL, "hyperboloid": HYP, "halfspace": HALF}


def valid_call(name: str, fn, module: str):
    """(args, kwargs) of a valid call of `fn`, from its parameter names."""
    model = module if module in POINTS else "poincare"
    pts, pts2 = POINTS[model], POINTS[model][::-1].copy()
    if module == "relativity":
        table = {"v": VEL, "u": VEL[::-1].copy(), "a": VEC, "w": VEC, "k": BALL * 0.5}
    else:
        table = {
            "x": pts, "y": pts2, "a": pts, "b": pts2, "base": pts2, "start": pts, "end": pts2,
            "v": VEC if model != "hyperboloid" else gk.hyperboloid.log_map(pts2, pts), "u": VEC,
            "t": np.linspace(-1, 2, N), "r": np.linspace(-2, 2, N), "m": np.eye(D) * 0.5,
        }
    special = {
        "gyrokit.convert": ((BALL, "poincare", "klein"), {}),
        "gyrokit.knn": ((BALL, 3), {}),
        "gyrokit.radius_neighbors": ((BALL, 0.5), {}),
        "gyrokit.frechet_variance": ((BALL,), {}),
        "gyrokit.KMeans": ((), {"n_clusters": 3, "n_init": 1, "random_state": 0}),
        "gyrokit.NeighborIndex": ((BALL,), {}),
        "gyrokit.PrincipalGeodesicAnalysis": ((), {"n_components": 2}),
        "hyperboloid.inner": ((HYP, HYP[::-1].copy()), {}),
        "embed.tree": ((TREE,), {}),
        "embed.hierarchy": ((np.column_stack([np.arange(1, N), TREE[1:]]),), {}),
        "metrics.tree_distances": ((TREE, TREE_PAIRS), {}),
        "metrics.reconstruction": ((BALL, np.column_stack([np.arange(N - 1), np.arange(1, N)])), {}),
        "metrics.distortion": ((BALL, 2.0 * gk.distance_matrix(BALL)), {}),
        "embed.from_distances": ((gk.distance_matrix(HYP, model="hyperboloid"), 3), {}),
        "poincare.angle": ((BALL, BALL2 * 0.5, np.roll(BALL, 1, axis=0) * 0.7), {}),
        "klein.angle": ((BALL, BALL2 * 0.5, np.roll(BALL, 1, axis=0) * 0.7), {}),
        "gyrokit.triangle": ((BALL, BALL2 * 0.5, np.roll(BALL, 1, axis=0) * 0.7), {}),
        "random.wrapped_normal": ((BALL[0], 0.3), {"size": 100, "seed": 0}),
        "random.wrapped_normal_logpdf": ((BALL, BALL[0], 0.3), {}),
        "random.uniform_ball": ((1.0,), {"size": 100, "dim": 3, "seed": 0}),
    }
    if name in special:
        return special[name]
    args = []
    for p in inspect.signature(fn).parameters.values():
        if p.default is not inspect.Parameter.empty or p.kind not in (p.POSITIONAL_ONLY, p.POSITIONAL_OR_KEYWORD):
            continue
        if p.name not in table:
            raise AssertionError(f"test_memory: no valid input for parameter {p.name!r} of {name}; add one")
        args.append(table[p.name])
    return tuple(args), {}


def bad_call(args, kwargs):
    """The same call with its first array argument made invalid (NaN)."""
    args = list(args)
    for i, a in enumerate(args):
        if isinstance(a, np.ndarray) and a.dtype.kind == "f":
            b = a.copy()
            b.reshape(-1)[-1] = np.nan
            args[i] = b
            return tuple(args), kwargs
    return tuple(args), dict(kwargs, curvature=float("nan"))


def runner(name, fn, args, kwargs):
    """A no-argument function making one (valid or invalid) call; classes
    are constructed and their main method called."""
    if name == "gyrokit.KMeans":
        X = args[0] if args else BALL

        def run():
            km = fn(**kwargs).fit(BALL if not args else X)
            km.predict(BALL)
        return run
    if name == "gyrokit.PrincipalGeodesicAnalysis":
        def run():
            pga = fn(**kwargs).fit(BALL)
            pga.inverse_transform(pga.transform(BALL))
        return run
    if name == "gyrokit.NeighborIndex":
        def run():
            idx = fn(*args, **kwargs)
            idx.query(BALL[:8], 3)
        return run
    return lambda: fn(*args, **kwargs)


TARGETS = public_callables()


def test_targets_enumerated():
    names = {t[0] for t in TARGETS}
    # a few that must be there (from the README's table)
    for must in ("poincare.add", "klein.distance", "hyperboloid.exp_map", "gyrokit.distance_matrix",
                 "gyrokit.NeighborIndex", "gyrokit.KMeans", "gyrokit.frechet_mean", "relativity.compose"):
        assert must in names, names
    assert len(names) >= 50


def test_resident_memory_is_flat_over_10000_calls_of_each_function():
    warnings.simplefilter("ignore")
    plans = []
    for name, fn, module in TARGETS:
        args, kwargs = valid_call(name, fn, module)
        good = runner(name, fn, args, kwargs)
        good()  # must be a valid call
        bargs, bkw = bad_call(args, kwargs)
        bad_run = runner(name, fn, bargs, bkw)

        def bad(bad_run=bad_run):
            try:
                bad_run()
            except (ValueError, TypeError):
                pass
        plans.append((name, good, bad))
    # warm-up: allocator arenas, caches, the rayon pool
    for _, good, bad in plans:
        for _ in range(WARMUP):
            good()
            bad()
    gc.collect()
    start = rss_mb()
    growth = {}
    for name, good, bad in plans:
        before = rss_mb()
        for _ in range(CALLS):
            good()
        for _ in range(CALLS):
            bad()
        gc.collect()
        growth[name] = rss_mb() - before
    total = rss_mb() - start
    worst = max(growth.items(), key=lambda kv: kv[1])
    assert worst[1] < PER_FUNCTION_MB, f"resident memory grew {worst[1]:.1f} MB over {CALLS} calls of {worst[0]}"
    assert total < TOTAL_MB, f"resident memory grew {total:.1f} MB in all: {growth}"
