"""The Beltrami–Klein ball: the Einstein gyrovector space of curvature K < 0.

Einstein addition is relativistic velocity addition in the ball of radius
``R = 1/sqrt(-curvature)`` (the speed of light). Geodesics are straight
chords. Conventions and accuracy as in :mod:`gyrokit.poincare`; the Klein
point of a Poincaré point ``p`` is ``2 ⊗ p = 2p/(1 + kappa |p|^2)``, and this
map carries Möbius to Einstein operations exactly.

The rim (representable range): float64 radii end at ``(1 - 2^-53) R``, about
18.7 R from the origin in hyperbolic distance in the Klein ball, half the
Poincaré figure (float32: 8.7 R). A function whose exact result lies within
``2^-54 R`` of the sphere, farther than about 19.1 R from the origin (float32:
9.0 R), raises ``ValueError`` naming the row by default, or with
``on_rim="clip"`` is clipped to the last radius with a
:class:`RimClipWarning`; the hyperboloid model holds such points. The rule is
the one of :mod:`gyrokit.poincare` (see *the rim* there), judged on the exact
Klein gap ``1 - |x|^2/R^2`` of the result. Functions that take ``on_rim``:
:func:`add`, :func:`sub`, :func:`scale`, :func:`midpoint`, :func:`exp_map`,
:func:`geodesic`.
"""

from __future__ import annotations

from typing import Any

from . import _native
from ._native import RimClipWarning

__all__ = [
    "add", "sub", "scale", "gyration", "midpoint",
    "distance", "exp_map", "log_map", "transport", "geodesic", "project",
    "angle", "RimClipWarning",
]


def add(x: Any, y: Any, *, curvature: float = -1.0, on_rim: str = "raise") -> Any:
    """Einstein addition ``x ⊕ y``.

    Signature ``(..., d), (..., d) -> (..., d)``. With ``kappa = -curvature``
    and ``γ_x = 1/sqrt(1 - kappa |x|^2)``::

        x ⊕ y = (x + y/γ_x + kappa γ_x/(1 + γ_x) <x,y> x) / (1 + kappa <x,y>)

    Evaluated without the cancellation of ``1 + kappa <x,y>`` for nearly
    opposite points near the boundary.

    Range: a result farther than about 19.1 R from the origin (9.0 R for
    float32 results) raises ``ValueError`` naming the row, or with
    ``on_rim="clip"`` is clipped to the last radius with a
    :class:`RimClipWarning`; see *the rim* in the module notes.
    """
    return _native.klein_add(x, y, curvature, on_rim)


def sub(x: Any, y: Any, *, curvature: float = -1.0, on_rim: str = "raise") -> Any:
    """Einstein subtraction ``x ⊖ y = x ⊕ (-y)``; signature ``(..., d), (..., d) -> (..., d)``.

    Range: a result farther than about 19.1 R from the origin (9.0 R for
    float32 results) raises ``ValueError`` naming the row, or with
    ``on_rim="clip"`` is clipped to the last radius with a
    :class:`RimClipWarning`; see *the rim* in the module notes.
    """
    return _native.klein_sub(x, y, curvature, on_rim)


def scale(r: Any, x: Any, *, curvature: float = -1.0, on_rim: str = "raise") -> Any:
    """Einstein scalar multiplication ``r ⊗ x = R tanh(r artanh(|x|/R)) x/|x|``.

    Signature ``(...), (..., d) -> (..., d)``; ``r`` broadcasts against
    ``x[..., 0]``.

    Range: a result farther than about 19.1 R from the origin (9.0 R for
    float32 results) raises ``ValueError`` naming the row, or with
    ``on_rim="clip"`` is clipped to the last radius with a
    :class:`RimClipWarning`; see *the rim* in the module notes.
    """
    return _native.klein_scale(r, x, curvature, on_rim)


def gyration(a: Any, b: Any, v: Any, *, curvature: float = -1.0) -> Any:
    """The Einstein gyration ``gyr[a, b] v = ⊖(a ⊕ b) ⊕ (a ⊕ (b ⊕ v))``.

    Signature ``(..., d), (..., d), (..., d) -> (..., d)``. A rotation of R^d
    (the Thomas rotation when the ball holds velocities); ``v`` may be any
    finite vector.
    """
    return _native.klein_gyration(a, b, v, curvature)


def midpoint(x: Any, y: Any, *, curvature: float = -1.0, on_rim: str = "raise") -> Any:
    """The Einstein midpoint ``(γ_x x + γ_y y)/(γ_x + γ_y)``.

    Signature ``(..., d), (..., d) -> (..., d)``. It is the Klein image of the
    Möbius gyromidpoint of the Poincaré images, the geodesic midpoint.

    Range: never farther out than the farther input; a result farther than
    about 19.1 R from the origin (9.0 R for float32 results) raises ``ValueError`` naming the row, or with
    ``on_rim="clip"`` is clipped to the last radius with a
    :class:`RimClipWarning`; see *the rim* in the module notes.
    """
    return _native.klein_midpoint(x, y, curvature, on_rim)


