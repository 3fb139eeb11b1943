"""High-precision (mpmath) references for the model-level operations of gyrokit.

Covers the Riemannian operations of the four models and the conversions
between them:

``poincare_distance``, ``poincare_exp_map``, ``poincare_log_map``,
``poincare_transport``, ``poincare_geodesic``, ``poincare_project``,
``poincare_matvec``
    The Poincaré ball (Möbius gyrovector space).
``klein_distance``, ``klein_exp_map``, ``klein_log_map``, ``klein_transport``,
``klein_geodesic``, ``klein_project``
    The Beltrami-Klein ball. Apart from the distance (which has its own
    closed form) these go to the Poincaré ball, apply the Poincaré formula and
    come back; tangent vectors go through the differential of the map.
``hyperboloid_inner``, ``hyperboloid_distance``, ``hyperboloid_exp_map``,
``hyperboloid_log_map``, ``hyperboloid_transport``, ``hyperboloid_geodesic``,
``hyperboloid_project``
    The hyperboloid (Lorentz) model. A point is read through its spatial
    part ``x_s`` and ``x0 = R sqrt(1 + kappa |x_s|^2)`` is recomputed (as the
    library does); a tangent vector is read through its spatial part and
    ``v0 = <x_s, v_s>/x0`` is implied by tangency.
``halfspace_distance``
    The upper half-space model.
``convert``
    Conversions between ``MODELS`` through the Poincaré point.

Second, independent formulations, used to check the references themselves:
``poincare_distance_asinh``, ``mobius_gyration_closed``,
``klein_to_poincare_tangent_fd`` / ``poincare_to_klein_tangent_fd`` (finite
differences of the point maps), ``exp_map_via_hyperboloid``,
``log_map_via_hyperboloid``, ``transport_via_hyperboloid``,
``geodesic_via_hyperboloid`` (the Poincaré / Klein operations computed on the
hyperboloid), and the norms ``poincare_riemannian_norm``,
``klein_riemannian_norm``, ``hyperboloid_minkowski_norm``.

Helpers: ``to_mp``, ``dot``, ``sq``, ``norm``, ``error`` (normwise relative
error of a float64 result), ``converged``, ``MODELS``, ``REFERENCES``.

Conventions: rows are 1-D sequences of floats (one row of a ``(..., d)``
array) and are converted exactly with ``mpf(float(v))``; results are Python
lists of ``mpf`` (vectors) or an ``mpf`` (scalars). ``curvature`` is the
sectional curvature K < 0, ``kappa = -K``, ``R = 1/sqrt(kappa)``. Every
public function evaluates the *textbook* formula, in the textbook
arrangement, at ``dps`` significant digits (default ``DPS = 50``); no
rearrangement for accuracy is made. Some compositions (the gyration by its
definition, conversions of nearly-boundary points) cancel many digits near
the sphere, so take reference values through :func:`converged`, which raises
the precision until the value stops moving. Each public function sets its
own precision; importing this module does not change ``mp.dps``.
"""

from __future__ import annotations

from typing import Callable, Dict, Iterable, List, Optional, Sequence, Tuple, Union

import mpmath
from mpmath import mp, mpf

DPS = 50
MODELS = ("poincare", "klein", "hyperboloid", "halfspace")

Vec = List[mpf]
Value = Union[mpf, Vec]


# =================================================================== helpers


def to_mp(x: Iterable) -> Vec:
    """The exact values of a float64 row as ``mpf`` (``mpf(float)`` is exact)."""
    return [v if isinstance(v, mpf) else mpf(float(v)) for v in x]


def to_mp_matrix(m) -> List[Vec]:
    return [to_mp(row) for row in m]


def dot(x: Sequence[mpf], y: Sequence[mpf]) -> mpf:
    return mpmath.fsum(a * b for a, b in zip(x, y))


def sq(x: Sequence[mpf]) -> mpf:
    return dot(x, x)


def norm(x: Sequence[mpf]) -> mpf:
    return mpmath.sqrt(sq(x))


def lin(a: mpf, x: Sequence[mpf], b: mpf, y: Sequence[mpf]) -> Vec:
    """``a x + b y``."""
    return [a * u + b * v for u, v in zip(x, y)]


def smul(a: mpf, x: Sequence[mpf]) -> Vec:
    return [a * u for u in x]


def neg(x: Sequence[mpf]) -> Vec:
    return [-u for u in x]


def vsub(x: Sequence[mpf], y: Sequence[mpf]) -> Vec:
    return [a - b for a, b in zip(x, y)]


def vadd(x: Sequence[mpf], y: Sequence[mpf]) -> Vec:
    return [a + b for a, b in zip(x, y)]


def kappa_of(curvature: float) -> mpf:
    k = -mpf(float(curvature))
    if not k > 0:
        raise ValueError("curvature must be negative")
    return k


def radius_of(curvature: float) -> mpf:
    return 1 / mpmath.sqrt(kappa_of(curvature))


def _zeros(n: int) -> Vec:
    return [mpf(0) for _ in range(n)]


def _is_vec(v) -> bool:
    return isinstance(v, (list, tuple))


def value_norm(v: Value) -> mpf:
    return norm(v) if _is_vec(v) else abs(v)


def value_diff_norm(a: Value, b: Value) -> mpf:
    if _is_vec(a):
        return norm(vsub(a, b))
    return abs(a - b)


