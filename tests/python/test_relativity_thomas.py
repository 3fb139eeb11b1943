"""Tests of gyrokit.relativity: relativistic velocities in physical units.

Every check against something outside the project names its source beside
it: a handbook identity, a textbook formula quoted from memory, mpmath at 50
significant digits on the exact float64 inputs, or scipy.linalg.polar.
"""

from __future__ import annotations

import mpmath
import numpy as np
import pytest
import scipy.linalg
from mpmath import mp, mpf

import gyrokit.klein as klein
import gyrokit.relativity as rel

C = rel.SPEED_OF_LIGHT
RNG_SEED = 20240611


def random_velocities(rng, n, max_beta=0.95):
    """n velocities with uniform random directions and speeds up to max_beta c."""
    d = rng.normal(size=(n, 3))
    d /= np.linalg.norm(d, axis=1, keepdims=True)
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


# ------------------------------------------------------------ composition


def test_collinear_composition_is_the_handbook_formula():
    # Handbook: w = (u + v)/(1 + u v/c^2) for parallel velocities, evaluated
    # with mpmath at 50 digits (the float64 formula itself cancels for the
    # nearly opposite pairs).
    pairs = [(1.0, 2.0), (3e4, -1e4), (0.6 * C, 0.7 * C), (0.999 * C, -0.9989 * C),
             (C * (1 - 1e-15), 0.5 * C), (C * (1 - 1e-15), -C * (1 - 2e-15))]
    u = np.array([[a, 0.0, 0.0] for a, _ in pairs])
    v = np.array([[b, 0.0, 0.0] for _, b in pairs])
    got = rel.compose(u, v)
    with mp.workdps(50):
        for (a, b), g in zip(pairs, got):
            want = (mpf(a) + mpf(b)) / (1 + mpf(a) * mpf(b) / mpf(C) ** 2)
            assert abs((mpf(g[0]) - want) / want) < 1e-14, (a, b, g[0], want)
            assert g[1] == 0.0 and g[2] == 0.0


def test_composition_is_the_velocity_of_the_boost_product():
    # Independent reference: the first column of B(u) B(v) is the
    # four-velocity gamma_w (1, w/c) of w = u ⊕ v (B(v) maps the rest
    # four-velocity to that of v; from memory, standard kinematics).
    rng = np.random.default_rng(RNG_SEED)
    u, v = random_velocities(rng, 200), random_velocities(rng, 200)
    m = rel.boost(u) @ rel.boost(v)
    w_ref = C * m[:, 1:, 0] / m[:, :1, 0]
    w = rel.compose(u, v)
    err = np.linalg.norm(w - w_ref, axis=1) / np.linalg.norm(w_ref, axis=1)
    assert err.max() < 1e-13, err.max()


def test_rotation_is_the_orthogonal_polar_factor_of_the_boost_product():
    # Independent reference: scipy.linalg.polar. The product of two pure
    # boosts is a boost times a rotation; since a pure boost is symmetric
    # positive definite, the *left* polar decomposition M = P U gives
    # P = boost(u ⊕ v) and U = diag(1, thomas_rotation(u, v)), i.e.
    #     boost(u) @ boost(v) == boost(u ⊕ v) @ diag(1, gyr[u, v])
    # (the documented convention: the rotation acts first, on the right).
    rng = np.random.default_rng(RNG_SEED + 1)
    u, v = random_velocities(rng, 60, 0.99), random_velocities(rng, 60, 0.99)
    rot = rel.thomas_rotation(u, v)
    bw = rel.boost(rel.compose(u, v))
    worst_u = worst_p = 0.0
    for i in range(len(u)):
        m = rel.boost(u[i]) @ rel.boost(v[i])
        unitary, positive = scipy.linalg.polar(m, side="left")
        r4 = np.eye(4)
        r4[1:, 1:] = rot[i]
        worst_u = max(worst_u, np.abs(unitary - r4).max())
        worst_p = max(worst_p, np.abs(positive - bw[i]).max() / np.abs(bw[i]).max())
        # The order matters: putting the rotation on the left is wrong
        # whenever the rotation is not tiny (so this test can tell them apart).
        if rel.wigner_angle(u[i], v[i]) > 1e-2:
            assert np.abs(r4 @ bw[i] - m).max() > 1e-4 * np.abs(m).max()
    assert worst_u < 1e-11, worst_u
    assert worst_p < 1e-11, worst_p


