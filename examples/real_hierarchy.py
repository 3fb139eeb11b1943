"""Example: embed a real hierarchy found on this machine, and judge it.

Data: the directory tree of the Python standard library installed with the
system (``/usr/lib/python3.X``: every directory and file is a node, its
parent the directory holding it; a few thousand nodes, written by the
Python developers, not by this project). Each run reads it afresh, so the
figures follow the machine.

The tree goes into the hyperbolic plane (d = 2) and into d = 10 with
``gk.embed.tree`` at the largest scale the Poincaré ball holds in float64
(``scale=None``), and at a smaller scale for comparison. For each, the
script prints the scale, the worst-case distortion of the hop counts
(``max(d/(s t)) * max(s t/d)`` over all pairs, directly from
``gk.distance_matrix`` and ``gk.metrics.tree_distances``), and the edge
lengths' largest relative departure from the scale.

Run: .venv/bin/python examples/real_hierarchy.py
"""

from __future__ import annotations

import glob
import os
import sys

import numpy as np
from scipy.spatial.distance import squareform

import gyrokit as gk


def directory_tree(top: str, limit: int = 5000):
    """Parent array and names of the tree under `top` (breadth-first, sorted
    names, at most `limit` nodes, symbolic links not followed)."""
    names = [top]
    parent = [-1]
    head = 0
    while head < len(names) and len(names) < limit:
        path = names[head]
        if os.path.isdir(path) and not os.path.islink(path):
            try:
                entries = sorted(os.listdir(path))
            except OSError:
                entries = []
            for e in entries:
                if len(names) >= limit:
                    break
                names.append(os.path.join(path, e))
                parent.append(head)
        head += 1
    return np.asarray(parent, dtype=np.int64), names


def main() -> None:
    tops = sorted(glob.glob("/usr/lib/python3.[0-9]*")) or [os.path.dirname(os.__file__)]
    top = tops[-1]
    parent, names = directory_tree(top)
    n = len(parent)
    hops = gk.metrics.tree_distances(parent)
    height = int(hops[0].max())
    degree = np.bincount(parent[1:], minlength=n)
    print(f"{top}: {n} nodes, height {height}, largest fan-out {degree.max()} "
          f"({os.path.relpath(names[int(degree.argmax())], top) or '.'})")
    t = squareform(hops, checks=False).astype(np.float64)  # condensed, like gk.condensed_distances
    del hops
    child = np.arange(1, n)
    for dim in (2, 10):
        for scale in (None, 1.0):
            e = gk.embed.tree(parent, dim, scale=scale)
            d = gk.condensed_distances(e.points)
            ratio = d / (e.scale * t)
            worst = ratio.max() / ratio.min()
            edges = gk.poincare.distance(e.points[child], e.points[parent[child]])
            edge_err = np.max(np.abs(edges / e.scale - 1))
            print(f"  d = {dim:2d}  scale {e.scale:7.4f} R  worst-case distortion {worst:9.4f}  "
                  f"mean |d/s - t|/t {np.mean(np.abs(d / e.scale - t) / t):.4f}  "
                  f"edges within {edge_err:.1e} of the scale")
    sys.stdout.flush()


if __name__ == "__main__":
    main()
