//! The Beltrami–Klein ball: the Einstein gyrovector space (relativistic
//! velocity addition) of curvature K = -kappa, ball radius R = 1/sqrt(kappa)
//! (the speed of light c when the ball holds velocities).
//!
//! Written around `s = u + v` and carried gaps, like the Poincaré module:
//! the textbook `1 + kappa u.v` cancels for nearly opposite velocities near
//! the boundary. The Einstein gyration is the Möbius one of the isomorphic
//! Poincaré points (Ungar's isomorphism `p -> 2 ⊗ p`); it is computed there,
//! one formula in one place.

use crate::models::ball::Curvature;
use crate::models::gyro::gyro_ball;
use crate::models::poincare;
use crate::numeric::{
    artanh_ratio, diff_of_squares, dist_sq, distance_from_half_delta, div_dd, dot2, dot_with_sum, gap,
    geodesic_weights, norm_scaled, perp_scaled, pow2, sqrt_dd, sumsq, unit_exponent, with_scratch, DD,
};

/// Einstein addition `u ⊕ (sv v)` (`sv = -1` gives `u ⊖ v`):
/// `(u + v/γ_u + kappa γ_u/(1 + γ_u) (u.v) u) / (1 + kappa u.v)`
/// rewritten with `s = u + v` and `a = sqrt(g_u) = 1/γ_u` as
/// `(a s + kappa (u.s)/(1 + a) u) / ((g_u + g_v)/2 + kappa |s|^2/2)`;
/// `u.s` is summed with `s` formed error-free. Returns the gap of the
/// result, `g_u g_v / (1 + kappa u.v)^2`.
#[inline(always)]
pub fn add_g(c: &Curvature, u: &[f64], gu: f64, v: &[f64], gv: f64, sv: f64, out: &mut [f64]) -> f64 {
    let k = c.kappa;
    for i in 0..u.len() {
        out[i] = u[i] + sv * v[i];
    }
    let ss = sumsq(out);
    let us = dot_with_sum(u, v, sv);
    let a = gu.sqrt();
    let den = 0.5 * (gu + gv) + 0.5 * k * ss;
    let cs = a / den;
    let cu = k * us / ((1.0 + a) * den);
    for i in 0..u.len() {
        out[i] = cs * out[i] + cu * u[i];
    }
    gu * gv / (den * den)
}

/// Einstein addition `u ⊕ v`.
pub fn add(c: &Curvature, u: &[f64], v: &[f64], out: &mut [f64]) {
    add_g(c, u, gap(c.kappa, u), v, gap(c.kappa, v), 1.0, out);
}

/// Einstein subtraction `u ⊖ v = u ⊕ (-v)`.
pub fn sub(c: &Curvature, u: &[f64], v: &[f64], out: &mut [f64]) {
    add_g(c, u, gap(c.kappa, u), v, gap(c.kappa, v), -1.0, out);
}

/// Einstein scalar multiplication; the same radial law as Möbius, and the
/// same gap of the result.
#[inline(always)]
pub fn scale_g(c: &Curvature, r: f64, x: &[f64], gx: f64, out: &mut [f64]) -> f64 {
    poincare::scale_g(c, r, x, gx, out)
}

/// Einstein scalar multiplication `r ⊗ x`.
pub fn scale(c: &Curvature, r: f64, x: &[f64], out: &mut [f64]) {
    scale_g(c, r, x, gap(c.kappa, x), out);
}

/// `gyr[u, v] w` in the Einstein space, as the Möbius gyration of the
/// Poincaré images `p = k/(1 + sqrt(g_k))` (gap `2 a/(1 + a)`, `a =
/// sqrt(g_k)`). Their sum is formed from `u + v` without cancellation:
/// `p_u + p_v = ((1 + a_v) s - kappa (|u|^2 - |v|^2)/(a_u + a_v) v) /
/// ((1 + a_u)(1 + a_v))`.
#[inline(always)]
pub fn gyration_g(c: &Curvature, u: &[f64], gu: f64, v: &[f64], gv: f64, w: &[f64], out: &mut [f64]) {
    let n = u.len();
    let k = c.kappa;
    let au = gu.sqrt();
    let av = gv.sqrt();
    let ds = diff_of_squares(u, v, 1.0);
    let q = 1.0 / ((1.0 + au) * (1.0 + av));
    let cv = k * ds / (au + av);
    with_scratch(
        3 * n,
        #[inline(always)]
        |buf| {
            let (pu, rest) = buf.split_at_mut(n);
            let (pv, sp) = rest.split_at_mut(n);
            let gpu = to_poincare(u, gu, pu);
            let gpv = to_poincare(v, gv, pv);
            for i in 0..n {
                sp[i] = ((1.0 + av) * (u[i] + v[i]) - cv * v[i]) * q;
            }
            poincare::gyration_s(c, pu, gpu, pv, gpv, sp, w, out);
        },
    )
}

