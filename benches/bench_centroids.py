"""Fréchet mean benchmark: gk.frechet_mean against Riemannian gradient descent
written with NumPy, timed in the same run on the same data.

Data: 1 000 000 Poincaré points at d = 16, hyperbolic radii uniform in
[0, 3], random directions, K = -1. Every method runs to the same tolerance:
the Riemannian norm of the mean log vector ``mean_i log_m(x_i)`` (the
gradient of ``F(m) = 1/(2n) sum d(m, x_i)^2``) at most 1e-12.

Baselines (our own code, the formulas of the Poincaré ball with K = -1,
handbook): ``u = (-m) ⊕ x``, ``log_m(x) = (1 - |m|^2) artanh(|u|) u/|u|``,
``exp_m(v) = m ⊕ tanh(|v|/(1 - |m|^2)) v/|v|``; gradient descent with step
1, ``m <- exp_m(mean_i log_m(x_i))``, started at the origin, at most 80
iterations.

(a) plain: every iteration forms the (n, d) arrays of ``(-m) ⊕ x`` and the
    log vectors with NumPy.
(b) fused: ``(-m) ⊕ x_i = alpha_i (-m) + beta_i x_i`` with per-point scalars
    that need only ``<m, x_i>`` and the precomputed ``|x_i|^2``, so an
    iteration is two BLAS matrix-vector products (``X @ m`` and
    ``X.T @ coef``) plus O(n) scalar work.

Both baselines run with one BLAS thread (the environment variables are set
below, before NumPy is imported: on the 2-core machine of PERF-NOTES.md
2-thread OpenBLAS matrix-vector products stall). gyrokit itself uses rayon
threads (RAYON_NUM_THREADS, default all cores), not BLAS.

Also: per-label means for 1000 groups (labels interleaved at random) against
the single mean on the same points.

KMeans (``--kmeans``, or ``--kmeans-only`` for that part alone): ``gk.KMeans``
against scikit-learn's Euclidean ``sklearn.cluster.KMeans`` on the same
array and the same parameters (``n_clusters=10``, ``n_init=1``,
``max_iter=100``, ``random_state=0``, k-means++ seeding, Lloyd's algorithm;
each with its own default ``tol``), one timed fit each:

* 36 607 x 10 points: an invented taxonomy (node depth ~ hyperbolic radius,
  Gamma(3, 0.9); twelve branches, nodes scattered around their branch's
  direction);
* 1 000 000 x 2 points: hyperbolic radii uniform in [0, 3].

scikit-learn runs with its default threads (OpenMP, all cores) for its
Lloyd loop. gyrokit runs with its default ``tol=1e-4`` (squared centre
movement relative to the data's spread, the hyperbolic counterpart of
scikit-learn's rule); scikit-learn with ``tol=0`` (until the labels stop
changing) and with its default ``tol=1e-4``. The iteration counts and the
time per iteration are printed beside the totals. ``benches/bench_kmeans.py``
compares the two with the same ``tol`` (0 on both, and each default).

Run: ``.venv/bin/python benches/bench_centroids.py [--quick] [--kmeans |
--kmeans-only]`` (``--quick``: n = 100 000 for the mean).
"""

from __future__ import annotations

import os

if "--kmeans-only" not in __import__("sys").argv:
    # (not for the KMeans comparison: scikit-learn's k-means uses OpenMP threads)
    for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS", "BLIS_NUM_THREADS"):
        os.environ[_var] = "1"

import sys  # noqa: E402
import time  # noqa: E402

import numpy as np  # noqa: E402

import gyrokit as gk  # noqa: E402

TOL = 1e-12
GD_MAX_ITER = 80


def ball_points(rng, n, d, max_radius=3.0):
    """Poincaré points with hyperbolic radius uniform in [0, max_radius] (K = -1)."""
    v = rng.standard_normal((n, d))
    v /= np.linalg.norm(v, axis=1, keepdims=True)
    return v * np.tanh(rng.uniform(0, max_radius, n) / 2)[:, None]


# ------------------------------------------------------------------ baselines (K = -1)


def mobius_add_one(a, b):
    """a ⊕ b for single vectors (handbook formula)."""
    ab, a2, b2 = a @ b, a @ a, b @ b
    return ((1 + 2 * ab + b2) * a + (1 - a2) * b) / (1 + 2 * ab + a2 * b2)