def error(got, ref: Value, floor: float = 0.0, dps: int = DPS) -> float:
    """Normwise relative error ``|got - ref| / max(|ref|, floor)`` of a float64
    result (scalar or row) against a reference, as a float.

    ``got`` is converted exactly; NaN/inf in ``got`` give ``inf``.
    """
    import math

    with mp.workdps(dps):
        if _is_vec(ref):
            vals = [float(v) for v in got]
            if not all(math.isfinite(v) for v in vals):
                return float("inf")
            g: Value = to_mp(vals)
        else:
            gv = float(got)
            if not math.isfinite(gv):
                return float("inf")
            g = mpf(gv)
        diff = value_diff_norm(g, ref)
        den = max(value_norm(ref), mpf(floor))
        if den == 0:
            return 0.0 if diff == 0 else float("inf")
        return float(diff / den)


def converged(
    fn: Callable[..., Value],
    *args,
    curvature: float,
    rel_tol: float = 1e-30,
    floor: float = 1e-40,
    start_dps: int = DPS,
    max_dps: int = 1600,
    **kwargs,
) -> Value:
    """``fn(*args, curvature=..., dps=p, **kwargs)`` at the first precision ``p``
    (doubling from ``start_dps``) whose value agrees with the one at ``p/2``
    to ``rel_tol`` normwise, relative to ``max(|value|, floor * R)``.

    A precision at which the textbook arrangement divides by zero or leaves
    the real line (a rounded ``acosh`` argument below 1) counts as not
    agreeing. Raises ``ArithmeticError`` if ``max_dps`` is reached.
    """
    big_r = radius_of(curvature)
    prev: Optional[Value] = None
    dps = start_dps
    while dps <= max_dps:
        try:
            cur = fn(*args, curvature=curvature, dps=dps, **kwargs)
        except ZeroDivisionError:
            cur = None
        if cur is not None and any(isinstance(c, mpmath.mpc) for c in (cur if _is_vec(cur) else [cur])):
            # an acosh/sqrt argument rounded across its branch point at this
            # precision (e.g. acosh(1 + 1e-24) with 20 digits to spare): not yet
            cur = None
        if cur is not None and prev is not None:
            with mp.workdps(dps):
                diff = value_diff_norm(cur, prev)
                den = max(value_norm(cur), floor * big_r)
                if diff <= rel_tol * den:
                    return cur
        prev = cur
        dps *= 2
    raise ArithmeticError(f"{getattr(fn, '__name__', fn)} did not converge by {max_dps} digits")


# ====================================================== Möbius (Poincaré ball)


def _mobius_add(x: Vec, y: Vec, k: mpf) -> Vec:
    # from memory (A. A. Ungar, Analytic Hyperbolic Geometry, 2005): Möbius addition in the
    # ball of radius 1/sqrt(k):
    # x ⊕ y = ((1 + 2k<x,y> + k|y|^2) x + (1 - k|x|^2) y) / (1 + 2k<x,y> + k^2|x|^2|y|^2)
    xy, xx, yy = dot(x, y), sq(x), sq(y)
    den = 1 + 2 * k * xy + k * k * xx * yy
    return lin((1 + 2 * k * xy + k * yy) / den, x, (1 - k * xx) / den, y)


def _radial_scale(r: mpf, x: Vec, k: mpf) -> Vec:
    # from memory (Ungar 2005): r ⊗ x = R tanh(r artanh(|x|/R)) x/|x|, r ⊗ 0 = 0.
    n = norm(x)
    if n == 0:
        return _zeros(len(x))
    big_r = 1 / mpmath.sqrt(k)
    return smul(big_r * mpmath.tanh(r * mpmath.atanh(n / big_r)) / n, x)


def _gyration(a: Vec, b: Vec, w: Vec, k: mpf) -> Vec:
    # from memory (Ungar 2005): the gyrator identity used as the definition:
    # gyr[a, b] w = ⊖(a ⊕ b) ⊕ (a ⊕ (b ⊕ w)).
    # gyr[a, b] is linear, but the composition is only a statement about
    # ball points, so w is scaled into the ball (by an exact power of two)
    # and the result scaled back.
    n = norm(w)
    if n == 0:
        return _zeros(len(w))
    big_r = 1 / mpmath.sqrt(k)
    s = mpmath.ldexp(1, -int(mpmath.ceil(mpmath.log(n / big_r, 2))) - 1)  # |s w| <= R/2
    sw = smul(s, w)
    ab = _mobius_add(a, b, k)
    out = _mobius_add(neg(ab), _mobius_add(a, _mobius_add(b, sw, k), k), k)
    return smul(1 / s, out)


def _gyration_closed(a: Vec, b: Vec, w: Vec, k: mpf) -> Vec:
    # from memory (Ungar 2005, closed form of the Möbius gyration, written for
    # the ball of radius 1/sqrt(k)):
    # gyr[a,b]w = w + 2k (A a + B b)/D,
    #   A = -k <a,w>|b|^2 + <b,w> + 2k <a,b><b,w>,
    #   B = -k <b,w>|a|^2 - <a,w>,
    #   D = 1 + 2k<a,b> + k^2 |a|^2 |b|^2.
    ab, aw, bw, aa, bb = dot(a, b), dot(a, w), dot(b, w), sq(a), sq(b)
    big_a = -k * aw * bb + bw + 2 * k * ab * bw
    big_b = -k * bw * aa - aw
    den = 1 + 2 * k * ab + k * k * aa * bb
    return [wi + 2 * k * (big_a * ai + big_b * bi) / den for wi, ai, bi in zip(w, a, b)]


