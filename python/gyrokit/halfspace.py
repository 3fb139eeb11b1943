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

    Signature ``(..., d), (..., d) -> (...)``.
    """
    return _native.halfspace_distance(x, y, curvature)
