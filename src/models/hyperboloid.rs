//! The hyperboloid (Lorentz) model: points `x = (x0, x_1..d)` with
//! `-x0^2 + |x_s|^2 = 1/K = -R^2` and `x0 > 0`, shape `(..., d + 1)`.
//!
//! float64 points sit about one ulp off the sheet, so a point is read
//! through its spatial part `x_s` (x0 recomputed as `R sqrt(1 + kappa |x_s|^2)`),
//! and a tangent vector through its spatial part (`v0 = x_s . v_s / x0`, from
//! tangency). Distances use the hyperbolic law of cosines split into two
//! non-negative terms, so neither nearly coincident points far from the
//! origin nor large distances lose digits:
//! `cosh(d/R) - 1 = (cosh(r_x - r_y) - 1) + kappa (|x_s||y_s| - x_s.y_s)`.

use crate::batch::{map_rows, model_operands, point_core, scalar_core, take_row, Core, Data, Operand, Output, Take};
use crate::error::{Fault, Result, RowFault};
use crate::models::ball::{finite_row, Curvature};
use crate::models::klein::chord_ends;
use crate::numeric::{
    diff_of_squares, div_dd, dot2, dot_dd, geodesic_weights, perp_scaled, pow2, sqrt_dd, sumsq, sumsq_dd, two_prod,
    unit_exponent, wedge_dot, wedge_sq, with_scratch, DD,
};
use Take::{Point, Scalar, Vector};

/// Relative tolerance on x0 when reading a point (loose enough for float32
/// embeddings, whose x0 is off by ~1e-7 after rounding).
pub const SHEET_TOLERANCE: f64 = 1e-6;

/// Largest `|x_s|^2` read (2^500): products of four coordinates, as in
/// `|x_s|^2 |y_s|^2`, then fit in float64. At K = -1 it is about 173 R from
/// the origin, where tangent vectors have long lost every digit across the
/// radial direction (see the module notes) and points of the ball models
/// (18-37 R) are out of reach.
pub const MAX_SPATIAL_SQ: f64 = 3.273390607896142e150; // 2^500

/// Checks a point and returns `c = sqrt(1 + kappa |x_s|^2) = x0/R` computed
/// from the spatial part.
#[inline(always)]
pub fn read_point(k: &Curvature, x: &[f64]) -> std::result::Result<f64, Fault> {
    if !x.iter().all(|v| v.is_finite()) {
        return Err(Fault::NonFinite);
    }
    let ss = sumsq(&x[1..]);
    if ss > MAX_SPATIAL_SQ {
        return Err(Fault::BeyondRange);
    }
    let cx = (1.0 + k.kappa * ss).sqrt();
    if x[0] <= 0.0 {
        return Err(Fault::OffHyperboloid(f64::NAN));
    }
    let defect = (x[0] * k.sqrt_kappa - cx).abs() / cx;
    if defect > SHEET_TOLERANCE {
        return Err(Fault::OffHyperboloid(defect));
    }
    Ok(cx)
}

// ------------------------------------------------- maps to and from the hub

/// The Poincaré point of a hyperboloid point (spatial part `xs`, `c = x0/R`
/// as [`read_point`] returns it), `p = x_s/(1 + c)`, and its exact gap
/// `2/(1 + c)`.
#[inline(always)]
pub fn to_poincare(xs: &[f64], c: f64, p: &mut [f64]) -> f64 {
    for (o, &v) in p.iter_mut().zip(xs) {
        *o = v / (1.0 + c);
    }
    2.0 / (1.0 + c)
}

/// [`to_poincare`] carried to double-double, with `c` recomputed in
/// double-double from the exact spatial part: writes the image's high parts
/// to `hi` and low parts to `lo`, and returns the factor `1/g = (1 + c)/2`
/// of the image (the pair space of `pairwise`).
#[inline(always)]
pub fn to_poincare_dd(k: &Curvature, xs: &[f64], hi: &mut [f64], lo: &mut [f64]) -> f64 {
    let c = sqrt_dd(DD::from(1.0).add(sumsq_dd(xs).mul_f64(k.kappa)));
    let den = DD::from(1.0).add(c);
    for ((h, l), &v) in hi.iter_mut().zip(lo.iter_mut()).zip(xs) {
        let q = div_dd(v, den);
        *h = q.hi;
        *l = q.lo;
    }
    0.5 * den.value()
}