def _lambda(x: Vec, k: mpf) -> mpf:
    # conformal factor of the Poincaré ball, lambda_x = 2/(1 - k|x|^2)
    return 2 / (1 - k * sq(x))


def mobius_add(x, y, *, curvature: float, dps: int = DPS) -> Vec:
    """Möbius addition ``x ⊕ y``."""
    with mp.workdps(dps):
        return _mobius_add(to_mp(x), to_mp(y), kappa_of(curvature))


def mobius_scale(r, x, *, curvature: float, dps: int = DPS) -> Vec:
    """Möbius scalar multiplication ``r ⊗ x``."""
    with mp.workdps(dps):
        return _radial_scale(mpf(float(r)), to_mp(x), kappa_of(curvature))


def mobius_gyration(a, b, w, *, curvature: float, dps: int = DPS) -> Vec:
    """``gyr[a, b] w`` by its definition ``⊖(a ⊕ b) ⊕ (a ⊕ (b ⊕ w))``."""
    with mp.workdps(dps):
        return _gyration(to_mp(a), to_mp(b), to_mp(w), kappa_of(curvature))


def mobius_gyration_closed(a, b, w, *, curvature: float, dps: int = DPS) -> Vec:
    """``gyr[a, b] w`` by its closed form (independent of :func:`mobius_gyration`)."""
    with mp.workdps(dps):
        return _gyration_closed(to_mp(a), to_mp(b), to_mp(w), kappa_of(curvature))


def _same(x: Sequence[mpf], y: Sequence[mpf]) -> bool:
    # identical inputs: d(x, x) = 0 by definition. The acosh forms evaluate
    # acosh(1 + rounding noise) there, which never converges to 0.
    return all(a == b for a, b in zip(x, y))


def _poincare_distance(x: Vec, y: Vec, k: mpf) -> mpf:
    if _same(x, y):
        return mpf(0)
    # textbook formula as stated in the gyrokit contract (from memory, standard):
    # d = R acosh(1 + 2k|x-y|^2 / ((1 - k|x|^2)(1 - k|y|^2)))
    arg = 1 + 2 * k * sq(vsub(x, y)) / ((1 - k * sq(x)) * (1 - k * sq(y)))
    return mpmath.acosh(arg) / mpmath.sqrt(k)


def poincare_distance(x, y, *, curvature: float, dps: int = DPS) -> mpf:
    """``R acosh(1 + 2 kappa |x-y|^2 / ((1 - kappa|x|^2)(1 - kappa|y|^2)))``."""
    with mp.workdps(dps):
        return _poincare_distance(to_mp(x), to_mp(y), kappa_of(curvature))


def poincare_distance_asinh(x, y, *, curvature: float, dps: int = DPS) -> mpf:
    """Independent form: ``2R artanh(|(-x) ⊕ y| / R)``."""
    # from memory (Ungar 2005): the Poincaré distance is 2R artanh(|⊖x ⊕ y|/R).
    with mp.workdps(dps):
        k = kappa_of(curvature)
        u = _mobius_add(neg(to_mp(x)), to_mp(y), k)
        return 2 * mpmath.atanh(mpmath.sqrt(k) * norm(u)) / mpmath.sqrt(k)


def _poincare_exp(v: Vec, x: Vec, k: mpf) -> Vec:
    # textbook formula as stated in the gyrokit contract (from memory: Ganea et
    # al. 2018, "Hyperbolic neural networks"):
    # exp_x(v) = x ⊕ tanh(sqrt(k) lambda_x |v| / 2) v / (sqrt(k) |v|)
    n = norm(v)
    if n == 0:
        return list(x)
    sk = mpmath.sqrt(k)
    f = mpmath.tanh(sk * _lambda(x, k) * n / 2) / (sk * n)
    return _mobius_add(x, smul(f, v), k)


def _poincare_log(y: Vec, x: Vec, k: mpf) -> Vec:
    # textbook formula as stated in the gyrokit contract (from memory: Ganea et al. 2018):
    # log_x(y) = (2 / (sqrt(k) lambda_x)) artanh(sqrt(k)|u|) u/|u|, u = (-x) ⊕ y
    u = _mobius_add(neg(x), y, k)
    n = norm(u)
    if n == 0:
        return _zeros(len(x))
    sk = mpmath.sqrt(k)
    f = 2 / (sk * _lambda(x, k)) * mpmath.atanh(sk * n) / n
    return smul(f, u)


def _poincare_transport(v: Vec, s: Vec, e: Vec, k: mpf) -> Vec:
    # textbook formula as stated in the gyrokit contract (from memory: Ganea et al. 2018):
    # P_{s->e}(v) = (lambda_s/lambda_e) gyr[e, -s] v
    g = _gyration(e, neg(s), v, k)
    return smul(_lambda(s, k) / _lambda(e, k), g)


def _poincare_geodesic(x: Vec, y: Vec, t: mpf, k: mpf) -> Vec:
    # from memory (Ungar 2005): the gyroline through x and y, x ⊕ (t ⊗ ((-x) ⊕ y))
    return _mobius_add(x, _radial_scale(t, _mobius_add(neg(x), y, k), k), k)


def _origin_or(base, n: int) -> Vec:
    return _zeros(n) if base is None else to_mp(base)


def poincare_exp_map(v, base=None, *, curvature: float, dps: int = DPS) -> Vec:
    """``exp_x(v) = x ⊕ tanh(sqrt(kappa) lambda_x |v|/2) v/(sqrt(kappa)|v|)``; base None = origin."""
    with mp.workdps(dps):
        vv = to_mp(v)
        return _poincare_exp(vv, _origin_or(base, len(vv)), kappa_of(curvature))


