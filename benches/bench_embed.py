"""Tree embedding benchmark: gk.embed.tree on 1 000 000 nodes, with
baselines timed in the same run on the same number of points.

Trees: a random recursive tree (node i attaches to a uniform earlier node;
height about 40), a path (height 999 999: one node per level, the sequential
worst case) and a star (one node with 999 999 children: one code of that
size). d = 2 and d = 10, Poincaré ball, scale=None.

Baselines:
(a) ``gk.convert`` of the 1 000 000 embedded points to the hyperboloid (one
    pass of the hub conversion the embedding ends with);
(b) the tree check alone: ``gk.metrics.tree_distances`` of 1 000 000 (node,
    parent) pairs (validation, structure, one LCA query per node);
(c) a NumPy construction of the same tree with the textbook Möbius formulas,
    level by level over the 40 levels of the random recursive tree (the
    children directions equally spaced, no exact gaps, d = 2 only): what
    the 115 hand-written lines of the issue amount to.

The ratios printed are embed / baseline. Run:
``.venv/bin/python benches/bench_embed.py [--quick]`` (``--quick``: 100 000 nodes).
"""

from __future__ import annotations

import sys
import time

import numpy as np

import gyrokit as gk

N = 100_000 if "--quick" in sys.argv else 1_000_000


def timed(f, repeat=3):
    best = float("inf")
    out = None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = f()
        best = min(best, time.perf_counter() - t0)
    return best, out


def numpy_sarkar_2d(parent, scale):
    """Sarkar in the plane with NumPy, level by level (K = -1)."""
    n = len(parent)
    deg = np.bincount(parent[1:], minlength=n)
    rank = np.zeros(n, dtype=np.int64)
    p1 = parent[1:]
    srt = np.argsort(p1, kind="stable")
    first = np.searchsorted(p1[srt], p1[srt])
    rank[1 + srt] = np.arange(n - 1) - first
    # depth by repeated parent lookups
    depth = np.zeros(n, dtype=np.int64)
    cur = parent.copy()
    alive = cur >= 0
    while alive.any():
        depth[alive] += 1
        cur[alive] = parent[cur[alive]]
        alive = cur >= 0
    x = np.zeros((n, 2))
    ang = np.zeros(n)  # direction of the parent at each node
    t = np.tanh(scale / 2)
    for lvl in range(1, depth.max() + 1):
        idx = np.flatnonzero(depth == lvl)
        p = parent[idx]
        m = deg[p] + (p != 0)
        a = np.where(p != 0, ang[p], 0.0) + 2 * np.pi * (rank[idx] + (p != 0)) / m
        b = t * np.stack([np.cos(a), np.sin(a)], 1)
        u = x[p]
        uv = (u * b).sum(1)
        uu = (u * u).sum(1)
        bb = (b * b).sum(1)
        den = 1 + 2 * uv + uu * bb
        c = ((1 + 2 * uv + bb)[:, None] * u + (1 - uu)[:, None] * b) / den[:, None]
        x[idx] = c
        # direction back to the parent: -(-c ⊕ u) direction
        cu = (c * u).sum(1)
        cc = (c * c).sum(1)
        num = (1 - 2 * cu + uu)[:, None] * (-c) + (1 - cc)[:, None] * u
        ang[idx] = np.arctan2(num[:, 1], num[:, 0])
    return x


def main():
    rng = np.random.default_rng(0)
    parent = np.empty(N, dtype=np.int64)
    parent[0] = -1
    parent[1:] = (rng.random(N - 1) * np.arange(1, N)).astype(np.int64)
    trees = {
        "random recursive": parent,
        "path": np.arange(N, dtype=np.int64) - 1,
        "star": np.r_[-1, np.zeros(N - 1, dtype=np.int64)],
    }
    print(f"n = {N}, threads: RAYON_NUM_THREADS or all cores")
    pairs = np.stack([np.arange(1, N), parent[1:]], 1)
    t_check, _ = timed(lambda: gk.metrics.tree_distances(parent, pairs))
    for d in (2, 10):
        t_emb, e = timed(lambda: gk.embed.tree(parent, d))
        t_conv, _ = timed(lambda: gk.convert(e.points, "poincare", "hyperboloid"))
        print(
            f"d = {d:2d} random recursive (height {int(e.scale and round(37.4 / e.scale))}): "
            f"embed {t_emb:.3f} s | convert {t_conv:.3f} s (ratio {t_emb / t_conv:.2f}) | "
            f"tree_distances of the edges {t_check:.3f} s (ratio {t_emb / t_check:.2f})"
        )
        if d == 2:
            t_np, _ = timed(lambda: numpy_sarkar_2d(parent, e.scale), repeat=1)
            print(f"       NumPy level-by-level construction {t_np:.3f} s (ratio {t_emb / t_np:.2f})")
        for name in ("path", "star"):
            t, _ = timed(lambda: gk.embed.tree(trees[name], d, model="hyperboloid"), repeat=1)
            print(f"d = {d:2d} {name}: embed {t:.3f} s")


if __name__ == "__main__":
    main()
