"""Example: embed a real hierarchy found on this machine, and judge it.

Data: the directory tree of the Python standard library installed with the
system (``/usr/lib/python3.X``: every directory and file is a node, its
parent the directory holding it; a few thousand nodes, written by the
Python developers, not by this project). Each run reads it afresh, so the
figures follow the machine.

The tree goes into the hyperbolic plane (d = 2) and into d = 10 with
``gk.embed.tree`` at the largest scale the Poincaré ball holds in float64
(``scale=None``), and at a smaller scale for comparison. For each, the
script prints the scale, the worst-case and mean distortion of the hop
counts over all pairs (``gk.metrics.distortion`` against
``gk.metrics.tree_distances``, at the embedding's own scale), the mean
average precision and mean rank of the tree's edges
(``gk.metrics.reconstruction``), and the edge lengths' largest relative
departure from the scale (at the largest scale the nodes sit near the rim,
where float64 coordinates resolve positions only to about 1e-16 e^r).

Run: .venv/bin/python examples/real_hierarchy.py
"""

from __future__ import annotations

import glob
import os
import sys

import numpy as np

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
    child = np.arange(1, n)
    edges = np.stack([child, parent[child]], axis=1)
    for dim in (2, 10):
        for scale in (None, 1.0):
            e = gk.embed.tree(parent, dim, scale=scale)
            q = gk.metrics.distortion(e.points, hops, scale=e.scale, model=e.model, curvature=e.curvature)
            rec = gk.metrics.reconstruction(e.points, edges, model=e.model, curvature=e.curvature)
            lengths = gk.poincare.distance(e.points[child], e.points[parent[child]])
            edge_err = np.max(np.abs(lengths / e.scale - 1))
            print(f"  d = {dim:2d}  scale {e.scale:7.4f} R  distortion: worst {q.worst:9.4f}, mean {q.mean:.4f}  "
                  f"MAP {rec.mean_average_precision:.4f}  mean rank {rec.mean_rank:.3f}  "
                  f"edges within {edge_err:.1e} of the scale")
    sys.stdout.flush()


if __name__ == "__main__":
    main()
