"""The Poincaré ball: the Möbius gyrovector space of curvature K < 0.

All functions take points of shape ``(..., d)`` strictly inside the ball of
radius ``R = 1/sqrt(-curvature)``, broadcast leading axes, release the GIL
and run on all cores for large inputs. Bad input (wrong shapes, mismatched
``d``, NaN/inf, points on or outside the sphere, curvature >= 0) raises
``ValueError``/``TypeError`` naming the argument and the first bad row.

Accuracy: every function is evaluated in a rearrangement that keeps its
digits near the boundary (compensated ``1 - |x|^2/R^2``, sums formed around
``x + y``); results agree with a 50-digit evaluation of the defining formula
to about 1e-15 relative, down to ``1 - |x|/R = 1e-15`` and for nearly
coincident or nearly opposite points.

The rim (representable range): float64 radii end at ``(1 - 2^-53) R``, about
37.4 R from the origin in hyperbolic distance (float32: ``(1 - 2^-24) R``,
17.3 R). A function whose exact result lies within ``2^-54 R`` (5.6e-17 R)
of the sphere, i.e. farther than about 38.1 R from the origin (float32:
3.0e-8 R, 18.0 R), cannot return it at its distance: by default it raises
``ValueError`` naming the row; the hyperboloid model
(:mod:`gyrokit.hyperboloid`, via :func:`gyrokit.convert`) holds such points.
With ``on_rim="clip"`` those results are clipped to the last radius inside
along their direction and a :class:`RimClipWarning` (a ``RuntimeWarning``)
says how many rows were; their distances from the origin are then wrong.
A result whose exact value is held but whose last rounding lands on the
sphere is moved to the last radius inside without a word: that is its
correct rounding. The rule judges the exact gap ``1 - |x|^2/R^2`` of the
result, from the gap identities of each operation (``g_{x⊕y} = g_x g_y/D``
for addition), never the gap of its rounded coordinates alone, which can
land inside by chance at the wrong distance. Functions that take
``on_rim``: :func:`add`, :func:`sub`, :func:`coadd`, :func:`scale`,
:func:`midpoint`, :func:`exp_map`, :func:`geodesic`, :func:`matvec` (the
others return distances or tangent vectors).
"""

from __future__ import annotations

from typing import Any

from . import _native
from ._native import RimClipWarning

__all__ = [
    "add", "sub", "coadd", "scale", "gyration", "midpoint",
    "distance", "exp_map", "log_map", "transport", "geodesic", "project", "matvec",
    "angle", "RimClipWarning",
]



def add(x: Any, y: Any, *, curvature: float = -1.0, on_rim: str = "raise") -> Any:
    """Möbius addition ``x ⊕ y``.

    Signature ``(..., d), (..., d) -> (..., d)``. With ``kappa = -curvature``::

        x ⊕ y = ((1 + 2 kappa <x,y> + kappa |y|^2) x + (1 - kappa |x|^2) y)
                / (1 + 2 kappa <x,y> + kappa^2 |x|^2 |y|^2)

    Not commutative: ``x ⊕ y = gyr[x, y](y ⊕ x)``.

    Range: a result farther than about 38.1 R from the origin (18.0 R for
    float32 results) raises ``ValueError`` naming the row, or with
    ``on_rim="clip"`` is clipped to the last radius with a
    :class:`RimClipWarning`; see *the rim* in the module notes.
    """
    return _native.poincare_add(x, y, curvature, on_rim)


def sub(x: Any, y: Any, *, curvature: float = -1.0, on_rim: str = "raise") -> Any:
    """Möbius subtraction ``x ⊖ y = x ⊕ (-y)``.

    Signature ``(..., d), (..., d) -> (..., d)``. ``(-x) ⊕ y`` (note the
    order) is the point ``y`` seen from ``x``: its norm gives the distance.

    Range: a result farther than about 38.1 R from the origin (18.0 R for
    float32 results) raises ``ValueError`` naming the row, or with
    ``on_rim="clip"`` is clipped to the last radius with a
    :class:`RimClipWarning`; see *the rim* in the module notes.
    """
    return _native.poincare_sub(x, y, curvature, on_rim)