/// `gyr[u, v] w` in the Einstein space.
pub fn gyration(c: &Curvature, u: &[f64], v: &[f64], w: &[f64], out: &mut [f64]) {
    gyration_g(c, u, gap(c.kappa, u), v, gap(c.kappa, v), w, out);
}

/// The Einstein midpoint `(γ_a a + γ_b b)/(γ_a + γ_b)` of two points,
/// rewritten through `s = a + b` and `sqrt(g_b) - sqrt(g_a) = kappa (|a|^2 -
/// |b|^2)/(sqrt(g_a) + sqrt(g_b))` so that nearly opposite points near the
/// boundary keep their digits. Returns the gap of the result,
/// `2 sqrt(g_a g_b) E / (sqrt g_a + sqrt g_b)^2` with
/// `E = sqrt(g_a g_b) + 1 - kappa a.b` (`-<z, z>/z0^2` for the hyperboloid
/// sum `z = a_H + b_H`), a sum of non-negative terms.
#[inline(always)]
pub fn midpoint_g(c: &Curvature, a: &[f64], ga: f64, b: &[f64], gb: f64, out: &mut [f64]) -> f64 {
    let k = c.kappa;
    let ra = ga.sqrt();
    let rb = gb.sqrt();
    let t = ra + rb;
    let ds = diff_of_squares(a, b, 1.0);
    let ca = k * ds / (t * t);
    let cs = ra / t;
    for i in 0..a.len() {
        out[i] = ca * a[i] + cs * (a[i] + b[i]);
    }
    2.0 * ra * rb * one_minus_dot(c, a, ga, b, gb) / (t * t)
}

/// The Einstein midpoint of `a` and `b`.
pub fn midpoint(c: &Curvature, a: &[f64], b: &[f64], out: &mut [f64]) {
    midpoint_g(c, a, gap(c.kappa, a), b, gap(c.kappa, b), out);
}

/// `E = sqrt(g_x g_y) + 1 - kappa x.y` as a sum of non-negative terms,
/// `1 - kappa x.y = (g_x + g_y)/2 + kappa |x - y|^2/2` (no cancellation for
/// nearly equal points near the sphere).
#[inline(always)]
fn one_minus_dot(c: &Curvature, x: &[f64], gx: f64, y: &[f64], gy: f64) -> f64 {
    (gx * gy).sqrt() + 0.5 * (gx + gy) + 0.5 * c.kappa * dist_sq(x, y)
}

// ------------------------------------------------------- model layer

/// Hyperbolic distance in the Klein ball. From `cosh(d/R) = (1 - kappa k.l)
/// / sqrt(g_k g_l)` and `1 - kappa k.l = (g_k + g_l)/2 + kappa |k - l|^2/2`:
/// `delta sqrt(g_k g_l) = ((sqrt g_k - sqrt g_l)^2 + kappa |k - l|^2)/2`, a
/// sum of squares, with `sqrt g_l - sqrt g_k = kappa (|k|^2 - |l|^2) /
/// (sqrt g_k + sqrt g_l)` formed error-free.
#[inline(always)]
pub fn distance_g(c: &Curvature, k: &[f64], gk: f64, l: &[f64], gl: f64) -> f64 {
    let (ra, rb) = (gk.sqrt(), gl.sqrt());
    let dg = c.kappa * diff_of_squares(k, l, 1.0) / (ra + rb);
    let half_delta = (dg * dg + c.kappa * dist_sq(k, l)) / (4.0 * ra * rb);
    distance_from_half_delta(c.radius, half_delta)
}

// ------------------------------------------------- maps to and from the hub

/// The map into the Poincaré ball as a radial scaling: `p = k/(1 + a)`
/// (`a = sqrt(g_k)`), whose image has the exact gap `2a/(1 + a)`. Returns
/// `(1 + a, 2a/(1 + a))`: the one place of the formula, for every form below.
#[inline(always)]
fn poincare_scaling(gk: f64) -> (f64, f64) {
    let a = gk.sqrt();
    (1.0 + a, 2.0 * a / (1.0 + a))
}

