"""The hyperboloid (Lorentz) model of curvature K < 0.

Points have shape ``(..., d + 1)`` with ``x0`` first, ``-x0^2 + |x_s|^2 =
1/K = -R^2`` and ``x0 > 0``. A point is read through its spatial part
``x_s``: ``x0`` is checked against ``R sqrt(1 + |x_s|^2/R^2)`` with a
relative tolerance of 1e-6 (loose enough for float32 embeddings) and then
recomputed. Tangent vectors are ``(d + 1)``-vectors Minkowski-orthogonal to
their base point; they too are read through their spatial part (``v0`` is
implied by tangency). Use :func:`project` to repair points that drifted.

Range: spatial coordinates up to ``|x_s| = 2^250`` (about 1.8e75; some 173 R
from the origin when R = 1), where products of coordinates still fit in
float64. Points beyond it, and results that would lie beyond it, raise
``ValueError`` naming the argument and row.

What float64 holds: a tangent vector of length ``L`` at a point with
``x0 = c R`` has coordinates of size up to ``c L`` along the radial
direction, so rounding it to float64 moves its part across that direction
by up to about ``eps c L`` (eps = 2.2e-16): 2e-12 L at 10 R, 4e-10 L at
15 R, everything beyond about 36 R. The functions here take their float64
inputs as exact and keep that rounding out of their own steps; it enters
only when a computed tangent (from ``log_map`` or ``transport``) is stored.
"""

from __future__ import annotations

from typing import Any

from . import _native

__all__ = ["distance", "exp_map", "log_map", "transport", "geodesic", "project", "inner"]


def distance(x: Any, y: Any, *, curvature: float = -1.0) -> Any:
    """Hyperbolic distance ``R arccosh(-<x, y>_L / R^2)``, signature ``(..., d+1) x 2 -> (...)``.

    Evaluated through the law of cosines in two non-negative terms
    (``cosh(r_x - r_y) - 1`` and ``kappa (|x_s||y_s| - x_s.y_s)``, the latter
    from exact 2x2 minors when the points are nearly collinear with the
    origin), so nearly coincident points far from the origin keep their digits.
    """
    return _native.hyperboloid_distance(x, y, curvature)


def exp_map(v: Any, base: Any = None, *, curvature: float = -1.0) -> Any:
    """``exp_x(v) = cosh(|v|/R) x + R sinh(|v|/R) v/|v|``; ``base=None`` is ``(R, 0, ..., 0)``.

    Signature ``(..., d+1), (..., d+1) -> (..., d+1)``. ``|v|`` is the
    Minkowski norm, computed as a sum of squares from the spatial parts.
    Results that overflow float64 raise ``ValueError``.

    Evaluated as ``e^{-|v|/R} x + sinh(|v|/R) l`` with ``l = x + R v/|v|`` the
    null vector towards the geodesic's end at infinity, formed through the
    Klein chord (the textbook ``cosh``/``sinh`` terms cancel like
    ``e^{2 min(|v|, r)}`` when a long tangent carries a far point back past
    the origin: 6.4e-4 relative at 30 R). Accuracy: <= 6e-15 relative
    (measured against 50-digit mpmath), tangents up to 30 R included.
    """
    return _native.hyperboloid_exp_map(v, base, curvature)


def log_map(y: Any, base: Any = None, *, curvature: float = -1.0) -> Any:
    """Logarithmic map at ``base`` (origin when None), the inverse of :func:`exp_map`."""
    return _native.hyperboloid_log_map(y, base, curvature)


def transport(v: Any, start: Any, end: Any, *, curvature: float = -1.0) -> Any:
    """Parallel transport ``v + <end, v>_L / (R^2 - <start, end>_L) (start + end)``.

    Signature ``(..., d+1) x 3 -> (..., d+1)``. ``v`` is split into its
    parts along and across ``start``; the transported radial direction and
    ``<end, v>_L`` are written as sums of non-negative terms and wedge
    products of the inputs (the textbook form cancels by ``x0 y0 / R^2``).

    Accuracy (measured against 50-digit mpmath): <= 3e-15 relative
    (normwise) on the hard cases, and between points anywhere from the
    centre to 20 R out; in the Riemannian norm, <= 8e-15 relative for points
    up to 20 R out.
    """
    return _native.hyperboloid_transport(v, start, end, curvature)


def geodesic(x: Any, y: Any, t: Any, *, curvature: float = -1.0) -> Any:
    """The point at fraction ``t`` of the geodesic from ``x`` to ``y``: ``exp_x(t log_x(y))``."""
    return _native.hyperboloid_geodesic(x, y, t, curvature)


def project(x: Any, *, curvature: float = -1.0) -> Any:
    """Repair: recompute ``x0 = R sqrt(1 + |x_s|^2/R^2)`` from the spatial part.

    Points are never rescaled by ``sqrt(-<x,x>_L)``, which moves far points
    by about 1e-4 in hyperbolic distance.
    """
    return _native.hyperboloid_project(x, curvature)


def inner(u: Any, v: Any) -> Any:
    """Minkowski inner product ``-u0 v0 + u_s . v_s`` (compensated), ``(..., d+1) x 2 -> (...)``."""
    return _native.hyperboloid_inner(u, v)
