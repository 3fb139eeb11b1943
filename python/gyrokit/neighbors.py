"""Distance matrices and neighbour queries for points of any model.

Every function takes ``model`` (``"poincare"`` default, ``"klein"``,
``"hyperboloid"``, ``"halfspace"``) and ``curvature``. Distances are exact
to a few ulps, nearly coincident pairs included: the kernels form
``x - y`` directly (no Gram-matrix shortcut) and evaluate
``R arccosh(1 + 2h)`` with ``h = sinh(d/2R)^2`` through a compensated
``log1p``. The Poincaré and half-space kernels are register-tiled and
vectorised (AVX2/FMA where the CPU has it); all release the GIL and run on
all cores, with results bit-identical for any thread count. The matrix,
:func:`knn`, :func:`radius_neighbors` and :class:`gyrokit.NeighborIndex`
report bit-identical distances for the same pair.

Result dtype: distances are float32 when every array argument is float32,
float64 otherwise (lists and integer arrays count as float64); they are
computed in float64 and rounded once, and neighbours are ranked in float64
(two neighbours may therefore show equal float32 distances in an order set
by their float64 distances). Indices and ``indptr`` are int64.

Empty inputs: an empty query set (``x`` of shape ``(0, d)``) gives empty
results of the right shape and dtype: ``(0, k)`` arrays from :func:`knn`,
``indptr = [0]`` from :func:`radius_neighbors`, ``(0, m)`` matrices.
"""

from __future__ import annotations

from typing import Any, Optional, Tuple

import numpy as np

from . import _native
from ._args import count as _count, real

__all__ = ["distance_matrix", "condensed_distances", "knn", "radius_neighbors"]


def distance_matrix(
    x: Any,
    y: Any = None,
    *,
    model: str = "poincare",
    curvature: float = -1.0,
    out: Optional[np.ndarray] = None,
) -> np.ndarray:
    """All pairwise distances, ``(n, d), (m, d) -> (n, m)``; ``y=None`` uses ``x``.

    ``out``: a C-contiguous, writeable ``(n, m)`` float64 or float32 array
    (a ``np.memmap`` works) that receives the result and is returned; it is
    validated (shape, dtype, contiguity), never copied around. Without
    ``out``, the result is float32 when ``x`` and ``y`` are float32, float64
    otherwise.
    """
    return _native.distance_matrix(x, y, model, curvature, out)


def condensed_distances(x: Any, *, model: str = "poincare", curvature: float = -1.0) -> np.ndarray:
    """The upper triangle (``i < j``) of the distance matrix, row-major, length ``n(n-1)/2``.

    The same layout as ``scipy.spatial.distance.pdist``; float32 for a
    float32 ``x``, float64 otherwise.
    """
    return _native.condensed_distances(x, model, curvature)


def knn(
    x: Any,
    k: int,
    y: Any = None,
    *,
    model: str = "poincare",
    curvature: float = -1.0,
) -> Tuple[np.ndarray, np.ndarray]:
    """The ``k`` nearest rows of ``y`` to each row of ``x`` (brute force, exact).

    Returns ``(indices (n, k) int64, distances (n, k))``, each row
    ascending by distance, ties broken by lower index; distances are
    float32 when ``x`` and ``y`` are float32 (see the module docs). ``y=None``
    searches ``x`` itself and excludes each point's own row (duplicates at
    distance 0 are still listed).

    ``k`` must be at least 1 and at most the number of candidates (the rows
    of ``y``, or ``n - 1`` for ``y=None``), else ``ValueError``; with ``y``
    given this holds even for an empty ``x``. An empty ``x`` with
    ``y=None`` returns ``(0, k)`` arrays for any ``k >= 1``: there is no
    query row, so none lacks candidates. Works in row strips: memory beyond the result is one
    tile per thread. Candidates are ranked by ``h``, which is monotone in the
    distance, so no transcendental is evaluated per pair.
    """
    return _native.knn(x, _count("k", k), y, model, curvature)


def radius_neighbors(
    x: Any,
    r: float,
    y: Any = None,
    *,
    model: str = "poincare",
    curvature: float = -1.0,
) -> Tuple[np.ndarray, np.ndarray, np.ndarray]:
    """All rows of ``y`` within distance ``r`` (inclusive) of each row of ``x``.

    Returns the CSR triple ``(indptr (n+1,), indices, distances)``; row ``i``
    is ``indices[indptr[i]:indptr[i+1]]``, sorted by (distance, index);
    distances float32 when ``x`` and ``y`` are float32. An empty ``x`` gives
    ``indptr = [0]`` and empty ``indices`` and ``distances``.
    ``y=None`` searches ``x`` itself, excluding self-matches.
    """
    return _native.radius_neighbors(x, real("r", r), y, model, curvature)