def poincare_log_map(y, base=None, *, curvature: float, dps: int = DPS) -> Vec:
    """``log_x(y) = (2/(sqrt(kappa) lambda_x)) artanh(sqrt(kappa)|u|) u/|u|``, ``u = (-x) ⊕ y``."""
    with mp.workdps(dps):
        yv = to_mp(y)
        return _poincare_log(yv, _origin_or(base, len(yv)), kappa_of(curvature))


def poincare_transport(v, start, end, *, curvature: float, dps: int = DPS) -> Vec:
    """``(lambda_start/lambda_end) gyr[end, -start] v`` (gyration by its definition)."""
    with mp.workdps(dps):
        return _poincare_transport(to_mp(v), to_mp(start), to_mp(end), kappa_of(curvature))


def poincare_geodesic(x, y, t, *, curvature: float, dps: int = DPS) -> Vec:
    """``x ⊕ (t ⊗ ((-x) ⊕ y))``."""
    with mp.workdps(dps):
        return _poincare_geodesic(to_mp(x), to_mp(y), mpf(float(t)), kappa_of(curvature))


def _ball_project(x: Vec, margin: mpf, k: mpf) -> Vec:
    # common practice (the repair stated in the gyrokit contract): rescale
    # points beyond radius (1 - margin) R onto that radius along their ray.
    big_r = 1 / mpmath.sqrt(k)
    n = norm(x)
    lim = (1 - margin) * big_r
    if n > lim:
        return smul(lim / n, x)
    return list(x)


def poincare_project(x, margin: float = 1e-12, *, curvature: float, dps: int = DPS) -> Vec:
    """Points with ``|x| > (1 - margin) R`` rescaled to radius ``(1 - margin) R``."""
    with mp.workdps(dps):
        return _ball_project(to_mp(x), mpf(float(margin)), kappa_of(curvature))


def poincare_matvec(m, x, *, curvature: float, dps: int = DPS) -> Vec:
    """``M ⊗ x = R tanh(|Mx|/|x| artanh(|x|/R)) Mx/|Mx|`` (zero when ``Mx = 0``)."""
    # textbook formula as stated in the gyrokit contract (from memory: Ganea et
    # al. 2018, Möbius matrix-vector multiplication)
    with mp.workdps(dps):
        k = kappa_of(curvature)
        big_r = 1 / mpmath.sqrt(k)
        mm, xv = to_mp_matrix(m), to_mp(x)
        mx = [dot(row, xv) for row in mm]
        nx, nmx = norm(xv), norm(mx)
        if nx == 0 or nmx == 0:
            return _zeros(len(mm))
        return smul(big_r * mpmath.tanh(nmx / nx * mpmath.atanh(nx / big_r)) / nmx, mx)


def poincare_riemannian_norm(v, base=None, *, curvature: float, dps: int = DPS) -> mpf:
    """``lambda_x |v|``: the length of tangent ``v`` at ``base`` (origin when None)."""
    with mp.workdps(dps):
        vv = to_mp(v)
        return _lambda(_origin_or(base, len(vv)), kappa_of(curvature)) * norm(vv)


# ===================================================== model conversions


def _p2k(p: Vec, k: mpf) -> Vec:
    # Klein point of a Poincaré point: k = 2p/(1 + kappa|p|^2)
    return smul(2 / (1 + k * sq(p)), p)


def _k2p(x: Vec, k: mpf) -> Vec:
    # Poincaré point of a Klein point: p = k/(1 + sqrt(1 - kappa|k|^2))
    return smul(1 / (1 + mpmath.sqrt(1 - k * sq(x))), x)


def _p2h(p: Vec, k: mpf) -> Vec:
    # hyperboloid point of a Poincaré point:
    # (x0, x_s) = (R(1 + kappa|p|^2), 2p) / (1 - kappa|p|^2)
    big_r = 1 / mpmath.sqrt(k)
    pp = sq(p)
    g = 1 - k * pp
    return [big_r * (1 + k * pp) / g] + smul(2 / g, p)


def _h_lift(xs: Vec, k: mpf) -> Vec:
    # the hyperboloid point with spatial part x_s: x0 = R sqrt(1 + kappa|x_s|^2)
    big_r = 1 / mpmath.sqrt(k)
    return [big_r * mpmath.sqrt(1 + k * sq(xs))] + list(xs)


def _h2p(x: Vec, k: mpf) -> Vec:
    # inverse of _p2h on the (recomputed) point: p = x_s / (1 + x0/R)
    lifted = _h_lift(x[1:], k)
    c = lifted[0] * mpmath.sqrt(k)
    return smul(1 / (1 + c), lifted[1:])


def _p2u(p: Vec, k: mpf) -> Vec:
    # Poincaré ball -> upper half-space: with p~ = sqrt(kappa) p in the unit
    # ball, y~ = -e_d + 2(p~ + e_d)/|p~ + e_d|^2 (inversion about the south
    # pole), y = R y~.
    sk = mpmath.sqrt(k)
    z = smul(sk, p)
    z[-1] += 1
    f = 2 / sq(z)
    y = smul(f, z)
    y[-1] -= 1
    return smul(1 / sk, y)


def _u2p(y: Vec, k: mpf) -> Vec:
    # the inversion above is an involution of R^d: the same map brings the
    # half-space back to the ball.
    return _p2u(y, k)


