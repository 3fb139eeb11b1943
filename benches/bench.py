"""gyrokit benchmarks: each figure is a ratio against a baseline timed in the
same run, on the same data (the machines are shared and noisy; absolute
times are printed for information only).

Run with ``make bench`` (or ``.venv/bin/python benches/bench.py [names...]``).
"""

from __future__ import annotations

import os
import sys
import time

import numpy as np

import gyrokit as gk


def best_of(f, repeat=5, min_time=0.2):
    """Best wall time of ``f()`` over ``repeat`` runs (each at least once)."""
    times = []
    t_end = time.perf_counter() + min_time
    for i in range(repeat):
        t0 = time.perf_counter()
        f()
        times.append(time.perf_counter() - t0)
        if i >= 2 and time.perf_counter() > t_end:
            break
    return min(times)


def ball_points(rng, n, d, max_radius=3.0):
    """Poincaré points with hyperbolic radius uniform in [0, max_radius] (K = -1)."""
    v = rng.standard_normal((n, d))
    v /= np.linalg.norm(v, axis=1, keepdims=True)
    rho = rng.uniform(0, max_radius, n)
    return v * np.tanh(rho / 2)[:, None]


def numpy_mobius_add(x, y):
    """The textbook formula written with NumPy (the baseline)."""
    xy = np.einsum("ij,ij->i", x, y)
    x2 = np.einsum("ij,ij->i", x, x)
    y2 = np.einsum("ij,ij->i", y, y)
    num = (1 + 2 * xy + y2)[:, None] * x + (1 - x2)[:, None] * y
    return num / (1 + 2 * xy + x2 * y2)[:, None]


def bench_add():
    rng = np.random.default_rng(7)
    n, d = 1_000_000, 16
    x = ball_points(rng, n, d)
    y = ball_points(rng, n, d)
    err = np.max(np.abs(gk.poincare.add(x, y) - numpy_mobius_add(x, y)))
    t_gk = best_of(lambda: gk.poincare.add(x, y))
    t_np = best_of(lambda: numpy_mobius_add(x, y))
    print(f"poincare.add   n={n} d={d}: gyrokit {t_gk*1e3:7.1f} ms   NumPy formula {t_np*1e3:7.1f} ms"
          f"   ratio gyrokit/NumPy = {t_gk/t_np:.3f}  (max |diff| {err:.1e})")
    t_k = best_of(lambda: gk.klein.add(x, y))
    print(f"klein.add      n={n} d={d}: gyrokit {t_k*1e3:7.1f} ms   ratio vs NumPy Möbius formula = {t_k/t_np:.3f}")
    t_g = best_of(lambda: gk.poincare.gyration(x, y, x))
    print(f"poincare.gyration          : gyrokit {t_g*1e3:7.1f} ms   ratio vs NumPy add formula = {t_g/t_np:.3f}")


BENCHES = {"add": bench_add}


def main(argv):
    names = argv or list(BENCHES)
    print(f"threads: RAYON_NUM_THREADS={os.environ.get('RAYON_NUM_THREADS', 'all')}, cpus={os.cpu_count()}")
    for name in names:
        BENCHES[name]()


if __name__ == "__main__":
    main(sys.argv[1:])
