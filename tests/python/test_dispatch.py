"""Runtime SIMD dispatch: every instruction-set tier gives bit-identical results.

The extension is built for the x86-64 baseline and dispatches at run time to
AVX-512 / AVX2+FMA copies of its kernels. The environment variable
``GYROKIT_SIMD`` (``baseline``, ``avx2``; unset = best the CPU has) caps the
tier; it is read once per process, so each tier runs in its own subprocess.
The tiers compute the same IEEE operations in the same order, so the SHA-256
of every result must be the same for all of them. A tier the CPU lacks falls
back to a lower one, which must still match; /proc/cpuinfo is read only to
say which tiers were really exercised.

Only bit-identity is checked here: timing is deliberately not part of this
test (``test_no_timing_in_this_module`` guards that).
"""

from __future__ import annotations

import ast
import json
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

TIERS = {
    "best": None,  # GYROKIT_SIMD unset
    "avx512": "avx512",
    "avx2": "avx2",
    "baseline": "baseline",
}

# The workload: a few thousand random points (near-boundary points with
# 1 - |x|/R = 1e-15, pairs 1e-12 apart and exact duplicates mixed in), run
# through every dispatched kernel family; one SHA-256 per operation.
SCRIPT = textwrap.dedent(
    r"""
    import hashlib, json, sys, warnings
    import numpy as np
    import gyrokit as gk

    hashes = {}
    def record(name, *arrays):
        h = hashlib.sha256()
        for a in arrays:
            a = np.ascontiguousarray(np.asarray(a))
            h.update(f"{a.dtype}{a.shape}".encode())
            h.update(a.tobytes())
        assert name not in hashes, name
        hashes[name] = h.hexdigest()

    def ball(rng, n, d, R, rmax=12.0):
        v = rng.standard_normal((n, d))
        v /= np.linalg.norm(v, axis=1, keepdims=True)
        p = R * np.tanh(rng.uniform(0.0, rmax, n) / 2)[:, None] * v
        # near-boundary rows: 1 - |x|/R = 1e-15
        nb = rng.choice(n, n // 20, replace=False)
        p[nb] = (1.0 - 1e-15) * R * v[nb]
        # pairs 1e-12 R apart, and exact duplicates
        p[1::50] = p[0::50][: len(p[1::50])] * (1 - 1e-12)
        p[2::50] = p[0::50][: len(p[2::50])]
        return p

    def to_model(p, model, R, K):
        # Poincare near-boundary rows have no float64 Klein image (documented);
        # Klein gets its own near-boundary rows, 1 - |x|/R = 1e-15 in Klein
        if model == "poincare":
            return p
        if model != "klein":
            return gk.convert(p, "poincare", model, curvature=K)
        nrm = np.linalg.norm(p, axis=1)
        nb = nrm > (1 - 1e-9) * R
        q = p.copy()
        q[nb] *= 0.5
        k = gk.convert(q, "poincare", "klein", curvature=K)
        k[nb] = (1.0 - 1e-15) * R * p[nb] / nrm[nb, None]
        return k

    rng = np.random.default_rng(20240611)
    for K in (-1.0, -0.3):
        R = 1.0 / np.sqrt(-K)
        kw = dict(curvature=K)
        for d in (2, 16, 33):
            p = ball(rng, 3000, d, R)
            a, b = p[:1100], p[1100:2100]
            for model in ("poincare", "halfspace", "klein", "hyperboloid"):
                if model in ("klein", "hyperboloid") and d == 33:
                    continue
                x = to_model(p, model, R, K)
                xa, xb = x[:1100], x[1100:2100]
                tag = f"{model}/K={K}/d={d}"
                record(f"convert poincare->{model} {tag}", x)
                record(f"distance_matrix {tag}", gk.distance_matrix(xa, xb, model=model, **kw))
                record(f"distance_matrix self {tag}", gk.distance_matrix(xa, model=model, **kw))
                # float32 only where rounding to float32 keeps the points valid
                keep = np.linalg.norm(p, axis=1) < 0.99 * R
                fa, fb = x[:1100][keep[:1100]], x[1100:2100][keep[1100:2100]]
                record(f"distance_matrix f32 {tag}",
                       gk.distance_matrix(fa.astype(np.float32), fb.astype(np.float32), model=model, **kw))
                if d != 33 or model in ("poincare", "halfspace"):
                    record(f"condensed {tag}", gk.condensed_distances(xb, model=model, **kw))
                    record(f"knn self {tag}", *gk.knn(xa, 8, model=model, **kw))
                    record(f"knn y {tag}", *gk.knn(xa, 8, xb, model=model, **kw))
                    record(f"radius self {tag}", *gk.radius_neighbors(xa, 2.0, model=model, **kw))
                    record(f"radius y {tag}", *gk.radius_neighbors(xa, 2.0, xb, model=model, **kw))
                if model != "poincare":
                    record(f"convert {model}->poincare {tag}", gk.convert(x, model, "poincare", **kw))
                    if model != "klein":
                        kk = to_model(p, "klein", R, K)
                        record(f"convert klein->{model} {tag}", gk.convert(kk, "klein", model, **kw))
            # element-wise gyrovector algebra (Poincare / Mobius, Klein / Einstein)
            x, y, z = p[:1000], p[1000:2000], p[2000:3000]
            tag = f"K={K}/d={d}"
            r = rng.uniform(-3.0, 3.0, 1000)
            t = rng.uniform(-0.5, 1.5, 1000)
            v = rng.standard_normal((1000, d)) * rng.uniform(0, 4, (1000, 1))
            P = gk.poincare
            # rows beyond float64's range (near-boundary pairs) clip, quietly:
            # the tiers must agree on those too
            rk = dict(kw, on_rim="clip")
            warnings.simplefilter("ignore", P.RimClipWarning)
            record(f"poincare.add {tag}", P.add(x, y, **rk))
            record(f"poincare.sub {tag}", P.sub(x, y, **rk))
            record(f"poincare.coadd {tag}", P.coadd(x, y, **rk))
            record(f"poincare.scale {tag}", P.scale(r, x, **rk))
            record(f"poincare.gyration {tag}", P.gyration(x, y, z, **kw))
            record(f"poincare.midpoint {tag}", P.midpoint(x, y, **rk))
            record(f"poincare.distance {tag}", P.distance(x, y, **kw))
            record(f"poincare.exp_map origin {tag}", P.exp_map(v, **rk))
            record(f"poincare.exp_map {tag}", P.exp_map(v, x, **rk))
            record(f"poincare.log_map origin {tag}", P.log_map(y, **kw))
            record(f"poincare.log_map {tag}", P.log_map(y, x, **kw))
            record(f"poincare.geodesic {tag}", P.geodesic(x, y, t, **rk))
            kp = to_model(p, "klein", R, K)
            kx, ky = kp[:1000], kp[1000:2000]
            record(f"klein.add {tag}", gk.klein.add(kx, ky, **rk))
            record(f"klein.distance {tag}", gk.klein.distance(kx, ky, **kw))
            record(f"hyperboloid.distance {tag}",
                   gk.hyperboloid.distance(gk.convert(x, "poincare", "hyperboloid", **kw),
                                           gk.convert(y, "poincare", "hyperboloid", **kw), **kw))
            record(f"halfspace.distance {tag}",
                   gk.halfspace.distance(gk.convert(x, "poincare", "halfspace", **kw),
                                         gk.convert(y, "poincare", "halfspace", **kw), **kw))
            # Frechet means (the near-boundary rows make them work hard)
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                inner = ball(rng, 3000, d, R, rmax=6.0)
                fm = gk.frechet_mean(inner, **kw)
                record(f"frechet_mean {tag}", fm.mean, np.array([fm.iterations, fm.converged]),
                       np.array([fm.grad_norm]))
                labels = rng.integers(0, 5, 3000)
                w = rng.uniform(0.1, 2.0, 3000)
                fl = gk.frechet_mean(inner, weights=w, labels=labels, **kw)
                record(f"frechet_mean labels {tag}", fl.mean, fl.iterations, fl.converged, fl.grad_norm)
                for model in ("klein", "hyperboloid"):
                    fk = gk.frechet_mean(to_model(inner, model, R, K), model=model, **kw)
                    record(f"frechet_mean {model} {tag}", fk.mean)
    json.dump(hashes, sys.stdout)
    """
)