def test_gyrocommutative_law():
    # Ungar's gyrocommutative law (from memory): u ⊕ v = gyr[u, v](v ⊕ u).
    rng = np.random.default_rng(RNG_SEED + 2)
    u, v = random_velocities(rng, 500, 0.999), random_velocities(rng, 500, 0.999)
    lhs = rel.compose(u, v)
    rhs = np.einsum("nij,nj->ni", rel.thomas_rotation(u, v), rel.compose(v, u))
    assert np.abs(lhs - rhs).max() < 1e-14 * C


def test_compose_near_light_matches_mpmath():
    # mpmath at 50 digits, textbook formula, on velocities with
    # 1 - |v|/c = 1e-15: one near c with a slower one (both orders, any
    # angle), and two near c nearly opposite (where 1 + u.v/c^2 cancels).
    cases = [
        (near_light([1, 0, 0], 1e-15), np.array([0.0, 0.5 * C, 0.0])),
        (np.array([0.0, 0.5 * C, 0.1 * C]), near_light([1, 0.2, -0.3], 1e-15)),
        (near_light([1, 2, 3], 1e-15), np.array([-0.3 * C, 0.1 * C, 0.2 * C])),
        (near_light([1, 0, 0], 1e-15), near_light([-1, 1e-7, 0], 1e-15)),
        (near_light([0.3, -0.4, 0.5], 1e-15), near_light([-0.3, 0.4, -0.5 + 1e-6], 1e-15)),
        (near_light([1, 1, 0], 1e-15), near_light([1, -1, 0], 1e-15)),
    ]
    u = np.array([a for a, _ in cases])
    v = np.array([b for _, b in cases])
    got = rel.compose(u, v)
    for (a, b), g in zip(cases, got):
        with mp.workdps(50):
            err = mp_rel_err(g, mp_compose(mp_vec(a), mp_vec(b)))
        assert err < 1e-12, (a, b, float(err))
    # The results are valid velocities (strictly below c).
    assert np.all(rel.lorentz_factor(got) > 1)


def test_compose_batches_in_nearly_opposite_directions_keep_digits():
    # mpmath at 50 digits for u ⊕ (-u + small) with |u| near c: the result is
    # small while both inputs are near c (note 3 of the accuracy notes).
    u = near_light([0.6, -0.8, 0.0], 1e-12)
    v = near_light([-0.6, 0.8, 1e-9], 2e-12)
    g = rel.compose(u, v)
    with mp.workdps(50):
        err = mp_rel_err(g, mp_compose(mp_vec(u), mp_vec(v)))
    assert err < 1e-12, float(err)


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


# ------------------------------------------------------------ scalars, boosts, rapidity


def test_gamma_minus_one_at_walking_speed_matches_mpmath():
    # mpmath at 50 digits: gamma - 1 at 1 m/s is 5.56e-18 (float64 gamma - 1
    # gives 0).
    vs = np.array([[1.0, 0, 0], [0.3, -0.4, 1.2], [1e3, 2e3, 0], [0.5 * C, 0, 0],
                   near_light([1, 1, 1], 1e-15)])
    got = rel.gamma_minus_one(vs)
    with mp.workdps(50):
        for v, g in zip(vs, got):
            want = mp_gamma(mp_vec(v)) - 1
            assert abs((g - want) / want) < 1e-12, (v, g, want)
    assert 5.5e-18 < got[0] < 5.6e-18


def test_lorentz_factor_near_light_matches_mpmath():
    # mpmath at 50 digits.
    vs = np.array([near_light([1, 0, 0], 1e-15), near_light([1, -2, 5], 1e-15),
                   near_light([0, 1, 1], 1e-9), [0.0, 0.0, 0.0], [1.0, 0.0, 0.0]])
    got = rel.lorentz_factor(vs)
    with mp.workdps(50):
        for v, g in zip(vs, got):
            want = mp_gamma(mp_vec(v))
            assert abs((g - want) / want) < 1e-12, (v, g, want)
    # Correctly rounded at low speed: gamma - 1 = 1.08e-16 at 4.4 m/s is
    # below half an ulp of 1 (1.11e-16), 1.21e-16 at 4.6 m/s is above.
    assert rel.lorentz_factor([4.4, 0, 0]) == 1.0
    assert rel.lorentz_factor([4.6, 0, 0]) == np.nextafter(1.0, 2.0)


