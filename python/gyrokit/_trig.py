"""Hyperbolic triangles: sides, angles, defect and area, in every model."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from . import _args, _native

__all__ = ["Triangle", "triangle"]


@dataclass(frozen=True)
class Triangle:
    """Result of :func:`gyrokit.triangle` (arrays broadcast over the leading axes).

    sides : ``(..., 3)``, the sides opposite ``a``, ``b``, ``c`` (distances).
    angles : ``(..., 3)``, the angles at ``a``, ``b``, ``c`` (radians).
    defect : ``(...)``, ``π - (α + β + γ)``, computed directly (not as a
        difference of rounded angles), so tiny triangles keep its digits.
    area : ``(...)``, ``defect R^2`` (Gauss–Bonnet).
    """

    sides: Any
    angles: Any
    defect: Any
    area: Any


def triangle(a: Any, b: Any, c: Any, *, model: str = "poincare", curvature: float = -1.0) -> Triangle:
    """The hyperbolic triangle with vertices ``a``, ``b``, ``c`` (points of ``model``).

    Signature ``(..., w) x 3 -> Triangle``; leading axes broadcast. The sides
    are the model's element-wise distances (bit for bit those of
    ``distance``). The angle at a vertex is the gyroangle between the
    gyrovectors to the other two (:func:`gyrokit.poincare.angle`;
    :func:`gyrokit.klein.angle` in the Klein model); in every model it is
    computed from the directions of the two geodesics at the vertex formed in
    double-double from the exact inputs, so thin triangles keep the digits of
    their small angles. The defect is not ``π - (α + β + γ)`` but
    ``tan(defect/2) = sinh a sinh c sin β / (1 + cosh a + cosh b + cosh c)``
    (sides in units of R; the hyperbolic form of the spherical-excess
    formula), a sum of positive terms, so tiny and thin triangles keep its
    digits.

    Accuracy (measured against mpmath at 300 digits, inputs taken as exact):
    sides, angles and defect to a few ulps for vertices within 1e-12 R of the
    sphere (Poincaré and Klein), nearly collinear and nearly coincident
    vertices, tiny triangles, half-space vertices near the boundary plane
    and far from the origin, and hyperboloid vertices out to 100 R, also on
    nearly the same ray (worst relative errors 7e-16, see
    ``tests/python/test_trig_hard.py``). Angles below ~1e-16 of the other
    directions at their vertex (vertices collinear to the last bits of their
    coordinates) keep an absolute accuracy of ~1e-32 rad. A vertex equal to
    another raises ``ValueError`` (its angle is undefined).
    """
    if not isinstance(model, str):
        raise TypeError(f"model must be a str, got {type(model).__name__}")
    out = np.asarray(_native.triangle(a, b, c, model, _args.real("curvature", curvature)))
    return Triangle(sides=out[..., 0:3], angles=out[..., 3:6], defect=out[..., 6][()], area=out[..., 7][()])