/// The Poincaré point of a Klein point, `p = k/(1 + a)`, and its exact gap
/// `2a/(1 + a)` (`a = sqrt(g_k)`): the one map into the Poincaré ball (the
/// conversions, the gyration, the log map, the Einstein midpoint use it).
#[inline(always)]
pub fn to_poincare(k: &[f64], gk: f64, p: &mut [f64]) -> f64 {
    let (den, g) = poincare_scaling(gk);
    for (o, &v) in p.iter_mut().zip(k) {
        *o = v / den;
    }
    g
}

/// [`to_poincare`] of the point in `x`, written over it.
#[inline(always)]
pub fn to_poincare_in_place(x: &mut [f64], gk: f64) -> f64 {
    let (den, g) = poincare_scaling(gk);
    x.iter_mut().for_each(|v| *v /= den);
    g
}

/// The gap `2a/(1 + a)` (`a = sqrt(g_k)`) of the Poincaré image of a Klein
/// point of gap `gk`, alone.
#[inline(always)]
pub fn poincare_gap(gk: f64) -> f64 {
    poincare_scaling(gk).1
}

/// [`to_poincare`] carried to double-double from the exact input and its
/// double-double gap: writes the image's high parts to `hi` and low parts to
/// `lo`, and returns the factor `1/g = (1 + a)/(2a)` of the image (the pair
/// space of `pairwise`).
#[inline(always)]
pub fn to_poincare_dd(k: &[f64], gk: DD, hi: &mut [f64], lo: &mut [f64]) -> f64 {
    let (a, den) = poincare_image_dd(k, gk, hi, lo);
    den.value() / (2.0 * a.value())
}

/// The image of [`to_poincare_dd`] alone: writes it to `hi`, `lo` and
/// returns `a = sqrt(g_k)` and `1 + a` in double-double (the image's gap is
/// `2a/(1 + a)`).
#[inline(always)]
pub fn poincare_image_dd(k: &[f64], gk: DD, hi: &mut [f64], lo: &mut [f64]) -> (DD, DD) {
    let a = sqrt_dd(gk);
    let den = DD::from(1.0).add(a);
    for ((h, l), &v) in hi.iter_mut().zip(lo.iter_mut()).zip(k) {
        let q = div_dd(v, den);
        *h = q.hi;
        *l = q.lo;
    }
    (a, den)
}

/// The factor `2/(2 - g_p)` of the map out of the Poincaré ball (Ungar's
/// `2 ⊗ p`); its differential scales directions across the radius by it too.
#[inline(always)]
fn klein_factor(gp: f64) -> f64 {
    2.0 / (2.0 - gp)
}

/// The Klein point of a Poincaré point of gap `gp`, `k = 2p/(2 - g_p)`
/// (Ungar's `2 ⊗ p`), and its exact gap `(g_p/(2 - g_p))^2`: the one map out
/// of the Poincaré ball.
#[inline(always)]
pub fn from_poincare(p: &[f64], gp: f64, k: &mut [f64]) -> f64 {
    let f = klein_factor(gp);
    for (o, &v) in k.iter_mut().zip(p) {
        *o = f * v;
    }
    let q = gp / (2.0 - gp);
    q * q
}

/// `p_x - p_y` for the Poincaré images of two Klein points, from the inputs:
/// `((x - y)(1 + a_y) + y kappa (|x|^2 - |y|^2)/(a_x + a_y)) / ((1 + a_x)(1 + a_y))`
/// (the difference of the two rounded images loses digits for close pairs).
#[inline(always)]
fn poincare_difference(c: &Curvature, x: &[f64], gx: f64, y: &[f64], gy: f64, out: &mut [f64]) {
    let (ax, ay) = (gx.sqrt(), gy.sqrt());
    let dv = c.kappa * diff_of_squares(x, y, 1.0) / (ax + ay);
    let q = 1.0 / ((1.0 + ax) * (1.0 + ay));
    for i in 0..x.len() {
        out[i] = ((x[i] - y[i]) * (1.0 + ay) + y[i] * dv) * q;
    }
}

/// The distances `(A, B)` from a Klein point `k` to the sphere along a unit
/// direction (ahead) and against it (behind), from `kv = k . dir` and
/// `r2g = R^2 - |k|^2 = R^2 g_k`: the roots of `|k + tau dir|^2 = R^2`,
/// `A B = R^2 g_k`, the larger one formed without cancellation and the
/// smaller one from the product.
#[inline(always)]
pub(crate) fn chord_ends(kv: f64, r2g: f64) -> (f64, f64) {
    let sq = (kv * kv + r2g).sqrt();
    if kv <= 0.0 {
        let a = sq - kv;
        (a, r2g / a)
    } else {
        let b = sq + kv;
        (r2g / b, b)
    }
}

