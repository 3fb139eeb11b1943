"""The rim of the ball models: results that float64 (or float32) cannot hold
strictly inside the ball raise ``ValueError`` naming the row and the model
that holds them (the hyperboloid), or with ``on_rim="clip"`` are clipped to
the last radius with a ``RimClipWarning``; results that are held are never
rejected, however close to the sphere.

References: mpmath at 50 digits (the textbook Möbius and Einstein additions
of ``mp_reference``, and the distance from the origin ``2R artanh(|z|/R)``
(Poincaré) / ``R artanh(|z|/R)`` (Klein), handbook formulas).
"""

from __future__ import annotations

import os
import sys
import warnings

import mpmath
import numpy as np
import pytest
from mpmath import mp, mpf

import gyrokit as gk

sys.path.insert(0, os.path.dirname(__file__))
import mp_reference as ref  # noqa: E402

# The limit of the rule, from mpmath: a Poincaré point within 2^-54 R of the
# sphere lies farther than 2 artanh(1 - 2^-54) = 38.12 R from the origin.
LIMIT_POINCARE = 38.12
LIMIT_KLEIN = 19.06


def _origin_distance(z, klein: bool = False) -> mpf:
    """Hyperbolic distance from the origin of an mpf point (R = 1), mpmath."""
    with mp.workdps(50):
        r = mpmath.sqrt(sum(v * v for v in z))
        return mpmath.atanh(r) if klein else 2 * mpmath.atanh(r)


def _poincare_radius(z: np.ndarray) -> float:
    """Distance from the origin of a float64 Poincaré point, mpmath at 50 digits."""
    return float(_origin_distance(ref.to_mp(z)))


# ------------------------------------------------------------ the example


def test_issue_example_is_beyond_float64_by_mpmath():
    # mpmath: (1 - 1e-15) ⊕ tanh 3 on a diameter lies 41.23 R out, beyond
    # the 38.12 R that float64 holds in the Poincaré ball; the function
    # must not return a point (the old code returned one 36.74 R out)
    x = [1 - 1e-15, 0.0]
    y = [np.tanh(3.0), 0.0]
    exact = _origin_distance(ref.mobius_add(x, y, curvature=-1.0))
    assert 41.2 < exact < 41.3
    with pytest.raises(ValueError) as err:
        gk.poincare.add(np.array(x), np.array(y), on_rim="raise")
    msg = str(err.value)
    assert msg.startswith(
        "x (a single point) gives a result beyond the range of the ball model: float64 cannot hold")
    assert "Poincaré ball" in msg and "hyperboloid" in msg and "38.1 R" in msg


def test_issue_example_raises_by_default():
    with pytest.raises(ValueError, match="hyperboloid"):
        gk.poincare.add(np.array([1 - 1e-15, 0.0]), np.array([np.tanh(3.0), 0.0]))


def test_clip_opt_in_clips_and_warns():
    x = np.array([1 - 1e-15, 0.0])
    y = np.array([np.tanh(3.0), 0.0])
    with pytest.warns(gk.poincare.RimClipWarning, match="1 of 1 results clipped") as rec:
        z = gk.poincare.add(x, y, on_rim="clip")
    assert issubclass(gk.poincare.RimClipWarning, RuntimeWarning)
    # the warning points at this file (the caller), not at the wrapper
    assert rec[0].filename == __file__
    # clipped to the last float64 radius below R on the axis, 1 - 2^-53
    # (37.43 R out by mpmath), along the exact direction
    assert z[0] == 1 - 2.0**-53 and z[1] == 0.0
    assert abs(_poincare_radius(z) - 37.43) < 0.01
    # and it is a valid input again
    assert np.isfinite(gk.poincare.distance(z, np.zeros(2)))


def test_unknown_on_rim_value_is_a_value_error():
    with pytest.raises(ValueError, match="on_rim must be one of"):
        gk.poincare.add(np.zeros(2), np.zeros(2), on_rim="wrap")


# ---------------------------------------------------- results that are held


def _far_point(rng, dist: float, d: int) -> np.ndarray:
    u = rng.normal(size=d)
    return np.tanh(dist / 2) * u / np.linalg.norm(u)


