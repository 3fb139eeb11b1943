"""Example: neighbourhoods and community centres in a hyperbolic network map.

Scenario (invented): "Lanternet", a volunteer radio mesh of 60 000 relay
huts, has been embedded in the hyperbolic plane (Poincaré disk) by its
maintainers' layout tool: well-connected hubs near the centre, remote huts
near the rim, each hut tagged with one of 12 valley communities. The
maintainers want, at full precision and in seconds:
  1. every hut's 8 nearest huts (an exact metric-tree index), checked
     against brute force on a sample;
  2. all huts within 0.5 (hyperbolic) of a stricken hut;
  3. the centre of each community (Fréchet mean, one pass for all 12) and
     how far the quick Einstein midpoint is from it;
  4. a distance matrix between the 12 centres, stored in a memory-mapped file.
Run: .venv/bin/python examples/network_map.py
"""

import tempfile
import time

import numpy as np

import gyrokit as gk

rng = np.random.default_rng(20261201)
n, n_comm = 60_000, 12

# --- the invented map: communities are angular sectors, radii spread out ---
comm = rng.integers(0, n_comm, n)
theta = 2 * np.pi * (comm + rng.beta(4, 4, n)) / n_comm
rho = np.sqrt(rng.uniform(0, 1, n)) * 9.0  # hyperbolic radius in [0, 9]
huts = np.tanh(rho / 2)[:, None] * np.c_[np.cos(theta), np.sin(theta)]
print(f"{n} huts; farthest from the centre at hyperbolic radius {rho.max():.2f} "
      f"(1 - |x| = {1 - np.linalg.norm(huts, axis=1).max():.1e})")

# --- 1. nearest huts with the exact index ----------------------------------
t0 = time.perf_counter()
index = gk.NeighborIndex(huts)
idx, dist = index.query(k=8)
t1 = time.perf_counter()
sample = rng.choice(n, 50, replace=False)
bi, bd = gk.knn(huts[sample], 9, huts)  # brute force, includes the hut itself
# the hut itself comes first in the brute-force list; drop it and compare
agree = all(np.array_equal(bi[r][bi[r] != s][:8], idx[s]) for r, s in enumerate(sample))
print(f"1. 8 nearest huts of all {n}: {t1 - t0:.2f} s; brute force agrees on a 50-hut sample: {agree}")

# --- 2. huts within reach of a stricken hut ---------------------------------
stricken = int(np.argmax(rho))
indptr, nb, nd = gk.radius_neighbors(huts[[stricken]], 0.5, huts)
others = nd[nb != stricken]  # y is all huts, so the hut itself is listed at distance 0
print(f"2. huts within 0.5 of hut {stricken}: {others.size} besides itself"
      f" (nearest at {others.min() if others.size else float('nan'):.6f})")

# --- 3. community centres ---------------------------------------------------
t0 = time.perf_counter()
res = gk.frechet_mean(huts, labels=comm)
t1 = time.perf_counter()
quick = gk.einstein_midpoint(huts, labels=comm)
gap = gk.poincare.distance(res.mean, quick)
print(f"3. {n_comm} community centres in {1e3 * (t1 - t0):.0f} ms, Newton iterations "
      f"{res.iterations.min()}..{res.iterations.max()}, all converged: {bool(res.converged.all())}; "
      f"Einstein midpoint lies {gap.min():.3f}..{gap.max():.3f} from the Fréchet mean")

# --- 4. centre-to-centre distances into a memory-mapped file -----------------
with tempfile.NamedTemporaryFile(suffix=".dat") as f:
    table = np.memmap(f.name, dtype=np.float64, mode="w+", shape=(n_comm, n_comm))
    out = gk.distance_matrix(res.mean, out=table)
    print(f"4. centre distances written in place (same object: {out is table}); "
          f"closest communities {np.unravel_index(np.argmin(table + np.eye(n_comm) * 1e9), table.shape)} "
          f"at {np.min(table + np.eye(n_comm) * 1e9):.4f}")
