"""High-precision (mpmath) reference implementations of the gyrovector operations.

Every function evaluates the *textbook* definition, in the textbook
arrangement, at ``DPS`` significant digits (50 by default) on the exact
values of its float64 inputs (converted with ``mpf(float)``). No rearrangement
for accuracy is made: the working precision is what makes these references
trustworthy. Near the boundary the textbook arrangements cancel up to about
``4 log10(1/gap)`` digits, so a fixed 50 digits is not always enough: take
reference values through ``converged``, which raises the precision until the
result stops moving.

Conventions follow gyrokit: a point is a 1-D sequence of floats (one row of
a ``(..., d)`` array), ``curvature`` is the sectional curvature K < 0,
``kappa = -K`` and the ball radius is ``R = 1/sqrt(kappa)``.

Public names:

``mobius_add``, ``mobius_sub``, ``mobius_coadd``, ``mobius_scale``,
``mobius_gyration``, ``mobius_midpoint``
    The Möbius gyrovector space (Poincaré ball).
``einstein_add``, ``einstein_sub``, ``einstein_scale``, ``einstein_gyration``,
``einstein_midpoint``
    The Einstein gyrovector space (Beltrami-Klein ball).
``REFERENCES``
    ``{"poincare.add": mobius_add, ..., "klein.midpoint": einstein_midpoint}``.
``converged``
    Evaluates a reference at rising precision (50, 100, 200, ... digits)
    until two successive precisions agree: the composition definitions
    (gyration, gyromidpoint) cancel like ``gap**4`` near the boundary, so
    50 digits are NOT enough for points with ``1 - |x|/R <= 1e-12`` (the
    ``gyr[a, b] v`` composition at ``1 - |a|/R = 1 - |b|/R = 1e-12`` divides by
    a quantity of size 1e-50). Use this, not a bare call, as the reference.
``to_mp``, ``mp_norm``, ``boundary_gap``, ``rel_error``
    Helpers: conversion, Euclidean norm, ``1 - |x|/R`` and the normwise
    relative error of a float64 result against a reference.

Functions take and return Python lists of ``mpf`` (row vectors); inputs may
also be NumPy float64 rows or lists of floats. Each public function sets its
own working precision, so importing this module does not change ``mp.dps``.
"""

from __future__ import annotations

from typing import Callable, Dict, Iterable, List, Sequence

import mpmath
from mpmath import mp, mpf

DPS = 50

Vec = List[mpf]


# ---------------------------------------------------------------- helpers


def to_mp(x: Iterable) -> Vec:
    """The exact values of a float64 row, as ``mpf`` (``mpf(float)`` is exact)."""
    return [v if isinstance(v, mpf) else mpf(float(v)) for v in x]


def _dot(x: Vec, y: Vec) -> mpf:
    return mpmath.fsum(a * b for a, b in zip(x, y))


def _sq(x: Vec) -> mpf:
    return _dot(x, x)


def _lin(a: mpf, x: Vec, b: mpf, y: Vec) -> Vec:
    return [a * u + b * v for u, v in zip(x, y)]


def _neg(x: Vec) -> Vec:
    return [-u for u in x]


def _kappa(curvature: float) -> mpf:
    k = -mpf(float(curvature))
    if not k > 0:
        raise ValueError("curvature must be negative")
    return k


def mp_norm(x: Iterable, dps: int = DPS) -> mpf:
    """Euclidean norm at ``dps`` digits."""
    with mp.workdps(dps):
        return mpmath.sqrt(_sq(to_mp(x)))


def boundary_gap(x: Iterable, curvature: float, dps: int = DPS) -> mpf:
    """``1 - |x|/R``: how far (relative to R) the row lies inside the sphere.

    Negative or zero when the float64 point is on or outside the sphere.
    """
    with mp.workdps(dps):
        k = _kappa(curvature)
        return 1 - mpmath.sqrt(k * _sq(to_mp(x)))


def rel_error(got: Iterable, ref: Sequence[mpf], floor: float, dps: int = DPS) -> float:
    """Normwise relative error ``|got - ref| / max(|ref|, floor)`` as a float."""
    with mp.workdps(dps):
        g = to_mp(got)
        diff = mpmath.sqrt(_sq([a - b for a, b in zip(g, ref)]))
        den = max(mpmath.sqrt(_sq(list(ref))), mpf(floor))
        return float(diff / den)


# ---------------------------------------------------------------- Möbius