/// The hyperboloid point of a Poincaré point `p` of gap `g`:
/// `x0 = R (2 - g)/g` (R times the Lorentz factor of the Klein image),
/// `x_s = 2p/g`.
#[inline(always)]
pub fn from_poincare(k: &Curvature, p: &[f64], g: f64, out: &mut [f64]) {
    out[0] = k.radius * (2.0 - g) / g;
    for (o, &v) in out[1..].iter_mut().zip(p) {
        *o = 2.0 * v / g;
    }
}

/// `cosh(d/R) - 1` halved, from spatial parts and their `c = x0/R`.
#[inline(always)]
pub fn half_delta(k: &Curvature, xs: &[f64], cx: f64, ys: &[f64], cy: f64) -> f64 {
    let kk = k.kappa;
    let nx = sumsq(xs).sqrt();
    let ny = sumsq(ys).sqrt();
    // sinh(r_x - r_y) = a c_y - b c_x = (a^2 - b^2)/(a c_y + b c_x), a = sinh r_x.
    let den = k.sqrt_kappa * (nx * cy + ny * cx);
    let a = if den > 0.0 { kk * diff_of_squares(xs, ys, 1.0) / den } else { 0.0 };
    let t1 = a * a / (1.0 + (1.0 + a * a).sqrt()); // cosh(r_x - r_y) - 1
    let p = dot2(xs, ys);
    let t2 = if p <= 0.0 { kk * (nx * ny - p) } else { kk * wedge_sq(xs, ys) / (nx * ny + p) };
    0.5 * (t1 + t2)
}

/// Writes the point with spatial part `ys` (x0 recomputed).
#[inline(always)]
pub(crate) fn write_point(k: &Curvature, ys: &[f64], out: &mut [f64]) {
    out[1..].copy_from_slice(ys);
    out[0] = k.radius * (1.0 + k.kappa * sumsq(ys)).sqrt();
}

/// `exp_x(v) = cosh(D) x + R sinh(D) v/|v|` (`D = |v|/R`), evaluated in the
/// ideal-endpoint form `e^{-D} x + sinh(D) l`, where the null vector
/// `l = x + R v/|v|` points at the end `xi` of the geodesic on the sphere at
/// infinity. The textbook sum cancels like e^{2r} when a long tangent
/// carries a far point back past the origin (6.4e-4 at 30 R); `l` is where
/// that cancellation lives, and it is formed from the Klein chord instead:
/// with `k = x_s/c_x` the Klein image of `x`, `u` the Klein direction of `v`
/// and `A`, `B` the chord lengths ahead and behind (`klein::chord_ends`),
/// `xi = k + A u`, and
/// `y_s = e^{-D} x_s + 2 B c_x sinh(D)/(A + B) (k + A u)`.
/// The Minkowski norm of `v` is `|v|^2 = (|v_s|^2 + kappa |x_s ∧ v_s|^2)/c_x^2`
/// (a sum of squares; the raw `|v_s|^2 - v0^2` cancels by ~1e-16 x0^2), and
/// the Klein direction `u ∝ v_s - kappa (x_s.v_s)/c_x^2 x_s` as
/// `v_perp + v_par/c_x^2` (the difference cancels by `1/c_x^2` for radial
/// tangents), with `v_perp` from `perp_scaled`. Writes the spatial part
/// into `ys`.
#[inline(always)]
pub(crate) fn exp_spatial(k: &Curvature, xs: &[f64], cx: f64, vs: &[f64], ys: &mut [f64]) {
    let kk = k.kappa;
    let n = xs.len();
    // x_s and v_s are read scaled by powers of two (exact): `2^-ex x_s` for
    // everything that depends on the direction of x_s only, `2^-ev v_s`
    // always (largest coordinate in [0.5, 1)), with `D = 2^ev D_s`, so that
    // neither tiny points nor tiny tangents (squares below the float64
    // range, also once multiplied by kappa) lose their digits.
    let ex = unit_exponent(xs);
    if vs.iter().all(|&v| v == 0.0) {
        ys.copy_from_slice(xs);
        return;
    }
    let ev = unit_exponent(vs);
    let (upx, upv) = (pow2(-ex), pow2(-ev));
    with_scratch(
        2 * n,
        #[inline(always)]
        |buf| {
            let (xsc, vsc) = buf.split_at_mut(n);
            for i in 0..n {
                xsc[i] = xs[i] * upx;
                vsc[i] = vs[i] * upv;
            }
            // The part of v across x_s, in ys for now (times |x_s|^2).
            let (xx, xv) = perp_scaled(xsc, vsc, ys);
            let (xx, xv) = (xx.value(), xv.value());
            let mut wedge = 0.0; // |x_s ∧ v_s|^2 = |x_s|^2 |v_perp|^2 (scaled by 2^(-2ex - 2ev))
            if xx == 0.0 {
                ys.copy_from_slice(vsc);
            } else {
                // Klein direction u = v_perp + v_par/c_x^2 (the parts across and along x_s)
                let par = xv / xx / (cx * cx);
                let mut pp = 0.0;
                for i in 0..n {
                    let vp = ys[i] / xx;
                    pp += vp * vp;
                    ys[i] = vp + par * xsc[i];
                }
                wedge = xx * pp;
            }
            let sx = pow2(ex);
            let n2 = (sumsq(vsc) + kk * ((wedge * sx) * sx)) / (cx * cx);
            let ds = k.sqrt_kappa * n2.sqrt(); // |v|/R = 2^ev ds
            let big_d = ds * pow2(ev);
            let nu = sumsq(ys).sqrt(); // |u| 2^-ev
                                       // k.u/|u| = (x.u)/(c_x |u|) with x.u = (x.v)/c_x^2
            let ku = xv * sx / cx / cx / cx / nu;
            let (a, b) = chord_ends(ku, 1.0 / (kk * cx * cx));
            let m = 2.0 * b * cx / (a + b);
            // m sinh(D), without overflowing sinh where the product is finite;
            // the term along u as m (sinh(D)/D) D_s a u_s/|u_s| 2^ev, so that
            // a D that underflows still moves the point
            let em = (-big_d).exp();
            let (ca, cu, down) = if big_d < 700.0 {
                let shd = if big_d < 1e-8 { 1.0 } else { big_d.sinh() / big_d };
                (m * big_d.sinh() / cx, m * shd * ds * a / nu, pow2(ev))
            } else {
                let coef = (big_d + m.ln() - std::f64::consts::LN_2).exp();
                (coef / cx, coef * a / nu, 1.0)
            };
            for i in 0..n {
                ys[i] = em * xs[i] + (ca * xs[i] + (cu * ys[i]) * down);
            }
        },
    )
}