def cpu_flags():
    """The CPU feature flags from /proc/cpuinfo (empty where unreadable)."""
    try:
        text = Path("/proc/cpuinfo").read_text()
    except OSError:
        return set()
    for line in text.splitlines():
        if line.startswith("flags"):
            return set(line.split(":", 1)[1].split())
    return set()


def start_tier(value):
    """Starts the workload in a subprocess with GYROKIT_SIMD=value (None: unset)."""
    env = {k: v for k, v in os.environ.items() if k != "GYROKIT_SIMD"}
    if value is not None:
        env["GYROKIT_SIMD"] = value
    return subprocess.Popen(
        [sys.executable, "-c", SCRIPT], env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True
    )


def finish_tier(proc, value):
    out, err = proc.communicate(timeout=600)
    assert proc.returncode == 0, f"GYROKIT_SIMD={value}: {err[-3000:]}"
    return json.loads(out)


def run_tier(value):
    return finish_tier(start_tier(value), value)


@pytest.fixture(scope="module")
def tier_hashes():
    # one process per tier (the tier is fixed at the first kernel call), run concurrently
    procs = {name: start_tier(value) for name, value in TIERS.items()}
    return {name: finish_tier(proc, TIERS[name]) for name, proc in procs.items()}


def test_workload_is_complete(tier_hashes):
    base = tier_hashes["baseline"]
    families = [
        "distance_matrix poincare", "distance_matrix halfspace", "distance_matrix klein",
        "distance_matrix hyperboloid", "condensed", "knn", "radius", "poincare.add",
        "poincare.sub", "poincare.coadd", "poincare.scale", "poincare.gyration",
        "poincare.midpoint", "poincare.distance", "poincare.exp_map", "poincare.log_map",
        "poincare.geodesic", "klein.add", "klein.distance", "convert", "frechet_mean",
    ]
    for fam in families:
        assert any(k.startswith(fam) for k in base), f"no {fam!r} in the workload"
    for d in (2, 16, 33):
        for model in ("poincare", "halfspace"):
            assert any(k == f"distance_matrix {model}/K=-1.0/d={d}" for k in base)
    # distinct operations really give distinct bytes (the hash is not constant)
    assert len(set(base.values())) > 0.9 * len(base)