def exp_map_one(m, v):
    """exp_m(v) = m ⊕ tanh(|v| / (1 - |m|^2)) v / |v|."""
    nv = np.linalg.norm(v)
    if nv == 0.0:
        return m
    return mobius_add_one(m, np.tanh(nv / (1 - m @ m)) * v / nv)


def gd_plain(X, max_iter=GD_MAX_ITER, tol=TOL):
    """Riemannian gradient descent, step 1, plain NumPy log/exp maps."""
    n, d = X.shape
    m = np.zeros(d)
    x2 = np.einsum("ij,ij->i", X, X)
    for it in range(max_iter + 1):
        a = -m
        a2 = a @ a
        ax = X @ a
        den = 1 + 2 * ax + a2 * x2
        U = ((1 + 2 * ax + x2) / den)[:, None] * a + ((1 - a2) / den)[:, None] * X  # (-m) ⊕ x
        nu = np.sqrt(np.einsum("ij,ij->i", U, U))
        with np.errstate(invalid="ignore", divide="ignore"):
            c = np.where(nu > 0, (1 - a2) * np.arctanh(nu) / nu, 0.0)
        v = (c[:, None] * U).mean(axis=0)  # mean log_m(x)
        grad = 2 / (1 - m @ m) * np.linalg.norm(v)  # Riemannian norm
        if grad <= tol or it == max_iter:
            return m, it, grad <= tol, grad
        m = exp_map_one(m, v)


def gd_fused(X, max_iter=GD_MAX_ITER, tol=TOL):
    """The same descent in two BLAS matrix-vector products per iteration.

    (-m) ⊕ x = alpha (-m) + beta x with D = 1 - 2<m,x> + |m|^2 |x|^2,
    alpha = (1 - 2<m,x> + |x|^2)/D, beta = (1 - |m|^2)/D, and
    |u|^2 = alpha^2 |m|^2 - 2 alpha beta <m,x> + beta^2 |x|^2, so
    mean log = (-m sum(c alpha) + X.T @ (c beta)) / n, c = (1-|m|^2) artanh|u| / |u|.
    """
    n, d = X.shape
    m = np.zeros(d)
    x2 = np.einsum("ij,ij->i", X, X)
    for it in range(max_iter + 1):
        m2 = m @ m
        mx = X @ m  # BLAS pass 1
        den = 1 - 2 * mx + m2 * x2
        alpha = (1 - 2 * mx + x2) / den
        beta = (1 - m2) / den
        u2 = np.maximum(alpha * alpha * m2 - 2 * alpha * beta * mx + beta * beta * x2, 0.0)
        nu = np.sqrt(u2)
        with np.errstate(invalid="ignore", divide="ignore"):
            c = np.where(nu > 0, (1 - m2) * np.arctanh(nu) / nu, 0.0)
        v = (X.T @ (c * beta) - m * np.sum(c * alpha)) / n  # BLAS pass 2
        grad = 2 / (1 - m2) * np.linalg.norm(v)
        if grad <= tol or it == max_iter:
            return m, it, grad <= tol, grad
        m = exp_map_one(m, v)


# ------------------------------------------------------------------ timing


def timed(f, repeat=1):
    best, out = float("inf"), None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = f()
        best = min(best, time.perf_counter() - t0)
    return best, out


def taxonomy(rng, n=36_607, d=10):
    """Invented taxonomy: twelve branches; a node's direction scatters around
    its branch's, its depth (hyperbolic radius) is Gamma(3, 0.9), capped at 12."""
    branches = rng.standard_normal((12, d))
    u = branches[rng.integers(0, 12, n)] + 0.6 * rng.standard_normal((n, d))
    u /= np.linalg.norm(u, axis=1, keepdims=True)
    return np.tanh(np.minimum(rng.gamma(3.0, 0.9, n), 12.0) / 2)[:, None] * u


