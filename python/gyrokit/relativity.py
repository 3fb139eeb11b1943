"""Relativistic velocities: the Einstein gyrovector space in physical units.

Velocities are 3-vectors along the last axis, shape ``(..., 3)``, in any
unit system: ``c`` (keyword, default ``SPEED_OF_LIGHT = 299_792_458.0``, SI
m/s) fixes it. Leading axes broadcast like NumPy (``(n, 3)`` with ``(3,)``
works); float32 and float64 inputs are accepted, computation is in float64
and the result is float32 only when every array input is float32.

The space of admissible velocities (speeds below ``c``) is the Beltrami–Klein
ball of radius ``c``, curvature ``-1/c**2``: :func:`compose` is
:func:`gyrokit.klein.add` and :func:`thomas_rotation` is the matrix of
:func:`gyrokit.klein.gyration` in that ball (the same kernels). Use
:func:`to_klein` / :func:`from_klein` to move velocities into a Klein ball of
another curvature (for instance the unit ball, ``curvature=-1``) and back, so
that distances (rapidity differences), midpoints, means and neighbour
searches of the rest of the package apply to them.

Accuracy: every digit is kept from 1 m/s (``gamma - 1 = 5.6e-18``, Wigner
angles of ~1e-17 rad) up to speeds with ``1 - |v|/c = 1e-15``; the gap
``1 - |v|^2/c^2`` is computed as ``(c^2 - |v|^2)/c^2`` in double-double, never
through a rounded ``1/c^2``.

Errors: a speed at or above ``c`` or a NaN/infinite coordinate raises
``ValueError`` naming the argument and its first bad row (in that argument's
own shape); a last axis other than 3 raises ``ValueError``; non-numeric input
raises ``TypeError``; ``c`` must be a finite positive number (with
``1/c**2`` a normal float64).

Conventions, stated once:

* ``u ⊕ v`` is the lab velocity of an object that moves with ``v`` relative
  to an observer who moves with ``u`` relative to the lab (the observer's
  axes being the lab axes carried along by the pure boost ``boost(u)``).
* ``boost(v)`` is the active pure boost taking the rest four-velocity
  ``(1, 0, 0, 0)`` to ``gamma (1, v/c)`` on coordinates ``(ct, x, y, z)``.
* Boost products factor as ``boost(u) @ boost(v) == boost(u ⊕ v) @ R4`` with
  ``R4 = diag(1, thomas_rotation(u, v))`` (rotation on the right).
* ``thomas_rotation(u, v)`` is a right-handed rotation by
  ``wigner_angle(u, v)`` in ``[0, pi)`` about ``wigner_axis(u, v)``, the unit
  vector along ``v x u``.
"""

from __future__ import annotations

from typing import Any

from . import _native

__all__ = [
    "SPEED_OF_LIGHT",
    "lorentz_factor", "gamma_minus_one", "compose", "thomas_rotation",
    "wigner_angle", "wigner_axis", "boost", "thomas_precession",
    "rapidity", "velocity_from_rapidity", "to_klein", "from_klein",
]

#: The speed of light in vacuum, m/s (exact by the SI definition of the metre).
SPEED_OF_LIGHT = 299_792_458.0


def lorentz_factor(v: Any, *, c: float = SPEED_OF_LIGHT) -> Any:
    """The Lorentz factor ``gamma = 1/sqrt(1 - |v|^2/c^2)``.

    Signature ``(..., 3) -> (...)``. Relative error of a few ulps up to
    ``1 - |v|/c = 1e-15`` (``gamma ~ 2.2e7``). For slow velocities use
    :func:`gamma_minus_one`: in float64 ``gamma`` rounds to exactly 1.0 below
    about 4.5 m/s (SI) and holds only the leading digits of ``gamma - 1`` up
    to far higher speeds. Evaluated as ``1 + gamma_minus_one(v)``.
    """
    return _native.relativity_lorentz_factor(v, c)


