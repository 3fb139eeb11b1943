"""Reading a tree argument, once for the whole library: a parent array, an
``(n - 1, 2)`` array of ``(parent, child)`` rows, or a networkx tree. This
module only converts to plain int64 arrays; the Rust core validates the tree
(cycles, roots, ranges) and builds its structure.

networkx graphs: the node labels, in ``G.nodes`` order, become ``0..n-1``
(labels that already are exactly ``0..n-1`` keep their numbers), so row
``i`` of a result belongs to ``list(G.nodes)[i]``. A directed graph's edges
point from parent to child; an undirected graph is rooted at ``root`` (a
node label; default node ``0``, which must then be a node).
"""

from __future__ import annotations

from typing import Any, Optional, Tuple

import numpy as np

#: (form, int64 C-contiguous data, number of nodes, root index or -1)
TreeArgs = Tuple[str, np.ndarray, int, int]


def _is_networkx(obj: Any) -> bool:
    return type(obj).__module__.startswith("networkx")


def _int_array(name: str, value: Any) -> np.ndarray:
    a = np.asarray(value)
    if a.dtype == np.bool_ or a.dtype.kind not in "iu":
        if a.size == 0 and a.dtype.kind == "f":
            # an empty list arrives as float64
            return np.zeros(a.shape, dtype=np.int64)
        raise TypeError(f"{name} must be an array of integers (node indices), got dtype {a.dtype}")
    if a.dtype.kind == "u" and a.size and a.max() > np.iinfo(np.int64).max:
        raise ValueError(f"{name} holds a node index beyond the int64 range")
    return np.ascontiguousarray(a, dtype=np.int64)


def from_graph(graph: Any, root: Any = None) -> TreeArgs:
    """A networkx tree as core arguments (see the module notes)."""
    import networkx as nx

    nodes = list(graph.nodes)
    n = len(nodes)
    if n == 0:
        raise ValueError("the tree is empty: the graph has no nodes")
    if set(nodes) == set(range(n)):
        nodes = list(range(n))
    index = {v: i for i, v in enumerate(nodes)}
    if graph.is_multigraph():
        raise TypeError("a multigraph is not a tree; pass a networkx Graph or DiGraph")
    # one conversion to index arrays (no walk over the graph in Python)
    coo = nx.to_scipy_sparse_array(graph, nodelist=nodes, weight=None, format="coo")
    rows = np.asarray(coo.row, dtype=np.int64)
    cols = np.asarray(coo.col, dtype=np.int64)
    if graph.is_directed():
        edges = np.ascontiguousarray(np.stack([rows, cols], axis=1))
        tree = ("edges", edges, n, -1)
        if root is not None:
            if root not in index:
                raise ValueError(f"root {root!r} is not a node of the graph")
            has_parent = np.zeros(n, dtype=bool)
            has_parent[cols] = True
            if has_parent[index[root]]:
                raise ValueError(f"root {root!r} has a parent in the directed graph; its root is the node without one")
        return tree
    keep = rows <= cols  # each undirected edge once (self-loops kept: the core names them)
    edges = np.ascontiguousarray(np.stack([rows[keep], cols[keep]], axis=1))
    if root is None:
        if 0 not in index:
            raise ValueError("the graph has no node 0: pass root= (the label of the root node)")
        root = 0
    if root not in index:
        raise ValueError(f"root {root!r} is not a node of the graph")
    return ("undirected", edges, n, index[root])


def tree_args(parent: Any, root: Any = None, name: str = "parent") -> TreeArgs:
    """Any accepted tree argument as core arguments."""
    if _is_networkx(parent):
        return from_graph(parent, root)
    a = _int_array(name, parent)
    if root is not None:
        raise ValueError("root= applies to networkx graphs only (a parent array marks its root with -1)")
    if a.ndim == 1:
        return ("parent", a, len(a), -1)
    if a.ndim == 2 and a.shape[1] == 2:
        return ("edges", a, len(a) + 1, -1)
    raise ValueError(
        f"{name} must be a parent array (n,), an (n - 1, 2) array of (parent, child) rows, "
        f"or a networkx tree; got shape {a.shape}"
    )


def pairs_array(pairs: Optional[Any]) -> Optional[np.ndarray]:
    if pairs is None:
        return None
    a = _int_array("pairs", pairs)
    if a.ndim != 2 or a.shape[1] != 2:
        raise ValueError(f"pairs must have shape (p, 2), got {a.shape}")
    return a
