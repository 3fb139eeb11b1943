"""KMeans benchmark: ``gk.KMeans`` against scikit-learn's Euclidean
``sklearn.cluster.KMeans`` on the same array, timed in the same run.

Data (invented, our own):

* 36 607 x 10 points: a taxonomy (node depth ~ hyperbolic radius,
  Gamma(3, 0.9) capped at 12; twelve branches, nodes scattered around their
  branch's direction);
* 1 000 000 x 2 points: hyperbolic radii uniform in [0, 3], uniform directions.

Configurations, ``n_clusters=10``, k-means++ seeding, ``random_state=0``
(each library draws its own seeding from it), scikit-learn with
``algorithm="lloyd"``:

* ``same``: ``n_init=1, max_iter=100, tol=0`` on both: each runs until its
  labels stop changing (or 100 updates); the time per iteration compares
  the work of one Lloyd step.
* ``default tol, n_init=1``: each library's default stop rule (gyrokit:
  ``tol=1e-4`` relative to the data's spread; scikit-learn: ``tol=1e-4``
  relative to the mean per-feature variance), one run each.
* ``defaults``: each library's defaults (gyrokit: ``n_init="auto"``;
  scikit-learn: ``n_init="auto"``; both 1 run for k-means++).

Each fit is timed twice, alternating the libraries, and the faster time of
each is kept; the ratio gk/sklearn is printed beside the times, with the
iteration counts. ``--seeds N`` fits each configuration with
``random_state`` 0 to N - 1 and sums the best times over the seeds (the
iteration counts are then means): the number of Lloyd iterations depends
on the seeding and varies several-fold between seeds for both libraries
(taxonomy, ``tol=0``, seeds 0-19: gyrokit 11 to 69, scikit-learn 11 to
32), so one seed compares luck as much as speed. Threads: gyrokit uses
rayon (``RAYON_NUM_THREADS``), scikit-learn OpenMP (``OMP_NUM_THREADS``);
both default to all cores, and ``--threads N`` sets both to N (read before
either library starts its threads). On a machine shared with another busy
job, OpenMP's spinning threads lose much of their time when there are
fewer free cores than threads: compare with ``--threads 1`` too.

BLAS threads: scikit-learn's k-means++ seeding computes its distances with
BLAS (NumPy's OpenBLAS, all cores by default; its Lloyd steps limit BLAS to
one thread and run on OpenMP). OpenBLAS's idle threads keep spinning for a
while after such a call, so on a 2-core machine they slow whatever runs
next: the rest of scikit-learn's fit and the next gyrokit fit of the
alternation (seen here: best-of-7 times of the same gyrokit fit 51-76 ms,
scikit-learn's 30-45 ms; with one BLAS thread 47-48 and 23 ms, steady).
``--blas-threads N`` sets the BLAS pool of NumPy (and so of scikit-learn) to
N threads before NumPy starts it; ``--blas-threads 1`` gives the steady
figures and the stronger baseline.

Run: ``.venv/bin/python benches/bench_kmeans.py [--repeat N] [--only small|large] [--threads N]
[--blas-threads N] [--seeds N]``.
"""

from __future__ import annotations

import os
import sys
import time

if "--threads" in sys.argv:
    _n = sys.argv[sys.argv.index("--threads") + 1]
    os.environ["RAYON_NUM_THREADS"] = os.environ["OMP_NUM_THREADS"] = _n
