"""Sampling benchmark: gk.random against numpy's ``standard_normal`` of the
same size (n x d normals), timed in the same run.

Cases: 1 000 000 points at d = 16 (K = -1): ``wrapped_normal`` (Poincaré,
full covariance, mean away from the origin; and hyperboloid),
``uniform_ball`` (radius 5, Poincaré), and ``wrapped_normal_logpdf`` on the
Poincaré samples. Reported: best of 3 wall times and the ratio to numpy's
``Generator.standard_normal((n, d))`` (one thread; gyrokit uses rayon
threads, RAYON_NUM_THREADS, default all cores).
"""

from __future__ import annotations

import os
import time

import numpy as np

import gyrokit as gk


def best(f, reps=3):
    t = []
    for _ in range(reps):
        s = time.perf_counter()
        f()
        t.append(time.perf_counter() - s)
    return min(t)


def main() -> None:
    n, d = 1_000_000, 16
    rng = np.random.default_rng(0)
    a = rng.normal(size=(d, d)) * 0.1
    cov = a @ a.T + 0.2 * np.eye(d)
    mean = np.full(d, 0.1)
    mean_h = gk.convert(mean, "poincare", "hyperboloid")
    base = best(lambda: rng.standard_normal((n, d)))
    x = gk.random.wrapped_normal(mean, cov, n, seed=1)
    cases = [
        ("wrapped_normal poincare", lambda: gk.random.wrapped_normal(mean, cov, n, seed=1)),
        ("wrapped_normal hyperboloid", lambda: gk.random.wrapped_normal(mean_h, cov, n, model="hyperboloid", seed=1)),
        ("uniform_ball radius 5", lambda: gk.random.uniform_ball(5.0, n, d, seed=1)),
        ("wrapped_normal_logpdf", lambda: gk.random.wrapped_normal_logpdf(x, mean, cov)),
    ]
    print(f"n = {n}, d = {d}, RAYON_NUM_THREADS = {os.environ.get('RAYON_NUM_THREADS', 'all')}, load {os.getloadavg()[0]:.2f}")
    print(f"{'numpy standard_normal':30s} {base * 1e3:8.1f} ms   ratio 1.00")
    for name, f in cases:
        t = best(f)
        print(f"{name:30s} {t * 1e3:8.1f} ms   ratio {t / base:.2f}")


if __name__ == "__main__":
    main()