def coadd(x: Any, y: Any, *, curvature: float = -1.0, on_rim: str = "raise") -> Any:
    """Möbius coaddition ``x ⊞ y = x ⊕ gyr[x, ⊖y] y`` (commutative).

    Signature ``(..., d), (..., d) -> (..., d)``. Closed form::

        x ⊞ y = ((1 - kappa |y|^2) x + (1 - kappa |x|^2) y) / (1 - kappa^2 |x|^2 |y|^2)

    The result is ``2 ⊗ midpoint(x, y)``: it lies twice as far out as the
    midpoint, so it can leave the range when both points are far out.

    Range: a result farther than about 38.1 R from the origin (18.0 R for
    float32 results) raises ``ValueError`` naming the row, or with
    ``on_rim="clip"`` is clipped to the last radius with a
    :class:`RimClipWarning`; see *the rim* in the module notes.
    """
    return _native.poincare_coadd(x, y, curvature, on_rim)


def scale(r: Any, x: Any, *, curvature: float = -1.0, on_rim: str = "raise") -> Any:
    """Möbius scalar multiplication ``r ⊗ x = R tanh(r artanh(|x|/R)) x/|x|``.

    Signature ``(...), (..., d) -> (..., d)``: ``r`` is a scalar or an array
    broadcasting against ``x[..., 0]``. ``r ⊗ x`` lies at ``r`` times the
    hyperbolic distance of ``x`` from the origin.

    Range: a result farther than about 38.1 R from the origin (18.0 R for
    float32 results) raises ``ValueError`` naming the row, or with
    ``on_rim="clip"`` is clipped to the last radius with a
    :class:`RimClipWarning`; see *the rim* in the module notes.
    """
    return _native.poincare_scale(r, x, curvature, on_rim)


def gyration(a: Any, b: Any, v: Any, *, curvature: float = -1.0) -> Any:
    """The gyration ``gyr[a, b] v = ⊖(a ⊕ b) ⊕ (a ⊕ (b ⊕ v))``.

    Signature ``(..., d), (..., d), (..., d) -> (..., d)``. ``gyr[a, b]`` is a
    rotation of R^d (it preserves norms and inner products), so ``v`` may be
    any finite vector, inside the ball or not; ``a`` and ``b`` must be ball
    points. Computed in closed form, not by the composition above.
    """
    return _native.poincare_gyration(a, b, v, curvature)


def midpoint(x: Any, y: Any, *, curvature: float = -1.0, on_rim: str = "raise") -> Any:
    """The gyromidpoint ``½ ⊗ (x ⊞ y) = x ⊕ ½ ⊗ ((-x) ⊕ y)``.

    Signature ``(..., d), (..., d) -> (..., d)``. It is the midpoint of the
    geodesic segment from ``x`` to ``y``, equidistant from both.

    Range: never farther out than the farther input; a result farther than
    about 38.1 R from the origin (18.0 R for float32 results) raises ``ValueError`` naming the row, or with
    ``on_rim="clip"`` is clipped to the last radius with a
    :class:`RimClipWarning`; see *the rim* in the module notes.
    """
    return _native.poincare_midpoint(x, y, curvature, on_rim)


def distance(x: Any, y: Any, *, curvature: float = -1.0) -> Any:
    """Hyperbolic distance, signature ``(..., d), (..., d) -> (...)``.

    ``d = 2R asinh(sqrt(kappa) |x - y| / sqrt(g_x g_y))`` with
    ``g = 1 - kappa |x|^2`` in double-double: the same value as
    ``R arccosh(1 + 2 kappa |x-y|^2 / (g_x g_y))`` but exact to a few ulps for
    points 1e-12 apart (where the arccosh form returns 0) and for points
    within 1e-15 R of the sphere. 0-d results come back as NumPy scalars.
    """
    return _native.poincare_distance(x, y, curvature)


def exp_map(v: Any, base: Any = None, *, curvature: float = -1.0, on_rim: str = "raise") -> Any:
    """Exponential map ``exp_base(v)``, signature ``(..., d), (..., d) -> (..., d)``.

    ``v`` is a tangent vector at ``base`` in ambient coordinates (the
    Riemannian norm is ``2|v|/(1 - kappa |base|^2)``); ``base=None`` is the
    origin. ``exp_x(v) = x ⊕ tanh(sqrt(kappa)|v|/g_x) v/(sqrt(kappa)|v|)``.

    Range: a result farther than about 38.1 R from the origin (18.0 R for
    float32 results) raises ``ValueError`` naming the row, or with
    ``on_rim="clip"`` is clipped to the last radius with a
    :class:`RimClipWarning`; see *the rim* in the module notes.

    Accuracy: ~1e-15 relative for tangents up to ~15 R long; for longer
    tangents that carry a far base point back past the origin the rounding of
    the intermediate point costs up to ~5e-10 relative (measured at 20-30 R).
    """
    return _native.poincare_exp_map(v, base, curvature, on_rim)