if "--blas-threads" in sys.argv:
    _b = sys.argv[sys.argv.index("--blas-threads") + 1]
    for _v in ("OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "BLIS_NUM_THREADS"):
        os.environ[_v] = _b

import numpy as np  # noqa: E402

import gyrokit as gk  # noqa: E402


def ball_points(rng, n, d, max_radius=3.0):
    """Poincaré points with hyperbolic radius uniform in [0, max_radius] (K = -1)."""
    v = rng.standard_normal((n, d))
    v /= np.linalg.norm(v, axis=1, keepdims=True)
    return v * np.tanh(rng.uniform(0, max_radius, n) / 2)[:, None]


# The same invented taxonomy as bench_centroids (this script's folder is on
# sys.path). That module pins the BLAS/OpenMP threads to 1 for its NumPy
# baselines when imported; here scikit-learn keeps the threads it is given.
_saved = {v: os.environ.get(v) for v in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS", "BLIS_NUM_THREADS")}
from bench_centroids import taxonomy  # noqa: E402

for _v, _val in _saved.items():
    if _val is None:
        os.environ.pop(_v, None)
    else:
        os.environ[_v] = _val


def main(argv):
    try:
        from sklearn.cluster import KMeans as SkKMeans
    except ImportError:
        print("scikit-learn is not installed (pip install scikit-learn); nothing to compare with")
        return
    repeat = int(argv[argv.index("--repeat") + 1]) if "--repeat" in argv else 2
    only = argv[argv.index("--only") + 1] if "--only" in argv else None
    seeds = int(argv[argv.index("--seeds") + 1]) if "--seeds" in argv else 1
    rng = np.random.default_rng(7)
    cases = []
    if only in (None, "small"):
        cases.append(("36 607 x 10, taxonomy", taxonomy(rng)))
    if only in (None, "large"):
        cases.append(("1 000 000 x 2, radii in [0, 3]", ball_points(np.random.default_rng(8), 1_000_000, 2)))
    configs = [
        ("same (n_init=1, max_iter=100, tol=0)",
         dict(n_init=1, max_iter=100, tol=0.0), dict(n_init=1, max_iter=100, tol=0.0)),
        ("default tol, n_init=1 on both", dict(n_init=1), dict(n_init=1)),
        ("defaults", {}, {}),
    ]
    warm = taxonomy(np.random.default_rng(1), 500)
    gk.KMeans(2, n_init=1).fit(warm)  # warm-up (thread pools)
    SkKMeans(2, n_init=1).fit(warm)
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    states = "random_state=0" if seeds == 1 else f"random_state=0..{seeds - 1}, times summed, iterations averaged"
    print(f"KMeans(n_clusters=10, {states}), k-means++; best of {repeat}, alternating; threads: gyrokit "
          f"RAYON_NUM_THREADS={os.environ.get('RAYON_NUM_THREADS', 'all')}, scikit-learn OMP_NUM_THREADS="
          f"{os.environ.get('OMP_NUM_THREADS', 'all')}, BLAS OPENBLAS_NUM_THREADS="
          f"{os.environ.get('OPENBLAS_NUM_THREADS', 'all')}, {os.cpu_count()} cpus; load average {load:.2f}")
    ratios = []
    for name, X in cases:
        print(f"{name}")
        for cname, gk_kw, sk_kw in configs:
            t_gk = t_sk = 0.0
            it_gk = it_sk = 0
            for state in range(seeds):
                b_gk = b_sk = float("inf")
                for _ in range(repeat):
                    t0 = time.perf_counter()
                    km = gk.KMeans(10, random_state=state, **gk_kw).fit(X)
                    b_gk = min(b_gk, time.perf_counter() - t0)
                    t0 = time.perf_counter()
                    sk = SkKMeans(10, random_state=state, algorithm="lloyd", **sk_kw).fit(X)
                    b_sk = min(b_sk, time.perf_counter() - t0)
                t_gk += b_gk
                t_sk += b_sk
                it_gk += km.n_iter_
                it_sk += sk.n_iter_
            r = t_gk / t_sk
            ratios.append((name, cname, r))
            print(f"  {cname:38s} gk {t_gk:7.3f} s ({it_gk / seeds:5.1f} it, {t_gk / max(it_gk, 1) * 1e3:6.1f} ms/it)"
                  f"   sklearn {t_sk:7.3f} s ({it_sk / seeds:5.1f} it, {t_sk / max(it_sk, 1) * 1e3:6.1f} ms/it)"
                  f"   ratio gk/sklearn {r:5.2f}x")
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"load average {load:.2f} after the run")
    return ratios


if __name__ == "__main__":
    main(sys.argv[1:])