def _mobius_add(x: Vec, y: Vec, k: mpf) -> Vec:
    # A. A. Ungar, Analytic Hyperbolic Geometry (2005), Möbius addition in the
    # ball of radius s = 1/sqrt(kappa):
    # x ⊕ y = ((1 + 2k<x,y> + k|y|^2) x + (1 - k|x|^2) y) / (1 + 2k<x,y> + k^2|x|^2|y|^2)
    xy = _dot(x, y)
    xx = _sq(x)
    yy = _sq(y)
    den = 1 + 2 * k * xy + k * k * xx * yy
    return _lin((1 + 2 * k * xy + k * yy) / den, x, (1 - k * xx) / den, y)


def _radial_scale(r: mpf, x: Vec, k: mpf) -> Vec:
    # Ungar (2005): r ⊗ x = R tanh(r artanh(|x|/R)) x/|x|, and r ⊗ 0 = 0.
    n = mpmath.sqrt(_sq(x))
    if n == 0:
        return [mpf(0) for _ in x]
    big_r = 1 / mpmath.sqrt(k)
    f = big_r * mpmath.tanh(r * mpmath.atanh(n / big_r)) / n
    return [f * u for u in x]


def mobius_add(x: Iterable, y: Iterable, curvature: float, dps: int = DPS) -> Vec:
    """Möbius addition ``x ⊕ y`` (textbook closed form)."""
    with mp.workdps(dps):
        return _mobius_add(to_mp(x), to_mp(y), _kappa(curvature))


def mobius_sub(x: Iterable, y: Iterable, curvature: float, dps: int = DPS) -> Vec:
    """Möbius subtraction ``x ⊖ y = x ⊕ (-y)``."""
    with mp.workdps(dps):
        return _mobius_add(to_mp(x), _neg(to_mp(y)), _kappa(curvature))


def mobius_coadd(x: Iterable, y: Iterable, curvature: float, dps: int = DPS) -> Vec:
    """Möbius coaddition ``x ⊞ y = ((1-k|y|^2) x + (1-k|x|^2) y)/(1 - k^2|x|^2|y|^2)``."""
    # Ungar (2005), Möbius coaddition (the commutative dual of ⊕).
    with mp.workdps(dps):
        k = _kappa(curvature)
        xv, yv = to_mp(x), to_mp(y)
        xx, yy = _sq(xv), _sq(yv)
        den = 1 - k * k * xx * yy
        return _lin((1 - k * yy) / den, xv, (1 - k * xx) / den, yv)


def mobius_scale(r: float, x: Iterable, curvature: float, dps: int = DPS) -> Vec:
    """Möbius scalar multiplication ``r ⊗ x = R tanh(r artanh(|x|/R)) x/|x|``."""
    with mp.workdps(dps):
        return _radial_scale(mpf(float(r)), to_mp(x), _kappa(curvature))


def mobius_gyration(a: Iterable, b: Iterable, v: Iterable, curvature: float, dps: int = DPS) -> Vec:
    """The gyration by its definition ``gyr[a,b]v = ⊖(a ⊕ b) ⊕ (a ⊕ (b ⊕ v))``."""
    # Ungar (2005): the gyrator identity, used here as the definition.
    with mp.workdps(dps):
        k = _kappa(curvature)
        av, bv, vv = to_mp(a), to_mp(b), to_mp(v)
        ab = _mobius_add(av, bv, k)
        return _mobius_add(_neg(ab), _mobius_add(av, _mobius_add(bv, vv, k), k), k)


def mobius_midpoint(x: Iterable, y: Iterable, curvature: float, dps: int = DPS) -> Vec:
    """The gyromidpoint by its definition ``x ⊕ ½ ⊗ ((-x) ⊕ y)``."""
    # Ungar (2005): the gyromidpoint of the gyrosegment from x to y.
    with mp.workdps(dps):
        k = _kappa(curvature)
        xv, yv = to_mp(x), to_mp(y)
        half = _radial_scale(mpf(1) / 2, _mobius_add(_neg(xv), yv, k), k)
        return _mobius_add(xv, half, k)


# ---------------------------------------------------------------- Einstein


def _gamma(x: Vec, k: mpf) -> mpf:
    return 1 / mpmath.sqrt(1 - k * _sq(x))