/// `log_x(y) = d (y - (1 + delta) x) / |y - (1 + delta) x|`, spatial part
/// `(y_s - x_s) - delta x_s` (the difference formed from the inputs), norm
/// factor `asinh(sqrt h)/sqrt(h (1 + h))` with `h = delta/2`. Writes the full
/// (d + 1)-vector.
#[inline(always)]
fn log_full(k: &Curvature, xs: &[f64], cx: f64, ys: &[f64], cy: f64, out: &mut [f64]) {
    let h = half_delta(k, xs, cx, ys, cy);
    let (f, fx) = if h > 0.0 {
        let (sh, s1h) = (h.sqrt(), (1.0 + h).sqrt());
        let a = sh.asinh();
        (a / (sh * s1h), 2.0 * a * (sh / s1h)) // f and 2 h f
    } else {
        (1.0, 0.0)
    };
    let ws = &mut out[1..];
    for i in 0..xs.len() {
        ws[i] = f * (ys[i] - xs[i]) - fx * xs[i];
    }
    out[0] = dot2(xs, &out[1..]) / (k.radius * cx);
}

/// Parallel transport `v + <y, v>_L / (R^2 (2 + delta)) (x + y)`, with
/// `v` split into its parts along and across `x_s`, `v_s = alpha x_s + v_perp`
/// (`v_perp` from `perp_scaled`; spatial parts throughout, the time
/// component follows from tangency at `y`):
/// `P v = v_perp + kappa ((y_s - x_s).v_perp)/(2 + delta) (x_s + y_s)
///        + alpha (nu x_s + kappa (x_s.w')/c_x^2 y_s)`,
/// where `nu = (c_x + c_y)/(c_x (2 + delta))` and
/// `w' = (y - cosh(D) x)/(2 + delta) = (y_s - x_s)/(2 + delta) - delta/(2 + delta) x_s`.
/// The radial part is the transported radial direction, whose coefficient
/// on `x_s`, `1 + <y, x_r>_L/(R^2 (2 + delta))`, is written as the sum
/// `nu`: formed as a difference it cancels by `c_x/c_y` (1e-8 for a tangent
/// carried from 19 R out to the centre). The part across takes
/// `y_s.v_perp = (x_s ∧ y_s).(x_s ∧ v_s)/|x_s|^2` from the inputs, so that
/// no rounding of the large coordinates of far points leaks into it. Every coefficient stays bounded where
/// `x0 y0` does not fit in float64. Writes the full (d + 1)-vector.
#[inline(always)]
fn transport_full(k: &Curvature, xs: &[f64], cx: f64, ys: &[f64], cy: f64, vs: &[f64], out: &mut [f64]) {
    // Linear in v: v read scaled by a power of two (exact), so that no
    // product of it with the points underflows.
    let ev = unit_exponent(vs);
    if ev == 0 {
        return transport_unit(k, xs, cx, ys, cy, vs, out);
    }
    let up = pow2(-ev);
    with_scratch(
        vs.len(),
        #[inline(always)]
        |vsc| {
            for (o, &a) in vsc.iter_mut().zip(vs) {
                *o = a * up;
            }
            transport_unit(k, xs, cx, ys, cy, vsc, out);
        },
    );
    let down = pow2(ev);
    out.iter_mut().for_each(|o| *o *= down);
}

