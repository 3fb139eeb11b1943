"""gyrokit.relativity: Thomas-Wigner rotations (matrix, angle, axis) against
the gyration definition in mpmath and closed forms, and Thomas precession.

Every check against something outside the project names its source beside
it: a handbook identity, a textbook formula quoted from memory, mpmath at 50
significant digits on the exact float64 inputs, or scipy.linalg.polar."""

from __future__ import annotations

from mpmath import mp, mpf
import mpmath
import numpy as np
import pytest
import scipy.linalg

import gyrokit.klein as klein
import gyrokit.relativity as rel
from relativity_support import (
    axial,
    C,
    mp_compose,
    mp_dot,
    mp_gamma,
    mp_rel_err,
    mp_vec,
    near_light,
    random_velocities,
    RNG_SEED,
    rotation_angle,
)


# ------------------------------------------------------------ rotation


def test_thomas_rotation_is_the_klein_gyration():
    # Shared identity: the velocity ball is the Klein ball of radius c, and
    # thomas_rotation(u, v) @ w == gk.klein.gyration(u, v, w, curvature=-1/c^2).
    rng = np.random.default_rng(RNG_SEED + 3)
    u, v = random_velocities(rng, 400, 0.999), random_velocities(rng, 400, 0.999)
    w = rng.normal(size=(400, 3)) * 1e3
    a = np.einsum("nij,nj->ni", rel.thomas_rotation(u, v), w)
    b = klein.gyration(u, v, w, curvature=-1.0 / C**2)
    err = np.linalg.norm(a - b, axis=1) / np.linalg.norm(w, axis=1)
    assert err.max() < 1e-14, err.max()


def mp_gyration_matrix(u, v):
    """gyr[u, v] from its definition (-(u ⊕ v)) ⊕ (u ⊕ (v ⊕ w)), textbook
    Einstein addition in mpmath, applied to w = e_j (1 m/s, the map is
    linear). The nested compositions cancel like gap^4 near c, hence the
    working precision of 150 digits (checked against 200 below)."""
    mu, mv = mp_vec(u), mp_vec(v)
    uv = mp_compose(mu, mv)
    cols = []
    for j in range(3):
        w = [mpf(0)] * 3
        w[j] = mpf(1)
        cols.append(mp_compose([-x for x in uv], mp_compose(mu, mp_compose(mv, w))))
    return mpmath.matrix([[cols[j][i] for j in range(3)] for i in range(3)])


def mp_angle(m):
    ax = [(m[2, 1] - m[1, 2]) / 2, (m[0, 2] - m[2, 0]) / 2, (m[1, 0] - m[0, 1]) / 2]
    return mpmath.atan2(mpmath.sqrt(mp_dot(ax, ax)), (m[0, 0] + m[1, 1] + m[2, 2] - 1) / 2), ax


HARD_PAIRS = [
    (np.array([1.0, 0, 0]), np.array([0.3, 0.8, -0.2])),                     # walking pace
    (np.array([3e4, -1e4, 2e3]), np.array([-5e3, 2e4, 7e3])),               # orbital speeds
    (near_light([1, 0, 0], 1e-15), near_light([0, 1, 0], 1e-15)),           # both near c
    (near_light([1, 0, 0], 1e-15), near_light([-1, 1e-6, 0], 1e-15)),       # near c, nearly opposite
    (near_light([1, 2, 3], 1e-12), np.array([1.0, -1.0, 0.5])),             # near c and slow
    (np.array([0.5 * C, 0.1 * C, 0]), np.array([0.49 * C, 0.1 * C, 1e-3])),  # nearly parallel
]


