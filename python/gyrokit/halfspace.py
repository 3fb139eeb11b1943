"""The upper half-space model of curvature K < 0.

Points have shape ``(..., d)`` with last coordinate ``y_d > 0``; the metric
is ``R^2 |dy|^2 / y_d^2``. :func:`gyrokit.convert` maps the ball origin to
``(0, ..., 0, R)``.
"""

from __future__ import annotations

from typing import Any

from . import _native

__all__ = ["distance"]


def distance(x: Any, y: Any, *, curvature: float = -1.0) -> Any:
    """Hyperbolic distance, ``cosh(d/R) = 1 + |x - y|^2 / (2 x_d y_d)``, through asinh.

    Signature ``(..., d), (..., d) -> (...)``. Points must have coordinates
    of at most 2^250 (about 1.8e75) in magnitude and a last coordinate of at
    least 2^-250, so that ``|x - y|^2 / (x_d y_d)`` fits in float64; others
    raise ``ValueError``. Computed by the kernel of :func:`gyrokit.distance_matrix`,
    bit for bit.
    """
    return _native.halfspace_distance(x, y, curvature)