/// [`transport_full`] of a tangent scaled to a largest coordinate in [0.5, 1).
#[inline(always)]
fn transport_unit(k: &Curvature, xs: &[f64], cx: f64, ys: &[f64], cy: f64, vs: &[f64], out: &mut [f64]) {
    let kk = k.kappa;
    let n = xs.len();
    let h = half_delta(k, xs, cx, ys, cy);
    let s = 1.0 / (2.0 + 2.0 * h); // 1/(2 + delta)
    let hh = h / (1.0 + h); // delta/(2 + delta)
    let ps = &mut out[1..];
    // x_s enters through its direction (and alpha x_s), read scaled by a
    // power of two (exact), so that points whose squares underflow keep it
    let ex = unit_exponent(xs);
    let upx = pow2(-ex);
    with_scratch(
        n,
        #[inline(always)]
        |xsc| {
            for i in 0..n {
                xsc[i] = xs[i] * upx;
            }
            let (xx, xv) = perp_scaled(xsc, vs, ps); // |x_s|^2 v_perp (x_s scaled)
            let xx = xx.value();
            let (alpha, cxx, cxy) = if xx > 0.0 {
                ps.iter_mut().for_each(|o| *o /= xx);
                // x_s.w' = x_s.(y_s - x_s)/(2 + delta) - delta/(2 + delta) |x_s|^2
                let mut xw = 0.0;
                for i in 0..n {
                    xw += xsc[i] * (s * (ys[i] - xs[i]) - hh * xs[i]);
                }
                let nu = (cx + cy) / cx * s;
                (xv.value() / xx, nu, kk * xw / (cx * cx))
            } else {
                ps.copy_from_slice(vs); // x at the origin: all of v is across
                (0.0, 0.0, 0.0)
            };
            // y_s.v_perp = (x ∧ y).(x ∧ v)/|x_s|^2, from the inputs (a rounded v_perp
            // or y_s - x_s would leak eps times the far coordinates into it)
            let dv = if xx > 0.0 { wedge_dot(xsc, ys, vs) / xx } else { dot2(ys, vs) };
            let cp = kk * dv * s;
            // alpha (nu x_s + kappa (x_s.w')/c_x^2 y_s), both terms with x_s scaled
            for i in 0..n {
                ps[i] += cp * (xs[i] + ys[i]) + alpha * (cxx * xsc[i] + cxy * ys[i]);
            }
        },
    );
    out[0] = dot2(ys, &out[1..]) / (k.radius * cy);
}

/// Geodesic point `(sinh((1 - t) D) x + sinh(t D) y)/sinh(D)`, spatial
/// part, with the weights in their non-overflowing, non-cancelling form
/// (`exp_x(t log_x(y))` cancels like e^{2r} for far points).
#[inline(always)]
fn geodesic_spatial(k: &Curvature, xs: &[f64], cx: f64, ys: &[f64], cy: f64, t: f64, out: &mut [f64]) {
    let h = half_delta(k, xs, cx, ys, cy);
    let (a, b) = geodesic_weights(t, 2.0 * h.sqrt().asinh());
    for i in 0..xs.len() {
        out[i] = a * xs[i] + b * ys[i];
    }
}