@pytest.mark.parametrize("u, v", HARD_PAIRS, ids=range(len(HARD_PAIRS)))
def test_rotation_and_angle_match_the_mpmath_gyration_definition(u, v):
    # mpmath reference (gyration definition, 150 digits); independent of the
    # closed form behind wigner_angle.
    with mp.workdps(150):
        m = mp_gyration_matrix(u, v)
        e_ref, ax_ref = mp_angle(m)
    with mp.workdps(200):
        e_200, _ = mp_angle(mp_gyration_matrix(u, v))
    assert abs(e_ref - e_200) <= abs(e_ref) * mpf(10) ** -40
    e = rel.wigner_angle(u, v)
    assert abs(e - e_ref) <= 1e-12 * abs(e_ref), (e, e_ref)
    rot = rel.thomas_rotation(u, v)
    assert max(abs(rot[i, j] - m[i, j]) for i in range(3) for j in range(3)) < 1e-15
    # The off-diagonal (sine) part keeps relative accuracy even when tiny, as
    # long as |u| and |v| are comparable: the Klein gyration forms it as a
    # difference of terms of size |u|^2/c^2 (for |u| >> |v|), so it holds
    # ~eps max(|u|/|v|, |v|/|u|) relative (measured 1.9e-8 for the 2e8 ratio
    # of the near-c-and-slow pair; wigner_angle has no such limit).
    nu, nv = np.linalg.norm(u), np.linalg.norm(v)
    err = mp_rel_err(axial(rot), ax_ref)
    assert err < 1e-12 * max(nu / nv, nv / nu), float(err)
    # And the axis is the direction of the mpmath rotation vector.
    assert mp_rel_err(rel.wigner_axis(u, v) * e, [x * e_ref / mpmath.sin(e_ref) for x in ax_ref]) < 1e-12


def test_rotations_are_orthogonal_with_determinant_one():
    rng = np.random.default_rng(RNG_SEED + 4)
    u = np.concatenate([random_velocities(rng, 300, 0.999),
                        [near_light([1, 2, 3], 1e-15), near_light([0, 0, 1], 1e-15)]])
    v = np.concatenate([random_velocities(rng, 300, 0.999),
                        [near_light([-3, 1, 0], 1e-15), near_light([1, 0, 0], 1e-15)]])
    m = rel.thomas_rotation(u, v)
    eye = np.einsum("nki,nkj->nij", m, m)
    assert np.abs(eye - np.eye(3)).max() < 1e-14
    assert np.abs(np.linalg.det(m) - 1).max() < 1e-14


def test_axis_and_angle_describe_the_rotation_matrix():
    # Rodrigues' formula (handbook): R = I + sin(e) K + (1 - cos(e)) K^2 for a
    # right-handed rotation by e about the unit axis n (K the cross matrix).
    rng = np.random.default_rng(RNG_SEED + 5)
    u, v = random_velocities(rng, 300, 0.999), random_velocities(rng, 300, 0.999)
    e = rel.wigner_angle(u, v)
    n = rel.wigner_axis(u, v)
    k = np.zeros((len(u), 3, 3))
    k[:, 0, 1], k[:, 0, 2], k[:, 1, 2] = -n[:, 2], n[:, 1], -n[:, 0]
    k -= np.transpose(k, (0, 2, 1))
    r = np.eye(3) + np.sin(e)[:, None, None] * k + (1 - np.cos(e))[:, None, None] * (k @ k)
    assert np.abs(r - rel.thomas_rotation(u, v)).max() < 1e-14
    # Axis along v x u, unit length; angle in [0, pi).
    vxu = np.cross(v, u)
    assert np.abs(n - vxu / np.linalg.norm(vxu, axis=1, keepdims=True)).max() < 1e-14
    assert np.all((e >= 0) & (e < np.pi))
    # The atan2 form agrees with the trace-and-axial angle of the matrix.
    assert np.abs(rotation_angle(rel.thomas_rotation(u, v)) - e).max() < 1e-14


def test_parallel_velocities_have_no_rotation():
    u = np.array([[1e8, 0, 0], [0, 0, 0], [1e8, 2e8, -1e7]])
    v = np.array([[-2e8, 0, 0], [3e7, 1e7, 0], [5e7, 1e8, -5e6]])
    np.testing.assert_array_equal(rel.wigner_angle(u, v), 0.0)
    np.testing.assert_array_equal(rel.wigner_axis(u, v), 0.0)
    np.testing.assert_allclose(rel.thomas_rotation(u, v), np.broadcast_to(np.eye(3), (3, 3, 3)), atol=1e-16)


@pytest.mark.parametrize("bu, bv", [(0.6, 0.8), (0.9, 0.99), (0.999, 0.5), (0.3, 0.1),
                                    (1 - 1e-15, 1 - 1e-15), (1 - 1e-15, 1e-3)])
