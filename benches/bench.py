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


def numpy_distance_matrix(x, y):
    """The NumPy broadcasting formula arccosh(1 + 2|x-y|^2/((1-|x|^2)(1-|y|^2)))."""
    d2 = np.sum((x[:, None, :] - y[None, :, :]) ** 2, axis=-1)
    gx = 1 - np.sum(x * x, axis=1)
    gy = 1 - np.sum(y * y, axis=1)
    return np.arccosh(1 + 2 * d2 / (gx[:, None] * gy[None, :]))


def bench_matrix():
    from scipy.spatial.distance import cdist

    rng = np.random.default_rng(11)
    n = 2000
    for d in (2, 16, 128):
        x = ball_points(rng, n, d)
        t_gk = best_of(lambda: gk.distance_matrix(x), repeat=7)
        t_cd = best_of(lambda: cdist(x, x), repeat=7)
        line = (f"distance_matrix n=m={n} d={d:3d}: gyrokit {t_gk*1e3:7.1f} ms   cdist {t_cd*1e3:7.1f} ms"
                f"   ratio gyrokit/cdist = {t_gk/t_cd:.2f}")
        if d <= 16:
            t_np = best_of(lambda: numpy_distance_matrix(x, x), repeat=2)
            line += f"   NumPy formula {t_np*1e3:7.1f} ms (gyrokit {t_np/t_gk:.0f}x faster)"
        print(line)


def bench_knn():
    rng = np.random.default_rng(12)
    n, d, k = 4000, 16, 10
    x = ball_points(rng, n, d)
    t_dm = best_of(lambda: gk.distance_matrix(x), repeat=5)
    t_kn = best_of(lambda: gk.knn(x, k), repeat=5)
    print(f"knn n={n} d={d} k={k}: {t_kn*1e3:7.1f} ms; distance_matrix {t_dm*1e3:7.1f} ms;"
          f" knn pair throughput = {t_dm/t_kn*100:.0f}% of distance_matrix")


def _rowdot(a, b):
    return np.einsum("ij,ij->i", a, b)


def numpy_poincare_exp(v, x):
    """Textbook x ⊕ tanh(|v|/g_x) v/|v| (K = -1, g = 1 - |x|^2)."""
    nv = np.linalg.norm(v, axis=1, keepdims=True)
    g = 1 - _rowdot(x, x)[:, None]
    return numpy_mobius_add(x, np.tanh(nv / g) * v / nv)


def numpy_klein_exp(v, x):
    """Textbook Klein exp through the Poincaré ball (K = -1): the point, its
    tangent by the differential, the Poincaré exp, and back."""
    a = np.sqrt(1 - _rowdot(x, x))[:, None]
    p = x / (1 + a)
    dp = v / (1 + a) + (_rowdot(x, v)[:, None] / (a * (1 + a) ** 2)) * x
    q = numpy_poincare_exp(dp, p)
    return 2 * q / (1 + _rowdot(q, q))[:, None]


def numpy_hyperboloid_exp(v, x):
    """Textbook cosh(|v|) x + sinh(|v|) v/|v| (K = -1)."""
    n = np.sqrt(np.maximum(_rowdot(v[:, 1:], v[:, 1:]) - v[:, 0] ** 2, 0))[:, None]
    return np.cosh(n) * x + np.sinh(n) / n * v


def numpy_hyperboloid_transport(v, x, y):
    """Textbook v + <y, v>_L / (1 - <x, y>_L) (x + y) (K = -1)."""
    mink = lambda a, b: _rowdot(a[:, 1:], b[:, 1:]) - a[:, 0] * b[:, 0]  # noqa: E731
    return v + (mink(y, v) / (1 - mink(x, y)))[:, None] * (x + y)