def test_points_at_30R_add_exactly():
    # mpmath reference: x 30 R out, y up to 2 R out in random directions;
    # sums up to ~32 R out are held and exact to rounding (normwise error
    # against the 50-digit Möbius addition, relative to R)
    rng = np.random.default_rng(14)
    worst = 0.0
    for _ in range(40):
        d = int(rng.integers(1, 6))
        x = _far_point(rng, 30.0, d)
        y = _far_point(rng, float(rng.uniform(0.0, 2.0)), d)
        z = gk.poincare.add(x, y, on_rim="raise")
        want = ref.mobius_add(x, y, curvature=-1.0)
        worst = max(worst, ref.rel_error(z, want, floor=1.0))
        # the distance from the origin is right too (to the conditioning of
        # float64 coordinates there, 2 eps / gap ~ 1e-3 R at 32 R)
        assert abs(_poincare_radius(z) - float(_origin_distance(want))) < 5e-3
    assert worst < 4e-16


def test_results_held_by_the_last_rounding_are_not_rejected():
    # r ⊗ x on a diameter lands 37.8 R out (mpmath): between the last float64
    # radius (37.43 R) and the limit (38.12 R), so its correct rounding is
    # the last radius 1 - 2^-53; no error, and exactly that point
    x = np.array([np.tanh(1.0), 0.0])  # 2 R out
    r = 18.9
    want = ref.mobius_scale(r, x, curvature=-1.0)
    assert 37.5 < float(_origin_distance(want)) < LIMIT_POINCARE
    z = gk.poincare.scale(r, x, on_rim="raise")
    assert z[0] == 1 - 2.0**-53 and z[1] == 0.0
    # and just beyond the limit it raises
    with pytest.raises(ValueError, match="Poincaré ball"):
        gk.poincare.scale(19.2, x, on_rim="raise")


# ------------------------------------------------------------ broadcasting


def _rows_beyond(x, ys) -> list:
    """Rows whose exact sum (mpmath) lies beyond the Poincaré limit."""
    return [i for i, y in enumerate(ys)
            if _origin_distance(ref.mobius_add(x, y, curvature=-1.0)) > LIMIT_POINCARE]


def test_broadcast_error_names_the_only_row_beyond():
    x = np.array([1 - 1e-15, 0.0])  # 35.2 R out
    ys = np.array([[0.1, 0.0], [-0.5, 0.0], [0.3, 0.0], [np.tanh(3.0), 0.0], [0.0, 0.2]])
    assert _rows_beyond(x, ys) == [3]  # mpmath
    with pytest.raises(ValueError, match=r"^y: row 3 gives a result beyond the range of the ball model: float64"):
        gk.poincare.add(x, ys, on_rim="raise")
    # the other way round the row belongs to x
    with pytest.raises(ValueError, match=r"^x: row 3 gives a result"):
        gk.poincare.add(ys, x, on_rim="raise")


def test_broadcast_clip_counts_only_that_row():
    x = np.array([1 - 1e-15, 0.0])
    ys = np.array([[0.1, 0.0], [-0.5, 0.0], [0.3, 0.0], [np.tanh(3.0), 0.0], [0.0, 0.2]])
    with pytest.warns(gk.poincare.RimClipWarning, match="1 of 5 results clipped"):
        z = gk.poincare.add(x, ys, on_rim="clip")
    for i in (0, 1, 2, 4):
        want = ref.mobius_add(x, ys[i], curvature=-1.0)
        assert ref.rel_error(z[i], want, floor=1.0) < 4e-16


# --------------------------------------------------- other functions, Klein


def test_klein_add_beyond_raises_naming_klein():
    # mpmath: Einstein addition on a diameter, 17.3 R + 3 R = 20.3 R out,
    # beyond the 19.06 R that float64 holds in the Klein ball
    x = [1 - 1e-15, 0.0]
    y = [np.tanh(3.0), 0.0]
    exact = _origin_distance(ref.einstein_add(x, y, curvature=-1.0), klein=True)
    assert exact > LIMIT_KLEIN + 1
    with pytest.raises(ValueError, match="Klein ball.*hyperboloid"):
        gk.klein.add(np.array(x), np.array(y), on_rim="raise")
    with pytest.warns(gk.klein.RimClipWarning, match="klein.add: 1 of 1"):
        z = gk.klein.add(np.array(x), np.array(y), on_rim="clip")
    assert z[0] == 1 - 2.0**-53