def test_perpendicular_boost_angle_closed_form(bu, bv):
    # From memory: for perpendicular u, v the Wigner angle e satisfies
    # cos(e) = (gamma_u + gamma_v)/(1 + gamma_u gamma_v), evaluated in mpmath
    # at 50 digits. Verified numerically here against the rotation angle of
    # the orthogonal factor of scipy.linalg.polar(boost(u) @ boost(v)) (the
    # polar check is loosened near c, where the 4x4 product has gamma ~ 1e7
    # entries and float64 matrix arithmetic loses ~7 digits).
    u = np.array([bu * C, 0.0, 0.0])
    v = np.array([0.0, bv * C, 0.0])
    e = rel.wigner_angle(u, v)
    with mp.workdps(50):
        gu, gv = mp_gamma(mp_vec(u)), mp_gamma(mp_vec(v))
        want = mpmath.acos((gu + gv) / (1 + gu * gv))
    assert abs(e - want) / want < 1e-12, (e, want)
    unitary, _ = scipy.linalg.polar(rel.boost(u) @ rel.boost(v), side="left")
    polar_angle = rotation_angle(unitary[1:, 1:])
    tol = 1e-12 if max(bu, bv) < 0.9999 else 1e-6
    assert abs(polar_angle - e) / e < tol, (polar_angle, e)


@pytest.mark.parametrize("speed", [1.0, 1000.0])
def test_slow_velocities_give_the_small_angle_limit(speed):
    # From memory: e ~ |u x v|/(2 c^2) for slow velocities (the next term is
    # O(v^2/c^2) relative, 1e-11 at 1000 m/s). acos((tr - 1)/2) returns 0
    # here; the atan2 form must keep every digit, and so must the matrix.
    u = np.array([speed, 0.0, 0.0])
    v = np.array([0.3, 0.8, -0.2]) * speed
    want = np.linalg.norm(np.cross(u, v)) / (2 * C**2)
    e = rel.wigner_angle(u, v)
    assert abs(e - want) / want < 1e-6, (e, want)
    assert abs(e - want) / want < 1e-10  # what is actually achieved
    m = rel.thomas_rotation(u, v)
    rv = e * rel.wigner_axis(u, v)
    assert np.linalg.norm(axial(m) - rv) / e < 1e-12


# ------------------------------------------------------------ precession


def test_thomas_precession_is_the_limit_of_rest_frame_gyrations():
    # Textbook form (from memory): omega_T = gamma^2/(gamma + 1) (a x v)/c^2.
    # Independent check: the finite-difference limit of the Wigner rotation
    # between the rest frames at t and t + dt. With dv' = (-v) ⊕ (v + a dt),
    # B(v) B(dv') = B(v + a dt) gyr[v, dv'], so the rotation vector of
    # gyr[v, dv'] divided by dt tends to omega_T; the central difference over
    # +-dt removes the O(dt) term.
    rng = np.random.default_rng(RNG_SEED + 6)
    v = random_velocities(rng, 50, 0.95)
    a = rng.normal(size=(50, 3)) * 1e14  # m/s^2: a dt = 1e3 m/s for dt = 1e-11 s
    omega = rel.thomas_precession(v, a)
    g = rel.lorentz_factor(v)[:, None]
    textbook = g**2 / (g + 1) * np.cross(a, v) / C**2
    assert np.abs(omega - textbook).max() < 1e-14 * np.abs(textbook).max()

    def rot(h):
        dv = rel.compose(-v, v + a * h)
        return rel.wigner_angle(v, dv)[:, None] * rel.wigner_axis(v, dv)

    # Truncation error ~ (a dt/c)^2 (2e-4 at dt = 1e-8, 2e-8 at 1e-10),
    # rounding ~ 1e-16 c/(a dt): dt = 1e-11 s measures ~2e-10.
    dt = 1e-11
    fd = (rot(dt) - rot(-dt)) / (2 * dt)
    err = np.linalg.norm(fd - omega, axis=1) / np.linalg.norm(omega, axis=1)
    assert err.max() < 1e-8, err.max()


def test_thomas_precession_is_retrograde_for_circular_motion():
    # From memory: Thomas precession of an orbiting body is opposite to the
    # orbital angular velocity (a points to the centre).
    r = np.array([1.0, 0.0, 0.0])
    v = np.array([0.0, 0.4 * C, 0.0])
    a = -r * (0.4 * C) ** 2 / 1e3  # circular orbit of radius 1 km
    omega = rel.thomas_precession(v, a)
    assert np.dot(omega, np.cross(r, v)) < 0
