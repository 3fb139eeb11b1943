//! The Beltrami–Klein ball: the Einstein gyrovector space (relativistic
//! velocity addition) of curvature K = -kappa, ball radius R = 1/sqrt(kappa)
//! (the speed of light c when the ball holds velocities).
//!
//! Written around `s = u + v` and carried gaps, like the Poincaré module:
//! the textbook `1 + kappa u.v` cancels for nearly opposite velocities near
//! the boundary. The Einstein gyration is the Möbius one of the isomorphic
//! Poincaré points (Ungar's isomorphism `p -> 2 ⊗ p`); it is computed there,
//! one formula in one place.

use crate::ball::{check_finite, checked_gap, Curvature};
use crate::batch::{finite_scalar, map_rows, Data, Operand, Output};
use crate::error::{Result, RowFault};
use crate::numeric::{diff_of_squares, dot_with_sum, gap, sumsq};
use crate::poincare::{self, gap_of, with_scratch};

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

/// Einstein scalar multiplication; the same radial law as Möbius.
#[inline(always)]
pub fn scale_g(c: &Curvature, r: f64, x: &[f64], gx: f64, out: &mut [f64]) {
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
    with_scratch(3 * n, |buf| {
        let (pu, rest) = buf.split_at_mut(n);
        let (pv, sp) = rest.split_at_mut(n);
        for i in 0..n {
            pu[i] = u[i] / (1.0 + au);
            pv[i] = v[i] / (1.0 + av);
            sp[i] = ((1.0 + av) * (u[i] + v[i]) - cv * v[i]) * q;
        }
        let gpu = 2.0 * au / (1.0 + au);
        let gpv = 2.0 * av / (1.0 + av);
        poincare::gyration_s(c, pu, gpu, pv, gpv, sp, w, out);
    })
}

/// `gyr[u, v] w` in the Einstein space.
pub fn gyration(c: &Curvature, u: &[f64], v: &[f64], w: &[f64], out: &mut [f64]) {
    gyration_g(c, u, gap(c.kappa, u), v, gap(c.kappa, v), w, out);
}

/// The Einstein midpoint `(γ_a a + γ_b b)/(γ_a + γ_b)` of two points,
/// rewritten through `s = a + b` and `sqrt(g_b) - sqrt(g_a) = kappa (|a|^2 -
/// |b|^2)/(sqrt(g_a) + sqrt(g_b))` so that nearly opposite points near the
/// boundary keep their digits.
#[inline(always)]
pub fn midpoint_g(c: &Curvature, a: &[f64], ga: f64, b: &[f64], gb: f64, out: &mut [f64]) {
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
}

/// The Einstein midpoint of `a` and `b`.
pub fn midpoint(c: &Curvature, a: &[f64], b: &[f64], out: &mut [f64]) {
    midpoint_g(c, a, gap(c.kappa, a), b, gap(c.kappa, b), out);
}

/// `|u|/R` for a Klein point, for callers that need the rapidity.
#[inline(always)]
pub fn speed_ratio(c: &Curvature, u: &[f64]) -> f64 {
    (c.kappa * sumsq(u)).sqrt()
}

// ---------------------------------------------------------------- batched

fn point_out(d: usize) -> Vec<usize> {
    vec![d]
}

fn add_like<'a>(c: Curvature, x: Data<'a>, y: Data<'a>, sy: f64) -> Result<Output> {
    let ops = [Operand::point("x", x), Operand::point("y", y)];
    map_rows(&ops, &point_out, 16, #[inline(always)] |r, out| {
        let gx = gap_of!(&c, r[0], 0);
        let gy = gap_of!(&c, r[1], 1);
        add_g(&c, r[0], gx, r[1], gy, sy, out);
        Ok(())
    })
}

/// Batched Einstein addition `x ⊕ y`.
pub fn add_arrays<'a>(c: Curvature, x: Data<'a>, y: Data<'a>) -> Result<Output> {
    add_like(c, x, y, 1.0)
}

/// Batched Einstein subtraction `x ⊖ y`.
pub fn sub_arrays<'a>(c: Curvature, x: Data<'a>, y: Data<'a>) -> Result<Output> {
    add_like(c, x, y, -1.0)
}

/// Batched Einstein scalar multiplication `r ⊗ x`.
pub fn scale_arrays<'a>(c: Curvature, r: Data<'a>, x: Data<'a>) -> Result<Output> {
    let ops = [Operand::scalar("r", r), Operand::point("x", x)];
    map_rows(&ops, &point_out, 12, #[inline(always)] |rows, out| {
        let r = finite_scalar(0, rows[0][0])?;
        let gx = gap_of!(&c, rows[1], 1);
        scale_g(&c, r, rows[1], gx, out);
        Ok(())
    })
}

/// Batched Einstein gyration `gyr[a, b] v`.
pub fn gyration_arrays<'a>(c: Curvature, a: Data<'a>, b: Data<'a>, v: Data<'a>) -> Result<Output> {
    let ops = [Operand::point("a", a), Operand::point("b", b), Operand::point("v", v)];
    map_rows(&ops, &point_out, 40, #[inline(always)] |r, out| {
        let ga = gap_of!(&c, r[0], 0);
        let gb = gap_of!(&c, r[1], 1);
        check_finite(r[2]).map_err(|f| RowFault::new(2, f))?;
        gyration_g(&c, r[0], ga, r[1], gb, r[2], out);
        Ok(())
    })
}

/// Batched Einstein midpoint of `x` and `y`.
pub fn midpoint_arrays<'a>(c: Curvature, x: Data<'a>, y: Data<'a>) -> Result<Output> {
    let ops = [Operand::point("x", x), Operand::point("y", y)];
    map_rows(&ops, &point_out, 20, #[inline(always)] |r, out| {
        let gx = gap_of!(&c, r[0], 0);
        let gy = gap_of!(&c, r[1], 1);
        midpoint_g(&c, r[0], gx, r[1], gy, out);
        Ok(())
    })
}