/// `exp_x(v)` along the Klein chord `x + t v/|v|` (geodesics are straight
/// lines). With `A`, `B` the distances along it from `x` to the sphere ahead
/// and behind ([`chord_ends`]) and `D = |v|_x / R`, the cross-ratio form of
/// the distance gives `t = A B (1 - e^{-2D}) / (A e^{-2D} + B)`, a product
/// of accurate factors. Only the input direction enters, never a rounded
/// intermediate point near the sphere (the route through the Poincaré ball
/// rounds the image of `x` and loses ~1e-10 for 30 R tangents). Returns
/// the gap of the result: `1 - kappa |x + tau u|^2 = kappa (A - tau)(B + tau)`
/// on the chord, so `g = kappa A B e^{-2D} (A + B)^2 / (A e^{-2D} + B)^2`.
#[inline(always)]
pub fn exp_map_g(c: &Curvature, x: &[f64], gx: f64, v: &[f64], out: &mut [f64]) -> f64 {
    let k = c.kappa;
    // v = 2^e v_s (exact): D = 2^e D_s and t/|v| = (t/D) (D_s/|v_s|), so
    // tangents whose squares underflow (below ~1e-154) keep their digits.
    // (always scaled to a largest coordinate in [0.5, 1): kappa |v|^2 must
    // not underflow either)
    let e = unit_exponent(v);
    let (up, down) = (pow2(-e), pow2(e));
    let (vv, xv) = with_scratch(
        v.len(),
        #[inline(always)]
        |vs| {
            for (o, &a) in vs.iter_mut().zip(v) {
                *o = a * up;
            }
            (sumsq(vs), dot2(x, vs))
        },
    );
    if vv == 0.0 {
        out.copy_from_slice(x);
        return gx;
    }
    let nv = vv.sqrt();
    // D^2 = kappa |v|^2 / g + kappa^2 (x.v)^2 / g^2 (the Klein metric)
    let q = k * xv / gx;
    let ds = (k * vv / gx + q * q).sqrt();
    let big_d = ds * down;
    let (a, b) = chord_ends(xv / nv, gx / k);
    let em = (-2.0 * big_d).exp();
    let den = a * em + b;
    // t/|v| = (t/D) (D_s/|v_s|), with (1 - e^{-2D})/D -> 2 as D -> 0 (D may underflow)
    let r = if big_d > 1e-300 { -(-2.0 * big_d).exp_m1() / big_d } else { 2.0 };
    let f = a * b * r / den * (ds / nv);
    for i in 0..x.len() {
        out[i] = x[i] + f * v[i];
    }
    let ab = (a + b) / den;
    k * a * b * em * ab * ab
}

/// `log_x(y)`, computed in the Poincaré ball with the pair's difference
/// formed from the Klein inputs, then mapped back with the exact
/// differential.
#[inline(always)]
pub fn log_map_g(c: &Curvature, x: &[f64], gx: f64, y: &[f64], gy: f64, out: &mut [f64]) {
    let n = x.len();
    let k = c.kappa;
    with_scratch(
        4 * n,
        #[inline(always)]
        |buf| {
            let (p, rest) = buf.split_at_mut(n);
            let (s, rest) = rest.split_at_mut(n);
            let (w, xs) = rest.split_at_mut(n);
            let gp = to_poincare(x, gx, p);
            let a = gy.sqrt();
            let gq = poincare_gap(gy);
            // s = p - q, then p ⊖ q from it (Möbius form with s given), its gap exact
            poincare_difference(c, x, gx, y, gy, s);
            let ss = sumsq(s);
            let den = gp * gq + k * ss;
            for i in 0..n {
                w[i] = (gp * s[i] + k * ss * p[i]) / den;
            }
            let gu = gp * gq / den;
            if w.iter().all(|&v| v == 0.0) {
                out.iter_mut().for_each(|o| *o = 0.0);
                return;
            }
            // |w| without underflow (tiny pairs: log = -g_p w to full precision)
            let t = c.sqrt_kappa * norm_scaled(w);
            let f = -gp * artanh_ratio(t, gu); // log_p(q) = f (p ⊖ q)
            if p.iter().all(|&v| v == 0.0) {
                let g2 = klein_factor(gp);
                for i in 0..n {
                    out[i] = g2 * f * w[i];
                }
                return;
            }
            // The Klein differential shrinks the radial part by g_p, so the part
            // of the log perpendicular to p must carry its own digits: it is
            // f g_p s_perp / D (p has no perpendicular part). s itself is
            // dominated by its radial part (the Klein -> Poincaré map stretches
            // it by 1/sqrt(g_x)), so s_perp is taken from the input difference:
            // s_perp = (x - y)_perp / (1 + sqrt(g_y)), p and x being parallel.
            // The radial part (s.p) p/|p|^2 + kappa |s|^2 p/D and the part
            // across x depend on the direction of p (and of x) only: both are
            // taken from x scaled by a power of two (exact), so that points
            // whose squares underflow (below ~1e-154) keep their digits.
            let ex = unit_exponent(x);
            let up = pow2(-ex);
            for i in 0..n {
                xs[i] = x[i] * up;
            }
            let pp = sumsq(xs);
            let sp = dot2(s, xs) / pp;
            let g2 = klein_factor(gp);
            let shrink = gp / (2.0 - gp);
            let fr = f * shrink / den;
            // (x - y) scaled by a power of two too (the part across is linear in it)
            let ew = {
                for i in 0..n {
                    w[i] = x[i] - y[i];
                }
                unit_exponent(w)
            };
            let upw = pow2(-ew);
            w.iter_mut().for_each(|v| *v *= upw);
            let (xx, _) = perp_scaled(xs, w, out); // |x_s|^2 (x - y)_perp 2^-ew
            let cp = f * gp / (den * xx.value() * (1.0 + a));
            let downw = pow2(ew);
            for i in 0..n {
                out[i] = g2 * ((cp * out[i]) * downw + fr * (gp * sp * xs[i] + k * ss * p[i]));
            }
        },
    )
}