def _to_poincare(x: Vec, src: str, k: mpf) -> Vec:
    if src == "poincare":
        return list(x)
    if src == "klein":
        return _k2p(x, k)
    if src == "hyperboloid":
        return _h2p(x, k)
    if src == "halfspace":
        return _u2p(x, k)
    raise ValueError(src)


def _from_poincare(p: Vec, dst: str, k: mpf) -> Vec:
    if dst == "poincare":
        return list(p)
    if dst == "klein":
        return _p2k(p, k)
    if dst == "hyperboloid":
        return _p2h(p, k)
    if dst == "halfspace":
        return _p2u(p, k)
    raise ValueError(dst)


def convert(x, src: str, dst: str, *, curvature: float, dps: int = DPS) -> Vec:
    """The point ``x`` of model ``src`` in model ``dst`` (through the Poincaré point).

    A hyperboloid input is read through its spatial part.
    """
    with mp.workdps(dps):
        k = kappa_of(curvature)
        xv = to_mp(x)
        if src == dst:
            return _h_lift(xv[1:], k) if src == "hyperboloid" else xv
        return _from_poincare(_to_poincare(xv, src, k), dst, k)


# ================================================================== Klein


def _dk2p(x: Vec, v: Vec, k: mpf) -> Vec:
    # Differential of the Klein -> Poincaré map p = x/(1 + s), s = sqrt(1 - kappa|x|^2),
    # by the chain rule: dp = v/(1+s) + kappa <x,v> x / (s (1+s)^2).
    s = mpmath.sqrt(1 - k * sq(x))
    return lin(1 / (1 + s), v, k * dot(x, v) / (s * (1 + s) ** 2), x)


def _dp2k(p: Vec, w: Vec, k: mpf) -> Vec:
    # Differential of the Poincaré -> Klein map x = 2p/(1 + kappa|p|^2), chain rule:
    # dx = 2w/(1 + kappa|p|^2) - 4 kappa <p,w> p / (1 + kappa|p|^2)^2.
    q = 1 + k * sq(p)
    return lin(2 / q, w, -4 * k * dot(p, w) / q ** 2, p)


def klein_to_poincare_tangent(v, base, *, curvature: float, dps: int = DPS) -> Vec:
    """The Poincaré tangent vector of Klein tangent ``v`` at Klein point ``base`` (chain rule)."""
    with mp.workdps(dps):
        return _dk2p(to_mp(base), to_mp(v), kappa_of(curvature))


def poincare_to_klein_tangent(w, base, *, curvature: float, dps: int = DPS) -> Vec:
    """The Klein tangent vector of Poincaré tangent ``w`` at Poincaré point ``base`` (chain rule)."""
    with mp.workdps(dps):
        return _dp2k(to_mp(base), to_mp(w), kappa_of(curvature))


def _central_difference(f: Callable[[Vec], Vec], x: Vec, v: Vec, h: mpf) -> Vec:
    a = f(lin(1, x, h, v))
    b = f(lin(1, x, -h, v))
    return smul(1 / (2 * h), vsub(a, b))


def klein_to_poincare_tangent_fd(v, base, *, curvature: float, dps: int = DPS,
                                 step: float = 1e-25) -> Vec:
    """Independent form of :func:`klein_to_poincare_tangent`: a central
    difference of the point map with step ``step * R / |v|`` (error ~ step^2)."""
    with mp.workdps(dps):
        k = kappa_of(curvature)
        vv = to_mp(v)
        h = mpf(step) / (mpmath.sqrt(k) * norm(vv))
        return _central_difference(lambda z: _k2p(z, k), to_mp(base), vv, h)


def poincare_to_klein_tangent_fd(w, base, *, curvature: float, dps: int = DPS,
                                 step: float = 1e-25) -> Vec:
    """Independent form of :func:`poincare_to_klein_tangent` by central differences."""
    with mp.workdps(dps):
        k = kappa_of(curvature)
        ww = to_mp(w)
        h = mpf(step) / (mpmath.sqrt(k) * norm(ww))
        return _central_difference(lambda z: _p2k(z, k), to_mp(base), ww, h)


def _klein_distance(x: Vec, y: Vec, k: mpf) -> mpf:
    if _same(x, y):
        return mpf(0)
    # textbook formula as stated in the gyrokit contract (from memory, standard):
    # d = R acosh((1 - kappa <x,y>) / sqrt((1 - kappa|x|^2)(1 - kappa|y|^2)))
    arg = (1 - k * dot(x, y)) / mpmath.sqrt((1 - k * sq(x)) * (1 - k * sq(y)))
    return mpmath.acosh(arg) / mpmath.sqrt(k)


def klein_distance(x, y, *, curvature: float, dps: int = DPS) -> mpf:
    """``R acosh((1 - kappa x.y)/sqrt((1 - kappa|x|^2)(1 - kappa|y|^2)))``."""
    with mp.workdps(dps):
        return _klein_distance(to_mp(x), to_mp(y), kappa_of(curvature))


def klein_exp_map(v, base=None, *, curvature: float, dps: int = DPS) -> Vec:
    """Klein ``exp_x(v)`` through the Poincaré ball (tangent by the differential)."""
    with mp.workdps(dps):
        k = kappa_of(curvature)
        vv = to_mp(v)
        x = _origin_or(base, len(vv))
        p = _k2p(x, k)
        return _p2k(_poincare_exp(_dk2p(x, vv, k), p, k), k)