/// The Minkowski inner product `-u0 v0 + u_s . v_s`, compensated.
#[inline(always)]
pub fn inner(u: &[f64], v: &[f64]) -> f64 {
    let s = dot_dd(&u[1..], &v[1..]);
    let (p, e) = two_prod(u[0], v[0]);
    s.sub(DD::new(p, e)).value()
}

// ---------------------------------------------------------------- batched

/// Checks that hyperboloid point operands have `d + 1 >= 2` coordinates.
pub(crate) fn check_dim(ops: &[Operand]) -> Result<()> {
    for o in ops.iter().filter(|o| o.core == Core::Point) {
        if let Some(&n) = o.data.shape().last() {
            if n < 2 {
                return crate::error::value_err(format!(
                    "{}: hyperboloid points have d + 1 >= 2 coordinates (x0 first), got {n}",
                    o.name
                ));
            }
        }
    }
    Ok(())
}

fn finite_out(out: &[f64], arg: usize) -> std::result::Result<(), RowFault> {
    if out.iter().all(|v| v.is_finite()) {
        Ok(())
    } else {
        Err(RowFault::new(arg, Fault::Overflow))
    }
}

/// A computed point: finite and within the range that can be read back.
fn point_out(out: &[f64], arg: usize) -> std::result::Result<(), RowFault> {
    if sumsq(&out[1..]) > MAX_SPATIAL_SQ {
        return Err(RowFault::new(arg, Fault::ResultBeyondRange));
    }
    finite_out(out, arg)
}

/// The batched form of a hyperboloid kernel, written once: operands named
/// as in Python and taken as `args` says, checked in order on every row
/// ([`take_row`], points by [`read_point`]); `kernel(rows, cs, out)` gets
/// `c = x0/R` of the point operands (1 for the others), writes the result
/// and checks it.
#[inline(always)]
fn hyper_rows<'a, const N: usize>(
    k: Curvature,
    args: [(&'static str, Data<'a>, Take); N],
    work: usize,
    kernel: impl Fn(&[&[f64]], &[f64; N], &mut [f64]) -> std::result::Result<(), RowFault> + Sync,
) -> Result<Output> {
    let (ops, takes) = model_operands(args);
    check_dim(&ops)?;
    map_rows(
        &ops,
        &point_core,
        work,
        #[inline(always)]
        |r, out| {
            let c = take_row(
                r,
                &takes,
                #[inline(always)]
                |x| read_point(&k, x),
            )?;
            kernel(r, &c, out)
        },
    )
}

/// `exp_x(v)` as a checked point, from spatial parts.
#[inline(always)]
fn exp_point(k: &Curvature, xs: &[f64], cx: f64, vs: &[f64], out: &mut [f64]) -> std::result::Result<(), RowFault> {
    with_scratch(
        vs.len(),
        #[inline(always)]
        |ys| {
            exp_spatial(k, xs, cx, vs, ys);
            write_point(k, ys, out);
        },
    );
    point_out(out, 0)
}

/// Batched exponential map; `base = None` is the origin `(R, 0, ..., 0)`.
pub fn exp_map_arrays<'a>(k: Curvature, v: Data<'a>, base: Option<Data<'a>>) -> Result<Output> {
    match base {
        None => hyper_rows(
            k,
            [("v", v, Vector)],
            30,
            #[inline(always)]
            |r, _, out| {
                with_scratch(
                    r[0].len() - 1,
                    #[inline(always)]
                    |zero| exp_point(&k, zero, 1.0, &r[0][1..], out),
                )
            },
        ),
        Some(b) => hyper_rows(
            k,
            [("v", v, Vector), ("base", b, Point)],
            30,
            #[inline(always)]
            |r, c, out| exp_point(&k, &r[1][1..], c[1], &r[0][1..], out),
        ),
    }
}

/// Batched logarithmic map; `base = None` is the origin.
pub fn log_map_arrays<'a>(k: Curvature, y: Data<'a>, base: Option<Data<'a>>) -> Result<Output> {
    match base {
        None => hyper_rows(
            k,
            [("y", y, Point)],
            30,
            #[inline(always)]
            |r, c, out| {
                with_scratch(
                    r[0].len() - 1,
                    #[inline(always)]
                    |zero| log_full(&k, zero, 1.0, &r[0][1..], c[0], out),
                );
                finite_out(out, 0)
            },
        ),
        Some(b) => hyper_rows(
            k,
            [("y", y, Point), ("base", b, Point)],
            30,
            #[inline(always)]
            |r, c, out| {
                log_full(&k, &r[1][1..], c[1], &r[0][1..], c[0], out);
                finite_out(out, 0)
            },
        ),
    }
}