/// The split of a Klein transport at its start `x`: writes `v_perp` (the
/// part of `v` across `x`) into `vp` and returns `alpha_s`, `ex`, `c_dv` and
/// `2^-ex x.v`, where `v = alpha x + v_perp` with `alpha = alpha_s 2^-ex` (`x` is
/// read scaled by the power of two `2^-ex`, exact, so that points whose
/// squares underflow keep their direction; `alpha` times anything parallel
/// to `x` is formed from the scaled vector) and `c_dv = kappa (y - x).v_perp / E`
/// (the coefficient of `x - y` in [`transport_g`] is `alpha mu + c_dv`).
/// `(y - x).v_perp` is formed from the difference (`x.v_perp` is zero only
/// in exact arithmetic).
#[inline(always)]
fn split_at_start(k: f64, x: &[f64], y: &[f64], v: &[f64], e: f64, vp: &mut [f64]) -> (f64, i32, f64, f64) {
    let ex = unit_exponent(x);
    let up = pow2(-ex);
    let (xx, xv) = with_scratch(
        x.len(),
        #[inline(always)]
        |xs| {
            for (o, &a) in xs.iter_mut().zip(x) {
                *o = a * up;
            }
            perp_scaled(xs, v, vp) // |x_s|^2 v_perp
        },
    );
    let (xx, xv) = (xx.value(), xv.value());
    let alpha_s = if xx > 0.0 {
        vp.iter_mut().for_each(|o| *o /= xx);
        xv / xx
    } else {
        vp.copy_from_slice(v);
        0.0
    };
    let mut dv = 0.0;
    for i in 0..x.len() {
        dv += (y[i] - x[i]) * vp[i];
    }
    (alpha_s, ex, k * dv / e, xv)
}

/// Parallel transport from `x` to `y`. Through the hyperboloid
/// (`x_H = (R, x)/sqrt(g_x)`, where transport is `V + <Y,V>/(R^2 - <X,Y>) (X + Y)`)
/// it has the closed form `P v = s (v + lambda (x - y))`, `s = sqrt(g_y/g_x)`,
/// `lambda = kappa ((x.v) mu - (x - y).v / E)` with
/// `E = sqrt(g_x g_y) + 1 - kappa x.y` and `mu = (sqrt g_x + sqrt g_y)/(sqrt(g_x) E)`.
/// Summed as it stands, the part of `P v` along the radius cancels by up to
/// `1/g` near the sphere, so one of two exact rearrangements is used, each
/// from parts formed by `perp_scaled` (every factor a sum of non-negative
/// terms):
///
/// * split at `x`, `v = alpha x + v_perp`:
///   `P v = s (alpha y + v_perp + (alpha mu + kappa (y - x).v_perp / E)(x - y))`;
///   its radial part `alpha (y + mu (x - y))` cancels by `|y| / (s |x|)`;
/// * split at `y`: the part across `y` is that of the split at `x`,
///   `s (v_perp(x)_perp(y) + (alpha mu + kappa (y - x).v_perp(x) / E) x_perp(y))`,
///   the part along it the time component of the hyperboloid transport,
///   `(P v).y = s^3 (x.v) - sqrt(g_x) g_y (sqrt g_x + sqrt g_y) G_x(x - y, v) / E`
///   (Klein metric `G_x(a, b) = a.b/g_x + kappa (x.a)(x.b)/g_x^2`), which
///   cancels by `s |x| / |y|`.
///
/// The split with the factor <= 1 is taken. (Through the Poincaré ball, as a
/// gyration, the small angle between the transported radial direction and
/// the radial direction at `y` keeps only ~eps/sqrt(g) of its digits: 1.4e-9
/// at `1 - |x|/R = 1e-15` for tangents dominated by their radial part.)
#[inline(always)]
pub fn transport_g(c: &Curvature, x: &[f64], gx: f64, y: &[f64], gy: f64, v: &[f64], out: &mut [f64]) {
    if x == y {
        out.copy_from_slice(v); // exactly the identity
        return;
    }
    // Transport is linear in v: v is read scaled by a power of two (exact)
    // to a largest coordinate in [0.5, 1), so that no product of it with the
    // points underflows (subnormal tangents lost half their value).
    let ev = unit_exponent(v);
    if ev == 0 {
        return transport_unit(c, x, gx, y, gy, v, out);
    }
    let up = pow2(-ev);
    with_scratch(
        v.len(),
        #[inline(always)]
        |vs| {
            for (o, &a) in vs.iter_mut().zip(v) {
                *o = a * up;
            }
            transport_unit(c, x, gx, y, gy, vs, out);
        },
    );
    let down = pow2(ev);
    out.iter_mut().for_each(|o| *o *= down);
}