def klein_log_map(y, base=None, *, curvature: float, dps: int = DPS) -> Vec:
    """Klein ``log_x(y)`` through the Poincaré ball."""
    with mp.workdps(dps):
        k = kappa_of(curvature)
        yv = to_mp(y)
        x = _origin_or(base, len(yv))
        p, q = _k2p(x, k), _k2p(yv, k)
        return _dp2k(p, _poincare_log(q, p, k), k)


def klein_transport(v, start, end, *, curvature: float, dps: int = DPS) -> Vec:
    """Klein parallel transport through the Poincaré ball."""
    with mp.workdps(dps):
        k = kappa_of(curvature)
        s, e = to_mp(start), to_mp(end)
        ps, pe = _k2p(s, k), _k2p(e, k)
        w = _poincare_transport(_dk2p(s, to_mp(v), k), ps, pe, k)
        return _dp2k(pe, w, k)


def klein_geodesic(x, y, t, *, curvature: float, dps: int = DPS) -> Vec:
    """Klein geodesic point at fraction ``t`` through the Poincaré ball."""
    with mp.workdps(dps):
        k = kappa_of(curvature)
        p, q = _k2p(to_mp(x), k), _k2p(to_mp(y), k)
        return _p2k(_poincare_geodesic(p, q, mpf(float(t)), k), k)


def klein_project(x, margin: float = 1e-12, *, curvature: float, dps: int = DPS) -> Vec:
    """Same repair as :func:`poincare_project` (the Klein ball has the same radius)."""
    with mp.workdps(dps):
        return _ball_project(to_mp(x), mpf(float(margin)), kappa_of(curvature))


def klein_riemannian_norm(v, base=None, *, curvature: float, dps: int = DPS) -> mpf:
    """Length of Klein tangent ``v`` at ``base``: the Poincaré length of its image."""
    with mp.workdps(dps):
        k = kappa_of(curvature)
        vv = to_mp(v)
        x = _origin_or(base, len(vv))
        return _lambda(_k2p(x, k), k) * norm(_dk2p(x, vv, k))


# ============================================================ hyperboloid


def _minkowski(u: Vec, v: Vec) -> mpf:
    # <u, v>_L = -u0 v0 + u_s . v_s
    return -u[0] * v[0] + dot(u[1:], v[1:])


def _h_tangent(v: Vec, x: Vec) -> Vec:
    # tangent vector read through its spatial part: <x, v>_L = 0 gives
    # v0 = <x_s, v_s> / x0
    return [dot(x[1:], v[1:]) / x[0]] + list(v[1:])


def _h_origin(n: int, k: mpf) -> Vec:
    return [1 / mpmath.sqrt(k)] + _zeros(n - 1)


def _h_point(x, k: mpf) -> Vec:
    return _h_lift(to_mp(x)[1:], k)


def _h_distance(x: Vec, y: Vec, k: mpf) -> mpf:
    if _same(x, y):
        return mpf(0)
    # textbook formula as stated in the gyrokit contract (from memory, standard):
    # d = R acosh(-kappa <x, y>_L) = R acosh(c_x c_y - kappa x_s.y_s)
    return mpmath.acosh(-k * _minkowski(x, y)) / mpmath.sqrt(k)


def _h_exp(v: Vec, x: Vec, k: mpf) -> Vec:
    # textbook formula as stated in the gyrokit contract (from memory, standard):
    # exp_x(v) = cosh(|v|/R) x + R sinh(|v|/R) v/|v|, |v| the Minkowski norm
    n = mpmath.sqrt(_minkowski(v, v))
    if n == 0:
        return list(x)
    sk = mpmath.sqrt(k)
    return lin(mpmath.cosh(sk * n), x, mpmath.sinh(sk * n) / (sk * n), v)


def _h_log(y: Vec, x: Vec, k: mpf) -> Vec:
    # textbook formula as stated in the gyrokit contract (from memory, standard):
    # log_x(y) = d(x, y) (y + kappa<x,y>_L x) / |y + kappa<x,y>_L x|_L
    if _same(x, y):
        return _zeros(len(x))
    w = lin(1, y, k * _minkowski(x, y), x)
    n2 = _minkowski(w, w)
    return smul(_h_distance(x, y, k) / mpmath.sqrt(n2), w)


def _h_transport(v: Vec, s: Vec, e: Vec, k: mpf) -> Vec:
    # textbook formula as stated in the gyrokit contract (from memory, standard):
    # P_{s->e}(v) = v + <e, v>_L / (R^2 - <s, e>_L) (s + e)
    big_r2 = 1 / k
    f = _minkowski(e, v) / (big_r2 - _minkowski(s, e))
    return lin(1, v, f, vadd(s, e))


def _h_geodesic(x: Vec, y: Vec, t: mpf, k: mpf) -> Vec:
    # textbook formula as stated in the gyrokit contract (from memory, standard):
    # gamma(t) = (sinh((1-t)D) x + sinh(tD) y) / sinh(D), D = d(x,y)/R
    big_d = _h_distance(x, y, k) * mpmath.sqrt(k)
    if big_d == 0:
        return list(x)
    sd = mpmath.sinh(big_d)
    return lin(mpmath.sinh((1 - t) * big_d) / sd, x, mpmath.sinh(t * big_d) / sd, y)


def hyperboloid_inner(u, v, *, dps: int = DPS, curvature: float = -1.0) -> mpf:
    """Minkowski inner product ``-u0 v0 + u_s.v_s`` of the rows as given (no recomputation).

    ``curvature`` is accepted (and ignored) so that the signature matches the
    other references.
    """
    with mp.workdps(dps):
        return _minkowski(to_mp(u), to_mp(v))