@pytest.mark.parametrize("tier", ["best", "avx512", "avx2"])
def test_tier_matches_baseline(tier_hashes, tier):
    base = tier_hashes["baseline"]
    got = tier_hashes[tier]
    assert got.keys() == base.keys()
    differ = sorted(k for k in base if got[k] != base[k])
    flags = cpu_flags()
    cpu = (f"CPU avx2+fma={ {'avx2', 'fma'} <= flags}, "
           f"avx512(f,dq,vl)={ {'avx512f', 'avx512dq', 'avx512vl'} <= flags}")
    assert not differ, f"GYROKIT_SIMD={TIERS[tier]} differs from baseline ({cpu}) in: {differ}"


def test_repeat_run_is_identical(tier_hashes):
    # the same tier twice: the workload itself is deterministic
    again = run_tier(None)
    assert again == tier_hashes["best"]


def test_no_timing_in_this_module():
    """Timing is not part of this test: no clock is imported or called here."""
    tree = ast.parse(Path(__file__).read_text())
    banned = {"time", "timeit", "perf_counter", "monotonic", "process_time", "benchmark"}
    names = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names.update(a.name.split(".")[0] for a in node.names)
        elif isinstance(node, ast.ImportFrom):
            names.add((node.module or "").split(".")[0])
            names.update(a.name for a in node.names)
        elif isinstance(node, ast.Attribute):
            names.add(node.attr)
        elif isinstance(node, ast.Name):
            names.add(node.id)
    # the subprocess workload too
    sub = ast.parse(SCRIPT)
    for node in ast.walk(sub):
        if isinstance(node, ast.Import):
            names.update(a.name.split(".")[0] for a in node.names)
        elif isinstance(node, ast.Attribute):
            names.add(node.attr)
        elif isinstance(node, ast.Name):
            names.add(node.id)
    assert not (names & banned), f"timing found: {names & banned}"