/// [`transport_g`] for `x != y`.
#[inline(always)]
fn transport_unit(c: &Curvature, x: &[f64], gx: f64, y: &[f64], gy: f64, v: &[f64], out: &mut [f64]) {
    let n = x.len();
    let k = c.kappa;
    let (ax, ay) = (gx.sqrt(), gy.sqrt());
    let e = one_minus_dot(c, x, gx, y, gy);
    let mu = (ax + ay) / (ax * e);
    let s = ay / ax;
    // (norms without underflow: tiny points take the right branch too)
    if ay * norm_scaled(x) >= ax * norm_scaled(y) {
        // split at x (|x| > 0 here: x = 0 would need y = 0 = x)
        let (alpha_s, ex, cdv, _) = split_at_start(k, x, y, v, e, out);
        let up = pow2(-ex);
        for i in 0..n {
            let d = x[i] - y[i];
            out[i] = s * (alpha_s * (y[i] * up) + out[i] + (alpha_s * mu * (d * up) + cdv * d));
        }
        return;
    }
    // split at y (|y| > 0 here): the part along y from the hyperboloid, the
    // part across y from the split at x (whose along-y part would cancel);
    // x and y are read scaled by powers of two where they are parallel to
    // the result (exact), so that tiny points keep their digits
    with_scratch(
        4 * n,
        #[inline(always)]
        |buf| {
            let (dl, rest) = buf.split_at_mut(n);
            let (xp, rest) = rest.split_at_mut(n);
            let (vx, ysc) = rest.split_at_mut(n);
            let ey = unit_exponent(y);
            let upy = pow2(-ey);
            for i in 0..n {
                ysc[i] = y[i] * upy;
                dl[i] = (x[i] - y[i]) * upy;
            }
            let (alpha_s, ex, cdv, xv_s) = split_at_start(k, x, y, v, e, vx);
            // (P v).y 2^-ey, every part of it scaled by 2^-ey (exact), so that
            // it does not fall to the subnormal range with a tiny y
            let dv = dot2(dl, v);
            let xd = dot2(x, dl);
            let xv = xv_s * pow2(ex);
            let xvu = (xv_s * upy) * pow2(ex);
            let gxdv = dv / gx + k * xd * xv / (gx * gx); // G_x(x - y, v) 2^-ey
            let along = s * s * s * xvu - ax * gy * (ax + ay) * gxdv / e;
            let (yy, _) = perp_scaled(ysc, vx, out); // |y_s|^2 (v_perp(x))_perp(y)
            let yy = yy.value();
            // |y_s|^2 (x_s)_perp(y), x_s = x 2^-ex (dl reused)
            let upx = pow2(-ex);
            for i in 0..n {
                dl[i] = x[i] * upx;
            }
            perp_scaled(ysc, dl, xp);
            let (fy, fp) = (along / yy, s / yy);
            let lam_s = alpha_s * mu + cdv * pow2(ex); // lambda x = lam_s x_s
            for i in 0..n {
                out[i] = fy * ysc[i] + fp * (out[i] + lam_s * xp[i]);
            }
        },
    )
}