def hyperboloid_minkowski_norm(v, base=None, *, curvature: float, dps: int = DPS) -> mpf:
    """Minkowski norm of tangent ``v`` (read through its spatial part) at ``base``."""
    with mp.workdps(dps):
        k = kappa_of(curvature)
        vv = to_mp(v)
        x = _h_origin(len(vv), k) if base is None else _h_point(base, k)
        t = _h_tangent(vv, x)
        return mpmath.sqrt(_minkowski(t, t))


def hyperboloid_distance(x, y, *, curvature: float, dps: int = DPS) -> mpf:
    """``R acosh(c_x c_y - kappa x_s.y_s)``, ``c = sqrt(1 + kappa|x_s|^2)``."""
    with mp.workdps(dps):
        k = kappa_of(curvature)
        return _h_distance(_h_point(x, k), _h_point(y, k), k)


def hyperboloid_exp_map(v, base=None, *, curvature: float, dps: int = DPS) -> Vec:
    """``cosh(|v|/R) x + R sinh(|v|/R) v/|v|``; base None is ``(R, 0, ..., 0)``."""
    with mp.workdps(dps):
        k = kappa_of(curvature)
        vv = to_mp(v)
        x = _h_origin(len(vv), k) if base is None else _h_point(base, k)
        return _h_exp(_h_tangent(vv, x), x, k)


def hyperboloid_log_map(y, base=None, *, curvature: float, dps: int = DPS) -> Vec:
    """``d(x,y) (y + kappa<x,y>_L x)/|y + kappa<x,y>_L x|_L``; base None is the origin."""
    with mp.workdps(dps):
        k = kappa_of(curvature)
        yv = _h_point(y, k)
        x = _h_origin(len(yv), k) if base is None else _h_point(base, k)
        return _h_log(yv, x, k)


def hyperboloid_transport(v, start, end, *, curvature: float, dps: int = DPS) -> Vec:
    """``v + <end,v>_L/(R^2 - <start,end>_L) (start + end)``."""
    with mp.workdps(dps):
        k = kappa_of(curvature)
        s, e = _h_point(start, k), _h_point(end, k)
        return _h_transport(_h_tangent(to_mp(v), s), s, e, k)


def hyperboloid_geodesic(x, y, t, *, curvature: float, dps: int = DPS) -> Vec:
    """``(sinh((1-t)D) x + sinh(tD) y)/sinh(D)``, ``D = d(x,y)/R``."""
    with mp.workdps(dps):
        k = kappa_of(curvature)
        return _h_geodesic(_h_point(x, k), _h_point(y, k), mpf(float(t)), k)


def hyperboloid_project(x, *, curvature: float, dps: int = DPS) -> Vec:
    """``x0`` recomputed from the spatial part."""
    with mp.workdps(dps):
        return _h_point(x, kappa_of(curvature))


# ============================================================= half-space


def halfspace_distance(x, y, *, curvature: float, dps: int = DPS) -> mpf:
    """``R acosh(1 + |x-y|^2/(2 x_d y_d))``."""
    # textbook formula as stated in the gyrokit contract (from memory: the
    # distance of the upper half-space metric R^2|dy|^2/y_d^2)
    with mp.workdps(dps):
        k = kappa_of(curvature)
        xv, yv = to_mp(x), to_mp(y)
        if _same(xv, yv):
            return mpf(0)
        return mpmath.acosh(1 + sq(vsub(xv, yv)) / (2 * xv[-1] * yv[-1])) / mpmath.sqrt(k)


REFERENCES: Dict[str, Callable[..., Value]] = {
    "poincare.distance": poincare_distance,
    "poincare.exp_map": poincare_exp_map,
    "poincare.log_map": poincare_log_map,
    "poincare.transport": poincare_transport,
    "poincare.geodesic": poincare_geodesic,
    "poincare.project": poincare_project,
    "poincare.matvec": poincare_matvec,
    "klein.distance": klein_distance,
    "klein.exp_map": klein_exp_map,
    "klein.log_map": klein_log_map,
    "klein.transport": klein_transport,
    "klein.geodesic": klein_geodesic,
    "klein.project": klein_project,
    "hyperboloid.inner": hyperboloid_inner,
    "hyperboloid.distance": hyperboloid_distance,
    "hyperboloid.exp_map": hyperboloid_exp_map,
    "hyperboloid.log_map": hyperboloid_log_map,
    "hyperboloid.transport": hyperboloid_transport,
    "hyperboloid.geodesic": hyperboloid_geodesic,
    "hyperboloid.project": hyperboloid_project,
    "halfspace.distance": halfspace_distance,
    "convert": convert,
}


# ======================================= independent routes (for validation)
#
# The ball operations again, computed on the hyperboloid: ball points are
# lifted by the point maps, tangent vectors pushed forward by the chain-rule
# differential of the lift, the hyperboloid formula applied, and the result
# brought back. These share no formula with the gyrovector references above
# (only the point maps of the conversions), so agreement to many digits
# validates both.


def _dp2h(p: Vec, w: Vec, k: mpf) -> Vec:
    # differential of p -> (R(1 + k|p|^2), 2p)/(1 - k|p|^2):
    # dx0 = 4 R k <p,w> / g^2,  dx_s = 2w/g + 4k <p,w> p / g^2,  g = 1 - k|p|^2
    big_r = 1 / mpmath.sqrt(k)
    g = 1 - k * sq(p)
    pw = dot(p, w)
    return [4 * big_r * k * pw / g ** 2] + lin(2 / g, w, 4 * k * pw / g ** 2, p)