def log_map(y: Any, base: Any = None, *, curvature: float = -1.0) -> Any:
    """Logarithmic map ``log_base(y)``, the inverse of :func:`exp_map`.

    Signature ``(..., d), (..., d) -> (..., d)``; ``base=None`` is the origin.
    Its Riemannian norm equals ``distance(base, y)``.
    """
    return _native.poincare_log_map(y, base, curvature)


def transport(v: Any, start: Any, end: Any, *, curvature: float = -1.0) -> Any:
    """Parallel transport of tangent ``v`` at ``start`` to ``end`` along the geodesic.

    Signature ``(..., d) x 3 -> (..., d)``:
    ``(g_end/g_start) gyr[end, -start] v``. Preserves Riemannian norms and
    inner products.
    """
    return _native.poincare_transport(v, start, end, curvature)


def geodesic(x: Any, y: Any, t: Any, *, curvature: float = -1.0, on_rim: str = "raise") -> Any:
    """The point at fraction ``t`` of the geodesic from ``x`` to ``y``.

    Signature ``(..., d), (..., d), (...) -> (..., d)``; ``t`` broadcasts
    against the leading axes (``t`` outside [0, 1] extrapolates).
    ``x ⊕ (t ⊗ ((-x) ⊕ y))``; ``t = 0.5`` gives :func:`midpoint`.

    Range: for ``t`` in [0, 1] never farther out than the farther input; a
    result farther than about 38.1 R from the origin (18.0 R for float32
    results) raises ``ValueError`` naming the row, or with
    ``on_rim="clip"`` is clipped to the last radius with a
    :class:`RimClipWarning`; see *the rim* in the module notes.
    """
    return _native.poincare_geodesic(x, y, t, curvature, on_rim)


def project(x: Any, margin: float = 1e-12, *, curvature: float = -1.0) -> Any:
    """Explicit repair: pull points with ``|x| > (1 - margin) R`` back to that radius.

    Signature ``(..., d) -> (..., d)``. Points inside radius
    ``(1 - margin) R`` are returned unchanged (bit for bit); others are
    rescaled along their ray (points outside the ball included). No other
    function ever does this silently: they reject points on or outside the
    sphere. ``margin`` must satisfy ``1.1e-16 < margin < 1``.
    """
    return _native.poincare_project(x, margin, curvature)


def matvec(m: Any, x: Any, *, curvature: float = -1.0, on_rim: str = "raise") -> Any:
    """Möbius matrix-vector product ``M ⊗ x = R tanh(|Mx|/|x| artanh(|x|/R)) Mx/|Mx|``.

    ``m`` has shape ``(d_out, d_in)``; signature ``(..., d_in) -> (..., d_out)``.
    Zero when ``Mx = 0``. ``(rM) ⊗ x = r ⊗ (M ⊗ x)`` and
    ``(M N) ⊗ x = M ⊗ (N ⊗ x)``.

    Range: a result farther than about 38.1 R from the origin (18.0 R for
    float32 results) raises ``ValueError`` naming the row, or with
    ``on_rim="clip"`` is clipped to the last radius with a
    :class:`RimClipWarning`; see *the rim* in the module notes.
    """
    return _native.poincare_matvec(m, x, curvature, on_rim)


def angle(a: Any, b: Any, c: Any, *, curvature: float = -1.0) -> Any:
    """The gyroangle at ``b`` between ``⊖b⊕a`` and ``⊖b⊕c`` (Möbius), in ``[0, π]``.

    Signature ``(..., d), (..., d), (..., d) -> (...)``. In the Poincaré ball this is the Euclidean angle between the two
    gyrovectors, and the hyperbolic angle of the triangle at ``b`` (the model
    is conformal).
    Computed as ``atan2(|u ∧ w|, u.w)`` from the exact gyrovectors (wedge
    from error-free 2x2 minors), so angles near 0 and π, nearly coincident
    points and points near the sphere keep their digits. ``a`` or ``c``
    equal to ``b`` raises ``ValueError`` (the angle is undefined).
    """
    return _native.poincare_angle(a, b, c, curvature)