def kmeans_bench():
    try:
        from sklearn.cluster import KMeans as SkKMeans
    except ImportError:
        print("KMeans: scikit-learn is not installed (pip install scikit-learn); skipped")
        return
    rng = np.random.default_rng(7)
    cases = [("36 607 x 10, taxonomy", taxonomy(rng)), ("1 000 000 x 2, radii in [0, 3]", ball_points(rng, 1_000_000, 2))]
    params = dict(n_clusters=10, n_init=1, max_iter=100, random_state=0)
    gk.KMeans(2, n_init=1).fit(cases[0][1][:500])  # warm-up (thread pool)
    SkKMeans(2, n_init=1).fit(cases[0][1][:500])
    print(f"KMeans, {params}, one fit each (threads: gyrokit RAYON_NUM_THREADS="
          f"{os.environ.get('RAYON_NUM_THREADS', 'all')}, scikit-learn OMP_NUM_THREADS="
          f"{os.environ.get('OMP_NUM_THREADS', 'all')}, {os.cpu_count()} cpus)")
    for name, X in cases:
        t_gk, km = timed(lambda: gk.KMeans(**params).fit(X))
        print(f"  {name:32s} gk          {t_gk:7.3f} s ({km.n_iter_:3d} iterations, {t_gk / (km.n_iter_ + 1) * 1e3:6.1f} ms each)")
        for label, tol in (("tol=0", 0.0), ("tol=1e-4", 1e-4)):
            t_sk, sk = timed(lambda: SkKMeans(algorithm="lloyd", init="k-means++", tol=tol, **params).fit(X))
            print(f"  {'':32s} sklearn {label:8s} {t_sk:7.3f} s ({sk.n_iter_:3d} iterations, {t_sk / sk.n_iter_ * 1e3:6.1f} ms each)"
                  f"   ratio gk/sklearn {t_gk / t_sk:5.2f}x")


def main(argv):
    if "--kmeans-only" in argv:
        kmeans_bench()
        return
    n = 100_000 if "--quick" in argv else 1_000_000
    d = 16
    rng = np.random.default_rng(2024)
    X = ball_points(rng, n, d)
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"Fréchet mean, n={n}, d={d}, hyperbolic radii uniform in [0, 3], K=-1, tol={TOL:g}")
    print(f"threads: gyrokit RAYON_NUM_THREADS={os.environ.get('RAYON_NUM_THREADS', 'all')} of {os.cpu_count()} cpus;"
          f" NumPy baselines with 1 BLAS thread; load average {load:.2f} before the run")

    gk.frechet_mean(X[:1000])  # warm-up (thread pool)
    t_gk, r = timed(lambda: gk.frechet_mean(X, tol=TOL), repeat=5)
    t_em, _ = timed(lambda: gk.einstein_midpoint(X), repeat=5)
    t_pass, _ = timed(lambda: X @ np.ones(d), repeat=5)
    print(f"  gk.frechet_mean          {t_gk * 1e3:9.1f} ms   iterations {r.iterations}, converged {r.converged},"
          f" grad_norm {r.grad_norm:.1e}")
    print(f"  (gk.einstein_midpoint    {t_em * 1e3:9.1f} ms;  one BLAS pass X @ p {t_pass * 1e3:.1f} ms)")

    t_plain, (m_a, it_a, conv_a, g_a) = timed(lambda: gd_plain(X))
    t_fused, (m_b, it_b, conv_b, g_b) = timed(lambda: gd_fused(X))
    for name, t, m, it, conv, g in (("(a) NumPy GD, plain maps", t_plain, m_a, it_a, conv_a, g_a),
                                    ("(b) NumPy GD, fused BLAS", t_fused, m_b, it_b, conv_b, g_b)):
        print(f"  {name:24s} {t * 1e3:9.1f} ms   iterations {it}, converged {conv}, grad_norm {g:.1e},"
              f" distance to gk mean {float(gk.poincare.distance(m, r.mean)):.1e}")
    print(f"  ratio (a)/gk = {t_plain / t_gk:6.1f}x   (issue 5 asks >= 30x)")
    print(f"  ratio (b)/gk = {t_fused / t_gk:6.1f}x   (issue 5 asks >= 8x)")

    labels = rng.integers(0, 1000, n)
    t_lab, rl = timed(lambda: gk.frechet_mean(X, labels=labels, tol=TOL), repeat=3)
    print(f"  per-label, 1000 groups   {t_lab * 1e3:9.1f} ms   = {t_lab / t_gk:.2f}x the single mean;"
          f" iterations max {int(np.max(rl.iterations))}, median {int(np.median(rl.iterations))},"
          f" all converged {bool(np.all(rl.converged))}, max grad_norm {float(np.max(rl.grad_norm)):.1e}")
    if "--kmeans" in argv:
        kmeans_bench()
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"load average {load:.2f} after the run")


if __name__ == "__main__":
    main(sys.argv[1:])
