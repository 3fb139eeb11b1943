"""Helpers shared by the special-relativity tests
(tests/python/test_relativity_*.py): random and near-light velocities,
rotation-matrix helpers, and mpmath references (textbook formulas at 50
significant digits on the exact float64 inputs)."""

from __future__ import annotations

from mpmath import mpf
import mpmath
import numpy as np

import gyrokit.relativity as rel
from conftest import unit_vectors


C = rel.SPEED_OF_LIGHT
RNG_SEED = 20240611


def random_velocities(rng, n, max_beta=0.95):
    """n velocities with uniform random directions and speeds up to max_beta c."""
    d = unit_vectors(rng, n, 3)
    return d * (rng.uniform(0.0, max_beta, n) * C)[:, None]


def near_light(direction, one_minus_beta):
    """A float64 velocity along `direction` with 1 - |v|/c ~ one_minus_beta."""
    d = np.asarray(direction, float)
    return d / np.linalg.norm(d) * (C * (1.0 - one_minus_beta))


def rel_err(got, want):
    got, want = np.asarray(got, float), np.asarray(want, float)
    return float(np.linalg.norm(got - want) / np.linalg.norm(want))


def axial(m):
    """The rotation vector's sine part: the axial vector of (M - M^T)/2."""
    return np.stack([m[..., 2, 1] - m[..., 1, 2], m[..., 0, 2] - m[..., 2, 0],
                     m[..., 1, 0] - m[..., 0, 1]], axis=-1) / 2


def rotation_angle(m):
    """Rotation angle of a 3x3 rotation, atan2(|axial|, (tr - 1)/2)."""
    return np.arctan2(np.linalg.norm(axial(m), axis=-1), (np.trace(m, axis1=-2, axis2=-1) - 1) / 2)


# ------------------------------------------------------------ mpmath references
# Textbook formulas evaluated at 50 significant digits on the exact float64
# inputs (mpf(float) is exact); c enters exactly too.

def mp_vec(x):
    return [mpf(float(t)) for t in x]


def mp_dot(a, b):
    return mpmath.fsum(p * q for p, q in zip(a, b))


def mp_gamma(v):
    return 1 / mpmath.sqrt(1 - mp_dot(v, v) / mpf(C) ** 2)


def mp_rel_err(got, want):
    """Normwise relative error of a float64 row against an mpf row."""
    diff = mpmath.fsum((mpf(float(a)) - b) ** 2 for a, b in zip(got, want))
    return mpmath.sqrt(diff / mp_dot(want, want))


def mp_compose(u, v):
    """Textbook Einstein addition (u + v/g_u + g_u/(1 + g_u) (u.v/c^2) u)/(1 + u.v/c^2)."""
    c2 = mpf(C) ** 2
    gu = mp_gamma(u)
    uv = mp_dot(u, v) / c2
    return [(a + b / gu + gu / (1 + gu) * uv * a) / (1 + uv) for a, b in zip(u, v)]
