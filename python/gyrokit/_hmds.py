"""Hyperbolic multidimensional scaling (h-MDS; Sala, De Sa, Gu and Ré 2018):
points whose pairwise distances reproduce a distance table.

Derivation (our own, on the hyperboloid of radius R, ``<x, x> = -R^2``):
pick a base point b and move it to ``(R, 0, ..., 0)`` by an isometry. Then
every point is ``x_i = (R cosh a_i, s_i)`` with ``a_i = D[b, i]/R`` and
``|s_i| = R sinh a_i``, and ``cosh(D_ij/R) = -<x_i, x_j>/R^2`` gives the Gram
matrix of the spatial parts,

    s_i . s_j / R^2 = cosh a_i cosh a_j - cosh c_ij,    c_ij = D_ij/R.

Written this way it cancels badly (both terms grow like ``e^(a_i + a_j)``
while their difference can be far smaller); with ``cosh x - cosh y =
2 sinh((x+y)/2) sinh((x-y)/2)`` it becomes

    G_ij = sinh a_i sinh a_j - 2 sinh((c + a_i - a_j)/2) sinh((c - a_i + a_j)/2),

an identity for any numbers, in which both terms are products of
accurately computed factors (the half-sums are formed from the given
distances, never from their cosh). For distances of points of H^dim, G is
positive semi-definite of rank dim; its leading dim eigenpairs give
``s = R U sqrt(lambda)`` and ``x_0 = sqrt(R^2 + |s|^2)``. The base point is
the 1-centre of the table (the row with the smallest largest distance),
which keeps the ``a_i``, and so the size of ``G`` relative to its finest
detail, as small as the data allows.

The eigenproblem is LAPACK's (``scipy.linalg.eigh``, only the leading
eigenpairs): a dense symmetric eigensolver is what LAPACK does best, and a
re-write in the core would be slower and less tested. The O(n^2) Gram
matrix is element-wise NumPy work; the conversion to the requested model is
the core's (``gyrokit.convert``).

float64 limits what any coordinates can hold: a point at distance ``a R``
from the others' centre is known to about ``eps e^a R`` across its radial
direction, so two such points closer than ``~1e-8 e^a R`` cannot keep their
distance to 1e-8 relative in any float64 model.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from ._args import count, real
from .embed import Embedding

#: Largest distance from the base point (in units of R) whose hyperboloid
#: point has spatial coordinates within the model's range 2^250.
_MAX_A = math.asinh(2.0**250)


def _check_table(D: Any) -> np.ndarray:
    try:
        a = np.asarray(D)
    except Exception as e:  # pragma: no cover - exotic array-likes
        raise TypeError(f"D must be an (n, n) array of distances: {e}") from None
    if a.dtype.kind not in "fiu" or a.dtype == np.bool_:
        raise TypeError(f"D must be an (n, n) array of real distances, got dtype {a.dtype}")
    a = np.array(a, dtype=np.float64)
    if a.ndim != 2 or a.shape[0] != a.shape[1]:
        raise ValueError(f"D must be a square (n, n) distance matrix, got shape {a.shape}")
    n = a.shape[0]
    if n == 0:
        raise ValueError("D is empty: there is nothing to embed")
    bad = ~np.isfinite(a) | (a < 0)
    if bad.any():
        i, j = np.argwhere(bad)[0]
        raise ValueError(f"D row {i}: D[{i}, {j}] = {a[i, j]} is not a finite distance >= 0")
    dg = np.diagonal(a)
    if (dg != 0).any():
        i = int(np.flatnonzero(dg != 0)[0])
        raise ValueError(f"D row {i}: D[{i}, {i}] = {a[i, i]}; the diagonal must be 0")
    asym = np.abs(a - a.T) > 1e-12 * np.maximum(a, a.T)
    if asym.any():
        i, j = np.argwhere(asym)[0]
        raise ValueError(f"D row {i}: not symmetric: D[{i}, {j}] = {a[i, j]} but D[{j}, {i}] = {a[j, i]}")
    return a


def from_distances(D: Any, dim: int, *, model: str = "hyperboloid", curvature: float = -1.0) -> Embedding:
    """Points in ``dim``-dimensional hyperbolic space whose distances reproduce ``D``.

    Hyperbolic multidimensional scaling (h-MDS, Sala, De Sa, Gu and Ré 2018),
    derived in the module notes. ``D``: ``(n, n)`` distances in the metric of
    ``curvature`` (symmetric to 1e-12 relative, zero diagonal, finite,
    non-negative; otherwise a ``ValueError`` naming the row). Returns an
    :class:`~gyrokit.embed.Embedding` with ``points`` ``(n, dim + 1)`` on the
    hyperboloid (default) or ``(n, dim)`` in the other models, ``scale``
    None. The first point placed at the origin of the model is the table's
    1-centre (the row with the smallest largest distance); the result is
    determined up to an isometry fixing it.

    When ``D`` holds the distances of points of H^dim, they are reproduced to
    1e-8 relative or better (measured against 50-digit references in dim 2,
    5 and 10) for all pairs up to ~20 R when every point is within ~10 R of
    the 1-centre (worst measured 5e-12), and for small distances ``d``
    beside large ones while ``eps e^(2a) R / d`` stays below ~1e-8, ``a R``
    the largest distance from the 1-centre: 1e-4 R beside 5 R (1e-11),
    1e-6 R beside 2 R (7e-10). Beyond that the smallest distances lose
    digits (1e-6 R beside 5 R: 2e-8; 0.5 R at 20 R from the centre: 2e-8):
    the eigensolver resolves the Gram matrix to ``eps`` times its largest
    entries, about ``e^(2a)``. Otherwise (a table that is not hyperbolic) the
    result is the rank-``dim`` approximation of the Gram matrix (negative
    eigenvalues dropped).
    Distances beyond ``asinh(2^250) R`` (about 174 R) from the 1-centre do
    not fit the hyperboloid's coordinate range and raise ``ValueError``; the
    ball models hold less (about 37 R in the Poincaré ball, 18 R in Klein),
    which ``gyrokit.convert`` reports.
    """
    from . import convert  # the package's own conversion (the core's)
    from .__init__ import MODELS

    dim = count("dim", dim, 1)
    c = real("curvature", curvature)
    if not (math.isfinite(c) and c < 0):
        raise ValueError(f"curvature must be a finite number < 0, got {c}")
    if model not in MODELS:
        raise ValueError(f"model must be one of {MODELS}, got {model!r}")
    a = _check_table(D)
    n = a.shape[0]
    R = 1.0 / math.sqrt(-c)
    A = a / R
    b = int(np.argmin(A.max(axis=1)))
    ab = A[b]
    if ab.max() > _MAX_A:
        i = int(np.argmax(ab))
        raise ValueError(
            f"D row {i}: distance {a[b, i]} from the central point (row {b}) exceeds the hyperboloid's "
            f"float64 range ({_MAX_A:.1f} R)"
        )
    sh = np.sinh(ab)
    G = np.multiply.outer(sh, sh)
    G -= 2.0 * np.sinh(0.5 * ((A + ab[:, None]) - ab[None, :])) * np.sinh(0.5 * ((A - ab[:, None]) + ab[None, :]))
    G = 0.5 * (G + G.T)  # the two products are symmetric up to rounding
    k = min(dim, n)
    from scipy.linalg import eigh

    lam, U = eigh(G, subset_by_index=[n - k, n - 1])
    lam = np.clip(lam[::-1], 0.0, None)
    U = U[:, ::-1]
    s = np.zeros((n, dim))
    s[:, :k] = U * (R * np.sqrt(lam))
    x0 = np.sqrt(R * R + np.einsum("ij,ij->i", s, s))
    pts = np.column_stack([x0, s])
    if model != "hyperboloid":
        pts = convert(pts, "hyperboloid", model, curvature=c)
    return Embedding(points=pts, model=model, curvature=c)
