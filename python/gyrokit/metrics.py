"""How good an embedding is: distortion of distances, graph reconstruction
(mean average precision and mean rank), exact tree distances."""

from __future__ import annotations

from typing import Any

__all__: list = []


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
