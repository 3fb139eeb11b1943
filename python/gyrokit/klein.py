"""The Beltrami–Klein ball: the Einstein gyrovector space of curvature K < 0.

Einstein addition is relativistic velocity addition in the ball of radius
``R = 1/sqrt(-curvature)`` (the speed of light). Geodesics are straight
chords. Conventions and accuracy as in :mod:`gyrokit.poincare`; the Klein
point of a Poincaré point ``p`` is ``2 ⊗ p = 2p/(1 + kappa |p|^2)``, and this
map carries Möbius to Einstein operations exactly.
"""

from __future__ import annotations

from typing import Any

from . import _native

__all__ = ["add", "sub", "scale", "gyration", "midpoint"]


def add(x: Any, y: Any, *, curvature: float = -1.0) -> Any:
    """Einstein addition ``x ⊕ y``.

    Signature ``(..., d), (..., d) -> (..., d)``. With ``kappa = -curvature``
    and ``γ_x = 1/sqrt(1 - kappa |x|^2)``::

        x ⊕ y = (x + y/γ_x + kappa γ_x/(1 + γ_x) <x,y> x) / (1 + kappa <x,y>)

    Evaluated without the cancellation of ``1 + kappa <x,y>`` for nearly
    opposite points near the boundary.
    """
    return _native.klein_add(x, y, curvature)


def sub(x: Any, y: Any, *, curvature: float = -1.0) -> Any:
    """Einstein subtraction ``x ⊖ y = x ⊕ (-y)``; signature ``(..., d), (..., d) -> (..., d)``."""
    return _native.klein_sub(x, y, curvature)


def scale(r: Any, x: Any, *, curvature: float = -1.0) -> Any:
    """Einstein scalar multiplication ``r ⊗ x = R tanh(r artanh(|x|/R)) x/|x|``.

    Signature ``(...), (..., d) -> (..., d)``; ``r`` broadcasts against
    ``x[..., 0]``. Results with ``1 - |x|/R < 1.1e-16`` round onto the sphere
    (not representable in float64).
    """
    return _native.klein_scale(r, x, curvature)


def gyration(a: Any, b: Any, v: Any, *, curvature: float = -1.0) -> Any:
    """The Einstein gyration ``gyr[a, b] v = ⊖(a ⊕ b) ⊕ (a ⊕ (b ⊕ v))``.

    Signature ``(..., d), (..., d), (..., d) -> (..., d)``. A rotation of R^d
    (the Thomas rotation when the ball holds velocities); ``v`` may be any
    finite vector.
    """
    return _native.klein_gyration(a, b, v, curvature)


def midpoint(x: Any, y: Any, *, curvature: float = -1.0) -> Any:
    """The Einstein midpoint ``(γ_x x + γ_y y)/(γ_x + γ_y)``.

    Signature ``(..., d), (..., d) -> (..., d)``. It is the Klein image of the
    Möbius gyromidpoint of the Poincaré images, the geodesic midpoint.
    """
    return _native.klein_midpoint(x, y, curvature)
