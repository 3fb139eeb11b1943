"""How good an embedding is: distortion of distances, graph reconstruction
(mean average precision and mean rank), exact tree distances."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Optional

import numpy as np

from . import _native
from ._args import real

__all__: list = []

# --- distortion and graph reconstruction -------------------------------------------------


@dataclass(frozen=True)
class Reconstruction:
    """Result of :func:`reconstruction`.

    ``mean_average_precision``: mean over the nodes with neighbours of their
    average precision. ``mean_rank``: mean over the edges ranked (both
    directions of every undirected edge; every distinct arc of a directed
    graph). ``nodes``: the nodes with at least one neighbour (int64,
    ascending; the average precision is undefined for the others), and
    ``average_precision`` the average precision of each of them.
    ``ranked_edges``: edges ranked (twice the distinct undirected edges, or
    the distinct arcs). ``arcs``: the ranked arcs ``(u, v)``, an
    ``(ranked_edges, 2)`` int64 array sorted by ``u`` then ``v`` (both
    directions of an undirected edge; each distinct row of a directed
    graph), and ``ranks`` the rank of each (int64; ``mean_rank`` is their
    mean): the relations an embedding places worst are
    ``arcs[np.argsort(ranks)[::-1]]``.
    """

    mean_average_precision: float
    mean_rank: float
    nodes: np.ndarray
    average_precision: np.ndarray
    ranked_edges: int
    arcs: np.ndarray
    ranks: np.ndarray


@dataclass(frozen=True)
class Distortion:
    """Result of :func:`distortion`: ``mean``, ``worst``, ``scale`` and the
    number of point ``pairs`` compared."""

    mean: float
    worst: float
    scale: float
    pairs: int


def _index_pairs(name: str, a: Any, n_hint: Optional[int] = None) -> np.ndarray:
    """An ``(m, 2)`` integer array (or a networkx graph, for ``edges``) as a
    C-contiguous int64 array."""
    if hasattr(a, "edges") and hasattr(a, "nodes") and hasattr(a, "is_directed"):
        # A networkx graph: nodes must be the row indices 0..n-1 of x.
        for v in a.nodes:
            if isinstance(v, (bool, np.bool_)) or not isinstance(v, (int, np.integer)):
                raise ValueError(
                    f"{name}: graph node {v!r} is not a row index of x; relabel the graph with "
                    "networkx.convert_node_labels_to_integers and reorder x to match"
                )
            if n_hint is not None and not 0 <= v < n_hint:
                raise ValueError(f"{name}: graph node {v} is out of range for {n_hint} points (x has {n_hint} rows)")
        for u, v in a.edges():
            if u == v:
                raise ValueError(f"{name}: graph node {u} has a self-loop; a node is never ranked against itself")
        out = np.array([(u, v) for u, v in a.edges()], dtype=np.int64).reshape(-1, 2)
        return out
    try:
        arr = np.asarray(a)
    except Exception as e:  # an array-like that cannot become an array
        raise TypeError(f"{name} must be an integer array of shape (m, 2): {type(e).__name__}: {e}") from None
    if arr.dtype.kind not in "iu":
        if arr.size == 0 and arr.dtype.kind == "f":
            arr = arr.astype(np.int64)
        else:
            raise TypeError(f"{name} must be an integer array of shape (m, 2), got dtype {arr.dtype}")
    if arr.ndim != 2 or arr.shape[1] != 2:
        if arr.size == 0:
            arr = arr.reshape(0, 2)
        else:
            raise ValueError(f"{name} must have shape (m, 2), got shape {arr.shape}")
    if arr.dtype.kind == "u" and arr.size and arr.max() > np.iinfo(np.int64).max:
        r = int(np.argmax(arr.max(axis=1) > np.iinfo(np.int64).max))
        raise ValueError(f"{name} row {r}: {tuple(int(v) for v in arr[r])} names a node out of range")
    return np.ascontiguousarray(arr, dtype=np.int64)


def _npoints(x: Any) -> Optional[int]:
    shape = getattr(x, "shape", None)
    return int(shape[0]) if shape is not None and len(shape) >= 1 else None


def reconstruction(
    x: Any, edges: Any, *, model: str = "poincare", curvature: float = -1.0, directed: bool = False
) -> Reconstruction:
    """Graph reconstruction scores of the points ``x`` (``(n, d)``, row ``i``
    the point of node ``i``) for a graph (Nickel & Kiela 2017).

    ``edges``: an ``(m, 2)`` integer array of node pairs, or a networkx
    graph whose nodes are the integers ``0..n-1``. By default every edge is
    undirected: repeated edges and both directions of one edge count once,
    and ``N(u)`` is the set of ``u``'s neighbours. With ``directed=True``
    each row ``(u, v)`` is an arc and ``N(u)`` the set of its targets
    ``{v : (u, v) a row}`` (repeated rows count once): every other node,
    including one with an arc to ``u``, ranks as a non-neighbour. For a
    hierarchy's closure given as ``(descendant, ancestor)`` rows this is
    the protocol behind Nickel & Kiela's WordNet figures: each observed
    ``(u, v)`` ranked among ``{v' : (u, v') not observed}``. A node out of
    range, a self-loop or no edge at all is a ``ValueError`` naming the row
    (or node).

    For each node ``u`` with neighbours ``N(u)``, every ``v != u`` is ranked
    by its distance to ``u``:

    * ``mean_average_precision``: mean over such ``u`` of the average
      precision of ``N(u)``: for each neighbour ``v``, the fraction of
      neighbours among the nodes at distance ``<= d(u, v)``. Exact ties count
      against (every node tied with ``v`` ranks at or above it), as in
      scikit-learn's ``label_ranking_average_precision_score``;
    * ``mean_rank``: mean over edges ``(u, v)`` (each undirected edge counted
      in both directions; each distinct arc once) of ``1 + #{non-neighbours
      w != u of u with d(u, w) < d(u, v)}`` (strict: ties do not count
      against); each arc's rank is returned (``arcs``, ``ranks``).

    Distances are compared as the library's kernels compute them (through
    ``sinh(d/2R)^2``, monotone in ``d``, bit-identical to
    :func:`gyrokit.distance_matrix`); "tied" means equal there, e.g.
    duplicated points. Exact over all ``n (n - 1)`` ordered pairs, in the
    tiled kernel of :func:`gyrokit.knn`, on all cores, without storing the
    distances (memory ``O(n + m)``); results do not depend on the number of
    threads.
    """
    c = real("curvature", curvature)
    if not isinstance(directed, (bool, np.bool_)):
        raise TypeError(f"directed must be True or False, got {directed!r}")
    e = _index_pairs("edges", edges, _npoints(x))
    m, r, ap, _, ranked, degrees, targets, ranks = _native.reconstruction(x, e, model, c, bool(directed))
    # The core marks the nodes without neighbours with NaN; they are left
    # out here rather than handed on as NaN.
    nodes = np.flatnonzero(~np.isnan(ap)).astype(np.int64)
    arcs = np.column_stack([np.repeat(np.arange(len(degrees), dtype=np.int64), degrees), targets])
    return Reconstruction(float(m), float(r), nodes, ap[nodes], int(ranked), arcs, ranks)


def distortion(
    x: Any,
    target: Any,
    *,
    pairs: Any = None,
    scale: Optional[float] = None,
    model: str = "poincare",
    curvature: float = -1.0,
) -> Distortion:
    """Distortion of the distances of ``x`` (``(n, d)``) against target distances.

    ``target``: an ``(n, n)`` matrix of true distances (symmetric to 1e-12
    relative, zero diagonal; each pair ``i < j`` counted once), or ``(p,)``
    true distances of the ``(p, 2)`` integer ``pairs``. With ``d`` the
    distance in ``x`` (the library's own, as :func:`gyrokit.distance_matrix`
    gives it), ``t`` the target and ``s`` the scale:

    * ``mean``: the mean over pairs of ``|d/s - t| / t``;
    * ``worst``: ``max(d/(s t)) * max(s t/d)`` (worst-case distortion; it does
      not depend on ``s``; infinite when two points of ``x`` coincide);
    * ``scale``: ``s`` as given, or, with ``scale=None``, the scale that
      minimises ``mean`` exactly (a weighted median of the ratios ``d/t``
      with weights ``d/t``; it is one of the ratios).

    A target of 0 between two distinct points (off the diagonal, or in a pair
    of two distinct indices) is a ``ValueError`` naming the pair: the
    relative distortion of a zero distance is undefined (merge duplicated
    items, or list the other pairs with ``pairs=``). Negative, NaN, infinite
    or non-symmetric targets, a non-zero diagonal, pairs out of range and
    pairs of a point with itself are ``ValueError`` naming the row. Memory:
    one float64 per pair when the scale is fitted.
    """
    c = real("curvature", curvature)
    s = None
    if scale is not None:
        s = real("scale", scale)
        if not (np.isfinite(s) and s > 0):
            raise ValueError(f"scale must be a finite number > 0, got {s}")
    p = None if pairs is None else _index_pairs("pairs", pairs)
    mean, worst, sc, n = _native.distortion(x, target, p, s, model, c)
    return Distortion(float(mean), float(worst), float(sc), int(n))


__all__ += ["reconstruction", "distortion", "Reconstruction", "Distortion"]

# --- end of distortion and graph reconstruction ------------------------------------------


# ---------------------------------------------------------------- tree distances


def tree_distances(parent: Any, pairs: Any = None, *, root: Any = None) -> Any:
    """Exact hop counts between nodes of a tree.

    ``parent`` is any tree that :func:`gyrokit.embed.tree` accepts (parent
    array, ``(n - 1, 2)`` rows of ``(parent, child)``, or a networkx tree
    with ``root=``; graph labels numbered in ``G.nodes`` order). With
    ``pairs`` an ``(p, 2)`` int array: the ``(p,)`` hop counts of those
    pairs; without: the ``(n, n)`` table. Both are int32 (hop counts are
    below n; half the memory of int64 for the table). Computed in the core
    from lowest common ancestors, ``depth[u] + depth[v] - 2 depth[lca]``:
    O(log n) per pair, O(n) per row of the table, on all cores.
    """
    from . import _native
    from ._tree import pairs_array, tree_args

    kind, data, n, r = tree_args(parent, root)
    return _native.tree_distances(kind, data, n, r, pairs_array(pairs))


__all__ += ["tree_distances"]