def gamma_minus_one(v: Any, *, c: float = SPEED_OF_LIGHT) -> Any:
    """``gamma - 1``, accurate for slow velocities.

    Signature ``(..., 3) -> (...)``. Computed as
    ``beta^2/(sqrt(g)(1 + sqrt(g)))`` with ``beta^2 = |v|^2/c^2`` and
    ``g = 1 - beta^2``, never as ``gamma - 1``: at 1 m/s it gives
    ``5.56e-18`` to full relative accuracy where the subtraction gives 0.
    The kinetic energy of a mass ``m`` is ``m c^2 gamma_minus_one(v)``.
    """
    return _native.relativity_gamma_minus_one(v, c)


def compose(u: Any, v: Any, *, c: float = SPEED_OF_LIGHT) -> Any:
    """Einstein velocity addition ``u ⊕ v``.

    Signature ``(..., 3), (..., 3) -> (..., 3)``. With
    ``gamma_u = lorentz_factor(u)``::

        u ⊕ v = (u + v/gamma_u + gamma_u/(1 + gamma_u) (u.v/c^2) u) / (1 + u.v/c^2)

    the lab velocity of an object moving with ``v`` relative to an observer
    who moves with ``u`` (see the module conventions). Not commutative: ``u ⊕ v``
    and ``v ⊕ u`` differ by :func:`thomas_rotation`. The same kernel as
    :func:`gyrokit.klein.add` with ball radius ``c``, evaluated without the
    cancellation of ``1 + u.v/c^2`` for nearly opposite velocities near
    ``c``. Results whose exact speed lies within ~1e-16 c of ``c`` would round
    onto ``c``; they are returned at the largest float64 speed below ``c``
    along their direction, so every result is a valid velocity.
    """
    return _native.relativity_compose(u, v, c)


def thomas_rotation(u: Any, v: Any, *, c: float = SPEED_OF_LIGHT) -> Any:
    """The Thomas–Wigner rotation ``gyr[u, v]`` as a matrix.

    Signature ``(..., 3), (..., 3) -> (..., 3, 3)``; column ``j`` is
    ``gyr[u, v] e_j``, so ``thomas_rotation(u, v) @ w`` equals
    ``gyrokit.klein.gyration(u, v, w, curvature=-1/c**2)``. It satisfies
    ``u ⊕ v = thomas_rotation(u, v) @ (v ⊕ u)`` and
    ``boost(u) @ boost(v) == boost(u ⊕ v) @ diag(1, thomas_rotation(u, v))``.
    A rotation (orthogonal, determinant +1) by :func:`wigner_angle` about
    :func:`wigner_axis`.
    """
    return _native.relativity_thomas_rotation(u, v, c)


def wigner_angle(u: Any, v: Any, *, c: float = SPEED_OF_LIGHT) -> Any:
    """The rotation angle of :func:`thomas_rotation`, radians in ``[0, pi)``.

    Signature ``(..., 3), (..., 3) -> (...)``. From the spinor form of the
    boosts::

        tan(eps/2) = (|u x v|/c^2) / ((1 + 1/gamma_u)(1 + 1/gamma_v) + u.v/c^2)

    evaluated with the cross product from error-free 2x2 minors and the
    denominator as a sum of positive terms, never as
    ``acos((trace - 1)/2)`` (which returns 0 for slow velocities): the angle
    has full relative accuracy down to the ``|u x v|/(2 c^2)`` (~1e-17 rad)
    of velocities of 1 m/s. For perpendicular ``u``, ``v``:
    ``cos(eps) = (gamma_u + gamma_v)/(1 + gamma_u gamma_v)``.
    """
    return _native.relativity_wigner_angle(u, v, c)


def wigner_axis(u: Any, v: Any, *, c: float = SPEED_OF_LIGHT) -> Any:
    """The unit rotation axis of :func:`thomas_rotation`, along ``v x u``.

    Signature ``(..., 3), (..., 3) -> (..., 3)``. Oriented so that
    ``thomas_rotation(u, v)`` turns right-handedly by
    ``wigner_angle(u, v) >= 0`` about it; ``wigner_angle * wigner_axis`` is the
    rotation vector. When ``u`` and ``v`` are parallel (or one is zero) the
    rotation is the identity and the axis is the zero vector. The direction
    is computed from error-free minors, so it is exact to a few ulps even
    for nearly parallel velocities.
    """
    return _native.relativity_wigner_axis(u, v, c)