/// The point at fraction `t` of the geodesic (a straight chord) from `x` to
/// `y`, in closed form through the hyperboloid (`x_H = (R, x)/sqrt(g_x)`):
/// `(a sqrt(g_y) x + b sqrt(g_x) y) / (a sqrt(g_y) + b sqrt(g_x))` with the
/// geodesic weights `(a, b)` of `D = d(x, y)/R`. Returns the gap of the
/// result, `g_x g_y / den^2` (`1/z0^2` for the hyperboloid point `z = a x_H + b y_H`).
///
/// The point is written as a step from the nearer end, `x + f_b (y - x)`
/// or `y + f_a (x - y)` with the step weight at most 1/2: each coordinate
/// then lies between those of `x` and `y` after rounding (the convex form
/// `f_a x + f_b y` rounds `f_a + f_b` away from 1 and can land an ulp past
/// an end, which near the sphere is ~1e-7 of a short chord), and `t = 0`,
/// `t = 1` return `x`, `y` exactly.
#[inline(always)]
pub fn geodesic_g(c: &Curvature, x: &[f64], gx: f64, y: &[f64], gy: f64, t: f64, out: &mut [f64]) -> f64 {
    let big_d = distance_g(c, x, gx, y, gy) * c.sqrt_kappa;
    let (a, b) = geodesic_weights(t, big_d);
    let (ca, cb) = (a * gy.sqrt(), b * gx.sqrt());
    let den = ca + cb;
    let (from, to, f) = if cb <= ca { (x, y, cb / den) } else { (y, x, ca / den) };
    for i in 0..x.len() {
        out[i] = from[i] + f * (to[i] - from[i]);
    }
    gx * gy / (den * den)
}

// ---------------------------------------------------------------- batched

/// The Einstein gyrovector space of the Klein ball, for the batched forms
/// of [`gyro`](crate::models::gyro) (`gyro::add_arrays::<Einstein>`, ...).
#[derive(Clone, Copy, Debug)]
pub struct Einstein;

gyro_ball!(Einstein, "Klein");

#[cfg(test)]
mod tests {
    use super::*;

    /// The differential of Klein -> Poincaré at `k`:
    /// `dp = dk/(1 + a) + kappa (k.dk) k / (a (1 + a)^2)`. Along `k` the two
    /// terms add (the radial coefficient is `1/(a (1 + a))`), so nothing cancels;
    /// `k.dk` is compensated because it is divided by the small `a`.
    fn tangent_to_poincare(c: &Curvature, k: &[f64], gk: f64, dk: &[f64], dp: &mut [f64]) {
        let a = gk.sqrt();
        let f = c.kappa * dot2(k, dk) / (a * (1.0 + a) * (1.0 + a));
        for i in 0..k.len() {
            dp[i] = dk[i] / (1.0 + a) + f * k[i];
        }
    }

    fn rel(got: &[f64], want: &[f64]) -> f64 {
        let num: f64 = got.iter().zip(want).map(|(a, b)| (a - b) * (a - b)).sum::<f64>().sqrt();
        num / want.iter().map(|b| b * b).sum::<f64>().sqrt()
    }

    #[test]
    fn exp_along_a_diameter_is_the_closed_form() {
        // handbook: on a diameter the Klein coordinate is tanh(rho) and
        // ds = dk/(1 - k^2) (d = 1, R = 1); a 28 R step inward from rho = 14
        // lands at tanh(rho - 28).
        let c = Curvature::new(-1.0).unwrap();
        let x = [14f64.tanh()];
        let gx = gap(1.0, &x);
        let rho = ((1.0 + x[0]) / gx.sqrt()).ln(); // artanh of the float64 input
        let v = [-28.0 * gx];
        let mut y = [0.0];
        exp_map_g(&c, &x, gx, &v, &mut y);
        let want = (rho - 28.0).tanh();
        assert!(((y[0] - want) / want).abs() < 1e-14, "{} vs {}", y[0], want);
    }

    #[test]
    fn exp_agrees_with_the_poincare_route_at_moderate_radii() {
        // the isomorphism k = 2p/(1 + kappa|p|^2) carries the Poincaré
        // exponential map (an independent formula) to the Klein one
        let c = Curvature::new(-0.3).unwrap();
        let x = [0.9, -0.4, 0.7];
        let v = [-0.8, 1.1, 0.25];
        let gx = gap(c.kappa, &x);
        let mut want = [0.0; 3];
        let (mut p, mut dp, mut q) = ([0.0; 3], [0.0; 3], [0.0; 3]);
        let gp = to_poincare(&x, gx, &mut p);
        tangent_to_poincare(&c, &x, gx, &v, &mut dp);
        let gq = poincare::exp_map_g(&c, &p, gp, &dp, &mut q);
        from_poincare(&q, gq, &mut want);
        let mut got = [0.0; 3];
        exp_map_g(&c, &x, gx, &v, &mut got);
        assert!(rel(&got, &want) < 1e-14, "{got:?} vs {want:?}");
    }