def _dh2p(x: Vec, v: Vec, k: mpf) -> Vec:
    # differential of x -> x_s/(1 + x0/R): dp = dx_s/(1 + c) - x_s (dx0/R)/(1 + c)^2
    sk = mpmath.sqrt(k)
    c = x[0] * sk
    return lin(1 / (1 + c), v[1:], -v[0] * sk / (1 + c) ** 2, x[1:])


def _k2h(x: Vec, k: mpf) -> Vec:
    # Klein -> hyperboloid: (x0, x_s) = gamma (R, x), gamma = 1/sqrt(1 - k|x|^2)
    gam = 1 / mpmath.sqrt(1 - k * sq(x))
    return [gam / mpmath.sqrt(k)] + smul(gam, x)


def _h2k(x: Vec, k: mpf) -> Vec:
    # hyperboloid -> Klein: x_s R / x0
    return smul(1 / (mpmath.sqrt(k) * x[0]), x[1:])


def _dk2h(x: Vec, v: Vec, k: mpf) -> Vec:
    # d gamma = gamma^3 k <x,v>;  dx0 = R d gamma,  dx_s = gamma v + d gamma x
    gam = 1 / mpmath.sqrt(1 - k * sq(x))
    dg = gam ** 3 * k * dot(x, v)
    return [dg / mpmath.sqrt(k)] + lin(gam, v, dg, x)


def _dh2k(x: Vec, v: Vec, k: mpf) -> Vec:
    # d(R x_s/x0) = R (dx_s/x0 - x_s dx0/x0^2)
    big_r = 1 / mpmath.sqrt(k)
    return lin(big_r / x[0], v[1:], -big_r * v[0] / x[0] ** 2, x[1:])


_LIFT = {
    "poincare": (lambda x, k: _p2h(x, k), lambda x, k: _h2p(x, k), _dp2h, _dh2p),
    "klein": (_k2h, _h2k, _dk2h, _dh2k),
}


def _ball_origin_or(base, n):
    return _zeros(n) if base is None else to_mp(base)


def exp_map_via_hyperboloid(model: str, v, base=None, *, curvature: float, dps: int = DPS) -> Vec:
    """Ball ``exp_x(v)`` (``model`` ``"poincare"`` or ``"klein"``) through the hyperboloid."""
    up, down, dup, _ = _LIFT[model]
    with mp.workdps(dps):
        k = kappa_of(curvature)
        vv = to_mp(v)
        x = _ball_origin_or(base, len(vv))
        hx = up(x, k)
        return down(_h_exp(dup(x, vv, k), hx, k), k)


def log_map_via_hyperboloid(model: str, y, base=None, *, curvature: float, dps: int = DPS) -> Vec:
    """Ball ``log_x(y)`` through the hyperboloid."""
    up, _, _, ddown = _LIFT[model]
    with mp.workdps(dps):
        k = kappa_of(curvature)
        yv = to_mp(y)
        x = _ball_origin_or(base, len(yv))
        hx, hy = up(x, k), up(yv, k)
        return ddown(hx, _h_log(hy, hx, k), k)


def transport_via_hyperboloid(model: str, v, start, end, *, curvature: float, dps: int = DPS) -> Vec:
    """Ball parallel transport through the hyperboloid."""
    up, _, dup, ddown = _LIFT[model]
    with mp.workdps(dps):
        k = kappa_of(curvature)
        s, e = to_mp(start), to_mp(end)
        hs, he = up(s, k), up(e, k)
        return ddown(he, _h_transport(dup(s, to_mp(v), k), hs, he, k), k)


def geodesic_via_hyperboloid(model: str, x, y, t, *, curvature: float, dps: int = DPS) -> Vec:
    """Ball geodesic point through the hyperboloid."""
    up, down, _, _ = _LIFT[model]
    with mp.workdps(dps):
        k = kappa_of(curvature)
        return down(_h_geodesic(up(to_mp(x), k), up(to_mp(y), k), mpf(float(t)), k), k)


def triangle(pts: Sequence[Sequence[mpf]], curvature: float = -1.0) -> Tuple[List[mpf], List[mpf], mpf]:
    """Sides (opposite a, b, c, in model units), angles (at a, b, c) and
    defect of the triangle of three Poincaré points, at the working
    precision (handbook: hyperbolic law of cosines, cos α = (cosh b cosh c -
    cosh a)/(sinh b sinh c) with sides in units of R; Gauss–Bonnet: defect =
    π - sum of the angles)."""
    k = -mpf(curvature)

    def dist(x, y):  # in units of R
        gx = 1 - k * sum(t * t for t in x)
        gy = 1 - k * sum(t * t for t in y)
        return mp.acosh(1 + 2 * k * sum((s - t) ** 2 for s, t in zip(x, y)) / (gx * gy))

    A, B, C = pts
    s = [dist(B, C), dist(A, C), dist(A, B)]

    def ang(opp, e1, e2):
        return mp.acos((mp.cosh(e1) * mp.cosh(e2) - mp.cosh(opp)) / (mp.sinh(e1) * mp.sinh(e2)))

    angles = [ang(s[0], s[1], s[2]), ang(s[1], s[0], s[2]), ang(s[2], s[0], s[1])]
    R = 1 / mp.sqrt(k)
    return [x * R for x in s], angles, mp.pi - sum(angles)