/// Batched parallel transport of tangent `v` from `start` to `end`.
pub fn transport_arrays<'a>(k: Curvature, v: Data<'a>, start: Data<'a>, end: Data<'a>) -> Result<Output> {
    hyper_rows(
        k,
        [("v", v, Vector), ("start", start, Point), ("end", end, Point)],
        40,
        #[inline(always)]
        |r, c, out| {
            transport_full(&k, &r[1][1..], c[1], &r[2][1..], c[2], &r[0][1..], out);
            finite_out(out, 0)
        },
    )
}

/// Batched geodesic interpolation; `t` broadcasts against the leading axes.
pub fn geodesic_arrays<'a>(k: Curvature, x: Data<'a>, y: Data<'a>, t: Data<'a>) -> Result<Output> {
    hyper_rows(
        k,
        [("x", x, Point), ("y", y, Point), ("t", t, Scalar)],
        30,
        #[inline(always)]
        |r, c, out| {
            with_scratch(
                r[0].len() - 1,
                #[inline(always)]
                |ys| {
                    geodesic_spatial(&k, &r[0][1..], c[0], &r[1][1..], c[1], r[2][0], ys);
                    write_point(&k, ys, out);
                },
            );
            point_out(out, 2)
        },
    )
}

/// Batched repair: x0 recomputed from the spatial part (a point is never
/// rescaled: rescaling by sqrt(-<x,x>) moves far points by ~1e-4).
pub fn project_arrays<'a>(k: Curvature, x: Data<'a>) -> Result<Output> {
    let ops = [Operand::point("x", x)];
    check_dim(&ops)?;
    map_rows(
        &ops,
        &point_core,
        4,
        #[inline(always)]
        |r, out| {
            finite_row(&r[0][1..], 0)?;
            write_point(&k, &r[0][1..], out);
            finite_out(out, 0)
        },
    )
}

/// Batched Minkowski inner product `(..., d+1), (..., d+1) -> (...)`.
pub fn inner_arrays<'a>(u: Data<'a>, v: Data<'a>) -> Result<Output> {
    let ops = [Operand::point("u", u), Operand::point("v", v)];
    map_rows(
        &ops,
        &scalar_core,
        8,
        #[inline(always)]
        |r, out| {
            finite_row(r[0], 0)?;
            finite_row(r[1], 1)?;
            out[0] = inner(r[0], r[1]);
            finite_out(out, 0)
        },
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exp_back_through_the_origin_is_the_closed_form() {
        // handbook: on a line through the origin (d = 1, R = 1) points are
        // (cosh r, sinh r) and the unit tangent is (sinh r, cosh r); a 29 R
        // step inward from r = 14.5 lands at r - 29. (The textbook
        // cosh/sinh sum loses ~1e-4 here.)
        let k = Curvature::new(-1.0).unwrap();
        let xs = [14.5f64.sinh()];
        let cx = (1.0 + xs[0] * xs[0]).sqrt();
        let r = xs[0].asinh();
        let vs = [-29.0 * cx];
        let big_d = 29.0 * cx / cx; // the length the inputs carry
        let mut ys = [0.0];
        exp_spatial(&k, &xs, cx, &vs, &mut ys);
        let want = (r - big_d).sinh();
        assert!(((ys[0] - want) / want).abs() < 1e-14, "{} vs {}", ys[0], want);
    }

    #[test]
    fn transport_along_a_line_keeps_the_radial_unit_tangent() {
        // handbook: along a line through the origin the unit tangent
        // (sinh r, cosh r) is parallel; both points far out on one side
        // (the direct <y - x, v>_L cancels by ~x0 y0 here: 4e-10 before)
        let k = Curvature::new(-1.0).unwrap();
        let xs = [9.5f64.sinh()];
        let ys = [9.7f64.sinh()];
        let cx = (1.0 + xs[0] * xs[0]).sqrt();
        let cy = (1.0 + ys[0] * ys[0]).sqrt();
        let big_l = 1.3;
        let mut out = [0.0; 2];
        transport_full(&k, &xs, cx, &ys, cy, &[big_l * cx], &mut out);
        let want = [big_l * ys[0], big_l * cy];
        for i in 0..2 {
            assert!(((out[i] - want[i]) / want[i]).abs() < 1e-14, "{out:?} vs {want:?}");
        }
    }
}