    #[test]
    fn geodesic_points_stay_on_the_chord_near_the_sphere() {
        // handbook: Klein geodesics are straight chords; on a diameter (d = 1,
        // R = 1) the coordinate is tanh(rho), so the point at fraction t is
        // tanh((1 - t) rho_x + t rho_y). The pair was drawn by a randomised
        // test: the convex form put the point two ulps past y (chord
        // parameter 1 + 1.6e-7).
        let c = Curvature::new(-1.0).unwrap();
        let (x, y, t) = ([0.9999999933611915f64], [0.9999999926671334f64], 0.999999982583457);
        let (gx, gy) = (gap(1.0, &x), gap(1.0, &y));
        let rho = |k: f64, g: f64| ((1.0 + k) / g.sqrt()).ln();
        let want = ((1.0 - t) * rho(x[0], gx) + t * rho(y[0], gy)).tanh();
        let mut z = [0.0];
        geodesic_g(&c, &x, gx, &y, gy, t, &mut z);
        assert!(z[0] >= y[0] && z[0] <= x[0], "{} outside [{}, {}]", z[0], y[0], x[0]);
        assert!((z[0] - want).abs() <= 2.0 * f64::EPSILON, "{} vs {}", z[0], want);
        // the ends are returned exactly, and in d = 5 every coordinate of
        // every point lies between those of the ends (common practice)
        let mut rng = crate::numeric::rng::Rng::new(7);
        for _ in 0..2000 {
            let mut p = [[0.0; 5]; 2];
            for q in p.iter_mut() {
                rng.fill_normal(q);
                let r = q.iter().map(|v| v * v).sum::<f64>().sqrt();
                let rim = 1.0 - 10f64.powf(-15.0 * rng.uniform());
                q.iter_mut().for_each(|v| *v *= rim / r);
            }
            if rng.uniform() < 0.5 {
                // nearly coincident pairs
                let e = 10f64.powf(-12.0 * rng.uniform());
                for i in 0..5 {
                    p[1][i] = p[0][i] * (1.0 - e) + e * p[1][i];
                }
            }
            let (x, y) = (p[0], p[1]);
            let (gx, gy) = (gap(1.0, &x), gap(1.0, &y));
            let mut z = [0.0; 5];
            for t in [0.0, 1.0, rng.uniform(), 10f64.powf(-9.0 * rng.uniform()), 1.0 - 10f64.powf(-9.0 * rng.uniform())]
            {
                geodesic_g(&c, &x, gx, &y, gy, t, &mut z);
                for i in 0..5 {
                    let (lo, hi) = (x[i].min(y[i]), x[i].max(y[i]));
                    assert!(z[i] >= lo && z[i] <= hi, "t {t}: {z:?} outside {x:?} .. {y:?}");
                }
                if t == 0.0 {
                    assert_eq!(z, x);
                }
                if t == 1.0 {
                    assert_eq!(z, y);
                }
            }
        }
    }

    #[test]
    fn transport_to_the_same_point_is_the_identity() {
        // common practice: P_{x->x} = id, here 1e-15 R from the sphere
        let c = Curvature::new(-1.0).unwrap();
        let x = [0.6 * (1.0 - 1e-15), 0.8 * (1.0 - 1e-15)];
        let gx = gap(1.0, &x);
        let v = [3e-8, -7e-8];
        let mut out = [0.0; 2];
        transport_g(&c, &x, gx, &x, gx, &v, &mut out);
        assert!(rel(&out, &v) < 1e-15, "{out:?} vs {v:?}");
    }

    #[test]
    fn transport_along_a_diameter_keeps_the_length() {
        // handbook: on a diameter (d = 1, R = 1) a tangent of length L is
        // dk = L (1 - k^2); transport keeps L
        let c = Curvature::new(-1.0).unwrap();
        let x = [1.0 - 3e-12];
        let y = [1.0 - 7e-9];
        let (gx, gy) = (gap(1.0, &x), gap(1.0, &y));
        let big_l = 1.7;
        let mut out = [0.0];
        transport_g(&c, &x, gx, &y, gy, &[big_l * gx], &mut out);
        let want = big_l * gy;
        assert!(((out[0] - want) / want).abs() < 1e-14, "{} vs {}", out[0], want);
    }
}
