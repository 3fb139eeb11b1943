"""Trees for the tree tests: random recursive, balanced, path, star and
caterpillar, as parent arrays (-1 for the root)."""

from __future__ import annotations

import numpy as np


def random_recursive(n: int, seed: int = 0) -> np.ndarray:
    """Node i attaches to a uniform earlier node (the random recursive tree)."""
    rng = np.random.default_rng(seed)
    p = np.empty(n, dtype=np.int64)
    p[0] = -1
    p[1:] = [rng.integers(0, i) for i in range(1, n)]
    return p


def balanced(branching: int, height: int) -> np.ndarray:
    n = sum(branching**h for h in range(height + 1))
    p = (np.arange(n) - 1) // branching
    p[0] = -1
    return p


def path(n: int) -> np.ndarray:
    return np.arange(n, dtype=np.int64) - 1


def star(n: int) -> np.ndarray:
    p = np.zeros(n, dtype=np.int64)
    p[0] = -1
    return p


def caterpillar(spine: int, legs: int) -> np.ndarray:
    """A path of `spine` nodes, each with `legs` leaves."""
    p = list(range(-1, spine - 1))
    for s in range(spine):
        p += [s] * legs
    return np.asarray(p, dtype=np.int64)


FAMILIES = {
    "random_recursive": lambda: random_recursive(60, seed=3),
    "balanced": lambda: balanced(3, 3),
    "path": lambda: path(8),
    "star": lambda: star(25),
    "caterpillar": lambda: caterpillar(6, 3),
}


def to_networkx(parent: np.ndarray):
    import networkx as nx

    g = nx.Graph()
    g.add_nodes_from(range(len(parent)))
    g.add_edges_from((int(p), i) for i, p in enumerate(parent) if p >= 0)
    return g
