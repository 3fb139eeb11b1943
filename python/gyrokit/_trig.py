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
    :func:`gyrokit.klein.angle` in the Klein model). The defect uses the
    triangle moved so that ``b`` is at the origin of the Poincaré ball,
    ``(0, u, w)``, and ``tan(defect/2) = |u ∧ w| / (R^2 - u.w)`` with
    ``R^2 - u.w`` formed from the exact gaps: a sum of non-negative terms.
    Accurate for nearly degenerate triangles and vertices within 1e-12 R of
    the sphere in the ball models. Half-space and hyperboloid vertices are
    read into the Poincaré ball first: their angles and defect are as
    accurate as that conversion, which for vertices closer than about 1e-8 of
    their coordinates' size loses digits of the short sides' directions
    (convert such data to the Poincaré ball once and work there). A vertex
    equal to another raises ``ValueError`` (its angle is undefined).
    """
    if not isinstance(model, str):
        raise TypeError(f"model must be a str, got {type(model).__name__}")
    out = np.asarray(_native.triangle(a, b, c, model, _args.real("curvature", curvature)))
    return Triangle(sides=out[..., 0:3], angles=out[..., 3:6], defect=out[..., 6][()], area=out[..., 7][()])