def _einstein_add(x: Vec, y: Vec, k: mpf) -> Vec:
    # Ungar (2005), Einstein (relativistic velocity) addition with c = R:
    # x ⊕ y = (x + y/γx + k γx/(1+γx) <x,y> x) / (1 + k<x,y>),  γx = 1/sqrt(1 - k|x|^2)
    g = _gamma(x, k)
    xy = _dot(x, y)
    den = 1 + k * xy
    cx = (1 + k * g / (1 + g) * xy) / den
    cy = 1 / (g * den)
    return _lin(cx, x, cy, y)


def einstein_add(x: Iterable, y: Iterable, curvature: float, dps: int = DPS) -> Vec:
    """Einstein addition ``x ⊕ y`` (textbook form)."""
    with mp.workdps(dps):
        return _einstein_add(to_mp(x), to_mp(y), _kappa(curvature))


def einstein_sub(x: Iterable, y: Iterable, curvature: float, dps: int = DPS) -> Vec:
    """Einstein subtraction ``x ⊖ y = x ⊕ (-y)``."""
    with mp.workdps(dps):
        return _einstein_add(to_mp(x), _neg(to_mp(y)), _kappa(curvature))


def einstein_scale(r: float, x: Iterable, curvature: float, dps: int = DPS) -> Vec:
    """Einstein scalar multiplication: the same radial law as Möbius."""
    with mp.workdps(dps):
        return _radial_scale(mpf(float(r)), to_mp(x), _kappa(curvature))


def einstein_gyration(a: Iterable, b: Iterable, v: Iterable, curvature: float, dps: int = DPS) -> Vec:
    """The Einstein gyration by its definition ``⊖(a ⊕ b) ⊕ (a ⊕ (b ⊕ v))``."""
    # Ungar (2005): gyrator identity in the Einstein gyrogroup.
    with mp.workdps(dps):
        k = _kappa(curvature)
        av, bv, vv = to_mp(a), to_mp(b), to_mp(v)
        ab = _einstein_add(av, bv, k)
        return _einstein_add(_neg(ab), _einstein_add(av, _einstein_add(bv, vv, k), k), k)


def einstein_midpoint(x: Iterable, y: Iterable, curvature: float, dps: int = DPS) -> Vec:
    """The Einstein midpoint ``(γx x + γy y)/(γx + γy)``."""
    # Ungar (2005): Einstein gyromidpoint (the relativistic centre of mass of
    # two equal rest masses).
    with mp.workdps(dps):
        k = _kappa(curvature)
        xv, yv = to_mp(x), to_mp(y)
        gx, gy = _gamma(xv, k), _gamma(yv, k)
        return _lin(gx / (gx + gy), xv, gy / (gx + gy), yv)


def converged(
    fn: Callable[..., Vec],
    *args,
    curvature: float,
    rel_tol: float = 1e-30,
    floor: float = 1e-35,
    start_dps: int = DPS,
    max_dps: int = 3200,
) -> Vec:
    """``fn(*args, curvature, dps=p)`` at the first precision ``p`` (doubling
    from ``start_dps``) whose result agrees with the one at ``p/2`` to
    ``rel_tol`` normwise (relative to ``max(|result|, floor * R)``).

    A precision at which the textbook arrangement divides by zero (all of its
    digits cancelled) counts as not agreeing. Raises ``ArithmeticError`` when
    ``max_dps`` is reached without agreement.
    """
    big_r = 1 / mpmath.sqrt(_kappa(curvature))
    prev = None
    dps = start_dps
    while dps <= max_dps:
        try:
            cur = fn(*args, curvature, dps=dps)
        except ZeroDivisionError:
            cur = None
        if cur is not None and prev is not None:
            with mp.workdps(dps):
                diff = mpmath.sqrt(_sq([a - b for a, b in zip(cur, prev)]))
                den = max(mpmath.sqrt(_sq(cur)), floor * big_r)
                if diff <= rel_tol * den:
                    return cur
        prev = cur
        dps *= 2
    raise ArithmeticError(f"{getattr(fn, '__name__', fn)} did not converge by {max_dps} digits")


REFERENCES: Dict[str, Callable[..., Vec]] = {
    "poincare.add": mobius_add,
    "poincare.sub": mobius_sub,
    "poincare.coadd": mobius_coadd,
    "poincare.scale": mobius_scale,
    "poincare.gyration": mobius_gyration,
    "poincare.midpoint": mobius_midpoint,
    "klein.add": einstein_add,
    "klein.sub": einstein_sub,
    "klein.scale": einstein_scale,
    "klein.gyration": einstein_gyration,
    "klein.midpoint": einstein_midpoint,
}
