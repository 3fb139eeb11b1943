"""gyrokit: exact, fast gyrovector and hyperbolic-geometry operations on NumPy arrays.

Points lie along the last axis, shape ``(..., d)``; leading axes broadcast
like NumPy. ``curvature`` is the sectional curvature K < 0 (keyword,
default -1.0); the ball radius is ``R = 1/sqrt(-K)``. float32 and float64
inputs are accepted; computation is in float64 and the result is float32
only when every array input is float32.

Submodules:

``gyrokit.poincare``
    The Poincaré ball, Möbius gyrovector space.
``gyrokit.klein``
    The Beltrami–Klein ball, Einstein gyrovector space.
``gyrokit.hyperboloid``
    The hyperboloid (Lorentz) model, points ``(..., d + 1)``.
``gyrokit.halfspace``
    The upper half-space model.
``gyrokit.random``
    Sampling: the wrapped normal distribution, uniform points in a ball.
``gyrokit.relativity``
    Relativistic velocities in physical units (Einstein addition, Thomas
    rotation, boosts, precession).
``gyrokit.plot``
    Drawing in the Poincaré disk (needs the optional extra matplotlib:
    ``pip install gyrokit[plot]``; imported only when a plot is drawn).
"""

from __future__ import annotations

from typing import Any

from . import embed, halfspace, hyperboloid, klein, metrics, plot, poincare, random, relativity
from .pga import PrincipalGeodesicAnalysis
from ._trig import Triangle, triangle
from .neighbors import condensed_distances, distance_matrix, knn, radius_neighbors
from ._index import NeighborIndex
from .kmeans import KMeans, UnfittedError
from ._native import RimClipWarning
from .centroids import ConvergenceWarning, FrechetMean, FrechetVariance, einstein_midpoint, frechet_mean, frechet_variance
from ._native import __version__
from . import _native

MODELS = ("poincare", "klein", "hyperboloid", "halfspace")


def convert(x: Any, src: str, dst: str, *, curvature: float = -1.0) -> Any:
    """Convert points between models; ``src``, ``dst`` in ``MODELS``.

    Signature ``(..., n) -> (..., m)``: hyperboloid points have ``d + 1``
    coordinates, the others ``d``. The maps go through the Poincaré point and
    its exact gap ``1 - |p|^2/R^2``, so points within 1e-15 R of the sphere
    convert to relative accuracy ~1e-16 (hyperboloid coordinates up to
    ~1e15 R). Distances are preserved. Points that map beyond the float64
    range of the target model (the ball models: about 37 R from the origin
    in the Poincaré ball, 18 R in Klein; the hyperboloid: ``|x_1..d|`` up to
    2^250) raise ``ValueError``; half-space points are read with coordinates
    up to 2^250 in magnitude and ``y_d`` at least 2^-250.
    """
    return _native.convert(x, src, dst, curvature)


# Submodules with optional dependencies, imported on first access
# (``gk.dask`` needs the ``dask`` extra).
_LAZY = ("dask",)


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        import importlib

        return importlib.import_module(f"{__name__}.{name}")
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


__all__ = [
    "poincare", "klein", "hyperboloid", "halfspace", "relativity", "embed", "metrics", "plot", "convert", "MODELS",
    "distance_matrix", "condensed_distances", "knn", "radius_neighbors",
    "NeighborIndex", "KMeans", "PrincipalGeodesicAnalysis", "UnfittedError", "frechet_mean", "einstein_midpoint", "frechet_variance", "FrechetMean",
    "FrechetVariance", "ConvergenceWarning", "RimClipWarning", "random", "triangle", "Triangle",
    "__version__",
]