def test_boost_preserves_the_minkowski_form_and_inverts():
    # Textbook: B^T eta B = eta, eta = diag(1, -1, -1, -1); B(-v) = B(v)^-1.
    rng = np.random.default_rng(RNG_SEED + 7)
    v = random_velocities(rng, 200, 0.999)
    b = rel.boost(v)
    eta = np.diag([1.0, -1, -1, -1])
    g2 = rel.lorentz_factor(v)[:, None, None] ** 2
    assert np.abs((np.transpose(b, (0, 2, 1)) @ eta @ b - eta) / g2).max() < 1e-14
    assert np.abs((b @ rel.boost(-v) - np.eye(4)) / g2).max() < 1e-14
    np.testing.assert_array_equal(b, np.transpose(b, (0, 2, 1)))
    np.testing.assert_array_equal(rel.boost([0.0, 0, 0]), np.eye(4))
    # gamma (1, v/c) in the first column.
    np.testing.assert_allclose(b[:, 1:, 0], rel.lorentz_factor(v)[:, None] * v / C, rtol=1e-15, atol=0)


def test_rapidity_near_light_matches_mpmath_and_round_trips():
    # mpmath at 50 digits: artanh(|v|/c) v/|v|.
    vs = np.array([near_light([1, 0, 0], 1e-15), near_light([2, -1, 3], 1e-15),
                   [1.0, 0, 0], [0.3 * C, 0.4 * C, 0.0]])
    got = rel.rapidity(vs)
    with mp.workdps(50):
        for v, w in zip(vs, got):
            mv = mp_vec(v)
            n = mpmath.sqrt(mp_dot(mv, mv))
            want = [mpmath.atanh(n / mpf(C)) * x / n for x in mv]
            err = mp_rel_err(w, want)
            assert err < 1e-12, (v, float(err))
    back = rel.velocity_from_rapidity(got)
    assert np.abs(back - vs).max() <= 2e-16 * C
    np.testing.assert_array_equal(rel.rapidity([0.0, 0, 0]), 0.0)


def test_collinear_rapidities_add():
    # Handbook: rapidities of collinear velocities add under composition.
    u = np.array([0.0, 0.8 * C, 0.0])
    v = np.array([[0.0, 0.55 * C, 0.0], [0.0, -0.3 * C, 0.0], [0.0, 1.0, 0.0]])
    w = rel.compose(u, v)
    np.testing.assert_allclose(rel.rapidity(w)[:, 1], rel.rapidity(u)[1] + rel.rapidity(v)[:, 1], rtol=1e-14)


def test_huge_rapidity_stays_below_light():
    v = rel.velocity_from_rapidity([[40.0, 0, 0], [1e300, -1e300, 0.0], [18.0, 5.0, 0.0]])
    assert np.all(rel.lorentz_factor(v) > 1)  # accepted: strictly below c
    np.testing.assert_allclose(np.linalg.norm(v, axis=1), C, rtol=1e-15)


# ------------------------------------------------------------ the Klein ball


def test_klein_round_trip_and_shared_algebra():
    rng = np.random.default_rng(RNG_SEED + 8)
    u, v = random_velocities(rng, 200, 0.99), random_velocities(rng, 200, 0.99)
    for curvature in (-1.0, -0.25, -1.0 / C**2):
        ku = rel.to_klein(u, curvature=curvature)
        kv = rel.to_klein(v, curvature=curvature)
        radius = 1 / np.sqrt(-curvature)
        assert np.all(np.linalg.norm(ku, axis=1) < radius)
        np.testing.assert_allclose(rel.from_klein(ku, curvature=curvature), u, rtol=0, atol=1e-15 * C)
        # Einstein addition in that ball, carried back, is compose.
        back = rel.from_klein(klein.add(ku, kv, curvature=curvature), curvature=curvature)
        assert np.abs(back - rel.compose(u, v)).max() < 1e-14 * C
        # Klein distance / R is the rapidity of (-u) ⊕ v (from memory:
        # tanh(d/R) = |(-a) ⊕ b|/R in the Einstein gyrovector space).
        d = klein.distance(ku, kv, curvature=curvature) / radius
        r = np.linalg.norm(rel.rapidity(rel.compose(-u, v)), axis=1)
        np.testing.assert_allclose(d, r, rtol=1e-12)


