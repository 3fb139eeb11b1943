"""gyrokit.relativity: Einstein velocity composition against the handbook
formulas, the boost product and mpmath, and the link with the Klein ball
(shared algebra, the Einstein midpoint as the centre-of-momentum velocity).

Every check against something outside the project names its source beside
it: a handbook identity, a textbook formula quoted from memory, mpmath at 50
significant digits on the exact float64 inputs, or scipy.linalg.polar."""

from __future__ import annotations

from mpmath import mp, mpf
import numpy as np
import pytest
import scipy.linalg

import gyrokit.klein as klein
import gyrokit.relativity as rel
from relativity_support import (
    C,
    mp_compose,
    mp_rel_err,
    mp_vec,
    near_light,
    random_velocities,
    RNG_SEED,
)


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
