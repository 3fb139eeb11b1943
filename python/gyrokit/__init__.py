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
"""

from . import klein, poincare
from ._native import __version__

__all__ = ["poincare", "klein", "__version__"]