def test_einstein_midpoint_is_the_centre_of_momentum_velocity():
    # Textbook kinematics: two equal masses have total momentum m(g1 v1 + g2 v2)
    # and energy m c^2 (g1 + g2); the centre-of-momentum frame moves with
    # c^2 p/E. The Klein-ball midpoint of their images must give it.
    rng = np.random.default_rng(RNG_SEED + 9)
    u, v = random_velocities(rng, 100, 0.99), random_velocities(rng, 100, 0.99)
    mid = rel.from_klein(klein.midpoint(rel.to_klein(u), rel.to_klein(v)))
    gu, gv = rel.lorentz_factor(u)[:, None], rel.lorentz_factor(v)[:, None]
    np.testing.assert_allclose(mid, (gu * u + gv * v) / (gu + gv), rtol=0, atol=1e-14 * C)


def test_from_klein_rejects_points_outside_the_ball():
    with pytest.raises(ValueError, match=r"k: row 1 is on or outside the ball"):
        rel.from_klein([[0.1, 0, 0], [0.8, 0.8, 0.0]])


# ------------------------------------------------------------ contract


FUNCS_V = [rel.lorentz_factor, rel.gamma_minus_one, rel.boost, rel.rapidity, rel.to_klein]
FUNCS_UV = [rel.compose, rel.thomas_rotation, rel.wigner_angle, rel.wigner_axis]


@pytest.mark.parametrize("f", FUNCS_V, ids=lambda f: f.__name__)
def test_speed_at_or_above_c_names_the_row(f):
    v = np.zeros((5, 3))
    v[3] = [C, 0.0, 0.0]  # exactly c
    with pytest.raises(ValueError, match=r"^v: row 3 has speed at or above c"):
        f(v)
    v[3] = 0.0
    v[1] = [2.2e8, 2.2e8, 1.0]  # above c
    with pytest.raises(ValueError, match=r"^v: row 1 has speed at or above c"):
        f(v)
    v2 = np.zeros((2, 3, 3))
    v2[1, 2] = [0.0, 0.0, -3e8]
    with pytest.raises(ValueError, match=r"^v: row \(1, 2\) has speed at or above c"):
        f(v2)


@pytest.mark.parametrize("f", FUNCS_UV + [rel.thomas_precession], ids=lambda f: f.__name__)
def test_two_argument_errors_name_the_argument(f):
    names = ("v", "a") if f is rel.thomas_precession else ("u", "v")
    good = np.full((4, 3), 1e7)
    bad = good.copy()
    bad[2] = [np.nan, 0, 0]
    with pytest.raises(ValueError, match=rf"^{names[1]}: row 2 contains NaN or infinity"):
        f(good, bad)
    bad[2] = [0, np.inf, 0]
    with pytest.raises(ValueError, match=rf"^{names[1]}: row 2 contains NaN or infinity"):
        f(good, bad)
    fast = good.copy()
    fast[1] = [0, 0, 4e8]
    with pytest.raises(ValueError, match=rf"^{names[0]}: row 1 has speed at or above c"):
        f(fast, good)
    with pytest.raises(ValueError, match=rf"{names[1]} must hold 3-vectors"):
        f(good, np.zeros((4, 2)))
    with pytest.raises(TypeError, match=names[0]):
        f(np.array(["a", "b", "c"]), good)