def bench_maps():
    """Model-layer maps, 1M points at d = 16 (radii up to 3 R), against the
    textbook formulas in NumPy on the same inputs."""
    rng = np.random.default_rng(11)
    n, d = 1_000_000, 16
    p = ball_points(rng, n, d)
    q = ball_points(rng, n, d)
    w = 0.5 * rng.standard_normal((n, d))
    k, kq = gk.convert(p, "poincare", "klein"), gk.convert(q, "poincare", "klein")
    h, hq = gk.convert(p, "poincare", "hyperboloid"), gk.convert(q, "poincare", "hyperboloid")
    pv = w * (1 - _rowdot(p, p))[:, None]  # Poincaré tangents of hyperbolic length ~ 2|w| (within the ball's range)
    kv = w * (1 - _rowdot(k, k))[:, None]  # Klein tangents of moderate length
    hv = gk.hyperboloid.log_map(hq, h)     # hyperboloid tangents
    rows = [
        ("poincare.exp_map", lambda: gk.poincare.exp_map(pv, p), lambda: numpy_poincare_exp(pv, p)),
        ("klein.exp_map", lambda: gk.klein.exp_map(kv, k), lambda: numpy_klein_exp(kv, k)),
        ("hyperboloid.exp_map", lambda: gk.hyperboloid.exp_map(hv, h), lambda: numpy_hyperboloid_exp(hv, h)),
        ("hyperboloid.transport", lambda: gk.hyperboloid.transport(hv, h, hq),
         lambda: numpy_hyperboloid_transport(hv, h, hq)),
        ("klein.transport", lambda: gk.klein.transport(kv, k, kq), None),
        ("klein.log_map", lambda: gk.klein.log_map(kq, k), None),
    ]
    for name, f, base in rows:
        t = best_of(f, repeat=3)
        if base is None:
            print(f"{name:22s} n={n} d={d}: gyrokit {t*1e3:7.1f} ms")
            continue
        err = np.max(np.abs(f() - base())) / np.max(np.abs(base()))
        tb = best_of(base, repeat=3)
        print(f"{name:22s} n={n} d={d}: gyrokit {t*1e3:7.1f} ms   NumPy textbook {tb*1e3:7.1f} ms"
              f"   ratio gyrokit/NumPy = {t/tb:.3f}  (max rel diff {err:.1e})")


def bench_models():
    """distance_matrix and knn with model="klein" / "hyperboloid" / "halfspace"
    against model="poincare" on the same points (converted once): every model
    runs the same tiled kernel, so the ratios should be close to 1."""
    rng = np.random.default_rng(13)
    n = 2000
    for d in (2, 16, 128):
        x = ball_points(rng, n, d)
        pts = {m: gk.convert(x, "poincare", m) for m in ("poincare", "klein", "hyperboloid", "halfspace")}
        t_p = best_of(lambda: gk.distance_matrix(pts["poincare"]), repeat=7)
        line = f"distance_matrix n=m={n} d={d:3d}: poincare {t_p*1e3:7.1f} ms"
        for m in ("klein", "hyperboloid", "halfspace"):
            t = best_of(lambda: gk.distance_matrix(pts[m], model=m), repeat=7)
            line += f"   {m}/poincare = {t/t_p:.2f}"
        print(line)
    n, d, k = 20000, 10, 10
    x = ball_points(rng, n, d)
    pts = {m: gk.convert(x, "poincare", m) for m in ("poincare", "klein", "hyperboloid")}
    t_p = best_of(lambda: gk.knn(pts["poincare"], k), repeat=3)
    line = f"knn n={n} d={d} k={k}: poincare {t_p*1e3:7.1f} ms"
    for m in ("klein", "hyperboloid"):
        t = best_of(lambda: gk.knn(pts[m], k, model=m), repeat=3)
        line += f"   {m}/poincare = {t/t_p:.2f}"
    print(line)


BENCHES = {"add": bench_add, "matrix": bench_matrix, "knn": bench_knn, "maps": bench_maps, "models": bench_models}


def main(argv):
    names = [a for a in argv if a in BENCHES] or list(BENCHES)
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"threads: RAYON_NUM_THREADS={os.environ.get('RAYON_NUM_THREADS', 'all')}, cpus={os.cpu_count()},"
          f" load average {load:.2f}")
    for name in names:
        BENCHES[name]()
    if "--single-thread" in argv and os.environ.get("RAYON_NUM_THREADS") != "1":
        import subprocess

        env = dict(os.environ, RAYON_NUM_THREADS="1")
        print("--- again with one thread ---", flush=True)
        subprocess.run([sys.executable, __file__, *names], env=env, check=True)


if __name__ == "__main__":
    main(sys.argv[1:])
