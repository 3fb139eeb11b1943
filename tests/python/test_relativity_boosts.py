"""gyrokit.relativity: Lorentz factor, gamma - 1, boosts and rapidity
against mpmath and handbook identities, and the contract (errors naming the
argument and row, broadcasting, dtypes and layouts, other units).

Every check against something outside the project names its source beside
it: a handbook identity, a textbook formula quoted from memory, mpmath at 50
significant digits on the exact float64 inputs, or scipy.linalg.polar."""

from __future__ import annotations

from mpmath import mp, mpf
import mpmath
import numpy as np
import pytest

import gyrokit.relativity as rel
from relativity_support import (
    C,
    mp_dot,
    mp_gamma,
    mp_rel_err,
    mp_vec,
    near_light,
    random_velocities,
    RNG_SEED,
)


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
