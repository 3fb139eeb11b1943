"""Getting a hierarchy, a distance table or a graph into hyperbolic space.

Every function returns an :class:`Embedding`: the points in the requested
model, with the model name and curvature, so that they can be passed on to
any other gyrokit function (``model=e.model, curvature=e.curvature``).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Optional

import numpy as np


@dataclass(frozen=True)
class Embedding:
    """Result of the ``gyrokit.embed`` functions.

    ``points`` is ``(n, d)`` (``(n, d + 1)`` on the hyperboloid), row ``i``
    the point of node ``i``. ``scale`` is the hyperbolic length of every tree
    edge in units of the radius R (``embed.tree``), ``None`` otherwise.
    ``loss`` (per epoch) and ``epochs`` are set by the learned embeddings and
    ``None`` otherwise.
    """

    points: np.ndarray
    model: str
    curvature: float
    scale: Optional[float] = None
    loss: Optional[np.ndarray] = None
    epochs: Optional[int] = None


def tree(
    parent: Any,
    dim: int = 2,
    *,
    scale: Optional[float] = None,
    model: str = "poincare",
    curvature: float = -1.0,
    root: Any = None,
) -> Embedding:
    """Embed a tree so that every edge has hyperbolic length ``scale`` R.

    The combinatorial construction of Sarkar (2011) in the plane, and in
    ``dim > 2`` its higher-dimensional form (Sala, De Sa, Gu and Ré 2018):
    each node is moved to the origin by an isometry; there its parent lies in
    some direction, and its ``k`` children go to the other words of a
    ``(k + 1)``-word spherical code whose first word points at the parent:
    equally spaced angles in the plane, a regular simplex for
    ``k + 1 <= dim + 1``, the cross-polytope ``±e_i`` up to ``2 dim``, and a
    deterministic repulsion-spread set beyond. The larger ``scale``, the
    closer the worst-case distortion of tree distances comes to 1 (Sarkar's
    bound).

    ``parent``: an int array ``(n,)``, ``parent[i]`` the parent of node ``i``
    and -1 for the single root; or an ``(n - 1, 2)`` int array of
    ``(parent, child)`` rows (the root is the node that is never a child); or
    a networkx tree: a ``DiGraph`` with edges from parent to child, or a
    ``Graph`` rooted at ``root`` (a node label; default node 0). Graph
    labels that are not exactly ``0..n-1`` are numbered in ``G.nodes`` order:
    row ``i`` of ``points`` is ``list(G.nodes)[i]``. Not a tree (a cycle, two
    roots, a node with two parents, an index out of range, no nodes):
    ``ValueError`` naming the node.

    ``scale``: the edge length in units of R. ``None`` picks the largest
    scale at which every edge keeps ``scale`` to 1e-9 relative in
    ``model``'s float64 coordinates: ``height x scale`` at most the accurate
    radius below with a margin of 10 (``ln(2e6 scale)`` R, about 15.2 R for
    ``scale = 2``; in the Klein ball ``ln(4e6 scale)/2``, about 8.0 R) and
    within the model's range. A tree too tall for any such scale (a path of
    about 740 000 nodes and more) gets ``scale = 1/height``, where the
    estimated edge error is smallest, with an :class:`EdgeAccuracyWarning`.
    The ranges are wider: 37.4 R in the Poincaré ball, 18.7 R in the
    Klein ball, about 173 R on the hyperboloid and in the half-space (their
    coordinates reach 2^250). An explicit scale may use the whole range:
    nodes beyond the accurate radius are placed as exactly as float64
    allows, with an :class:`EdgeAccuracyWarning` saying how far the edges may
    be off; a scale that puts a node beyond the model's range raises
    ``ValueError`` naming the node and a model that holds it.

    Accuracy: nodes are built exactly (the Poincaré point with its exact gap,
    parent before child) and converted once; every edge is ``scale`` up to
    the float64 rounding of its two end points, which at a distance ``r``
    from the origin is about ``1e-16 sinh(r)`` R across the radius (in any
    model: float64 resolves directions to 1e-16), and along it
    ``1e-16 e^r/2`` R in the Poincaré ball, ``1e-16 e^(2r)/4`` R in the Klein
    ball. Hence the accurate radius above; beyond it, far-out siblings less
    than ~1e-16 rad apart round to one direction (the hyperboloid's larger
    range does not separate them: it extends radii, not angles), except
    along a single ray (a path keeps its edges far beyond it).

    Returns an :class:`Embedding` with ``points`` ``(n, dim)`` (``(n, dim +
    1)`` on the hyperboloid), ``model``, ``curvature`` and ``scale``.
    """
    from . import _args, _native
    from ._tree import tree_args

    dim = _args.count("dim", dim, 2)
    s = None if scale is None else _args.real("scale", scale)
    kind, data, n, r = tree_args(parent, root)
    points, used, beyond = _native.embed_tree(kind, data, n, r, dim, s, model, _args.real("curvature", curvature))
    _warn_if_inaccurate(used, beyond)
    return Embedding(points=points, model=model, curvature=float(curvature), scale=used)


def _warn_if_inaccurate(used: float, beyond: Optional[float]) -> None:
    """The core's verdict on the edges (``beyond``: the accurate radius, only
    when nodes lie beyond it) as an :class:`EdgeAccuracyWarning` to the
    caller of the public function."""
    if beyond is not None:
        import warnings

        warnings.warn(
            f"scale = {used}: the deepest nodes lie beyond the radius ({beyond:.2f} R) up to "
            f"which float64 coordinates keep every edge within 1e-9 of the scale; far out, edges may be off by up to "
            f"about 1e-16 e^r / scale relative at distance r R from the root, and siblings may merge. "
            f"scale=None picks the largest accurate scale",
            EdgeAccuracyWarning,
            stacklevel=3,
        )


def hierarchy(
    edges: Any,
    dim: int = 10,
    *,
    scale: Optional[float] = None,
    model: str = "poincare",
    curvature: float = -1.0,
    n_nodes: Optional[int] = None,
) -> Embedding:
    """Embed a hierarchy with multiple inheritance (a directed acyclic graph)
    combinatorially: every node one edge of hyperbolic length ``scale`` R
    beyond its parents. Made as a starting point of :func:`graph` for a
    taxonomy (``init=``), where it replaces the long undirected first phase
    of training from random points; it is also a quick embedding in its
    own right (on a tree it is :func:`tree`'s, bit for bit).

    ``edges``: ``(child, parent)`` rows, an ``(m, 2)`` integer array on nodes
    ``0 .. n_nodes - 1`` (``n_nodes`` defaults to the largest id + 1), such
    as the transitive closure ``(descendant, ancestor)`` that :func:`graph`
    trains on; or a networkx ``DiGraph`` with edges from parent to child (as
    :func:`tree`), whose nodes are numbered in ``list(G.nodes)`` order.
    Duplicate rows are ignored; a self-loop, an id out of range or a cycle
    is a ``ValueError`` naming the row or a node on the cycle.

    Construction. A node's level is its longest path to a root; its tree
    parent is its parent of highest level (then the lowest id), so that
    every parent of a node lies on a lower level; the closure and the direct
    rows of a hierarchy give the same embedding. That spanning tree (under a
    virtual root at the origin if there are several roots) is embedded as
    by :func:`tree`, level by level, except that a node with two or more
    direct parents (its parents not reachable upwards from another of its
    parents: the transitive reduction, from the closure or from any set of
    rows with that closure) is placed one
    edge beyond the Fréchet mean of their points, halfway between the
    radial direction there and the direction the tree would have given it
    (nodes of the same parents stay apart); its own children then spread
    from it as in the tree. Points are built exactly (Poincaré points with
    their exact gaps) and converted once to ``model``.

    ``scale``: the edge length in units of R, as in :func:`tree` for the
    spanning tree (``None``: the largest that keeps every tree edge to 1e-9
    relative). As a training start a moderate scale trains fastest (about
    0.5 to 1 R; a short hierarchy's default is several R, whose far-out
    points move slowly).

    Returns an :class:`Embedding` with ``points`` ``(n_nodes, dim)``
    (``(n_nodes, dim + 1)`` on the hyperboloid), ``model``, ``curvature``
    and ``scale``.
    """
    from . import _args, _native
    from ._graph_embed import _edge_rows, _from_networkx, _is_networkx

    if _is_networkx(edges):
        if n_nodes is not None:
            raise ValueError("n_nodes is taken from the networkx graph; leave it None")
        if not edges.is_directed():
            raise TypeError("a hierarchy is a networkx DiGraph (edges from parent to child), got an undirected graph")
        e, n = _from_networkx(edges)
        e = np.ascontiguousarray(e[:, ::-1])
    else:
        e, n = _edge_rows(edges, n_nodes, empty_ok=True)
    dim = _args.count("dim", dim, 2)
    s = None if scale is None else _args.real("scale", scale)
    points, used, beyond = _native.embed_hierarchy(e, n, dim, s, model, _args.real("curvature", curvature))
    _warn_if_inaccurate(used, beyond)
    return Embedding(points=points, model=model, curvature=float(curvature), scale=used)


class EdgeAccuracyWarning(UserWarning):
    """``embed.tree`` placed nodes where float64 cannot keep every edge at the scale to 1e-9."""



__all__ = ["Embedding", "EdgeAccuracyWarning", "hierarchy", "tree"]
from ._hmds import from_distances  # noqa: E402  (h-MDS; needs Embedding above)

__all__ += ["from_distances"]
from ._graph_embed import TrainingInterruptedWarning, graph  # noqa: E402  (learned graph embeddings)
