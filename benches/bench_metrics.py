"""Graph reconstruction benchmark: exact ``gk.metrics.reconstruction`` (all
n (n - 1) ordered pairs) against ``gk.knn`` (k = 10, all n^2 pairs) on the
same points, timed in the same run; the figure that counts is the pair
throughput ratio (SPEC: reconstruction at least 70 % of knn's), and the
absolute time on the WordNet noun hierarchy (SPEC: under a minute on 2 cores).

Data:
- ``wordnet``: the WordNet 3.0 noun hierarchy read from the Debian package
  ``wordnet-base`` (/usr/share/wordnet/data.noun, read by ``benches/wordnet.py``):
  82 115 synsets, the graph is the transitive closure of the hypernym and instance-hypernym
  relations. Points: an invented tree layout (each synset at hyperbolic
  distance 1.5 from its first hypernym, in a random direction, by Möbius
  addition; d = 10), a stand-in for a trained embedding: most nodes' closure
  neighbours (their ancestors) lie nearer than most other nodes, as in a
  good embedding.
- ``random``: the same graph on points uniform in direction with radius
  uniform in [0, 8] (the worst case for the ranking: a neighbour is rarely
  nearer than the other nodes, so nearly every pair is located among the
  node's neighbours).

Run: ``.venv/bin/python benches/bench_metrics.py [--n N] [--cases wordnet]``
(``--n`` takes the first N synsets in depth order, for a quick run).
"""

from __future__ import annotations

import argparse
import os
import sys
import time

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import wordnet  # noqa: E402  (the one WordNet loader, shared with bench_graph.py)

import gyrokit as gk  # noqa: E402


def first_parents(n, edges):
    """Each synset's first hypernym (pointer order of ``data.noun``), -1 for roots."""
    first = np.full(n, -1, dtype=np.int64)
    child, at = np.unique(edges[:, 0], return_index=True)
    first[child] = edges[at, 1]
    return first


def tree_layout(first, d, rng, step=1.5):
    """Each node at distance `step` from its first parent (``first``, -1 for
    roots), random direction."""
    n = len(first)
    depth = np.full(n, -1)
    depth[first < 0] = 0
    while (depth < 0).any():
        todo = np.flatnonzero(depth < 0)
        ok = depth[first[todo]] >= 0
        depth[todo[ok]] = depth[first[todo[ok]]] + 1
    x = np.zeros((n, d))
    u = rng.standard_normal((n, d))
    u *= (np.tanh(step / 2) / np.linalg.norm(u, axis=1))[:, None]
    for lev in range(1, depth.max() + 1):
        idx = np.flatnonzero(depth == lev)
        x[idx] = gk.poincare.add(x[first[idx]], u[idx])
    return x, depth


def timed(f):
    t = time.perf_counter()
    r = f()
    return time.perf_counter() - t, r


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--n", type=int, default=None)
    ap.add_argument("--d", type=int, default=10)
    ap.add_argument("--cases", default="wordnet,random", help="comma-separated: wordnet, random")
    args = ap.parse_args()
    names, hyper = wordnet.read_nouns()
    edges = wordnet.closure(len(names), hyper)
    rng = np.random.default_rng(0)
    x, depth = tree_layout(first_parents(len(names), hyper), args.d, rng)
    if args.n is not None:
        keep = np.argsort(depth, kind="stable")[: args.n]
        new = np.full(len(names), -1)
        new[keep] = np.arange(len(keep))
        e = new[edges]
        edges = e[(e >= 0).all(axis=1)]
        x = x[keep]
    n = len(x)
    print(f"WordNet nouns: {n} synsets, {len(edges)} closure pairs, d = {args.d}, "
          f"load {os.getloadavg()[0]:.1f} on {os.cpu_count()} cpus")
    v = rng.standard_normal((n, args.d))
    v /= np.linalg.norm(v, axis=1, keepdims=True)
    xr = np.tanh(rng.uniform(0, 8, n) / 2)[:, None] * v
    for name, pts in (("wordnet", x), ("random", xr)):
        if name not in args.cases.split(","):
            continue
        tk, _ = timed(lambda: gk.knn(pts, 10))
        tr, r = timed(lambda: gk.metrics.reconstruction(pts, edges))
        rate_k = n * n / tk
        rate_r = n * (n - 1) / tr
        print(f"{name:8s} reconstruction {tr:7.2f} s ({rate_r / 1e6:7.0f} M pairs/s), "
              f"knn(k=10) {tk:7.2f} s ({rate_k / 1e6:7.0f} M pairs/s), throughput ratio {rate_r / rate_k:.2f}; "
              f"MAP {r.mean_average_precision:.4f}, mean rank {r.mean_rank:.2f}")


if __name__ == "__main__":
    main()