def boost(v: Any, *, c: float = SPEED_OF_LIGHT) -> Any:
    """The pure Lorentz boost matrix of velocity ``v``.

    Signature ``(..., 3) -> (..., 4, 4)``, acting on column vectors
    ``(ct, x, y, z)``::

        [[gamma,         gamma v^T/c                          ],
         [gamma v/c,     I + (gamma - 1) v v^T / |v|^2        ]]

    The active boost taking the rest four-velocity to ``gamma (1, v/c)``;
    ``boost(-v)`` is its inverse. Exactly symmetric, with
    ``(gamma - 1)/|v|^2`` evaluated without cancellation (``v = 0`` gives the
    identity).
    """
    return _native.relativity_boost(v, c)


def thomas_precession(v: Any, a: Any, *, c: float = SPEED_OF_LIGHT) -> Any:
    """The Thomas precession angular velocity, rad per unit time.

    Signature ``(..., 3), (..., 3) -> (..., 3)``: for velocity ``v`` and
    acceleration ``a`` (both in the lab frame, units of ``c`` and ``c`` per
    unit time)::

        omega_T = gamma^2/(gamma + 1) (a x v)/c^2

    Sign convention: the rest frame reached by successive pure boosts
    rotates, relative to the lab axes, with angular velocity ``omega_T``
    (right-handed): it is the rotation vector of
    ``gyr[v, (-v) ⊕ (v + a dt)]`` divided by ``dt`` as ``dt -> 0``. For
    circular motion it is retrograde (opposite to the orbital angular
    velocity). ``ValueError`` when the result overflows float64.
    """
    return _native.relativity_thomas_precession(v, a, c)


def rapidity(v: Any, *, c: float = SPEED_OF_LIGHT) -> Any:
    """The rapidity vector ``artanh(|v|/c) v/|v|`` (dimensionless).

    Signature ``(..., 3) -> (..., 3)``. Collinear rapidities add under
    :func:`compose`; ``|rapidity(v)|`` is the hyperbolic distance of ``v``
    from rest in units of ``c``. artanh is taken from the exact gap
    ``1 - |v|^2/c^2``, so speeds with ``1 - |v|/c = 1e-15`` keep their
    digits (rapidity ~17.6).
    """
    return _native.relativity_rapidity(v, c)


def velocity_from_rapidity(w: Any, *, c: float = SPEED_OF_LIGHT) -> Any:
    """The velocity ``c tanh(|w|) w/|w|`` of a rapidity vector ``w``.

    Signature ``(..., 3) -> (..., 3)``, the inverse of :func:`rapidity`.
    float64 limit: for ``|w|`` above about 18.7 the speed is within 1.1e-16 c
    of ``c`` and not representable; the result is then the largest float64
    speed below ``c`` along ``w`` (still a valid velocity).
    """
    return _native.relativity_velocity_from_rapidity(w, c)


def to_klein(v: Any, *, c: float = SPEED_OF_LIGHT, curvature: float = -1.0) -> Any:
    """Velocities as points of the Klein ball of the given curvature.

    Signature ``(..., 3) -> (..., 3)``: ``k = v R/c`` with
    ``R = 1/sqrt(-curvature)``. Einstein addition, gyrations, distances and
    midpoints in that ball then correspond to :func:`compose`,
    :func:`thomas_rotation`, rapidity differences (``distance(k1, k2) / R`` is
    the rapidity of ``(-v1) ⊕ v2``) and relativistic averages of the
    velocities. Use ``gk.convert(k, "klein", ...)`` to reach the other models.
    Within ~1e-15 of the sphere the rescaled coordinates round (the gap of
    the image is then good to ~1e-16 absolute); images that would round onto
    the sphere are moved to the largest float64 radius inside.
    """
    return _native.relativity_to_klein(v, c, curvature)


def from_klein(k: Any, *, c: float = SPEED_OF_LIGHT, curvature: float = -1.0) -> Any:
    """Points of the Klein ball of the given curvature as velocities, ``v = k c/R``.

    Signature ``(..., 3) -> (..., 3)``, the inverse of :func:`to_klein`.
    Points on or outside the ball raise ``ValueError`` naming the row;
    results that would round onto ``c`` are returned at the largest float64
    speed below ``c``.
    """
    return _native.relativity_from_klein(k, c, curvature)