def test_bad_c_and_shapes():
    for c in (0.0, -1.0, np.nan, np.inf):
        with pytest.raises(ValueError, match="c must be a finite positive number"):
            rel.compose([1.0, 0, 0], [0, 1.0, 0], c=c)
    with pytest.raises(ValueError, match="3-vectors"):
        rel.lorentz_factor(np.zeros((3, 4)))
    with pytest.raises(ValueError, match="shape"):
        rel.lorentz_factor(1.0)
    with pytest.raises(ValueError, match="w: row 0 contains NaN"):
        rel.velocity_from_rapidity([[np.nan, 0, 0]])
    with pytest.raises(ValueError, match="broadcast"):
        rel.compose(np.zeros((4, 3)), np.zeros((5, 3)))
    with pytest.raises(ValueError, match="a: row 0 gives a result that overflows"):
        rel.thomas_precession([0.5e-10, 0, 0], [[0, 1e300, 0]], c=1e-10)


def test_broadcasting_matches_row_by_row():
    rng = np.random.default_rng(RNG_SEED + 10)
    u = random_velocities(rng, 6).reshape(2, 3, 3)
    v = random_velocities(rng, 1)[0]
    for f, core in [(rel.compose, (3,)), (rel.thomas_rotation, (3, 3)), (rel.wigner_angle, ()),
                    (rel.wigner_axis, (3,))]:
        out = f(u, v)
        assert out.shape == (2, 3) + core
        for i in range(2):
            for j in range(3):
                np.testing.assert_array_equal(out[i, j], f(u[i, j], v))
        # (n, 1, 3) with (m, 3) -> (n, m, ...)
        out = f(u[0][:, None, :], u[1])
        assert out.shape == (3, 3) + core
        np.testing.assert_array_equal(out[2, 1], f(u[0, 2], u[1, 1]))
    assert rel.boost(u).shape == (2, 3, 4, 4)
    assert rel.lorentz_factor(u).shape == (2, 3)
    assert rel.thomas_precession(u, [1.0, 2.0, 3.0]).shape == (2, 3, 3)
    # Empty arrays give empty results of the right shape.
    assert rel.thomas_rotation(np.zeros((0, 3)), v).shape == (0, 3, 3)
    assert rel.wigner_angle(np.zeros((2, 0, 3)), v).shape == (2, 0)


def test_float32_and_layouts():
    rng = np.random.default_rng(RNG_SEED + 11)
    u = random_velocities(rng, 50, 0.9)
    v = random_velocities(rng, 50, 0.9)
    u32, v32 = u.astype(np.float32), v.astype(np.float32)
    for f in FUNCS_UV:
        r32 = f(u32, v32)
        assert r32.dtype == np.float32
        r64 = f(u32.astype(np.float64), v32.astype(np.float64))
        np.testing.assert_allclose(r32, r64.astype(np.float32), rtol=1e-6, atol=1e-6 * np.abs(r64).max())
        assert f(u32, v).dtype == np.float64  # mixed: float64
        # Fortran order and strided views give the same bits.
        np.testing.assert_array_equal(f(np.asfortranarray(u), v[::-1][::-1]), f(u, v))
        np.testing.assert_array_equal(f(np.repeat(u, 2, axis=0)[::2], v), f(u, v))
    assert rel.boost(u32).dtype == np.float32
    # Python lists and integers are accepted; a 0-d result is a NumPy scalar.
    assert isinstance(rel.lorentz_factor([3, 4, 0], c=10), np.floating)
    assert rel.lorentz_factor([3, 4, 0], c=10) == pytest.approx(1 / np.sqrt(0.75), rel=1e-15)


def test_other_units():
    # The same physics in km/s and in units of c gives the same angles and
    # scaled velocities.
    u = np.array([0.6, 0.1, -0.2])
    v = np.array([-0.3, 0.7, 0.4])
    si = rel.compose(u * C, v * C)
    km = rel.compose(u * C / 1e3, v * C / 1e3, c=C / 1e3)
    nat = rel.compose(u, v, c=1.0)
    np.testing.assert_allclose(si / C, nat, rtol=1e-15)
    np.testing.assert_allclose(km * 1e3 / C, nat, rtol=1e-15)
    assert rel.wigner_angle(u, v, c=1.0) == pytest.approx(rel.wigner_angle(u * C, v * C), rel=1e-15)
