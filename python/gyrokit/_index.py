"""Exact nearest-neighbour index over hyperbolic points (``NeighborIndex``)."""

from __future__ import annotations

from typing import Any, Optional, Tuple

import numpy as np

from ._args import count, real
from . import _native

#: Points per leaf of the tree when ``leaf_size`` is not given (16).
DEFAULT_LEAF_SIZE: int = _native.VpTree.default_leaf_size

#: The values of ``method``.
METHODS: Tuple[str, ...] = ("auto", "tree", "brute")


_count = count


class NeighborIndex:
    """Exact k-nearest-neighbour and radius queries in hyperbolic space.

    ``NeighborIndex(x, model="poincare", *, curvature=-1.0, leaf_size=16,
    method="auto")`` indexes the points ``x``, shape ``(n, d)`` (``(n, d +
    1)`` for ``model="hyperboloid"``), of any of the four models
    (``"poincare"``, ``"klein"``, ``"hyperboloid"``, ``"halfspace"``) at
    sectional curvature ``curvature`` < 0. ``x`` is validated like every
    gyrokit input (NaN, infinity, points on or outside the ball, off the
    hyperboloid or outside the half-space raise ``ValueError`` naming ``x``
    and the row) and copied: later changes to ``x`` do not affect the index.

    Queries are exact whatever the method: the reported distances are the
    very values the brute-force functions compute (``gk.knn``,
    ``gk.radius_neighbors``: within a few ulps of the exact distance of the
    float64 inputs), bit for bit, and every row is sorted by ``(distance,
    index)``, equal distances going to the lower index. Building and
    querying release the GIL and use all cores; results are bit-identical
    whatever the number of threads (``RAYON_NUM_THREADS``).

    Methods (``method=``):

    ``"tree"``
        A vantage-point tree (Yianilos 1993) built on the hyperbolic
        distance itself, so it stays balanced however the points crowd
        against the boundary of the ball. Building costs ``O(n log n)``
        distance evaluations; a query visits few points only where the data
        are intrinsically low-dimensional: like any metric tree it
        degrades towards visiting every point as the dimension grows, and
        each point it visits costs 8 to 30 times a pair of the tiled
        brute-force kernel.
    ``"brute"``
        The brute-force kernels of ``gk.knn`` / ``gk.radius_neighbors``
        over the stored points: ``O(n)`` per query, no build.
    ``"auto"`` (default)
        Builds the tree, then counts the points it visits when finding the
        10 nearest neighbours of 64 of the indexed points (spread over the
        tree); it keeps the tree if that is at most 1/20 of ``n`` on average,
        and brute force otherwise. Above 4096 points a tree over 4096 evenly
        spaced rows is looked at first, and if its searches visit half of
        those rows brute force is chosen without building the full tree
        (so that in high dimension ``auto`` costs a few ms over brute
        force). Counts, not a clock, decide, so the same data always get
        the same method (``.method`` tells which).
        Measured on points at hyperbolic radius uniform in [0, 8] about the
        origin (n = 20 000, k = 10, one run on 2 cores): at d = 2 the tree
        visits 1 % of the points and takes 0.32x the brute-force time; at
        d = 3 it visits 23 % (2.7x), at d = 10 68 % (8.1x), so ``auto``
        chooses the tree at d = 2 and brute force from d = 3; for radii in
        [0, 2] (a smaller spread) the tree still wins up to d = 4 (visited
        2.6 %, 0.53x) and loses from d = 6 (16 %, 2.2x). Measured crossover:
        a visited fraction between 3 % and 16 %. The samples use k = 10 and
        the indexed points themselves. A larger ``k`` makes both methods
        dearer: at d = 2, n = 20 000 the tree took 0.25x the time of
        ``gk.knn`` for k = 10, 0.70x for k = 100 and 0.53x for k = 500 (one
        run). For queries from a very different region, or a ``k`` in the
        thousands, pass ``method`` explicitly if the choice is wrong.

    When to use what: ``gk.knn`` for one batch of queries against points
    you will not query again; ``NeighborIndex`` when the same points are
    queried repeatedly or all against each other (``query()`` with
    ``y=None``): at d = 2 and 1 000 000 points it answers every point's 10
    nearest in seconds where brute force needs many minutes, and in higher
    dimension it is never slower than ``gk.knn`` (it is ``gk.knn``).

    Memory: the points, about ``8 (d + 2) n`` bytes (in tree order for a
    tree, plus ``8 n`` for the permutation and ``56`` bytes per node, about
    ``n / 8`` nodes by default); ``nbytes`` gives the figure.

    Distances are float32 when the indexed points and the queries (``y``,
    or the indexed points for ``y=None``) are all float32, float64
    otherwise (the dtype rule of every gyrokit function); they are computed
    in float64 and rounded once, and ranked in float64.

    Pickling saves the tree, or the points for brute force (``pickle.loads``
    does not rebuild anything).

    Attributes
    ----------
    n : int
        Number of indexed points (also ``len(index)``).
    model : str
        The model of the points.
    curvature : float
        The sectional curvature K.
    leaf_size : int
        Maximum number of points in a leaf (of the tree, when one is used).
    method : str
        ``"tree"`` or ``"brute"``: how queries are answered.
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
        method: str = "auto",
    ) -> None:
        if not isinstance(model, str):
            raise TypeError(f"model must be a string, got {type(model).__name__}")
        if not isinstance(method, str):
            raise TypeError(f"method must be a string, got {type(method).__name__}")
        if method not in METHODS:
            raise ValueError(f"method must be 'auto', 'tree' or 'brute'; got {method!r}")
        self._tree = _native.VpTree(x, model, curvature, _count("leaf_size", leaf_size), method)

    def query(self, y: Any = None, k: int = 10) -> Tuple[np.ndarray, np.ndarray]:
        """The ``k`` nearest indexed points of each query point.

        Signature ``(m, d) -> (m, k), (m, k)``. ``y`` holds the query points,
        in the index's model and curvature (float64 or float32, any layout);
        ``y=None`` queries the indexed points themselves, each excluding
        itself (point ``i`` never lists ``i``, but does list its duplicates,
        at distance 0).

        Returns ``(indices, distances)``: int64 indices into the indexed
        points and hyperbolic distances (float32 when the indexed points and
        ``y`` are float32, float64 otherwise), each row ascending by
        ``(distance, index)`` as ranked in float64.

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
        ``distances[indptr[i]:indptr[i + 1]]`` (dtype as in :meth:`query`), ascending by
        ``(distance, index)``. ``scipy.sparse.csr_matrix((distances,
        indices, indptr), shape=(m, n))`` builds a sparse matrix from it
        (zero distances then look like missing entries).

        Raises ``ValueError`` for ``r < 0`` or NaN, and for invalid ``y``
        (as in :meth:`query`).
        """
        if r is None:
            raise TypeError("query_radius() missing required argument 'r'")
        return self._tree.query_radius(y, real("r", r))

    def _visited_fraction(self, k: int = 10, samples: int = 64) -> Optional[float]:
        """The tree's mean pair evaluations per ``k``-nearest search of
        ``samples`` indexed points, as a fraction of ``n`` (what ``"auto"``
        measures); ``None`` when the index holds no tree."""
        return self._tree.visited_fraction(_count("k", k), _count("samples", samples))

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
    def method(self) -> str:
        """How queries are answered: ``"tree"`` or ``"brute"`` (what
        ``method="auto"`` chose)."""
        return str(self._tree.method)

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
            f"curvature={self.curvature!r}, leaf_size={self.leaf_size}, method={self.method!r})"
        )

    def __getstate__(self) -> dict:
        # A tree is saved under "tree" (the layout of the first release, so
        # older pickles still load), the points of a brute-force index under
        # "points"; "float32" keeps the dtype rule of the distances.
        key = "tree" if self._tree.method == "tree" else "points"
        return {key: tuple(self._tree.state()), "float32": bool(self._tree.float32)}

    def __setstate__(self, state: dict) -> None:
        if not isinstance(state, dict):
            raise ValueError("invalid NeighborIndex state: expected a dict")
        f32 = state.get("float32", False)
        if not isinstance(f32, (bool, np.bool_)):
            raise ValueError("invalid NeighborIndex state: 'float32' must be a bool")
        for key, fields, build in (
            ("tree", 9, _native.VpTree.from_state),
            ("points", 6, _native.VpTree.from_points_state),
        ):
            if key in state:
                try:
                    parts = tuple(state[key])
                except TypeError:
                    raise ValueError(f"invalid NeighborIndex state: {key!r} must be a tuple") from None
                if len(parts) != fields:
                    raise ValueError(f"invalid NeighborIndex state: expected {fields} fields, got {len(parts)}")
                try:
                    self._tree = build(*parts, float32=bool(f32))
                except (OverflowError, TypeError) as e:
                    # integers beyond int64 or wrongly typed fields
                    raise ValueError(f"invalid NeighborIndex state: {e}") from None
                return
        raise ValueError("invalid NeighborIndex state: expected a dict with key 'tree' or 'points'")