def distance(x: Any, y: Any, *, curvature: float = -1.0) -> Any:
    """Hyperbolic distance in the Klein ball, signature ``(..., d), (..., d) -> (...)``.

    ``cosh(d/R) = (1 - kappa <x,y>)/sqrt(g_x g_y)``, evaluated as a sum of
    squares (exact for nearly coincident points and near the sphere).
    """
    return _native.klein_distance(x, y, curvature)


def exp_map(v: Any, base: Any = None, *, curvature: float = -1.0, on_rim: str = "raise") -> Any:
    """Exponential map at ``base`` (origin when None) in the Klein ball.

    Signature ``(..., d), (..., d) -> (..., d)``. Tangent vectors are ambient
    vectors with the Klein metric (Euclidean at the origin).

    Geodesics are straight chords, so ``exp_x(v) = x + t v/|v|``; ``t`` comes
    from the cross-ratio form of the distance along the chord,
    ``t = A B (1 - e^{-2D})/(A e^{-2D} + B)`` with ``D = |v|_x/R`` and ``A``,
    ``B`` the chord lengths from ``x`` to the sphere ahead and behind
    (``A B = R^2 - |x|^2``, the smaller one taken from the product).

    Accuracy: <= 1e-15 relative (measured against 50-digit mpmath) for points
    down to 1e-15 R from the sphere and tangents up to 30 R.

    Range: a result farther than about 19.1 R from the origin (9.0 R for
    float32 results) raises ``ValueError`` naming the row, or with
    ``on_rim="clip"`` is clipped to the last radius with a
    :class:`RimClipWarning`; see *the rim* in the module notes.
    """
    return _native.klein_exp_map(v, base, curvature, on_rim)


def log_map(y: Any, base: Any = None, *, curvature: float = -1.0) -> Any:
    """Logarithmic map at ``base`` (origin when None), inverse of :func:`exp_map`.

    Computed in the Poincaré ball (the pair's difference formed from the
    inputs), mapped back with the exact differential whose part perpendicular
    to ``base`` is taken from the input difference: <= 1e-15 relative
    (measured against 50-digit mpmath) down to 1e-15 R from the sphere, for
    pairs 1e-12 apart (1.2e-15 over 400 such pairs) and 30 R apart.
    """
    return _native.klein_log_map(y, base, curvature)


def transport(v: Any, start: Any, end: Any, *, curvature: float = -1.0) -> Any:
    """Parallel transport of tangent ``v`` from ``start`` to ``end`` (Klein ball).

    A closed form through the hyperboloid, ``s (v + lambda (start - end))``
    with ``s = sqrt(g_end/g_start)``, assembled from its parts along and
    across the radius, each from a cancellation-free expression (see the
    Rust source for the derivation). Accuracy: <= 7e-16 relative (measured
    against 50-digit mpmath) down to 1e-15 R from the sphere, for pairs
    1e-12 apart and 30 R apart; <= 1.2e-14 over 2500 random mixes of points
    near the centre and near the sphere with tangents of any direction
    (including ones dominated by their radial part); ``start == end``
    returns ``v`` exactly.
    """
    return _native.klein_transport(v, start, end, curvature)


def geodesic(x: Any, y: Any, t: Any, *, curvature: float = -1.0, on_rim: str = "raise") -> Any:
    """The point at fraction ``t`` of the geodesic (a straight chord) from ``x`` to ``y``.

    Signature ``(..., d), (..., d), (...) -> (..., d)``.

    Range: for ``t`` in [0, 1] never farther out than the farther input; a
    result farther than about 19.1 R from the origin (9.0 R for float32
    results) raises ``ValueError`` naming the row, or with
    ``on_rim="clip"`` is clipped to the last radius with a
    :class:`RimClipWarning`; see *the rim* in the module notes.
    """
    return _native.klein_geodesic(x, y, t, curvature, on_rim)


def project(x: Any, margin: float = 1e-12, *, curvature: float = -1.0) -> Any:
    """Explicit repair into the ball of radius ``(1 - margin) R``; see :func:`gyrokit.poincare.project`."""
    return _native.klein_project(x, margin, curvature)


def angle(a: Any, b: Any, c: Any, *, curvature: float = -1.0) -> Any:
    """The gyroangle at ``b`` between ``⊖b⊕a`` and ``⊖b⊕c`` (Einstein), in ``[0, π]``.

    Signature ``(..., d), (..., d), (..., d) -> (...)``. The Einstein gyrovectors are the Möbius ones of the Poincaré images
    scaled along their own directions, so this is the hyperbolic angle of the
    triangle at ``b`` too (the Klein model is not conformal: the Euclidean
    angle at ``b`` itself differs).
    Computed as ``atan2(|u ∧ w|, u.w)`` from the exact gyrovectors (wedge
    from error-free 2x2 minors), so angles near 0 and π, nearly coincident
    points and points near the sphere keep their digits. ``a`` or ``c``
    equal to ``b`` raises ``ValueError`` (the angle is undefined).
    """
    return _native.klein_angle(a, b, c, curvature)
