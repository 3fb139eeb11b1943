"""Exact nearest-neighbour index over hyperbolic points (``NeighborIndex``)."""

from __future__ import annotations

import operator
from typing import Any, Optional, Tuple

import numpy as np

from . import _native

#: Points per leaf of the tree when ``leaf_size`` is not given (16).
DEFAULT_LEAF_SIZE: int = _native.VpTree.default_leaf_size


def _count(name: str, value: Any) -> int:
    """``value`` as a Python int (``TypeError`` naming ``name`` otherwise)."""
    if isinstance(value, (bool, np.bool_)):
        raise TypeError(f"{name} must be an integer, got a bool")
    try:
        return operator.index(value)
    except TypeError:
        raise TypeError(f"{name} must be an integer, got {type(value).__name__}") from None


class NeighborIndex:
    """Exact k-nearest-neighbour and radius queries in hyperbolic space.

    ``NeighborIndex(x, model="poincare", *, curvature=-1.0, leaf_size=16)``
    indexes the points ``x``, shape ``(n, d)`` (``(n, d + 1)`` for
    ``model="hyperboloid"``), of any of the four models (``"poincare"``,
    ``"klein"``, ``"hyperboloid"``, ``"halfspace"``) at sectional curvature
    ``curvature`` < 0. ``x`` is validated like every gyrokit input (NaN,
    infinity, points on or outside the ball, off the hyperboloid or outside
    the half-space raise ``ValueError`` naming ``x`` and the row) and copied:
    later changes to ``x`` do not affect the index.

    The index is a vantage-point tree (Yianilos 1993) built on the
    hyperbolic distance itself, so it stays balanced however the points
    crowd against the boundary of the ball. Queries are exact: the reported
    distances are the very values a brute force over all pairs computes
    (``gk.knn``, ``gk.radius_neighbors``: within a few ulps of the exact
    distance of the float64 inputs), and every row is sorted by
    ``(distance, index)``, equal distances going to the lower index.
    Building and querying release the GIL and use all cores; results are
    bit-identical whatever the number of threads (``RAYON_NUM_THREADS``).

    Building costs ``O(n log n)`` distance evaluations; a query typically a
    few dozen to a few hundred for small ``k`` in low dimension (like any
    metric tree, it degrades towards brute force in high dimension). The
    index holds a copy of the points in tree order, about ``8 (d + 2) n``
    bytes, plus ``56`` bytes per node, about ``n / 8`` nodes by default
    (``nbytes``).

    Pickling saves the tree (``pickle.loads`` does not rebuild it).

    Attributes
    ----------
    n : int
        Number of indexed points (also ``len(index)``).
    model : str
        The model of the points.
    curvature : float
        The sectional curvature K.
    leaf_size : int
        Maximum number of points in a leaf.
    nbytes : int
        Memory held by the index, in bytes.
    """

    __slots__ = ("_tree",)

    def __init__(
        self,
        x: Any,
        model: str = "poincare",
        *,
        curvature: float = -1.0,
        leaf_size: int = DEFAULT_LEAF_SIZE,
    ) -> None:
        if not isinstance(model, str):
            raise TypeError(f"model must be a string, got {type(model).__name__}")
        self._tree = _native.VpTree(x, model, curvature, _count("leaf_size", leaf_size))

    def query(self, y: Any = None, k: int = 10) -> Tuple[np.ndarray, np.ndarray]:
        """The ``k`` nearest indexed points of each query point.

        Signature ``(m, d) -> (m, k), (m, k)``. ``y`` holds the query points,
        in the index's model and curvature (float64 or float32, any layout);
        ``y=None`` queries the indexed points themselves, each excluding
        itself (point ``i`` never lists ``i``, but does list its duplicates,
        at distance 0).

        Returns ``(indices, distances)``: int64 indices into the indexed
        points and float64 hyperbolic distances, each row ascending by
        ``(distance, index)``.

        Raises ``ValueError`` when ``k < 1``, when ``k`` exceeds the number
        of candidates (``n``, or ``n - 1`` for ``y=None``), for a ``y`` of
        the wrong shape or dimension, or for an invalid query point (naming
        ``y`` and the row). An empty ``y`` (shape ``(0, d)``) gives empty
        ``(0, k)`` arrays.
        """
        return self._tree.query(y, _count("k", k))

    def query_radius(self, y: Any = None, r: Optional[float] = None) -> Tuple[np.ndarray, np.ndarray, np.ndarray]:
        """All indexed points within hyperbolic distance ``r`` of each query point.

        ``r`` is required (``query_radius(y, r)`` or ``query_radius(r=...)``);
        distances ``<= r`` are included; ``r = inf`` lists every point.
        ``y=None`` queries the indexed points themselves, each excluding
        itself (as in :meth:`query`).

        Returns a CSR triple ``(indptr, indices, distances)``: ``indptr``
        int64 of length ``m + 1``; row ``i``'s neighbours are
        ``indices[indptr[i]:indptr[i + 1]]`` (int64) at
        ``distances[indptr[i]:indptr[i + 1]]`` (float64), ascending by
        ``(distance, index)``. ``scipy.sparse.csr_matrix((distances,
        indices, indptr), shape=(m, n))`` builds a sparse matrix from it
        (zero distances then look like missing entries).

        Raises ``ValueError`` for ``r < 0`` or NaN, and for invalid ``y``
        (as in :meth:`query`).
        """
        if r is None:
            raise TypeError("query_radius() missing required argument 'r'")
        if isinstance(r, (bool, np.bool_, str, bytes)):
            raise TypeError(f"r must be a real number, got {type(r).__name__}")
        try:
            rf = float(r)
        except (TypeError, ValueError):
            raise TypeError(f"r must be a real number, got {type(r).__name__}") from None
        return self._tree.query_radius(y, rf)

    def _pair_distances(self, y: Any = None) -> np.ndarray:
        """Every distance the index would report, ``(m, n)``: the brute force
        its results must agree with bit for bit (for tests; O(m n) memory)."""
        return self._tree.distances(y)

    @property
    def n(self) -> int:
        """Number of indexed points."""
        return int(self._tree.n)

    @property
    def model(self) -> str:
        """The model of the indexed points."""
        return str(self._tree.model)

    @property
    def curvature(self) -> float:
        """The sectional curvature K < 0."""
        return float(self._tree.curvature)

    @property
    def leaf_size(self) -> int:
        """Maximum number of points in a leaf of the tree."""
        return int(self._tree.leaf_size)

    @property
    def nbytes(self) -> int:
        """Bytes held by the index (points, permutation and nodes)."""
        return int(self._tree.nbytes)

    def __len__(self) -> int:
        return int(self._tree.n)

    def __repr__(self) -> str:
        return (
            f"NeighborIndex(n={self.n}, model={self.model!r}, "
            f"curvature={self.curvature!r}, leaf_size={self.leaf_size})"
        )

    def __getstate__(self) -> dict:
        return {"tree": tuple(self._tree.state())}

    def __setstate__(self, state: dict) -> None:
        try:
            parts = tuple(state["tree"])
        except (TypeError, KeyError):
            raise ValueError("invalid NeighborIndex state: expected a dict with key 'tree'") from None
        if len(parts) != 9:
            raise ValueError(f"invalid NeighborIndex state: expected 9 fields, got {len(parts)}")
        self._tree = _native.VpTree.from_state(*parts)