@pytest.mark.parametrize("call", [
    lambda o: gk.poincare.exp_map(np.array([25.0, 0.0]), on_rim=o),  # 50 R out (|v| = 2 |v|_0)
    lambda o: gk.poincare.scale(np.array([3.0]), np.array([[np.tanh(7.0), 0.0]]), on_rim=o),  # 42 R
    lambda o: gk.poincare.coadd(np.array([1 - 1e-15, 0.0]), np.array([1 - 1e-15, 0.0]), on_rim=o),  # ~70 R
    lambda o: gk.poincare.geodesic(np.zeros(2), np.array([np.tanh(10.0), 0.0]), 2.0, on_rim=o),  # 40 R
    lambda o: gk.poincare.matvec(4.0 * np.eye(2), np.array([np.tanh(5.0), 0.0]), on_rim=o),  # 40 R
    lambda o: gk.klein.exp_map(np.array([25.0, 0.0]), on_rim=o),  # 25 R
    lambda o: gk.klein.scale(3.0, np.array([np.tanh(8.0), 0.0]), on_rim=o),  # 24 R
    lambda o: gk.klein.geodesic(np.zeros(2), np.array([np.tanh(10.0), 0.0]), 2.0, on_rim=o),  # 20 R
])
def test_every_function_with_on_rim_raises_then_clips(call):
    # the distances in the comments are closed forms (handbook: the radial
    # laws of exp, scalar multiplication and geodesics on a diameter), all
    # beyond the limits (38.12 R / 19.06 R)
    with pytest.raises(ValueError, match="cannot hold it strictly inside"):
        call("raise")
    with pytest.warns(gk.poincare.RimClipWarning):
        z = call("clip")
    assert np.all(np.sum(np.asarray(z, dtype=np.float64) ** 2, axis=-1) < 1.0)


def test_float32_results_follow_float32_range():
    # mpmath: on a diameter, 16.6 R + 3 R = 19.6 R out: beyond the 18.0 R
    # that float32 holds in the Poincaré ball, well inside float64's range
    x = np.array([np.tanh(8.3), 0.0], dtype=np.float32)
    y = np.array([np.tanh(1.5), 0.0], dtype=np.float32)
    exact = _origin_distance(ref.mobius_add(x.astype(float), y.astype(float), curvature=-1.0))
    assert 18.1 < exact < 38.0
    with pytest.raises(ValueError, match="float32 cannot hold it"):
        gk.poincare.add(x, y, on_rim="raise")
    # the same inputs in float64 give a held float64 result
    z = gk.poincare.add(x.astype(np.float64), y.astype(np.float64))
    want = ref.mobius_add(x.astype(float), y.astype(float), curvature=-1.0)
    assert ref.rel_error(z, want, floor=1.0) < 4e-16
    with pytest.warns(gk.poincare.RimClipWarning):
        z32 = gk.poincare.add(x, y, on_rim="clip")
    assert z32.dtype == np.float32 and float(np.sum(z32.astype(np.float64) ** 2)) < 1.0


# ------------------------------------------------------------- conversions


def test_convert_message_comes_from_the_same_place():
    # a hyperboloid point 45 R out (x0 = cosh 45) has no float64 Poincaré image
    r = 45.0
    h = np.array([np.cosh(r), np.sinh(r), 0.0])
    with pytest.raises(ValueError) as err:
        gk.convert(h, "hyperboloid", "poincare")
    msg = str(err.value)
    assert "cannot be converted: float64 cannot hold it strictly inside the Poincaré ball" in msg
    with pytest.raises(ValueError) as err2:
        gk.poincare.add(np.array([1 - 1e-15, 0.0]), np.array([np.tanh(3.0), 0.0]))
    # the shared sentence, word for word
    shared = msg.split("cannot be converted: ")[1]
    assert shared in str(err2.value)
